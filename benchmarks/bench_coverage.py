"""Coverage benchmark: does ``partpick design`` design what an independent oracle
proves feasible, and are its refusals right?

1. Generate the requirements (``coverage_specs.py``, seeded).
2. Label each with the oracle (``oracle.py``: a brute-force designer sharing no code
   with partpick's search, judged by partpick's verifier): "exists" with a passing BOM,
   or "none found". Labels and BOMs are cached in a JSON file keyed by the generator
   seed and the spec text (``--refresh`` recomputes).
3. Run ``partpick design SPEC --format json -n 10`` as a whole process on every spec,
   timed.
4. For every refusal (exit 1), parse the requirement it names and the value it gives
   (``refusal_advice.py``), relax the spec to it and run design again: it must design.

Prints: coverage = designed / (oracle says exists); false refusals (the oracle has a
passing BOM, partpick refused) with the oracle's BOM written beside the spec; the
reverse (partpick designed where the oracle found nothing); whether each refusal's
message is right; and the time per spec (median, max) as ratios to ``python -c pass``
and ``python -c "import partpick.cli"`` measured in the same run.

Run: python benchmarks/bench_coverage.py [--count N] [--seed S] [--subset K] [--jobs J]
     [--refresh] [--out DIR] [--json FILE] [--partpick CMD]
"""

from __future__ import annotations

import argparse
import importlib.util
import hashlib
import json
import os
import shlex
import statistics
import subprocess
import sys
import tempfile
import time
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass, field
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))
if importlib.util.find_spec("partpick") is None:   # not installed: the checkout's own
    sys.path.insert(0, str(ROOT))

from coverage_specs import DEFAULT_COUNT, DEFAULT_SEED, Requirement, generate  # noqa: E402
from refusal_advice import apply_advice, parse_refusal  # noqa: E402

CACHE = HERE / ".cache" / "coverage_oracle.json"
# the oracle and every partpick run read the same catalogs
CATALOGS = Path(os.environ.get("PARTPICK_CATALOGS", ROOT / "catalogs"))
ORACLE_VERSION = 1          # bump when the oracle changes what it finds


@dataclass
class Run:
    """One whole-process ``partpick design`` run."""

    rc: int
    seconds: float
    stdout: str
    stderr: str

    @property
    def message(self) -> str:
        return self.stderr.strip().removeprefix("error: ")


@dataclass
class Row:
    req: Requirement
    oracle: dict
    run: Run | None = None
    relaxed: list = field(default_factory=list)   # (advice, rc) per piece of advice

    @property
    def exists(self) -> bool:
        return self.oracle.get("label") == "exists"


# -- the oracle's labels, cached ------------------------------------------------------------------

def cache_key(seed: int, text: str) -> str:
    return f"{seed}:{hashlib.sha256(text.encode()).hexdigest()[:20]}"


def load_cache(path: Path) -> dict:
    try:
        data = json.loads(path.read_text())
    except (OSError, ValueError):
        return {}
    return data if data.get("oracle_version") == ORACLE_VERSION else {}


def save_cache(path: Path, cache: dict) -> None:
    path.parent.mkdir(parents=True, exist_ok=True)
    tmp = path.with_suffix(".tmp")
    tmp.write_text(json.dumps(dict(cache, oracle_version=ORACLE_VERSION), indent=1, sort_keys=True))
    os.replace(tmp, path)


def label_all(reqs: list[Requirement], seed: int, cache_path: Path, refresh: bool, log) -> dict[str, dict]:
    """The oracle's label per requirement name (computed once per seed and text)."""
    from oracle import oracle_design
    from partpick.catalog import load_catalog
    from partpick.spec import Spec

    cache = {} if refresh else load_cache(cache_path)
    labels = cache.setdefault("labels", {})
    catalog = None
    out = {}
    for n, req in enumerate(reqs, 1):
        key = cache_key(seed, req.text)
        if key not in labels:
            catalog = catalog or load_catalog(CATALOGS)
            res = oracle_design(Spec.from_text(req.text, f"{req.name}.yaml"), catalog)
            labels[key] = res.to_json()
            log(f"oracle {n:3d}/{len(reqs)} {req.name}: {res.label} ({res.evaluations} judgements, "
                f"{res.seconds:.1f} s)")
            save_cache(cache_path, cache)
        out[req.name] = labels[key]
    return out


# -- partpick as a whole process ------------------------------------------------------------------

def partpick_command(given: str | None) -> list[str]:
    if given:
        return shlex.split(given)
    script = Path(sys.executable).parent / "partpick"
    return [str(script)] if script.exists() else [sys.executable, "-m", "partpick"]


def run(cmd: list[str], timeout: float = 600.0) -> Run:
    t = time.perf_counter()
    try:
        env = dict(os.environ, PARTPICK_CATALOGS=str(CATALOGS))
        p = subprocess.run(cmd, capture_output=True, text=True, timeout=timeout, env=env)
        return Run(p.returncode, time.perf_counter() - t, p.stdout, p.stderr)
    except subprocess.TimeoutExpired:
        return Run(-1, time.perf_counter() - t, "", f"timed out after {timeout:g} s")


def design(pp: list[str], spec_path: Path) -> Run:
    return run(pp + ["design", str(spec_path), "--format", "json", "-n", "10"])


def baselines(pp: list[str], repeats: int = 5) -> tuple[float, float]:
    """Median wall time of ``python -c pass`` and ``python -c "import partpick.cli"``
    with the interpreter the partpick command runs on."""
    py = sys.executable
    if pp and Path(pp[0]).exists() and Path(pp[0]).name == "partpick":
        first = Path(pp[0]).read_text(errors="replace").splitlines()[0]
        if first.startswith("#!"):
            py = first[2:].strip()
    bare = statistics.median(run([py, "-c", "pass"]).seconds for _ in range(repeats))
    imp = statistics.median(run([py, "-c", "import partpick.cli"]).seconds for _ in range(repeats))
    return bare, imp


def check_refusal(pp: list[str], row: Row, spec_dir: Path) -> None:
    """Relax the spec to each piece of advice in the refusal and design again."""
    for i, adv in enumerate(parse_refusal(row.run.message)):
        try:
            text = apply_advice(row.req.text, adv)
        except Exception as exc:        # an advice the spec cannot take is a wrong message
            row.relaxed.append((adv, f"not applicable: {exc}"))
            continue
        path = spec_dir / f"{row.req.name}.relaxed{i}.yaml"
        path.write_text(text)
        r = design(pp, path)
        row.relaxed.append((adv, r.rc))


# -- report ---------------------------------------------------------------------------------------

def _pct(a: int, b: int) -> str:
    return f"{a}/{b} = {100 * a / b:.1f} %" if b else f"{a}/0"


def report(rows: list[Row], bare: float, imp: float, out_dir: Path, oracle_s: list[float]) -> dict:
    exists = [r for r in rows if r.exists]
    designed = [r for r in rows if r.run and r.run.rc == 0]
    refused = [r for r in rows if r.run and r.run.rc == 1]
    other = [r for r in rows if r.run and r.run.rc not in (0, 1)]
    cov = [r for r in exists if r.run and r.run.rc == 0]
    false_ref = [r for r in exists if r.run and r.run.rc == 1]
    reverse = [r for r in designed if not r.exists]
    print(f"\n{len(rows)} requirements; oracle: {len(exists)} a design exists, {len(rows) - len(exists)} none found "
          f"(oracle time per spec: median {statistics.median(oracle_s):.1f} s, max {max(oracle_s):.1f} s)")
    print(f"partpick design: {len(designed)} designed, {len(refused)} refused (exit 1), {len(other)} other exit codes")
    print(f"coverage = designed / oracle exists: {_pct(len(cov), len(exists))}")
    print(f"\nfalse refusals (the oracle has a passing BOM, partpick refused): {len(false_ref)}")
    for r in false_ref:
        print(f"  {r.req.name}: {r.run.message.splitlines()[0][:160] if r.run.message else '(no message)'}")
        print(f"    oracle BOM: {out_dir / (r.req.name + '.oracle-bom.yaml')}")
    print(f"\npartpick designed, oracle found nothing: {len(reverse)}")
    for r in reverse:
        print(f"  {r.req.name}: partpick's designs in {out_dir / (r.req.name + '.design.json')}")
    right = wrong = no_advice = 0
    print("\nrefusal messages (relax what each names to the value it gives; design must then succeed):")
    for r in refused:
        if not r.relaxed:
            no_advice += 1
            verdict = "NO ADVICE PARSED"
        elif all(rc == 0 for _, rc in r.relaxed):
            right += 1
            verdict = "right"
        else:
            wrong += 1
            verdict = "WRONG"
        advice = "; ".join(f"{a.field} -> {a.value} ({a.how}): {'designs' if rc == 0 else f'exit {rc}'}"
                           for a, rc in r.relaxed)
        print(f"  {r.req.name}: {verdict}{': ' + advice if advice else ''}")
    print(f"refusal messages verified by relaxation: {right} right, {wrong} wrong, {no_advice} without parsable "
          f"advice, of {len(refused)}")
    for r in other:
        print(f"  {r.req.name}: exit {r.run.rc}: {r.run.message[:200]}")
    times = [r.run.seconds for r in rows if r.run]
    feas = [r.run.seconds for r in exists if r.run]
    print(f"\nbaselines (same run): python -c pass {bare * 1e3:.0f} ms; python -c 'import partpick.cli' {imp * 1e3:.0f} ms")
    for what, ts in (("every requirement", times), ("oracle-feasible requirements", feas)):
        if ts:
            med, mx = statistics.median(ts), max(ts)
            print(f"partpick design -n 10, {what} ({len(ts)}): median {med:.2f} s ({med / bare:.0f}x pass, "
                  f"{med / imp:.1f}x import), max {mx:.2f} s ({mx / bare:.0f}x pass, {mx / imp:.1f}x import), "
                  f"over 3 s: {sum(t > 3 for t in ts)}")
    return {"requirements": len(rows), "oracle_exists": len(exists), "designed": len(designed), "covered": len(cov),
            "false_refusals": [r.req.name for r in false_ref], "reverse": [r.req.name for r in reverse],
            "refusals_right": right, "refusals_wrong": wrong, "refusals_unparsed": no_advice,
            "baseline_pass_s": bare, "baseline_import_s": imp,
            "rows": [{"name": r.req.name, "oracle": r.oracle.get("label"), "rc": r.run.rc if r.run else None,
                      "seconds": r.run.seconds if r.run else None, "message": r.run.message if r.run else "",
                      "relaxed": [(a.field, a.value, rc) for a, rc in r.relaxed]} for r in rows]}


def store_subset(rows: list[Row], args, argv) -> int:
    """Write ``args.store_count`` requirements the oracle built a design for, spread
    over the set, each as ``NAME.yaml`` (the spec) and ``NAME.bom.yaml`` (the oracle's
    BOM), with a MANIFEST saying how they were made."""
    out: Path = args.store
    old = sorted(out.glob("*.yaml")) if out.exists() else []
    if old and not args.force:
        print(f"{out} holds {len(old)} files; add --force to replace them", file=sys.stderr)
        return 2
    for f in old:
        f.unlink()
    out.mkdir(parents=True, exist_ok=True)
    from partpick.bom import parse_bom
    from partpick.catalog import load_catalog
    from partpick.pipeline import evaluate_bom
    from partpick.spec import Spec

    catalog = load_catalog(CATALOGS)

    def still_passes(row: Row) -> bool:   # judged again by this partpick's verifier
        bom = parse_bom(row.oracle["bom"], "oracle.yaml", catalog)
        return evaluate_bom(bom, Spec.from_text(row.req.text), catalog).verdict.passed
    exists = [r for r in rows if r.exists]
    chosen, skipped = [], []
    for r in [exists[int(i * len(exists) / args.store_count)] for i in range(args.store_count)] + exists:
        if len(chosen) >= args.store_count:
            break
        if r.req in chosen or r.req.name in skipped:
            continue
        if still_passes(r):
            chosen.append(r.req)
        else:
            skipped.append(r.req.name)
    if skipped:
        print(f"not stored: the oracle BOM of {', '.join(skipped)} fails this partpick's verifier", file=sys.stderr)
    chosen.sort(key=lambda q: q.name)
    by_name = {r.req.name: r for r in rows}
    for req in chosen:
        (out / f"{req.name}.yaml").write_text(req.text)
        (out / f"{req.name}.bom.yaml").write_text("# the coverage oracle's design (benchmarks/oracle.py), judged "
                                                  "passing by partpick's verifier\n" + by_name[req.name].oracle["bom"])
    cmd = "python benchmarks/bench_coverage.py " + " ".join(argv if argv is not None else sys.argv[1:])
    (out / "MANIFEST").write_text(
        f"Coverage subset for tests/test_coverage_subset.py: {len(chosen)} requirements of the coverage "
        f"benchmark (generator seed {args.seed}, {args.count} requirements, oracle version {ORACLE_VERSION}) for "
        f"which the oracle built a design, spread over the set; NAME.yaml is the spec, NAME.bom.yaml the oracle's "
        f"BOM.\nMade by: {cmd}\n")
    print(f"wrote {len(chosen)} requirements and their oracle BOMs to {out}")
    return 0


def pick_subset(reqs: list[Requirement], k: int) -> list[Requirement]:
    """k requirements spread evenly over the set (deterministic)."""
    if k <= 0 or k >= len(reqs):
        return reqs
    step = len(reqs) / k
    return [reqs[int(i * step)] for i in range(k)]


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--count", type=int, default=DEFAULT_COUNT, help="requirements to generate")
    ap.add_argument("--seed", type=int, default=DEFAULT_SEED, help="generator seed")
    ap.add_argument("--subset", type=int, default=0, help="run K requirements spread over the set")
    ap.add_argument("--jobs", type=int, default=1, help="design runs at once (default 1)")
    ap.add_argument("--refresh", action="store_true", help="recompute the oracle's labels")
    ap.add_argument("--cache", type=Path, default=CACHE, help=f"oracle cache (default {CACHE.relative_to(ROOT)})")
    ap.add_argument("--out", type=Path, default=None, help="folder for the specs and oracle BOMs (default: a temp dir)")
    ap.add_argument("--json", type=Path, default=None, help="write the results as JSON")
    ap.add_argument("--partpick", default=None, help="the partpick command (default: the one beside this python)")
    ap.add_argument("--oracle-only", action="store_true", help="label with the oracle and stop")
    ap.add_argument("--no-relax", action="store_true", help="skip the refusal-message check")
    ap.add_argument("--store", type=Path, default=None,
                    help="write --store-count oracle-feasible requirements with their oracle BOMs to DIR and stop "
                         "(the test suite's subset: tests/data/coverage)")
    ap.add_argument("--store-count", type=int, default=30)
    ap.add_argument("--force", action="store_true", help="let --store replace the files in DIR")
    args = ap.parse_args(argv)

    log = lambda m: print(m, file=sys.stderr, flush=True)  # noqa: E731
    reqs = pick_subset(generate(args.count, args.seed), args.subset)
    out_dir = args.out or Path(tempfile.mkdtemp(prefix="partpick-coverage-"))
    out_dir.mkdir(parents=True, exist_ok=True)
    t = time.perf_counter()
    labels = label_all(reqs, args.seed, args.cache, args.refresh, log)
    log(f"oracle labels in {time.perf_counter() - t:.1f} s")
    rows = [Row(r, labels[r.name]) for r in reqs]
    for row in rows:
        (out_dir / f"{row.req.name}.yaml").write_text(row.req.text)
        if row.oracle.get("bom"):
            (out_dir / f"{row.req.name}.oracle-bom.yaml").write_text(row.oracle["bom"])
    oracle_s = [r.oracle.get("seconds", 0.0) for r in rows]
    if args.store:
        return store_subset(rows, args, argv)
    if args.oracle_only:
        n = sum(r.exists for r in rows)
        print(f"{len(rows)} requirements; oracle: {n} a design exists, {len(rows) - n} none found; "
              f"median {statistics.median(oracle_s):.1f} s, max {max(oracle_s):.1f} s per spec; files in {out_dir}")
        return 0
    pp = partpick_command(args.partpick)
    bare, imp = baselines(pp)

    def one(row: Row) -> Row:
        row.run = design(pp, out_dir / f"{row.req.name}.yaml")
        if row.run.rc == 0:
            (out_dir / f"{row.req.name}.design.json").write_text(row.run.stdout)
        log(f"design {row.req.name}: exit {row.run.rc} in {row.run.seconds:.1f} s (oracle: {row.oracle.get('label')})")
        if row.run.rc == 1 and not args.no_relax:
            check_refusal(pp, row, out_dir)
        return row

    with ThreadPoolExecutor(max_workers=max(args.jobs, 1)) as ex:
        rows = list(ex.map(one, rows))
    print(f"coverage benchmark: {len(rows)} requirements from seed {args.seed}; files in {out_dir}")
    summary = report(rows, bare, imp, out_dir, oracle_s)
    if args.json:
        args.json.write_text(json.dumps(summary, indent=1))
    return 0


if __name__ == "__main__":
    sys.exit(main())
