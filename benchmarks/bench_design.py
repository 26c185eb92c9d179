"""The whole design job on every demo spec: time per stage (setup, search, verify,
rank) for the top 10, and the ngspice frequency error of partpick's top BOM
beside that of the common hand method (round capacitor, R = 1/(2 pi f C) rounded to
the series, Rf = 2.2 Rg, diodes across Rf) on the same op-amp.

Targets (search issue): the whole process under 3 s on a 2-core machine; partpick at
least 5x closer to the target frequency than the hand method. Times are also printed
as ratios to a baseline measured in the same run (one linear loop analysis).

Run: python benchmarks/bench_design.py
"""

from __future__ import annotations

import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))

from partpick.catalog import load_catalog  # noqa: E402
from partpick.circuits import TOPOLOGIES, Conditions, build_netlist, linear  # noqa: E402
from partpick.circuits.wien import circuit as wien_circuit  # noqa: E402
from partpick.pipeline import design  # noqa: E402
from partpick.physics.ngspice import ngspice_available, run_ngspice  # noqa: E402
from partpick.physics.waveform import analyse  # noqa: E402
from partpick.spec import Spec  # noqa: E402
from partpick.verify import operating_conditions, predict, transient_cycles_for  # noqa: E402


def spice_error(circuit, spec) -> float:
    cond = operating_conditions(spec)["nominal"]
    p = predict(circuit, cond)
    cycles = transient_cycles_for(p.lin, circuit.f0_hz, max(p.osc_peak_v, 0.05)) if p.starts else 80
    t, v = run_ngspice(build_netlist(circuit, cond), cycles=cycles)
    st = analyse(t, v["osc"])
    return abs(st.freq_hz / spec.frequency.target_hz - 1) if st else float("nan")


def main() -> None:
    t0 = time.perf_counter()
    cat = load_catalog(ROOT / "catalogs")
    t_load = time.perf_counter() - t0
    specs = sorted((ROOT / "specs").glob("*.yaml"))
    base_spec = Spec.from_yaml(specs[0])
    c0 = wien_circuit(10e3, 10e-9, 10e3, 10e-9, 10e3, 22e3, cat.opamps[0])
    t = time.perf_counter()
    for _ in range(50):
        linear(c0, Conditions(12, 298.15, 1e4))
    base = (time.perf_counter() - t) / 50
    del base_spec
    print(f"baseline: one linear loop analysis {base * 1e3:.3f} ms; catalog load {t_load * 1e3:.1f} ms\n")
    print(f"{'spec':22s} {'total s':>8s} {'ratio':>8s} {'setup':>9s} {'search':>7s} {'verify':>7s} {'rank':>6s}"
          f" {'partpick err':>12s} {'hand err':>9s} {'closer':>7s}")
    for path in specs:
        spec = Spec.from_yaml(path)
        t = time.perf_counter()
        d = design(spec, cat, results=10)
        total = time.perf_counter() - t
        tm = d.timings
        best = d.ranked[0]
        ours = hand = float("nan")
        if ngspice_available():
            ours = spice_error(best.circuit, spec)
            hand = spice_error(TOPOLOGIES[spec.topology].hand_design(spec, cat, best.bom.line("opamp").family), spec)
        print(f"{spec.name:22s} {total:8.2f} {total / base:8.0f} {tm['setup']:9.2f} {tm['search']:7.2f} "
              f"{tm['verify']:7.2f} {tm['rank']:6.3f} {ours * 100:11.3f}% {hand * 100:8.3f}% {hand / ours:6.1f}x")


if __name__ == "__main__":
    main()
