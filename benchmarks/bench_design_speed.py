"""Whole-process speed of `partpick design`: what a user waits for at the prompt.

Every shipped demo spec (specs/*.yaml) and five ordinary requirements a new user might
write (benchmarks/data/*.yaml, all parts allowed) are designed as separate processes
(`partpick design SPEC -n 10`), RUNS times each; the median wall time is printed beside
two baselines measured in the same run: `python -c pass` (the interpreter's start) and
`python -c "import partpick.cli"` (the start plus partpick's imports). Peak RSS is each
child's own (os.wait4's resource usage, ru_maxrss). A last line times a spec that
refuses: the demo audio tone with its THD limit at 0.3 % and the diode limiter as its
amplitude control, which no allowed design reaches (the README's refusal example; with
the JFET control allowed it designs), so the why-not work is in the figure.

The first run of a spec may fill the user's cache folder (tables keyed by content); the
median of RUNS shows the warm figure, the `first` column the cold one. The children run
with their bytecode written and read back, as an installed package's is (the environment's
PYTHONDONTWRITEBYTECODE is dropped for them).

``--feasible stored`` times instead the coverage benchmark's stored feasible requirements
(tests/data/coverage: each with an oracle BOM that passed ``partpick check`` and ngspice
when recorded); ``--feasible wide`` the wide set's requirements the oracle found a
design for (the labels ``bench_coverage.py --set wide`` cached in
benchmarks/.cache/coverage_oracle.json, which must exist). Each is written to a
temporary folder and timed as the demo specs are (no refusal line).

Target (issue 11): median under 1 s, no requirement over 3 s, on a 2-core machine, over
the coverage benchmark's feasible requirements.

Run: python benchmarks/bench_design_speed.py [--runs 5] [--timeout 120] [--feasible stored|wide]
"""

from __future__ import annotations

import argparse
import os
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent


def _partpick() -> list[str]:
    """The console script beside this interpreter, else ``python -m partpick``."""
    script = Path(sys.executable).with_name("partpick")
    return [str(script)] if script.exists() else [sys.executable, "-m", "partpick"]


# timed as an installed package runs: its bytecode compiled once (pip compiles it at install)
# and read back, not compiled again in every process as a sandbox that sets
# PYTHONDONTWRITEBYTECODE would have it (about 0.1 s of every run here; bench_coverage.py alike)
_ENV = {k: v for k, v in os.environ.items() if k != "PYTHONDONTWRITEBYTECODE"}


def run_once(argv: list[str], timeout_s: float) -> tuple[float, int, float]:
    """(wall seconds, exit code, peak RSS in MiB) of one child process."""
    t0 = time.perf_counter()
    proc = subprocess.Popen(argv, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, cwd=ROOT, env=_ENV)
    deadline = t0 + timeout_s
    while True:
        pid, status, usage = os.wait4(proc.pid, os.WNOHANG)
        if pid:
            break
        if time.perf_counter() > deadline:
            proc.kill()
            pid, status, usage = os.wait4(proc.pid, 0)
            return float("inf"), -9, usage.ru_maxrss / 1024
        time.sleep(0.005)
    proc.returncode = os.waitstatus_to_exitcode(status)
    return time.perf_counter() - t0, proc.returncode, usage.ru_maxrss / 1024   # ru_maxrss: KiB on Linux


def measure(argv: list[str], runs: int, timeout_s: float) -> dict:
    results = [run_once(argv, timeout_s) for _ in range(runs)]
    times = [r[0] for r in results]
    return {"median": statistics.median(times), "first": times[0], "max": max(times),
            "codes": sorted({r[1] for r in results}), "rss": max(r[2] for r in results)}


def feasible_specs(which: str, folder: Path) -> list[Path]:
    """The coverage benchmark's feasible requirements written into ``folder``: 'stored'
    (tests/data/coverage) or 'wide' (the wide set's requirements the cached oracle
    labels 'exists')."""
    if which == "stored":
        return sorted(p for p in (ROOT / "tests" / "data" / "coverage").glob("*.yaml")
                      if not p.name.endswith(".bom.yaml"))
    sys.path.insert(0, str(ROOT / "benchmarks"))
    from bench_coverage import CACHE, cache_key, load_cache
    from coverage_specs import generate

    labels = load_cache(CACHE).get("labels", {})
    if not labels:
        sys.exit(f"no oracle labels in {CACHE}: run `python benchmarks/bench_coverage.py --set wide` first")
    out = []
    for req in generate():
        if labels.get(cache_key(req.text), {}).get("label") == "exists":
            path = folder / f"{req.name}.yaml"
            path.write_text(req.text, encoding="utf-8")
            out.append(path)
    return out


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--runs", type=int, default=5)
    ap.add_argument("--timeout", type=float, default=120.0, help="seconds a single run may take")
    ap.add_argument("--feasible", choices=("stored", "wide"), default=None,
                    help="time the coverage benchmark's feasible requirements instead of the demo specs")
    args = ap.parse_args()
    work = tempfile.TemporaryDirectory()

    base_pass = measure([sys.executable, "-c", "pass"], args.runs, args.timeout)
    base_import = measure([sys.executable, "-c", "import partpick.cli"], args.runs, args.timeout)
    t_pass, t_imp = base_pass["median"], base_import["median"]
    print(f"{time.strftime('%Y-%m-%d %H:%M')}, {os.cpu_count()} CPUs, load average "
          f"{' '.join(f'{x:.2f}' for x in os.getloadavg())}; {args.runs} runs each, medians")
    print(f"baseline `python -c pass` {t_pass:.3f} s (peak RSS {base_pass['rss']:.0f} MiB); "
          f"`import partpick.cli` {t_imp:.3f} s ({t_imp / t_pass:.1f}x pass, {base_import['rss']:.0f} MiB)\n")

    if args.feasible:
        specs = feasible_specs(args.feasible, Path(work.name))
    else:
        specs = sorted((ROOT / "specs").glob("*.yaml")) + sorted((ROOT / "benchmarks" / "data").glob("*.yaml"))
    print(f"{'spec':28s} {'exit':>4s} {'median s':>9s} {'first s':>8s} {'max s':>7s} {'x pass':>7s} "
          f"{'x import':>8s} {'RSS MiB':>8s}")
    medians = []
    for path in specs:
        m = measure([*_partpick(), "design", str(path), "-n", "10"], args.runs, args.timeout)
        medians.append(m["median"])
        label = path.name if args.feasible else f"{path.parent.name}/{path.name}"
        print(f"{label:28s} {','.join(map(str, m['codes'])):>4s} {m['median']:9.3f} {m['first']:8.3f} "
              f"{m['max']:7.3f} {m['median'] / t_pass:7.1f} {m['median'] / t_imp:8.2f} {m['rss']:8.0f}")
    mid = statistics.median(medians)
    print(f"\nmedian over {len(specs)} specs: {mid:.3f} s = {mid / t_pass:.1f}x `python -c pass`, "
          f"{mid / t_imp:.2f}x `import partpick.cli`; slowest {max(medians):.3f} s "
          f"({sum(t > 1 for t in medians)} over 1 s, {sum(t > 3 for t in medians)} over 3 s)")
    if args.feasible:
        return

    with tempfile.TemporaryDirectory() as tmp:
        text = (ROOT / "specs" / "audio-tone-1k.yaml").read_text(encoding="utf-8")
        refused = Path(tmp) / "audio-clean.yaml"
        refused.write_text(text.replace("max_thd: 1 %", "max_thd: 0.3 %") + "amplitude_control: diode\n",
                           encoding="utf-8")
        m = measure([*_partpick(), "design", str(refused)], args.runs, args.timeout)
    print(f"refusal (audio-tone-1k with max_thd 0.3 %, diode limiter, exit {','.join(map(str, m['codes']))}): median "
          f"{m['median']:.3f} s = {m['median'] / t_pass:.1f}x pass, {m['median'] / t_imp:.2f}x import; "
          f"peak RSS {m['rss']:.0f} MiB")


if __name__ == "__main__":
    main()
