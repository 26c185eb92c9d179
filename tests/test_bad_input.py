"""Every bad input gives one line naming file, line and field, and exit code 2.

The table below is the contract of the CLI's refusals (DESIGN.md, "Errors"): each
row is a spec edit and the exact location and the words the message must carry.
"""

from __future__ import annotations

import re

import pytest
from click.testing import CliRunner

from partpick.cli import main
from tests.conftest import CATALOGS, VALID_SPEC


def _edit(old: str, new: str) -> str:
    assert old in VALID_SPEC, old
    return VALID_SPEC.replace(old, new, 1)


# (case id, spec text, expected line, expected field or None, words the message must contain)
CASES = [
    ("bad-yaml", _edit("frequency: {target: 5 kHz, tolerance: 1 %}", "frequency: {target: 5 kHz, tolerance: 1 %"),
     4, None, ["is not valid YAML"]),
    ("unknown-top-field", _edit("frequency:", "frequncy:"), 3, "frequncy", ["not a known field", "did you mean 'frequency'"]),
    ("unknown-nested-field", _edit("tolerance: 1 %}", "tolerence: 1 %}"), 3, "frequency.tolerence",
     ["did you mean 'tolerance'"]),
    ("wrong-unit", _edit("target: 5 kHz", "target: 5 V"), 3, "frequency.target", ["frequency", "Hz"]),
    ("unit-case", _edit("target: 5 kHz", "target: 5 khz"), 3, "frequency.target", ["did you mean '5 kHz'"]),
    ("negative", _edit("target: 5 kHz", "target: -1 kHz"), 3, "frequency.target", ["must be > 0 Hz", "-1 kHz"]),
    ("zero", _edit("tolerance: 1 %}", "tolerance: 0 %}"), 3, "frequency.tolerance", ["must be > 0"]),
    ("tolerance-too-big", _edit("tolerance: 1 %}", "tolerance: 80 %}"), 3, "frequency.tolerance", ["< 50 %"]),
    ("supply-min-over-max", _edit("min: 10.8 V, max: 13.2 V", "min: 13.2 V, max: 10.8 V"), 5, "supply.min",
     ["must not exceed supply.max"]),
    ("temperature-min-over-max", _edit("min: -10 degC, max: 60 degC", "min: 80 degC, max: 60 degC"), 7,
     "temperature.min", ["must not exceed temperature.max"]),
    ("supply-kind", _edit("kind: dual", "kind: duel"), 5, "supply.kind", ["did you mean 'dual'"]),
    ("amplitude-kind-missing", _edit("target: 3.0 Vrms", "target: 3.0 V"), 4, "amplitude.target",
     ["Vpk", "Vpp", "Vrms"]),
    ("unknown-family", _edit("resistors: [mf-1, tk-1]", "resistors: [mf-1, tk-1x]"), 11, "parts.resistors",
     ["unknown resistor family 'tk-1x'", "did you mean 'tk-1'"]),
    ("family-of-other-kind", _edit("capacitors: [c0g-1]", "capacitors: [mf-1]"), 12, "parts.capacitors",
     ["'mf-1' is one of the resistors"]),
    ("missing-required", VALID_SPEC.replace("amplitude: {target: 3.0 Vrms, tolerance: 5 %}\n", ""), 1, "amplitude",
     ["is required"]),
    ("scalar-for-mapping", _edit("frequency: {target: 5 kHz, tolerance: 1 %}", "frequency: 5 kHz"), 3,
     "frequency", ["mapping of fields", "'5 kHz'"]),
    ("duplicate-key", VALID_SPEC + "results: 3\n", 17, None, ["duplicate key 'results'", "line 16"]),
    ("rank-key", _edit("rank_by: [yield, frequency_error, cost]", "rank_by: [yield, cots]"), 15, "rank_by",
     ["did you mean 'cost'"]),
    ("results-zero", _edit("results: 5", "results: 0"), 16, "results", ["between 1 and 100"]),
    ("results-not-int", _edit("results: 5", "results: five"), 16, "results", ["whole number"]),
    ("load-negative", _edit("resistance: 200 ohm", "resistance: -200 ohm"), 6, "load.resistance", ["must be > 0"]),
    ("thd-not-fraction", _edit("max_thd: 1 %", "max_thd: 1 V"), 8, "distortion.max_thd", ["fraction", "%"]),
    ("list-at-top", "- frequency\n- amplitude\n", 1, None, ["the file must be a mapping"]),
    # An alias node carries its anchor's position, so the line named is the anchor's.
    ("alias", "x: &a 1\n" + VALID_SPEC.replace("results: 5", "results: *a"), 1, None, ["aliases"]),
]


@pytest.mark.parametrize("case,text,line,field,words", CASES, ids=[c[0] for c in CASES])
def test_bad_spec_gives_one_located_line_and_exit_2(tmp_path, case, text, line, field, words):
    path = tmp_path / "bad.yaml"
    path.write_text(text, encoding="utf-8")
    result = CliRunner().invoke(main, ["spec", "check", str(path), "--catalog", str(CATALOGS)])
    assert result.exit_code == 2, result.output
    assert result.exception is None or isinstance(result.exception, SystemExit)
    out = result.stderr.strip()
    assert "\n" not in out, out
    assert "Traceback" not in out
    assert out.startswith(f"error: {path}:{line}: "), out
    if field is not None:
        assert f"'{field}'" in out, out
    for word in words:
        assert word in out, out


def test_alias_is_refused_when_field_is_known(tmp_path):
    text = VALID_SPEC.replace("results: 5", "results: &n 5") + "builds: *n\n"
    path = tmp_path / "alias.yaml"
    path.write_text(text, encoding="utf-8")
    result = CliRunner().invoke(main, ["spec", "check", str(path), "--catalog", str(CATALOGS)])
    assert result.exit_code == 2
    assert re.match(rf"error: {re.escape(str(path))}:16: .*aliases", result.stderr)


@pytest.mark.parametrize("content,words", [
    (b"", ["is empty"]),
    (b"name: x\nfrequency: \xff\xfe\n", [":2: is not UTF-8 text"]),
])
def test_unreadable_content(tmp_path, content, words):
    path = tmp_path / "raw.yaml"
    path.write_bytes(content)
    result = CliRunner().invoke(main, ["spec", "check", str(path), "--catalog", str(CATALOGS)])
    assert result.exit_code == 2
    for word in words:
        assert word in result.stderr


def test_missing_file(tmp_path):
    path = tmp_path / "nope.yaml"
    result = CliRunner().invoke(main, ["spec", "check", str(path), "--catalog", str(CATALOGS)])
    assert result.exit_code == 2
    assert result.stderr.strip() == f"error: {path}: file not found"


def test_directory_as_spec(tmp_path):
    result = CliRunner().invoke(main, ["spec", "check", str(tmp_path), "--catalog", str(CATALOGS)])
    assert result.exit_code == 2
    assert "is a directory" in result.stderr


def test_empty_catalog_folder(tmp_path, spec_file):
    empty = tmp_path / "empty"
    empty.mkdir()
    result = CliRunner().invoke(main, ["spec", "check", str(spec_file()), "--catalog", str(empty)])
    assert result.exit_code == 2
    assert result.stderr.strip() == f"error: {empty}: holds no catalog files (*.yaml); expected part families"


CATALOG_CASES = [
    ("tolerance: 1 %, tempco: 50 ppm/K", "tolerance: 1 %, tempco: 50 ppm/C", "resistors[0].tempco",
     ["temperature coefficient", "did you mean '50 ppm/°C'"]),
    ("series: E12,", "series: E13,", "resistors[0].series", ["unknown series 'E13'", "did you mean"]),
    ("range: {min: 1 kohm, max: 100 kohm}, power: 0.25 W",
     "range: {min: 100 kohm, max: 1 kohm}, power: 0.25 W", "resistors[0].range.min", ["must not exceed"]),
    ("kind: diode", "kind: diod", "limiters[0].kind", ["did you mean 'diode'"]),
    ("id: r-e24", "id: r-e12", "resistors[1].id", ["duplicates family 'r-e12'"]),
    ("gbw: 1 MHz", "gbw: 1 MHz, gwb: 2 MHz", "opamps[0].gwb", ["did you mean 'gbw'"]),
    ("emission: 1.8, series", "emission: 0.1, series", "limiters[0].emission", ["between 0.5 and 10"]),
    ("price: {unit: 0.1}", "price: {unit: -0.1}", "opamps[0].price.unit", ["between 0 and inf"]),
    # bad-input fuzz reproducers: a subnormal value (it reached the junction physics as a
    # math domain error), and a package no op-amp could dissipate a microwatt in (the
    # search verified for minutes, then named the wrong requirement)
    ("series_resistance: 0.6 ohm", "series_resistance: 4.9e-324 ohm", "limiters[0].series_resistance",
     ["too small to represent"]),
    ("price: {unit: 0.1}}\nlimiters:", "price: {unit: 0.1}, package: P8}\npackages:\n"
     "  - {id: P8, theta_ja: 1.5e8 K/W, max_junction: 150 degC}\nlimiters:", "packages[0].theta_ja",
     ["must lie within 0.1 K/W .. 10000 K/W"]),
]


@pytest.mark.parametrize("old,new,field,words", CATALOG_CASES, ids=[c[2] for c in CATALOG_CASES])
def test_bad_catalog_entry(tmp_path, old, new, field, words):
    from tests.conftest import TINY_CATALOG

    assert old in TINY_CATALOG
    folder = tmp_path / "cat"
    folder.mkdir()
    path = folder / "parts.yaml"
    path.write_text(TINY_CATALOG.replace(old, new, 1), encoding="utf-8")
    result = CliRunner().invoke(main, ["catalog", "validate", str(folder)])
    assert result.exit_code == 2, result.output
    out = result.stderr.strip()
    assert re.match(rf"error: {re.escape(str(path))}:\d+: '{re.escape(field)}' ", out), out
    for word in words:
        assert word in out, out


STOCK_CASES = [
    ("family,value,quantity\nmf-1,10k,5\nmf-9,10k,5\n", 3, 1, "family", ["unknown family 'mf-9'"]),
    ("family,value,quantity\nmf-1,10k,five\n", 2, 3, "quantity", ["whole number"]),
    ("family,value,quantity\nmf-1,10.4k,5\n", 2, 2, "value", ["not an E96 value"]),
    ("family,value,qty\nmf-1,10k,5\n", 1, 3, None, ["unknown column 'qty'"]),
    ("family,value,quantity\nmf-1,10k,5\nmf-1,10k0,5\n", 3, 1, "family", ["repeats the part on line 2"]),
    ("family,value,quantity\noa-jfet-4m,10k,5\n", 2, 2, "value", ["must be empty for opamps"]),
]


@pytest.mark.parametrize("text,line,column,field,words", STOCK_CASES)
def test_bad_stock_list(tmp_path, spec_file, text, line, column, field, words):
    stock = tmp_path / "stock.csv"
    stock.write_text(text, encoding="utf-8")
    spec = spec_file(VALID_SPEC + f"stock: {{file: {stock}, mode: prefer}}\n")
    result = CliRunner().invoke(main, ["spec", "check", str(spec), "--catalog", str(CATALOGS)])
    assert result.exit_code == 2, result.output
    out = result.stderr.strip()
    assert out.startswith(f"error: {stock}:{line}:{column}: "), out
    if field:
        assert f"'{field}'" in out
    for word in words:
        assert word in out, out
