"""Bad input, hostile files and edge requirements through the whole command line.

Generates (seeded) at least 10,000 command lines with broken or extreme inputs: spec
files mutated line by line and field by field (zero, NaN, subnormal, absurd, bare
numbers, long, multi-line, non-printable values, deep nesting), BOMs and stock lists
with bad values and headers, catalogs with extreme part data, out-of-range options,
and hostile files (FIFOs, /dev/zero, folders, unreadable or read-only places, names too
long, outputs onto or under a file). Each runs as its own process, two at a time, with
a timeout and a memory limit (resource.setrlimit), and is classed by its outcome:
exit code, one-line or multi-line message, traceback, hang over 20 s, peak memory over
1 GB, and whether an exit-2 message names the file (and line and field) it is about.

Done when (issue "bad input"): 0 tracebacks, 0 internal errors, 0 hangs, 0 processes
over 1 GB, every exit 2 one line, naming the file where a file is at fault. A refused
spec (exit 1, "error: no design meets the spec") prints its why-not over several lines
(what binds, what would make it design, the nearest designs): its own class, not a bad
outcome; any other multi-line message is one.

``--kinds spec-edge,catalog`` runs only those categories (the same cases as in the full
run, under the same numbers); ``--keep DIR`` copies each bad case's folder and command.

Each process is forked from this one after the imports (so 10,000 runs take minutes,
not hours) and runs ``partpick.cli.main`` as the ``partpick`` command does; ``--exec``
runs ``python -m partpick`` instead (slower, for a spot check of the real entry point).

Run: python benchmarks/bench_fuzz.py [-n 10000] [--seed 1] [--exec] [--show 5]
"""

from __future__ import annotations

import argparse
import collections
import os
import random
import re
import resource
import shutil
import signal
import subprocess
import sys
import tempfile
import time
from pathlib import Path

os.environ.setdefault("OMP_NUM_THREADS", "1")
ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))

os.environ.setdefault("MPLCONFIGDIR", tempfile.mkdtemp(prefix="partpick-fuzz-mpl-"))
os.chmod(os.environ["MPLCONFIGDIR"], 0o777)

# Imported before forking, shared by every child (and needed by the children that run as
# an unprivileged user, who may not be able to read this Python's own files).
import encodings.utf_8_sig  # noqa: E402,F401
import json  # noqa: E402,F401

import matplotlib  # noqa: E402

matplotlib.use("Agg")
import matplotlib.pyplot  # noqa: E402,F401
import schemdraw  # noqa: E402,F401

import partpick.cli  # noqa: E402,F401
import partpick.export.catalog_table  # noqa: E402,F401
import partpick.export.files  # noqa: E402,F401
import partpick.export.plots  # noqa: E402,F401
import partpick.export.report  # noqa: E402,F401
import partpick.export.spec_view  # noqa: E402,F401
import partpick.export.swap_view  # noqa: E402,F401
import partpick.export.tradeoff_view  # noqa: E402,F401
import partpick.export.verdict  # noqa: E402,F401
import partpick.pipeline  # noqa: E402,F401
import partpick.swap  # noqa: E402,F401
import partpick.tradeoff  # noqa: E402,F401

CATALOGS = ROOT / "catalogs"
SPEC = (ROOT / "specs" / "lvdt-exciter.yaml").read_text(encoding="utf-8")
CARRIER = (ROOT / "specs" / "carrier-50khz.yaml").read_text(encoding="utf-8")
BOM = (ROOT / "specs" / "boms" / "carrier-50khz-01.yaml").read_text(encoding="utf-8")
DRAFT = (ROOT / "specs" / "boms" / "lvdt-exciter-draft.yaml").read_text(encoding="utf-8")
STOCK = (ROOT / "specs" / "drawer.csv").read_text(encoding="utf-8")
CAT_FILES = {p.name: p.read_text(encoding="utf-8") for p in sorted(CATALOGS.glob("*.yaml"))}

TIMEOUT_S = 40          # a process is killed after this
HANG_S = 20             # ... and counted as a hang past this
MEMORY_LIMIT = 6 << 30  # address space per process (guards the machine; numpy and the solver reserve a lot)
BIG_RSS_KB = 1 << 20    # peak resident memory counted as a blow-up: 1 GB
FAST = ["--samples", "200"]
DESIGN_FAST = ["--samples", "200", "-n", "2"]

NUMBERS = ["0", "-1", "-0", "nan", ".nan", "NaN", "inf", "-inf", ".inf", "1e-320", "4.9e-324", "1e-300", "1e300",
           "1e400", "47", "0.3", "1", "100", "1e-9", "1e9", "2147483648", "-2147483649", "0x10", "1_000", "00",
           "1e3", "1.5", "-1e-12"]
UNITS = ["", " ", " F", " Hz", " kHz", " MHz", " GHz", " V", " Vpk", " Vpp", " Vrms", " mV", " %", " ppm", " degC",
         " K", " ohm", " kohm", " Mohm", " nF", " uF", " pF", " A", " mA", " W", " V/us", " ppm/K", " dB", " eV"]
WEIRD = ["", "~", "null", "true", "false", "[]", "{}", "[1, 2]", "{a: 1}", "-", "'", '"', "&a 1", "*a", "!!binary aGk=",
         '"a\\nb"', '"\\U0001F600"', '"\\ud83d\\ude00"', '"\\x07bell"', '"\\0"', '"tab\\there"', "é", "5 khz",
         "4,7 kHz", "1..2", "all", "none", "open", "dual", "single", "E24", "x" * 300, "'" + "y" * 100_000 + "'",
         "[" * 60 + "]" * 60, "[" * 2000 + "]" * 2000, "{a: " * 50 + "1" + "}" * 50]
SPEC_FIELDS = {
    "frequency": ["target", "tolerance"], "amplitude": ["target", "tolerance"], "supply": ["kind", "min", "max"],
    "load": ["resistance", "capacitance"], "temperature": ["min", "max", "nominal"], "distortion": ["max_thd"],
    "yield": ["min"]}
TOP_FIELDS = ["name", "description", "topology", "results", "builds", "output_stage", "rank_by", "catalogs", "stock",
              "parts"]
# Values that are inside partpick's ranges but at their edges: the physics must cope.
EDGES = {
    ("frequency", "target"): ["1 mHz", "0.1 Hz", "1 Hz", "20 Hz", "200 kHz", "1 MHz", "10 MHz"],
    ("frequency", "tolerance"): ["1 ppm", "0.001 %", "0.01 %", "10 %", "49 %"],
    ("amplitude", "target"): ["1 mVpk", "10 mVrms", "6 Vpk", "20 Vpk", "100 Vpp", "1 kVpk"],
    ("amplitude", "tolerance"): ["1 ppm", "0.1 %", "99 %"],
    ("supply", "min"): ["0.5 V", "1.8 V", "3.3 V", "18 V", "200 V"],
    ("supply", "max"): ["200 V", "40 V"],
    ("load", "resistance"): ["0.1 ohm", "1 ohm", "16 ohm", "1 Mohm", "1e12 ohm", "open"],
    ("load", "capacitance"): ["0 F", "1 pF", "100 nF", "10 uF"],
    ("temperature", "min"): ["-100 degC", "-55 degC", "150 degC"],
    ("temperature", "max"): ["200 degC", "125 degC", "-99 degC"],
    ("distortion", "max_thd"): ["1 ppm", "0.001 %", "0.1 %", "99 %"],
    ("yield", "min"): ["1 ppm", "50 %", "100 %"],
}
OPTIONS = {
    "--seed": ["-1", "0", "2147483646", "2147483647", "2147483648", "99999999999999999999", "x", "1.5", ""],
    "--samples": ["0", "99", "100", "1000001", "10000000", "-5", "x", "1e6"],
    "--why-not": ["0", "51", "x", "3"],
    "--cycles": ["0", "-1", "nan", "inf", "1e-9", "0.5", "1e12", "x", "3"],
    "--rank-by": ["cost,cost", "cost,", "", ",", "yield,frequency_error", "cots", "cost, parts", "a" * 500],
    "-n": ["0", "101", "-1", "x", "1"],
    "--format": ["xml", "json", "csv", "yaml", ""],
}


def _spec_lines_mutated(rng: random.Random, text: str) -> str:
    lines = text.splitlines()
    for _ in range(rng.randint(1, 3)):
        if not lines:
            break
        i = rng.randrange(len(lines))
        action = rng.choice(["delete", "duplicate", "insert", "replace", "truncate", "indent"])
        line = lines[i]
        token = rng.choice(NUMBERS + WEIRD + [n + u for n, u in zip(NUMBERS, UNITS)])
        if action == "delete":
            del lines[i]
        elif action == "duplicate":
            lines.insert(i, line)
        elif action == "insert":
            pos = rng.randint(0, len(line))
            lines[i] = line[:pos] + token + line[pos:]
        elif action == "replace":
            words = line.split(" ")
            words[rng.randrange(len(words))] = token
            lines[i] = " ".join(words)
        elif action == "truncate":
            lines[i] = line[: rng.randint(0, len(line))]
        else:
            lines[i] = " " * rng.randint(1, 3) + line
    return "\n".join(lines) + "\n"


def _set_field(text: str, section: str, key: str, value: str) -> str:
    """``section: {... key: value ...}`` in a flow-mapping spec line (added when absent)."""
    pattern = re.compile(rf"^({section}:\s*\{{.*?\b{key}:\s*)([^,}}]*)(.*)$", re.M)
    if pattern.search(text):
        return pattern.sub(lambda m: m[1] + value + m[3], text, count=1)
    line = re.compile(rf"^{section}:\s*\{{", re.M)
    if line.search(text):
        return line.sub(lambda m: m[0] + f"{key}: {value}, ", text, count=1)
    return text + f"{section}: {{{key}: {value}}}\n"


def _set_top(text: str, key: str, value: str) -> str:
    pattern = re.compile(rf"^{key}:.*$", re.M)
    if pattern.search(text):
        return pattern.sub(lambda m: f"{key}: {value}", text, count=1)
    return text + f"{key}: {value}\n"


def _bom_value(rng: random.Random) -> str:
    return rng.choice(["47", "0", "-1k", "1e-30", "1e30", "10M", "10k3", "4k7", "1", "1p", "1G", "nan", "300",
                       "9k76", "9.76k", "10 kohm", "10 kF", "inf", "1e-320", "'" + "9" * 2000 + "'", '"1\\n0k"',
                       "21k", "15k", "300p", "330p", "10", "100k", "1M"])


def _catalog_mutated(rng: random.Random) -> tuple[str, str]:
    """One catalog file with one quantity of one family set to an extreme, as (name, text)."""
    name = rng.choice(sorted(CAT_FILES))
    text = CAT_FILES[name]
    fields = list(re.finditer(r"(\b[a-z_]+): ([-0-9.][^,}\n]*)", text))
    m = rng.choice(fields)
    number_text = re.match(r"^[-+0-9.eE]+", m[2].strip())
    unit = m[2].strip()[number_text.end():].strip() if number_text else ""
    number = rng.choice(NUMBERS + ["1e-15", "1e-6", "1e6", "1e12", "1e15", "1e30"])
    scaled = m[2].strip()
    if number_text:
        try:  # the part's own value scaled: extreme, yet often inside partpick's ranges
            scaled = f"{float(number_text[0]) * rng.choice([1e-9, 1e-6, 1e-3, 0.1, 0.5, 2, 10, 1e3, 1e6]):g} {unit}"
        except ValueError:
            pass
    value = rng.choice([f"{number} {unit}".strip(), number, rng.choice(WEIRD), scaled, scaled, scaled])
    return name, text[: m.start(2)] + value + text[m.end(2):]


def cases(n: int, seed: int):
    """Yield n cases: (category, files {name: text | bytes | marker}, argv, blamed file or None, as_nobody)."""
    rng = random.Random(seed)
    kinds = (["spec-lines"] * 14 + ["spec-field"] * 14 + ["spec-edge"] * 8 + ["bom"] * 14 + ["stock"] * 10
             + ["catalog"] * 12 + ["options"] * 10 + ["files"] * 12 + ["bytes"] * 6)
    for _ in range(n):
        kind = rng.choice(kinds)
        files: dict[str, object] = {}
        blamed = None
        nobody = False
        if kind == "spec-lines":
            files["s.yaml"] = _spec_lines_mutated(rng, SPEC)
            blamed = "s.yaml"
            argv = rng.choice([["spec", "check", "s.yaml"]] * 30 + [["check", "s.yaml", "d.yaml"] + FAST] * 6
                              + [["design", "s.yaml"] + DESIGN_FAST])
            files["d.yaml"] = DRAFT
        elif kind == "spec-field":
            section = rng.choice(list(SPEC_FIELDS))
            key = rng.choice(SPEC_FIELDS[section])
            value = rng.choice(WEIRD + [rng.choice(NUMBERS) + rng.choice(UNITS) for _ in range(3)])
            if rng.random() < 0.3:
                files["s.yaml"] = _set_top(SPEC, rng.choice(TOP_FIELDS), value)
            else:
                files["s.yaml"] = _set_field(SPEC, section, key, value)
            files["d.yaml"] = DRAFT
            blamed = "s.yaml"
            argv = rng.choice([["spec", "check", "s.yaml"]] * 4 + [["check", "s.yaml", "d.yaml"] + FAST])
        elif kind == "spec-edge":
            base = rng.choice([SPEC, CARRIER])
            text = base
            for (section, key), values in rng.sample(list(EDGES.items()), rng.randint(1, 3)):
                text = _set_field(text, section, key, rng.choice(values))
            files["s.yaml"] = text
            files["d.yaml"] = DRAFT if base is SPEC else BOM
            blamed = "s.yaml"
            argv = rng.choice([["check", "s.yaml", "d.yaml"] + FAST] * 8 + [["check", "s.yaml", "d.yaml", "--transient"]
                              + FAST] * 2 + [["netlist", "d.yaml", "--spec", "s.yaml"]] * 2
                              + [["design", "s.yaml"] + DESIGN_FAST])
        elif kind == "bom":
            lines = BOM.splitlines()
            parts = [i for i, ln in enumerate(lines) if "value:" in ln]
            for i in rng.sample(parts, rng.randint(1, 2)):
                lines[i] = re.sub(r"value: [^}]*", f"value: {_bom_value(rng)}", lines[i])
            if rng.random() < 0.15:
                lines = [ln.replace("supply: dual", "supply: single") for ln in lines]
            if rng.random() < 0.1:
                lines = _spec_lines_mutated(rng, "\n".join(lines)).splitlines()
            name = rng.choice(["b.yaml", "b.yaml", "b.csv"])
            text = "\n".join(lines) + "\n"
            if name == "b.csv":
                text = _bom_csv(rng, text)
            files[name] = text
            files["s.yaml"] = CARRIER
            blamed = name
            argv = rng.choice([["check", "s.yaml", name] + FAST] * 4 + [["netlist", name, "--spec", "s.yaml"]] * 2
                              + [["swap", "s.yaml", name, "--stock", "st.csv"] + FAST])
            files["st.csv"] = STOCK
        elif kind == "stock":
            files["st.csv"] = _stock_mutated(rng)
            files["s.yaml"] = CARRIER
            files["b.yaml"] = BOM
            blamed = "st.csv"
            all_flag = ["--all"] if rng.random() < 0.4 else []
            argv = ["swap", "s.yaml", "b.yaml", "--stock", "st.csv"] + all_flag + FAST
        elif kind == "catalog":
            name, text = _catalog_mutated(rng)
            files["cat/" + name] = text
            for other, t in CAT_FILES.items():
                files.setdefault("cat/" + other, t)
            files["s.yaml"] = CARRIER
            files["b.yaml"] = BOM
            blamed = "cat/" + name
            argv = rng.choice([["catalog", "validate", "cat"]] * 3 + [["check", "s.yaml", "b.yaml", "--catalog", "cat"]
                              + FAST] * 3 + [["netlist", "b.yaml", "--spec", "s.yaml", "--catalog", "cat"]]
                              + [["design", "s.yaml", "--catalog", "cat"] + DESIGN_FAST])
        elif kind == "options":
            files["s.yaml"] = SPEC
            files["d.yaml"] = DRAFT
            files["st.csv"] = STOCK
            argv = _options_case(rng)
        elif kind == "files":
            argv, files, blamed, nobody = _files_case(rng)
        else:
            target = rng.choice(["s.yaml", "d.yaml", "st.csv", "cat/x.yaml"])
            data = bytes(rng.getrandbits(8) for _ in range(rng.randint(0, 400)))
            if rng.random() < 0.5:
                data = (SPEC if target == "s.yaml" else DRAFT).encode()[: rng.randint(0, 400)] + data[:20]
            files[target] = data
            files.setdefault("s.yaml", SPEC)
            files.setdefault("d.yaml", DRAFT)
            files.setdefault("st.csv", STOCK)
            blamed = target
            argv = {"s.yaml": ["spec", "check", "s.yaml"], "d.yaml": ["check", "s.yaml", "d.yaml"] + FAST,
                    "st.csv": ["swap", "s.yaml", "d.yaml", "--stock", "st.csv"] + FAST,
                    "cat/x.yaml": ["catalog", "validate", "cat"]}[target]
        if "--catalog" not in argv and argv[0] not in ("catalog", "init"):
            argv = argv + ["--catalog", str(CATALOGS)]
        yield kind, files, argv, blamed, nobody


def _bom_csv(rng: random.Random, yaml_text: str) -> str:
    rows = ["# supply: " + ("single" if "supply: single" in yaml_text else "dual"), "# stage: gain",
            rng.choice(["ref,role,family,value", "ref,role,family,value,value", "ref,role,family", "designator,role,"
                                                                                                  "family,value"])]
    for m in re.finditer(r"ref: '([^']*)', role: (\w+), family: ([\w.-]+)(?:, value: ([^}]*))?", yaml_text):
        ref = m[1] if "," not in m[1] else f'"{m[1]}"'
        rows.append(f"{ref},{m[2]},{m[3]},{m[4] or ''}")
    if rng.random() < 0.05:
        rows.append("R9,rs,tn-0.1," + "9" * 140_000)
    return "\n".join(rows) + "\n"


def _stock_mutated(rng: random.Random) -> str:
    lines = STOCK.splitlines()
    action = rng.choice(["value", "header", "many", "quantity", "price", "lines", "cell"])
    if action == "value":
        i = rng.randrange(2, len(lines))
        cells = lines[i].split(",")
        cells[1] = rng.choice(["-10k", "0", "1e-320", "nan", "1e300", "10k3", "47", "'a\nb'", "x" * 5000, ""])
        lines[i] = ",".join(cells)
    elif action == "header":
        lines[0] = rng.choice(["family,family,value,quantity", "family,value,quantity,quantity", "family,value",
                               "family;value;quantity", "", "family,value,quantity,unit_price,note,extra",
                               "value,family,quantity"])
    elif action == "many":
        from partpick.catalog import load_catalog

        cat = load_catalog(CATALOGS)
        fam = cat.find("resistors", rng.choice(["tn-0.1", "tk-1"]))
        values = [v for v in fam.values() if 3e3 <= v <= 60e3]
        lines += [f"{fam.id},{v:g},50,," for v in rng.sample(values, min(len(values), rng.randint(20, 400)))]
        lines = list(dict.fromkeys(lines))
    elif action == "quantity":
        i = rng.randrange(2, len(lines))
        cells = lines[i].split(",")
        cells[2] = rng.choice(["-1", "1.5", "1e9", "99999999999999999999", "x", ""])
        lines[i] = ",".join(cells)
    elif action == "price":
        i = rng.randrange(2, len(lines))
        cells = lines[i].split(",")
        cells[3] = rng.choice(["-1", "nan", "inf", "1e300", "x"])
        lines[i] = ",".join(cells)
    elif action == "lines":
        return _spec_lines_mutated(rng, STOCK)
    else:
        i = rng.randrange(2, len(lines))
        lines[i] += "," + "z" * rng.choice([10, 140_000])
    return "\n".join(lines) + "\n"


def _options_case(rng: random.Random) -> list[str]:
    command = rng.choice(["design", "check", "check", "check", "netlist", "swap"])
    base = {"design": ["design", "s.yaml"], "check": ["check", "s.yaml", "d.yaml"],
            "netlist": ["netlist", "d.yaml", "--spec", "s.yaml"], "swap": ["swap", "s.yaml", "d.yaml", "--stock",
                                                                          "st.csv"]}[command]
    allowed = {"design": ["--seed", "--samples", "--why-not", "--rank-by", "-n", "--format"],
               "check": ["--seed", "--samples"], "netlist": ["--cycles"], "swap": ["--samples"]}[command]
    chosen = rng.sample(allowed, rng.randint(1, min(2, len(allowed))))
    argv = list(base)
    for name in chosen:
        argv += [name, rng.choice(OPTIONS[name])]
    if command == "design":
        for name, value in (("--samples", "200"), ("-n", "2")):
            if name not in chosen:
                argv += [name, value]
    elif command in ("check", "swap") and "--samples" not in chosen:
        argv += ["--samples", "200"]
    return argv


def _files_case(rng: random.Random):
    """Hostile places to read from and write to."""
    files: dict[str, object] = {"s.yaml": SPEC, "d.yaml": DRAFT, "st.csv": STOCK, "afile": "x\n"}
    long = "n" * 300
    reading = rng.random() < 0.5
    nobody = False
    if reading:
        where = rng.choice(["fifo", "zero", "dir", "missing", "long", "unreadable", "cat-fifo", "cat-zero",
                            "cat-unlistable", "cat-long", "spec-catalogs-long", "stock-fifo", "symlink-zero"])
        spec, bom, argv_extra = "s.yaml", "d.yaml", []
        if where == "fifo":
            files["p.yaml"] = "FIFO"
            spec = "p.yaml"
        elif where == "zero":
            spec = "/dev/zero"
        elif where == "dir":
            files["dir/x"] = "x"
            spec = "dir"
        elif where == "missing":
            spec = "nope.yaml"
        elif where == "long":
            spec = long + ".yaml"
        elif where == "unreadable":
            files["u.yaml"] = ("MODE", 0o000, SPEC)
            spec, nobody = "u.yaml", True
        elif where == "cat-fifo":
            files["cat/x.yaml"] = "FIFO"
            argv_extra = ["--catalog", "cat"]
        elif where == "cat-zero":
            argv_extra = ["--catalog", "/dev/zero"]
        elif where == "cat-unlistable":
            files["cat/x.yaml"] = CAT_FILES["opamps.yaml"]
            files["cat"] = ("DIRMODE", 0o000)
            argv_extra, nobody = ["--catalog", "cat"], True
        elif where == "cat-long":
            argv_extra = ["--catalog", long]
        elif where == "spec-catalogs-long":
            files["s.yaml"] = SPEC + f"catalogs: [{long}]\n"
        elif where == "stock-fifo":
            files["p.csv"] = "FIFO"
            files["s.yaml"] = SPEC + "stock: {file: p.csv, mode: prefer}\n"
        else:
            files["z.yaml"] = ("LINK", "/dev/zero")
            bom = "z.yaml"
        blamed = {"fifo": "p.yaml", "zero": "/dev/zero", "dir": "dir", "missing": "nope.yaml", "long": spec,
                  "unreadable": "u.yaml", "cat-fifo": "cat/x.yaml", "cat-zero": "/dev/zero", "cat-unlistable": "cat",
                  "cat-long": long, "spec-catalogs-long": long, "stock-fifo": "p.csv", "symlink-zero": "z.yaml"}[where]
        command = rng.choice(["spec", "check", "netlist"]) if where != "symlink-zero" else "check"
        argv = {"spec": ["spec", "check", spec], "check": ["check", spec, bom] + FAST,
                "netlist": ["netlist", bom, "--spec", spec]}[command] + argv_extra
        return argv, files, blamed, nobody
    where = rng.choice(["onto-file", "under-file", "read-only", "long", "fifo-target", "dir-target", "escape-name",
                        "clash"])
    out = {"onto-file": "afile", "under-file": "afile/sub", "read-only": "ro", "long": long, "fifo-target": "pipe",
           "dir-target": "adir", "escape-name": "out", "clash": "out"}[where]
    if where == "read-only":  # immutable even for root where chattr works; else 0555 for a user
        files["ro/keep"] = "x"
        files["ro"] = ("DIRMODE", "immutable" if IMMUTABLE else 0o555)
    elif where == "fifo-target":
        files["pipe"] = "FIFO"
    elif where == "dir-target":
        files["adir/x"] = "x"
    elif where == "escape-name":
        files["s.yaml"] = _set_top(SPEC, "name", rng.choice(["../outside/escaped", "/etc/x", ".hidden", "a/b",
                                                             '"a\\0b"', "x" * 300, "..", "CON"]))
    elif where == "clash":
        files["out/lvdt-exciter-02.yaml"] = "keep\n"
    command = rng.choice(["init", "netlist", "design-out", "design-plots", "design-report", "tradeoff-plots",
                          "swap-out", "report"])
    argv = {"init": ["init", out],
            "netlist": ["netlist", "d.yaml", "--spec", "s.yaml", "-o", out],
            "design-out": ["design", "s.yaml", "--out", out] + DESIGN_FAST,
            "design-plots": ["design", "s.yaml", "--plots", out] + DESIGN_FAST,
            "design-report": ["design", "s.yaml", "--report", out] + DESIGN_FAST,
            "tradeoff-plots": ["tradeoff", "s.yaml", "--plots", out, "--samples", "200"],
            "swap-out": ["swap", "s.yaml", "d.yaml", "--stock", "st.csv", "--out", out] + FAST,
            "report": ["report", "s.yaml", "-o", out, "--samples", "200"]}[command]
    if where in ("escape-name", "clash") and command in ("init", "netlist", "swap-out", "report"):
        argv = ["design", "s.yaml", "--out", out] + DESIGN_FAST
    return argv, files, (out, "s.yaml") if where == "escape-name" else out, nobody


# -- running ------------------------------------------------------------------------------------

def _materialise(folder: Path, files: dict) -> None:
    for name, content in files.items():
        path = folder / name
        path.parent.mkdir(parents=True, exist_ok=True)
        if content == "FIFO":
            os.mkfifo(path)
        elif isinstance(content, tuple) and content[0] == "LINK":
            os.symlink(content[1], path)
        elif isinstance(content, tuple) and content[0] == "MODE":
            path.write_text(content[2], encoding="utf-8")
            path.chmod(content[1])
        elif isinstance(content, tuple) and content[0] == "DIRMODE":
            path.mkdir(exist_ok=True)
        else:
            path.write_bytes(content if isinstance(content, bytes) else str(content).encode("utf-8"))
    for name, content in files.items():  # folder modes last, after their files are in
        if isinstance(content, tuple) and content[0] == "DIRMODE":
            if content[1] == "immutable":
                subprocess.run(["chattr", "+i", str(folder / name)], check=True)
            else:
                (folder / name).chmod(content[1])


def _can_make_immutable() -> bool:
    """Whether chattr +i works here (root on ext2/3/4, xfs, btrfs): a folder even root
    cannot write into, the honest way to test a read-only place as root."""
    if os.geteuid() != 0 or shutil.which("chattr") is None:
        return False
    probe = Path(tempfile.mkdtemp(prefix="partpick-fuzz-probe-"))
    ok = subprocess.run(["chattr", "+i", str(probe)], capture_output=True).returncode == 0
    if ok:
        subprocess.run(["chattr", "-i", str(probe)], capture_output=True)
    probe.rmdir()
    return ok


IMMUTABLE = _can_make_immutable()


def _nobody() -> tuple[int, int] | None:
    if os.geteuid() != 0:
        return None
    import pwd

    try:
        entry = pwd.getpwnam("nobody")
    except KeyError:
        return None
    return entry.pw_uid, entry.pw_gid


def _child(folder: Path, argv: list[str], as_nobody, use_exec: bool) -> None:
    """In the forked process: limits, streams, then the command; never returns."""
    try:
        resource.setrlimit(resource.RLIMIT_AS, (MEMORY_LIMIT, MEMORY_LIMIT))
        os.chdir(folder)
        out = os.open(folder / ".stdout", os.O_WRONLY | os.O_CREAT | os.O_TRUNC, 0o644)
        err = os.open(folder / ".stderr", os.O_WRONLY | os.O_CREAT | os.O_TRUNC, 0o644)
        null = os.open(os.devnull, os.O_RDONLY)
        os.dup2(null, 0)
        os.dup2(out, 1)
        os.dup2(err, 2)
        if as_nobody:
            os.setgroups([])
            os.setgid(as_nobody[1])
            os.setuid(as_nobody[0])
        if use_exec:
            os.execv(sys.executable, [sys.executable, "-m", "partpick", *argv])
        sys.stdout = open(1, "w", closefd=False)
        sys.stderr = open(2, "w", closefd=False)
        code = 0
        try:
            partpick.cli.main.main(argv, prog_name="partpick")
        except SystemExit as exc:
            code = exc.code if isinstance(exc.code, int) else (0 if exc.code is None else 1)
        except BaseException:  # what an uncaught exception does in a real run
            import traceback

            traceback.print_exc()
            code = 1
        sys.stdout.flush()
        sys.stderr.flush()
        os._exit(code)
    except BaseException:
        os._exit(_NOT_STARTED)  # e.g. --exec as 'nobody' with a Python that user cannot run


_NOT_STARTED = 99


def run(n: int, seed: int, use_exec: bool, show: int, kinds: set[str] | None = None,
        keep: Path | None = None, jobs: int = 1) -> dict:
    """Run the cases (only ``kinds`` when given: the same cases, with the same numbers, as
    in the full run), ``jobs`` at once; ``keep`` receives a copy of every bad case's
    folder and command. The user cache starts empty (a folder of the run's own), as on
    a fresh install: a part the fuzz changed pays for its first use."""
    nobody = _nobody()
    base = Path(tempfile.mkdtemp(prefix="partpick-fuzz-"))
    base.chmod(0o755)
    cache = base / ".cache"
    cache.mkdir()
    cache.chmod(0o777)   # (cases run as 'nobody' share it)
    os.environ["PARTPICK_CACHE"] = str(cache)
    counts: collections.Counter = collections.Counter()
    by_kind: dict[str, collections.Counter] = collections.defaultdict(collections.Counter)
    examples: dict[str, list[str]] = collections.defaultdict(list)
    running: dict[int, tuple] = {}
    todo = ((i, c) for i, c in enumerate(cases(n, seed)) if kinds is None or c[0] in kinds)
    t_start = time.perf_counter()
    slowest = 0.0
    times: list[float] = []   # every case's wall time, s
    ran = 0

    def finish(pid: int, status: int, usage) -> None:
        nonlocal slowest, ran
        ran += 1
        i, kind, folder, argv, blamed, started, before = running.pop(pid)
        elapsed = time.perf_counter() - started
        slowest = max(slowest, elapsed)
        times.append(elapsed)
        err = (folder / ".stderr").read_text(encoding="utf-8", errors="replace")
        code = os.waitstatus_to_exitcode(status)
        classes = _classify(code, err, elapsed, usage.ru_maxrss, blamed)
        after = _listing(folder)
        new = after - before
        if any(".tmp" in p for p in new):
            classes.append("temporary file left")
        if code == 2 and new:
            classes.append("refusal wrote files")
        if kind == "files" and any(p.startswith("..") or (p.split("/")[0] not in (".stdout", ".stderr") and
                                                          p.split("/")[0] != blamed_out(blamed)) for p in new):
            classes.append("wrote outside the named place")
        if keep is not None and any(c in BAD for c in classes):
            _keep(folder, keep / f"case-{i}", argv, classes, elapsed)
        for c in classes:
            counts[c] += 1
            by_kind[kind][c] += 1
            if c in SHOW and len(examples[c]) < show:
                examples[c].append(f"[{kind}] partpick {' '.join(a[:60] for a in argv)}\n      -> {err.strip()[-600:]}")
        _remove(folder)

    while True:
        while len(running) < jobs:
            nxt = next(todo, None)
            if nxt is None:
                break
            i, (kind, files, argv, blamed, as_nobody) = nxt
            folder = base / f"case-{i}"
            folder.mkdir()
            folder.chmod(0o777)
            _materialise(folder, files)
            before = _listing(folder)
            pid = os.fork()
            if pid == 0:
                _child(folder, argv, nobody if as_nobody else None, use_exec)
            running[pid] = (i, kind, folder, argv, blamed, time.perf_counter(), before)
        if not running:
            break
        pid, status, usage = os.wait4(-1, os.WNOHANG)
        if pid:
            finish(pid, status, usage)
            continue
        now = time.perf_counter()
        for pid, (*_, started, _before) in list(running.items()):
            if now - started > TIMEOUT_S:
                os.kill(pid, signal.SIGKILL)
        time.sleep(0.005)
    shutil.rmtree(base, ignore_errors=True)
    return {"counts": counts, "by_kind": by_kind, "examples": examples, "seconds": time.perf_counter() - t_start,
            "slowest": slowest, "n": ran, "times": times}


BAD = ("traceback", "internal error (exit 3)", "hang > 20 s", "over 1 GB", "multi-line message", "killed",
       "temporary file left", "refusal wrote files", "wrote outside the named place")


def _keep(folder: Path, dest: Path, argv: list[str], classes: list[str], elapsed: float) -> None:
    """Copy a bad case (its files, streams and command) for reproduction by hand."""
    shutil.rmtree(dest, ignore_errors=True)
    shutil.copytree(folder, dest, symlinks=True, ignore_dangling_symlinks=True,
                    ignore=lambda d, names: [n for n in names if not (Path(d) / n).is_file()
                                             and not (Path(d) / n).is_dir()])
    (dest / ".command").write_text(f"partpick {' '.join(argv)}\n# {', '.join(classes)}; {elapsed:.1f} s\n")


SHOW = BAD + ("exit 2 not naming the file at fault", "exit 2 with file:line, no field")   # examples printed


REFUSAL = "error: no design meets the spec"


def _classify(code: int, err: str, elapsed: float, maxrss_kb: int, blamed: str | None) -> list[str]:
    if code == _NOT_STARTED:
        return ["not started (harness)"]
    out = [f"exit {code}" if code in (0, 1, 2, 3) else "killed"]
    lines = [ln for ln in err.splitlines() if ln.strip()]
    if "Traceback (most recent call last)" in err:
        out.append("traceback")
    if code == 3:
        out.append("internal error (exit 3)")
    if elapsed > HANG_S:
        out.append("hang > 20 s")
    if maxrss_kb > BIG_RSS_KB:
        out.append("over 1 GB")
    if code == 1 and lines and lines[0] == REFUSAL:
        # a refused spec's why-not: what binds, what would make it design and the nearest
        # designs, one per line (issue "the search designs what users ask for")
        out.append("refusal with its analysis")
    elif code == 2 or (code == 1 and lines):
        errors = [ln for ln in lines if ln.startswith("error:")]
        out.append("one-line message" if len(errors) == 1 and len(lines) == 1 else "multi-line message")
    elif code == 1:
        out.append("exit 1 with a result on stdout")
    if code == 2 and blamed is not None:
        first = lines[0] if lines else ""
        names = blamed if isinstance(blamed, tuple) else (blamed,)
        if any(b in first or Path(b).name in first for b in names):
            out.append("exit 2 naming the file")
            if re.search(r":\d+(:\d+)?: ", first):
                out.append("exit 2 with file:line")
            if re.search(r":\d+(:\d+)?: '[^']+' ", first):
                out.append("exit 2 with file:line 'field'")
            elif re.search(r":\d+(:\d+)?: ", first):
                out.append("exit 2 with file:line, no field")
        else:
            out.append("exit 2 not naming the file at fault")
    elif code == 2:
        out.append("exit 2 (option or other)")
    return out


def blamed_out(blamed) -> str:
    return (blamed[0] if isinstance(blamed, tuple) else str(blamed)).split("/")[0]


def _listing(folder: Path) -> set[str]:
    """Every path under ``folder`` (relative), and the files beside it (an escape)."""
    out = set()
    for root, dirs, names in os.walk(folder):
        for name in dirs + names:
            if name not in (".stdout", ".stderr"):
                out.add(os.path.relpath(os.path.join(root, name), folder))
    for name in os.listdir(folder.parent):
        if not name.startswith("case-"):
            out.add(f"../{name}")
    return out


def _remove(folder: Path) -> None:
    if IMMUTABLE:
        subprocess.run(["chattr", "-R", "-i", str(folder)], capture_output=True)
    for path in [folder, *folder.rglob("*")]:
        try:
            if path.is_dir() and not path.is_symlink():
                path.chmod(0o755)
        except OSError:
            pass
    shutil.rmtree(folder, ignore_errors=True)


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("-n", type=int, default=10_000, help="inputs to run (default 10000)")
    ap.add_argument("--seed", type=int, default=1)
    ap.add_argument("--exec", dest="use_exec", action="store_true", help="run python -m partpick per input")
    ap.add_argument("--show", type=int, default=5, help="examples shown per bad outcome class")
    ap.add_argument("--kinds", default="", help="comma-separated categories to run (the full run's same cases)")
    ap.add_argument("--keep", type=Path, default=None, help="copy each bad case's folder here")
    ap.add_argument("--jobs", type=int, default=1,
                    help="cases run at once (default 1: each case has the whole machine, as a user's command has; "
                         "partpick spreads independent work over the CPUs itself)")
    args = ap.parse_args()
    res = run(args.n, args.seed, args.use_exec, args.show, set(args.kinds.split(",")) if args.kinds else None,
              args.keep, max(1, args.jobs))
    counts = res["counts"]
    print(f"{res['n']} inputs in {res['seconds']:.0f} s ({res['seconds'] / res['n'] * args.jobs:.2f} s per input "
          f"per job, {args.jobs} at once, empty user cache), slowest {res['slowest']:.1f} s")
    if res["times"]:
        over = ", ".join(f"over {t} s {sum(x > t for x in res['times'])}" for t in (5, 10, 15, 20))
        print(f"  wall time per input: {over}; median {sorted(res['times'])[len(res['times']) // 2]:.2f} s")
    order = ["exit 0", "exit 1", "exit 2", "exit 3", "killed", "not started (harness)", "exit 1 with a result on stdout", "refusal with its analysis", "one-line message",
             "multi-line message", "temporary file left", "refusal wrote files", "wrote outside the named place",
             "traceback",
             "internal error (exit 3)", "hang > 20 s", "over 1 GB", "exit 2 naming the file", "exit 2 with file:line",
             "exit 2 with file:line 'field'", "exit 2 with file:line, no field", "exit 2 not naming the file at fault",
             "exit 2 (option or other)"]
    for c in order:
        print(f"  {c:38s} {counts.get(c, 0):6d}")
    print("by category (exit 0 / 1 / 2 / traceback / internal / hang / >1 GB):")
    for kind, c in sorted(res["by_kind"].items()):
        print(f"  {kind:11s} {c['exit 0']:5d} {c['exit 1']:5d} {c['exit 2']:5d} {c['traceback']:5d} "
              f"{c['internal error (exit 3)']:5d} {c['hang > 20 s']:5d} {c['over 1 GB']:5d}")
    for c, items in res["examples"].items():
        print(f"\n{c}:")
        for item in items:
            print(f"  {item}")
    bad = sum(counts.get(c, 0) for c in BAD)
    print(f"\n{'PASS' if bad == 0 else 'FAIL'}: {bad} bad outcomes")


if __name__ == "__main__":
    main()
