"""Coverage benchmark: does ``partpick design`` design what an independent oracle can
build, at no more cost, and how long does it take?

Per requirement (``coverage_specs.py``, seeded; by default issue 11's ordinary set):

1. ``partpick design SPEC --format json -n 10`` as a whole process, timed;
2. the oracle (``oracle.py``: a brute-force designer sharing no code with partpick's
   search: textbook arms, sweeps of Rf, Rd, limiter, output stage and op-amp, judged by
   the verifier), cached by spec text in ``benchmarks/.cache/``;
3. ``partpick check SPEC ORACLE_BOM`` as a whole process on the oracle's BOM, and, when
   it passes, ``partpick netlist`` run in ``ngspice -b``: the oracle's BOM is trusted
   only when the check passes and ngspice's nominal run lands inside the frequency and
   amplitude windows with THD under 1.5 x the limit (the factor of
   tests/test_ngspice_agreement.py);
4. where both design, ``partpick design --rank-by cost -n 1`` for partpick's cheapest.

Prints: designs found / feasible (feasible: partpick designs, or a trusted oracle BOM);
false refusals (a trusted oracle BOM, partpick refuses) with the refusal and the BOM
(``--refusals DIR`` writes NAME.yaml and NAME.oracle-bom.yaml for each as soon as it is
found); cost of partpick's #1 and of its cheapest against the oracle's BOM; median and
max whole-process design time as ratios to ``python -c pass`` and to importing
``partpick.cli``, measured in the same run. ``--relax`` also checks each refusal's
advice (``refusal_advice.py``): relaxing what it names to the value it gives must design.

Run: python benchmarks/bench_coverage.py [--set ordinary|wide|clean] [--count N] [--seed S]
     [--subset K] [--jobs 1] [--refusals DIR] [--store tests/data/coverage --force]
"""

from __future__ import annotations

import argparse
import hashlib
import importlib.util
import json
import math
import os
import re
import shutil
import statistics
import subprocess
import sys
import tempfile
import threading
import time
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass, field
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))
if importlib.util.find_spec("partpick") is None:   # not installed: the checkout's own
    sys.path.insert(0, str(ROOT))

from coverage_specs import (CLEAN_COUNT, CLEAN_SEED, DEFAULT_COUNT, DEFAULT_SEED, ORDINARY_COUNT, ORDINARY_SEED,
                            Requirement, clean,  # noqa: E402
                            generate, ordinary)
from refusal_advice import apply_advice, parse_refusal  # noqa: E402

CACHE = HERE / ".cache" / "coverage_oracle.json"
CATALOGS = Path(os.environ.get("PARTPICK_CATALOGS", ROOT / "catalogs"))   # the oracle's and partpick's
# bump when the oracle changes what it finds (2: looks for the cheapest pass; 3: a mid-rail
# decoupling sized for Rg and the stage, not for the bias divider); labels carry theirs
ORACLE_VERSION = 7   # 7: check reads a transient point's swing and slew at the op-amp's internal node, as harmonic balance does; 6: check counts the mid-rail node's ripple at the load; 5: arm resistors within the bias-drop rule check judges; 4: the op-amp's output current judged at the spec's derating share (as check now does)
SPICE_THD_FACTOR = 1.5      # tests/test_ngspice_agreement.py's THD agreement factor
MEASURED = re.compile(r"partpick measured: frequency (\S+) Hz, amplitude at the load (\S+) V peak")
THD = re.compile(r"THD:\s*([\d.eE+-]+)\s*%")


@dataclass
class Proc:
    """One whole-process partpick (or ngspice) run."""

    rc: int
    seconds: float
    stdout: str
    stderr: str

    @property
    def message(self) -> str:
        return self.stderr.strip().removeprefix("error: ")

    def json(self) -> dict:
        try:
            return json.loads(self.stdout)
        except ValueError:
            return {}


@dataclass
class Row:
    req: Requirement
    oracle: dict
    design: Proc | None = None
    by_cost: Proc | None = None
    check: Proc | None = None
    spice: dict = field(default_factory=dict)
    oracle_cost: float = math.nan
    relaxed: list = field(default_factory=list)

    @property
    def designed(self) -> bool:
        return self.design is not None and self.design.rc == 0

    @property
    def refused(self) -> bool:
        return self.design is not None and self.design.rc == 1

    @property
    def check_passed(self) -> bool:
        return self.check is not None and self.check.rc == 0

    @property
    def trusted(self) -> bool:
        """The oracle's BOM passes ``partpick check`` and ngspice agrees (or is absent)."""
        return self.check_passed and self.spice.get("ok", True)

    @property
    def feasible(self) -> bool:
        return self.designed or self.trusted

    def cost(self, which: str) -> float:
        proc = self.design if which == "first" else self.by_cost
        cands = proc.json().get("candidates", []) if proc is not None and proc.rc == 0 else []
        return cands[0]["cost"] if cands else math.nan


# -- processes ------------------------------------------------------------------------------------

def partpick_command(given: str | None) -> list[str]:
    if given:
        return given.split()
    script = Path(sys.executable).parent / "partpick"
    return [str(script)] if script.exists() else [sys.executable, "-m", "partpick"]


def run(cmd: list[str], timeout: float = 600.0) -> Proc:
    t = time.perf_counter()
    try:
        env = dict(os.environ, PARTPICK_CATALOGS=str(CATALOGS))
        # timed as an installed package runs: its bytecode compiled once (pip compiles it at
        # install) and read back, not compiled again in every process as a sandbox that sets
        # PYTHONDONTWRITEBYTECODE would have it (about 0.2 s of each run here)
        env.pop("PYTHONDONTWRITEBYTECODE", None)
        p = subprocess.run(cmd, capture_output=True, text=True, timeout=timeout, env=env)
        return Proc(p.returncode, time.perf_counter() - t, p.stdout, p.stderr)
    except subprocess.TimeoutExpired:
        return Proc(-1, time.perf_counter() - t, "", f"timed out after {timeout:g} s")


def baselines(repeats: int = 5) -> tuple[float, float]:
    """Median wall time of ``python -c pass`` and of ``python -c "import partpick.cli"``."""
    py = sys.executable
    bare = statistics.median(run([py, "-c", "pass"]).seconds for _ in range(repeats))
    imp = statistics.median(run([py, "-c", "import partpick.cli"]).seconds for _ in range(repeats))
    return bare, imp


def spice_verdict(pp: list[str], spec_path: Path, bom_path: Path, spec) -> dict:
    """The oracle's BOM at the nominal point in ngspice (``partpick netlist`` then
    ``ngspice -b``): its frequency, amplitude at the load and THD, judged against the
    spec's windows (THD against SPICE_THD_FACTOR x the limit)."""
    if shutil.which("ngspice") is None:
        return {}
    net = run(pp + ["netlist", str(bom_path), "--spec", str(spec_path)], timeout=120)
    if net.rc != 0:
        return {"ok": False, "why": f"netlist exit {net.rc}: {net.message[:200]}"}
    cir = bom_path.with_suffix(".cir")
    cir.write_text(net.stdout)
    sim = run(["ngspice", "-b", str(cir)], timeout=300)
    m, thd = MEASURED.search(sim.stdout), THD.search(sim.stdout)
    if not m:
        return {"ok": False, "why": f"ngspice measured nothing (exit {sim.rc}, {sim.seconds:.0f} s)"}
    f_hz, a_pk = float(m[1]), float(m[2])
    t = float(thd[1]) / 100 if thd else math.nan
    f_err, a_err = f_hz / spec.frequency.target_hz - 1, a_pk / spec.amplitude.peak_v - 1
    ok = (abs(f_err) <= spec.frequency.tolerance_frac and abs(a_err) <= spec.amplitude.tolerance_frac
          and not t > SPICE_THD_FACTOR * spec.max_thd_frac)
    title = net.stdout.splitlines()[0] if net.stdout else ""
    return {"ok": ok, "freq_error": f_err, "amp_error": a_err, "thd": t, "seconds": round(sim.seconds, 1),
            "predicted": title[title.find("predicted"):]}


# -- the oracle, cached ---------------------------------------------------------------------------

def cache_key(text: str) -> str:
    return hashlib.sha256(text.encode()).hexdigest()[:20]


def load_cache(path: Path) -> dict:
    try:
        data = json.loads(path.read_text())
    except (OSError, ValueError):
        return {}
    return data if data.get("oracle_version", 0) >= 2 else {}


def save_cache(path: Path, cache: dict) -> None:
    path.parent.mkdir(parents=True, exist_ok=True)
    tmp = path.with_suffix(".tmp")
    tmp.write_text(json.dumps(dict(cache, oracle_version=ORACLE_VERSION), indent=1, sort_keys=True))
    os.replace(tmp, path)


class Oracle:
    """The oracle's label per requirement text, computed once; ``refresh`` recomputes
    those asked for in this run (each label records the oracle version that made it)."""

    def __init__(self, path: Path, refresh: bool):
        self.path, self.cache, self.refresh = path, load_cache(path), refresh
        self.labels = self.cache.setdefault("labels", {})
        self.catalog = None
        self.lock = threading.Lock()      # one oracle at a time: it is in this process

    def __call__(self, req: Requirement) -> dict:
        key = cache_key(req.text)
        with self.lock:
            fresh = key in self.labels and self.labels[key].get("version", 2) >= ORACLE_VERSION and not self.refresh
            return self.labels[key] if fresh else self._label(req, key)

    def _label(self, req: Requirement, key: str) -> dict:
        from oracle import oracle_design
        from partpick.catalog import load_catalog
        from partpick.spec import Spec
        self.catalog = self.catalog or load_catalog(CATALOGS)
        label = oracle_design(Spec.from_text(req.text, f"{req.name}.yaml"), self.catalog).to_json()
        self.labels[key] = dict(label, version=ORACLE_VERSION)
        save_cache(self.path, self.cache)
        return self.labels[key]


# -- one requirement ------------------------------------------------------------------------------

def bom_cost(text: str) -> float:
    """The oracle BOM's cost per board by partpick's price list (``partpick.pricing``)."""
    from partpick.bom import parse_bom
    from partpick.catalog import load_catalog
    from partpick.pricing import bom_cost as cost
    catalog = load_catalog(CATALOGS)
    return cost(parse_bom(text, "oracle.yaml", catalog), catalog)[0]


def evaluate(row: Row, pp: list[str], oracle: "Oracle", out: Path, refusals: Path | None, relax: bool,
             log) -> Row:
    from partpick.spec import Spec
    name = row.req.name
    row.oracle = oracle(row.req)
    spec_path = out / f"{name}.yaml"
    spec_path.write_text(row.req.text)
    row.design = run(pp + ["design", str(spec_path), "--format", "json", "-n", "10"])
    bom = row.oracle.get("bom")
    if bom:
        bom_path = out / f"{name}.oracle-bom.yaml"
        bom_path.write_text(bom)
        row.oracle_cost = bom_cost(bom)
        row.check = run(pp + ["check", str(spec_path), str(bom_path), "--format", "json"])
        if row.check_passed:
            row.spice = spice_verdict(pp, spec_path, bom_path, Spec.from_text(row.req.text))
    if row.designed and row.trusted:
        row.by_cost = run(pp + ["design", str(spec_path), "--format", "json", "-n", "1", "--rank-by", "cost"])
    if row.refused and relax:
        check_refusal(pp, row, out)
    verdict = ("FALSE REFUSAL" if row.refused and row.trusted else
               "designed" if row.designed else f"exit {row.design.rc}")
    log(f"{name}: {verdict} in {row.design.seconds:.1f} s; oracle {row.oracle.get('label')}"
        + (f", check {'pass' if row.check_passed else 'FAIL'}" if bom else "")
        + (f", ngspice {'agrees' if row.spice.get('ok') else 'DISAGREES'}" if row.spice else ""))
    if refusals is not None and row.refused and row.trusted:
        write_false_refusal(row, refusals)
    return row


def write_false_refusal(row: Row, folder: Path) -> None:
    folder.mkdir(parents=True, exist_ok=True)
    name = row.req.name
    (folder / f"{name}.yaml").write_text(row.req.text)
    checks = row.check.json()
    header = ["# the coverage oracle's BOM (benchmarks/oracle.py); `partpick check` passes it"
              f" (yield {checks.get('monte_carlo', {}).get('yield', math.nan):.4g}, cost {row.oracle_cost:.3f} USD)"]
    if row.spice:
        header.append(f"# ngspice nominal run: frequency error {row.spice['freq_error']:+.3%}, amplitude error "
                      f"{row.spice['amp_error']:+.2%}, THD {row.spice['thd']:.2%}")
    header.append(f"# partpick design refused in {row.design.seconds:.1f} s:")
    header += [f"#   {ln}" for ln in row.design.message.splitlines()[:6]]
    (folder / f"{name}.oracle-bom.yaml").write_text("\n".join(header) + "\n" + row.oracle["bom"])


def check_refusal(pp: list[str], row: Row, out: Path) -> None:
    """Relax the spec to each piece of advice in the refusal and design again."""
    for i, adv in enumerate(parse_refusal(row.design.message)):
        try:
            text = apply_advice(row.req.text, adv)
        except Exception as exc:        # an advice the spec cannot take is a wrong message
            row.relaxed.append((adv, f"not applicable: {exc}"))
            continue
        path = out / f"{row.req.name}.relaxed{i}.yaml"
        path.write_text(text)
        row.relaxed.append((adv, run(pp + ["design", str(path), "--format", "json", "-n", "1"]).rc))


# -- report ---------------------------------------------------------------------------------------

def _pct(a: int, b: int) -> str:
    return f"{a}/{b} = {100 * a / b:.1f} %" if b else f"{a}/0"


def _times(label: str, ts: list[float], bare: float, imp: float) -> str:
    if not ts:
        return f"{label}: none"
    med, mx = statistics.median(ts), max(ts)
    return (f"{label} ({len(ts)}): median {med:.2f} s ({med / bare:.0f}x python -c pass, {med / imp:.1f}x import), "
            f"max {mx:.2f} s ({mx / bare:.0f}x pass, {mx / imp:.1f}x import), over 1 s: {sum(t > 1 for t in ts)}, "
            f"over 3 s: {sum(t > 3 for t in ts)}")


def report(rows: list[Row], bare: float, imp: float, out: Path) -> dict:
    feasible = [r for r in rows if r.feasible]
    designed = [r for r in rows if r.designed]
    with_bom = [r for r in rows if r.oracle.get("bom")]
    false_ref = [r for r in rows if r.refused and r.trusted]
    other = [r for r in rows if r.design.rc not in (0, 1)]
    print(f"\n{len(rows)} requirements; files in {out}")
    print(f"oracle: {len(with_bom)} BOMs built; partpick check passes {sum(r.check_passed for r in with_bom)}; "
          f"ngspice agrees with {sum(bool(r.spice.get('ok')) for r in with_bom)} of "
          f"{sum(bool(r.spice) for r in with_bom)} run; trusted {sum(r.trusted for r in rows)}")
    print(f"designs found / feasible: {_pct(len(designed), len(feasible))} "
          f"(feasible: partpick designs or a trusted oracle BOM)")
    print(f"\nfalse refusals (trusted oracle BOM, partpick refused): {len(false_ref)}")
    for r in false_ref:
        print(f"  {r.req.name}: {r.design.message.splitlines()[0][:200] if r.design.message else '(no message)'}")
        print(f"    oracle BOM {out / (r.req.name + '.oracle-bom.yaml')}, cost {r.oracle_cost:.3f} USD")
    for r in other:
        print(f"  {r.req.name}: design exit {r.design.rc}: {r.design.message[:200]}")
    for r in (r for r in with_bom if r.spice and not r.spice.get("ok")):
        sp = r.spice
        print(f"  ngspice disagrees on {r.req.name}'s oracle BOM (partpick check passes it): "
              + (sp["why"] if "why" in sp else f"frequency {sp['freq_error']:+.3%}, amplitude at the load "
                 f"{sp['amp_error']:+.2%} from target, THD {sp['thd']:.2%}; {sp.get('predicted', '')}"))
    bad = [r for r in with_bom if not r.check_passed]
    if bad:
        print(f"oracle BOMs partpick check rejects (oracle's judgement at {4000} builds, check at 20000): "
              + ", ".join(r.req.name for r in bad))
    print("\ncost where both design (USD per board): partpick #1 | partpick --rank-by cost #1 | oracle")
    both = [r for r in rows if r.by_cost is not None]
    dearer = []
    for r in both:
        first, cheap = r.cost("first"), r.cost("cheap")
        flag = "  PARTPICK DEARER" if cheap > r.oracle_cost + 0.005 else ""
        if flag:
            dearer.append(r.req.name)
        print(f"  {r.req.name:24s} {first:7.3f} | {cheap:7.3f} | {r.oracle_cost:7.3f}{flag}")
    ratios = [r.cost("cheap") / r.oracle_cost for r in both]
    if ratios:
        print(f"partpick's cheapest / oracle's: median {statistics.median(ratios):.2f}, max {max(ratios):.2f}; "
              f"dearer than the oracle by over half a cent: {len(dearer)}")
    if any(r.relaxed for r in rows):
        right = sum(bool(r.relaxed) and all(rc == 0 for _, rc in r.relaxed) for r in rows if r.refused)
        print(f"\nrefusal advice verified by relaxation: {right} of {sum(r.refused for r in rows)} refusals")
        for r in rows:
            if r.refused and not (r.relaxed and all(rc == 0 for _, rc in r.relaxed)):
                print(f"  {r.req.name}: " + ("no value to relax to in the message" if not r.relaxed else "; ".join(
                    f"{adv} -> {'designs' if rc == 0 else rc if isinstance(rc, str) else f'exit {rc}'}"
                    for adv, rc in r.relaxed)))
    print(f"\nbaselines (same run): python -c pass {bare * 1e3:.0f} ms; import partpick.cli {imp * 1e3:.0f} ms")
    print(_times("partpick design -n 10, every requirement", [r.design.seconds for r in rows], bare, imp))
    print(_times("  feasible requirements", [r.design.seconds for r in feasible], bare, imp))
    print(_times("  designed", [r.design.seconds for r in designed], bare, imp))
    print(_times("  refused", [r.design.seconds for r in rows if r.refused], bare, imp))
    return {"requirements": len(rows), "feasible": len(feasible), "designed": len(designed),
            "false_refusals": [r.req.name for r in false_ref], "dearer": dearer,
            "baseline_pass_s": bare, "baseline_import_s": imp,
            "rows": [{"name": r.req.name, "design_rc": r.design.rc, "design_s": round(r.design.seconds, 2),
                      "oracle": r.oracle.get("label"), "oracle_s": r.oracle.get("seconds"),
                      "check_passed": r.check_passed if r.check else None, "spice": r.spice,
                      "cost_first": r.cost("first"), "cost_cheapest": r.cost("cheap"),
                      "cost_oracle": r.oracle_cost, "message": r.design.message,
                      # each piece of refusal advice applied: the design's exit code, or why it could not be applied
                      "relaxed": [{"advice": str(adv), "outcome": rc} for adv, rc in r.relaxed]} for r in rows]}


def store(rows: list[Row], folder: Path, count: int, force: bool, command: str) -> None:
    """Write ``count`` requirements with a trusted oracle BOM, spread over the set, as
    NAME.yaml and NAME.bom.yaml, with a MANIFEST saying how they were made."""
    old = sorted(folder.glob("*.yaml")) if folder.exists() else []
    if old and not force:
        sys.exit(f"{folder} holds {len(old)} files; add --force to replace them")
    for f in old:
        f.unlink()
    folder.mkdir(parents=True, exist_ok=True)
    trusted = [r for r in rows if r.trusted]
    chosen = pick_subset(trusted, count)
    for r in chosen:
        (folder / f"{r.req.name}.yaml").write_text(r.req.text)
        (folder / f"{r.req.name}.bom.yaml").write_text(
            f"# the coverage oracle's BOM (benchmarks/oracle.py, oracle version {r.oracle.get('version', 2)}); "
            f"partpick check passed it when recorded; cost {r.oracle_cost:.4f} USD per board\n" + r.oracle["bom"])
    rev = subprocess.run(["git", "-C", str(ROOT), "rev-parse", "--short", "HEAD"], capture_output=True, text=True)
    (folder / "MANIFEST").write_text(
        f"Coverage subset for tests/test_coverage_subset.py: {len(chosen)} requirements of the coverage benchmark "
        f"whose oracle BOM passed `partpick check` and ngspice when recorded (oracle versions "
        f"{sorted({r.oracle.get('version', 2) for r in chosen})}, "
        f"partpick at {rev.stdout.strip()}), spread over the set; NAME.yaml is the spec, NAME.bom.yaml the "
        f"oracle's BOM.\nMade by: {command}\n")
    print(f"wrote {len(chosen)} requirements and their oracle BOMs to {folder}")


def pick_subset(items: list, k: int) -> list:
    """k items spread evenly over the list (deterministic)."""
    if k <= 0 or k >= len(items):
        return list(items)
    return [items[int(i * len(items) / k)] for i in range(k)]


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--set", choices=("ordinary", "wide", "clean"), default="ordinary",
                    help="issue 11's ordinary requirements (default), the wide 200+ spread, or clean tones "
                         "(THD 0.01..0.3 %%, for the JFET control; the oracle designs diode limiters only)")
    ap.add_argument("--count", type=int, default=None, help="requirements to generate")
    ap.add_argument("--seed", type=int, default=None, help="generator seed")
    ap.add_argument("--subset", type=int, default=0, help="run K requirements spread over the set")
    ap.add_argument("--only", default="", help="comma-separated requirement names to run")
    ap.add_argument("--jobs", type=int, default=1, help="requirements at once (default 1: the machine is shared)")
    ap.add_argument("--refresh", action="store_true", help="recompute the oracle's labels of the requirements run")
    ap.add_argument("--cache", type=Path, default=CACHE)
    ap.add_argument("--out", type=Path, default=None, help="folder for specs, BOMs, netlists (default: temp)")
    ap.add_argument("--refusals", type=Path, default=None,
                    help="write each false refusal's spec and oracle BOM here as soon as it is found")
    ap.add_argument("--json", type=Path, default=None, help="write the results as JSON")
    ap.add_argument("--partpick", default=None, help="the partpick command (default: the one beside this python)")
    ap.add_argument("--relax", action="store_true", help="also check each refusal's advice by relaxing the spec")
    ap.add_argument("--store", type=Path, default=None, help="record trusted oracle BOMs for the test subset")
    ap.add_argument("--store-count", type=int, default=30)
    ap.add_argument("--force", action="store_true", help="let --store replace the files in its folder")
    args = ap.parse_args(argv)

    log = lambda m: print(m, file=sys.stderr, flush=True)  # noqa: E731
    if args.set == "ordinary":
        reqs = ordinary(args.count or ORDINARY_COUNT, ORDINARY_SEED if args.seed is None else args.seed)
    elif args.set == "clean":
        reqs = clean(args.count or CLEAN_COUNT, CLEAN_SEED if args.seed is None else args.seed)
    else:
        reqs = generate(args.count or DEFAULT_COUNT, DEFAULT_SEED if args.seed is None else args.seed)
    reqs = pick_subset(reqs, args.subset)
    if args.only:
        reqs = [q for q in reqs if q.name in args.only.split(",")]
    out = args.out or Path(tempfile.mkdtemp(prefix="partpick-coverage-"))
    out.mkdir(parents=True, exist_ok=True)
    pp = partpick_command(args.partpick)
    bare, imp = baselines()
    oracle = Oracle(args.cache, args.refresh)
    with ThreadPoolExecutor(max_workers=max(args.jobs, 1)) as ex:
        rows = list(ex.map(lambda q: evaluate(Row(q, {}), pp, oracle, out, args.refusals, args.relax, log), reqs))
    summary = report(rows, bare, imp, out)
    if args.json:
        args.json.write_text(json.dumps(summary, indent=1, default=str))
    if args.store:
        cmd = "python benchmarks/bench_coverage.py " + " ".join(argv if argv is not None else sys.argv[1:])
        store(rows, args.store, args.store_count, args.force, cmd)
    return 0


if __name__ == "__main__":
    sys.exit(main())
