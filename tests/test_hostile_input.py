"""Bad input, hostile files and edge requirements: one located line and exit 2, never a
traceback, a hang or a misleading answer. Each reproducer of the issue "bad input" is
a test here, and the table of bad BOM and spec inputs is the issue "what the engineer
takes away"'s "input checked on the way in"."""

from __future__ import annotations

import os
import re
import subprocess
import sys
from pathlib import Path

import pytest
from click.testing import CliRunner

from partpick.cli import main
from tests.conftest import CATALOGS, ROOT, SPECS, VALID_SPEC

CARRIER = SPECS / "carrier-50khz.yaml"
CARRIER_BOM = SPECS / "boms" / "carrier-50khz-01.yaml"
LVDT = SPECS / "lvdt-exciter.yaml"
DRAFT = SPECS / "boms" / "lvdt-exciter-draft.yaml"


def run(*args):
    return CliRunner().invoke(main, [str(a) for a in args])


def located(result, path, line, field, *words):
    """Exit 2 and one line 'error: path:line[:col]: 'field' ...' carrying ``words``."""
    assert result.exit_code == 2, (result.output, result.stderr)
    err = result.stderr.strip()
    assert "\n" not in err and "Traceback" not in err, err
    where = re.escape(f"error: {path}:{line}") + r"(:\d+)?: " if line else re.escape(f"error: {path}: ")
    assert re.match(where, err), err
    if field:
        assert f"'{field}' " in err, err
    for word in words:
        assert word in err, err
    return err


def option_error(result, option, *words):
    assert result.exit_code == 2, (result.output, result.stderr)
    err = result.stderr.strip()
    assert err.startswith("error: ") and "\n" not in err and "Traceback" not in err, err
    assert option in err, err
    for word in words:
        assert word in err, err
    return err


def edited(tmp_path, source: Path, old: str, new: str, name: str | None = None) -> Path:
    text = source.read_text(encoding="utf-8")
    assert old in text, old
    path = tmp_path / (name or source.name)
    path.write_text(text.replace(old, new, 1), encoding="utf-8")
    return path


def line_of(path: Path, needle: str) -> int:
    for i, ln in enumerate(path.read_text(encoding="utf-8").splitlines(), 1):
        if needle in ln:
            return i
    raise AssertionError(needle)


# -- the table: bad BOM and spec inputs, each exit 2 with file, line and field ------------------------------
# (source file, old text, new text, needle for the line, field, words). Values and ranges are the
# shipped demo catalog's (tn-0.1: E96, 100 ohm .. 500 kohm; c0g-1: E24, 100 pF .. 47 nF).
TABLE = [
    ("bom-300-is-farads", CARRIER_BOM, "value: 300p}", "value: 300}", "C1", "parts[1].value",
     ["300 F is outside the range of family c0g-1", "a bare number is in F: did you mean '300p'?"]),
    ("bom-47-is-farads", CARRIER_BOM, "value: 300p}", "value: 47}", "C1", "parts[1].value",
     ["47 F", "did you mean '47n'?"]),
    ("bom-beyond-family-range", CARRIER_BOM, "value: 21k}", "value: 10M}", "R4", "parts[5].value",
     ["10 MΩ is outside the range of family tn-0.1 (100 Ω .. 500 kΩ)"]),
    ("bom-off-series", CARRIER_BOM, "value: 21k}", "value: 10k3}", "R4", "parts[5].value",
     ["10.3 kΩ is off the E192 series of family tn-0.1", "10.2 kΩ and 10.4 kΩ"]),
    ("bom-zero", CARRIER_BOM, "value: 21k}", "value: 0}", "R4", "parts[5].value", ["must be > 0"]),
    ("bom-negative", CARRIER_BOM, "value: 21k}", "value: -10k}", "R4", "parts[5].value", ["must be > 0"]),
    ("bom-dual-against-single-spec", CARRIER_BOM, "supply: dual", "supply: dual", "supply: dual", "supply",
     ["is dual, but", "asks for supply kind single"]),
    ("spec-bare-tolerance", CARRIER, "tolerance: 1.5 %}", "tolerance: 0.3}", "frequency:", "frequency.tolerance",
     ["needs its unit", "write '0.3 %' or '30 %'"]),
    ("spec-bare-thd", CARRIER, "max_thd: 5 %", "max_thd: 0.1", "max_thd", "distortion.max_thd",
     ["write '0.1 %' or '10 %'"]),
    ("spec-bare-yield", CARRIER, "min: 95 %", "min: 0.95", "yield:", "yield.min", ["write '0.95 %' or '95 %'"]),
    ("spec-1-farad-load", CARRIER, "capacitance: 100 pF", "capacitance: 1 F", "load:", "load.capacitance",
     ["must lie within 0 F .. 10 µF", "1 F"]),
    ("spec-absurd-temperature", CARRIER, "max: 40 degC", "max: 1000 degC", "temperature:",
     "temperature.max", ["-100 degC .. 200 degC"]),
    ("spec-absurd-frequency", CARRIER, "target: 50 kHz", "target: 1 THz", "frequency:", "frequency.target",
     ["must lie within 1 mHz .. 10 MHz"]),
    ("spec-subnormal-thd", CARRIER, "max_thd: 5 %", "max_thd: 1e-320 %", "max_thd", "distortion.max_thd",
     ["too small to represent"]),
    ("spec-huge-supply", CARRIER, "max: 5.25 V", "max: 1e300 V", "supply:", "supply.max",
     ["must lie within 500 mV .. 200 V"]),
]


@pytest.mark.parametrize("case,source,old,new,needle,field,words", TABLE, ids=[c[0] for c in TABLE])
def test_bad_bom_and_spec_inputs(tmp_path, case, source, old, new, needle, field, words):
    text = CARRIER.read_text(encoding="utf-8")
    if case == "bom-dual-against-single-spec":
        spec = tmp_path / "single.yaml"
        spec.write_text(re.sub(r"supply: \{kind: dual,", "supply: {kind: single,", text), encoding="utf-8")
        assert "kind: single" in spec.read_text(encoding="utf-8")
        bom = edited(tmp_path, source, old, new)
        located(run("check", spec, bom, "--catalog", CATALOGS), bom, line_of(bom, needle), field, *words)
        return
    path = edited(tmp_path, source, old, new)
    if source == CARRIER_BOM:
        result = run("check", CARRIER, path, "--catalog", CATALOGS, "--samples", "200")
    else:
        result = run("spec", "check", path, "--catalog", CATALOGS)
    located(result, path, line_of(path, needle), field, *words)


def test_a_bom_csv_off_series_is_located_at_line_and_column(tmp_path):
    from partpick.bom import bom_to_csv, load_bom
    from partpick.catalog import load_catalog

    bom = load_bom(CARRIER_BOM, load_catalog(CATALOGS))
    path = tmp_path / "bom.csv"
    path.write_text(bom_to_csv(bom).replace(",21k\n", ",10k3\n"), encoding="utf-8")
    err = located(run("check", CARRIER, path, "--catalog", CATALOGS), path, line_of(path, "10k3"), "value",
                  "off the E192 series")
    assert re.match(rf"error: {re.escape(str(path))}:\d+:4: ", err), err


def test_a_bom_csv_single_supply_against_a_dual_spec(tmp_path):
    from partpick.bom import bom_to_csv, load_bom
    from partpick.catalog import load_catalog

    path = tmp_path / "bom.csv"
    path.write_text(bom_to_csv(load_bom(CARRIER_BOM, load_catalog(CATALOGS))).replace("# supply: dual",
                                                                                        "# supply: single"),
                    encoding="utf-8")
    result = run("check", CARRIER, path, "--catalog", CATALOGS)
    # a single-supply BOM misses the bias network: refused on its own first, naming the roles
    located(result, path, None if False else line_of(path, "ref,role"), None, "misses role(s)")


# -- reproducers of the issue "bad input" -------------------------------------------------------------------

@pytest.mark.parametrize("args,option,words", [
    (["check", LVDT, DRAFT, "--seed", "-1"], "--seed", ["0 .. 2147483646", "got -1"]),
    (["check", LVDT, DRAFT, "--seed", "2147483648"], "--seed", ["got 2147483648"]),
    (["design", LVDT, "--seed", "2147483648"], "--seed", ["0 .. 2147483646"]),
    (["netlist", DRAFT, "--spec", LVDT, "--cycles", "0"], "--cycles", ["got 0"]),
    (["netlist", DRAFT, "--spec", LVDT, "--cycles", "nan"], "--cycles", ["got nan"]),
    (["netlist", DRAFT, "--spec", LVDT, "--cycles", "inf"], "--cycles", ["got inf"]),
    (["design", LVDT, "--rank-by", "cost,cost"], "--rank-by", ["lists 'cost' twice"]),
    (["design", LVDT, "--rank-by", "cots"], "--rank-by", ["did you mean 'cost'"]),
    (["design", LVDT, "--samples", "10000000"], "--samples", ["100 .. 1000000 (got 10000000)"]),
    (["design", LVDT, "--samples", "1000000", "-n", "100"], "--samples", ["over 1 GB", "at most 238095"]),
    (["check", LVDT, DRAFT, "--samples", "x"], "--samples", ["not a valid integer", "--help"]),
    (["design"], "SPEC", ["Missing argument", "design --help"]),
])
def test_options_are_checked_before_any_computation(args, option, words):
    option_error(CliRunner().invoke(main, [str(a) for a in args] + ["--catalog", str(CATALOGS)]
                                    if len(args) > 1 else [str(a) for a in args]), option, *words)


def test_a_bom_value_of_47_in_check(tmp_path):
    bom = edited(tmp_path, DRAFT, "value: 10n}", "value: 47}")
    located(run("check", LVDT, bom, "--catalog", CATALOGS), bom, line_of(bom, "value: 47}"), "parts[1].value",
            "47 F is outside", "did you mean")


@pytest.mark.parametrize("text,line,column,field,words", [
    ("family,value,quantity\ntk-1,-10k,5\n", 2, 2, "value", ["must be > 0", "-10k"]),
    ("family,value,quantity\ntk-1,0,5\n", 2, 2, "value", ["must be > 0"]),
    ("family,family,value,quantity\ntk-1,tk-1,10k,5\n", 1, 2, None, ["repeats column 'family'"]),
    ("family,value,quantity\ntk-1,10k," + "9" * 200 + "\n", 2, 3, "quantity", ["whole number", "characters)"]),
    ("family,value,quantity,note\ntk-1,10k,5," + "z" * 140_000 + "\n", 2, None, None, ["not valid CSV", "field"]),
])
def test_stock_values_are_located(tmp_path, text, line, column, field, words):
    stock = tmp_path / "stock.csv"
    stock.write_text(text, encoding="utf-8")
    result = run("swap", CARRIER, CARRIER_BOM, "--stock", stock, "--catalog", CATALOGS, "--samples", "200")
    err = located(result, stock, line, field, *words)
    if column:
        assert err.startswith(f"error: {stock}:{line}:{column}: "), err
    assert len(err) < 400, len(err)


def test_a_bom_csv_cell_over_the_csv_limit(tmp_path):
    path = tmp_path / "bom.csv"
    path.write_text("ref,role,family,value\nR1,rs,tn-0.1," + "9" * 140_000 + "\n", encoding="utf-8")
    located(run("check", CARRIER, path, "--catalog", CATALOGS), path, 2, None, "not valid CSV")


@pytest.mark.parametrize("key,value,words", [
    ("name", '"a\\nb"', ["must be one line of printable text", "a\\nb"]),
    ("name", '"\\ud83d\\ude00"', ["lone surrogate U+D83D"]),
    ("name", '"\\x07bell"', ["printable", "\\x07bell"]),
    ("output_stage", "'" + "y" * 100_000 + "'", ["must be one of", "characters)"]),
    ("output_stage", '"gain\\nnone"', ["must be one line", "gain\\nnone"]),
])
def test_line_breaks_escapes_and_floods_in_values(tmp_path, key, value, words):
    spec = tmp_path / "spec.yaml"
    spec.write_text(VALID_SPEC.replace("name: bench-test", f"{key}: {value}"), encoding="utf-8")
    err = located(run("spec", "check", spec, "--catalog", CATALOGS), spec, 1, key, *words)
    assert len(err) < 400, len(err)


def test_a_real_emoji_name_is_fine(tmp_path):
    spec = tmp_path / "spec.yaml"
    spec.write_text(VALID_SPEC.replace("name: bench-test", 'name: "\\U0001F600 exciter"'), encoding="utf-8")
    result = run("spec", "check", spec, "--catalog", CATALOGS)
    assert result.exit_code == 0, result.stderr
    assert "\U0001F600 exciter" in result.output


@pytest.mark.parametrize("text,line,words", [
    (VALID_SPEC + "deep: " + "[" * 3000 + "]" * 3000 + "\n", 17, ["nests deeper than 32 levels"]),
    (VALID_SPEC + "deep: " + "[" * 40 + "]" * 40 + "\n", 17, ["nests deeper than 32 levels"]),
    (VALID_SPEC.replace("results: 5", "results: 5\x01"), 16, ["non-printable character U+0001"]),
])
def test_deep_nesting_and_non_printable_characters_are_located(tmp_path, text, line, words):
    spec = tmp_path / "spec.yaml"
    spec.write_text(text, encoding="utf-8")
    located(run("spec", "check", spec, "--catalog", CATALOGS), spec, line, None, *words)


@pytest.mark.parametrize("where", ["spec", "catalogs"])
def test_300_character_names(tmp_path, where):
    long = "n" * 300
    if where == "spec":
        path = tmp_path / (long + ".yaml")
        result = run("spec", "check", str(path), "--catalog", CATALOGS)
        option_error(result, long[:40], "longer than the 255 bytes")
        return
    spec = tmp_path / "spec.yaml"
    spec.write_text(VALID_SPEC + f"catalogs: [{long}]\n", encoding="utf-8")
    located(run("spec", "check", spec), spec, 17, "catalogs", "longer than the 255 bytes")


def _cli(args, timeout=60):
    """The real command in its own process, so a hang fails the test instead of freezing it."""
    return subprocess.run([sys.executable, "-m", "partpick", *map(str, args)], cwd=ROOT, capture_output=True,
                          text=True, timeout=timeout, stdin=subprocess.DEVNULL)


@pytest.mark.parametrize("role", ["spec", "bom", "stock", "catalog"])
def test_a_fifo_is_refused_without_blocking(tmp_path, role):
    fifo = tmp_path / "fifo"
    os.mkfifo(fifo)
    args = {"spec": ["spec", "check", fifo, "--catalog", CATALOGS],
            "bom": ["check", LVDT, fifo, "--catalog", CATALOGS],
            "stock": ["swap", CARRIER, CARRIER_BOM, "--stock", fifo, "--catalog", CATALOGS],
            "catalog": ["catalog", "validate", fifo]}[role]
    proc = _cli(args)
    assert proc.returncode == 2, proc.stderr
    assert proc.stderr.strip() == f"error: {fifo}: is a FIFO (named pipe), expected a regular file"


def test_dev_zero_is_refused_without_reading_it(tmp_path):
    proc = _cli(["check", LVDT, "/dev/zero", "--catalog", CATALOGS])
    assert proc.returncode == 2
    assert proc.stderr.strip() == "error: /dev/zero: is a character device, expected a regular file"


def test_an_oversized_file_is_refused(tmp_path):
    from partpick.fileio import MAX_INPUT_BYTES

    spec = tmp_path / "big.yaml"
    spec.write_text(VALID_SPEC + "#" * (MAX_INPUT_BYTES + 1), encoding="utf-8")
    located(run("spec", "check", spec, "--catalog", CATALOGS), spec, None, None, "larger than 2 MiB")


def test_an_unknown_failure_is_one_line_not_a_traceback(monkeypatch):
    import partpick.pipeline

    def broken(*args, **kwargs):
        raise RuntimeError("something\nunexpected")
    monkeypatch.setattr(partpick.pipeline, "evaluate_bom", broken)
    result = run("check", LVDT, DRAFT, "--catalog", CATALOGS)
    assert result.exit_code == 3
    err = result.stderr.strip()
    assert "\n" not in err and err.startswith("error: internal error RuntimeError: something\\nunexpected (a bug")


def test_physics_that_cannot_cope_names_the_parts_and_values(monkeypatch):
    import partpick.pipeline

    def singular(*args, **kwargs):
        raise ZeroDivisionError("float division by zero")
    monkeypatch.setattr(partpick.pipeline, "evaluate_bom", singular)
    err = located(run("check", LVDT, DRAFT, "--catalog", CATALOGS), DRAFT, None, None,
                  "the physics cannot analyse this circuit (ZeroDivisionError: float division by zero)",
                  "R1 3k09", "C1 10n", "U1 oa-audio-10m")
    assert "\n" not in err


def test_no_color_and_the_progress_line(monkeypatch):
    import io

    from partpick.export.terminal import colour_enabled, coloured_verdicts, progress

    class Tty(io.StringIO):
        def isatty(self):
            return True
    tty = Tty()
    monkeypatch.delenv("NO_COLOR", raising=False)
    assert colour_enabled(tty) and "\x1b[32mpass" in coloured_verdicts("1 pass 2")
    monkeypatch.setenv("NO_COLOR", "1")
    assert not colour_enabled(tty)
    with progress(True, "verifying", tty) as p:
        p(1, 3)
        p(2, 3)
    assert tty.getvalue().endswith("\r" + " " * len("verifying: 2/3") + "\r")
