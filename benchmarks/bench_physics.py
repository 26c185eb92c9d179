"""Speed of the physics: one verification (loop analysis + harmonic balance + limits at
one operating point), a full verdict (five operating points), and one transient run.

Targets (physics issue): one verification under 5 ms so the search can verify
hundreds of candidates. Each time is also printed as a ratio to a baseline measured in
the same run on the same machine (a fixed numpy workload: 2000 small dense solves and
FFTs), so numbers from different machines compare.

Run: python benchmarks/bench_physics.py
"""

from __future__ import annotations

import sys
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))

from partpick.catalog import load_catalog  # noqa: E402
from partpick.physics.transient import simulate  # noqa: E402
from partpick.spec import Spec  # noqa: E402
from partpick.circuits import Conditions, build_netlist  # noqa: E402
from partpick.circuits.wien import circuit as WienCircuit  # noqa: E402
from partpick.verify import predict, verify  # noqa: E402

TARGET_VERIFY_S = 5e-3


def best_of(fn, repeat: int, number: int) -> float:
    times = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        for _ in range(number):
            fn()
        times.append((time.perf_counter() - t0) / number)
    return min(times)


def baseline() -> None:
    rng = np.random.default_rng(1)
    a = rng.normal(size=(16, 16)) + 16 * np.eye(16)
    b = rng.normal(size=16)
    x = rng.normal(size=256)
    for _ in range(2000):
        np.linalg.solve(a, b)
        np.fft.rfft(x)


def main() -> None:
    cat = load_catalog(ROOT / "catalogs")
    path = ROOT / "specs" / "lvdt-exciter.yaml"
    spec = Spec.from_yaml(path)
    # The same requirement at one operating point: verification = loop + amplitude + limits once.
    import dataclasses

    t = spec.temperature.nominal_k
    spec_one = dataclasses.replace(
        spec, supply=dataclasses.replace(spec.supply, min_v=12.0, max_v=12.0),
        temperature=dataclasses.replace(spec.temperature, min_k=t, max_k=t))
    c = WienCircuit(3.16e3, 10e-9, 3.16e3, 10e-9, 10e3, 21.5e3, cat.find("opamps", "oa-audio-10m"),
                    cat.find("limiters", "d-si-signal"), rd_ohm=10e3)
    cond = Conditions(12.0, 298.15, 10e3)
    predict(c, cond)  # warm the limiter table cache, as the search would

    base = best_of(baseline, 3, 1)
    one = best_of(lambda: verify(c, spec_one), 5, 20)
    full = best_of(lambda: verify(c, spec), 3, 5)
    slow = WienCircuit(10e3, 15.9155e-9, 10e3, 15.9155e-9, 10e3, 22e3, cat.find("opamps", "oa-jfet-4m"),
                       cat.find("limiters", "d-si-signal"))
    net = build_netlist(slow, Conditions(12.0, 298.15, 10e3))
    tran = best_of(lambda: simulate(net, cycles=150), 2, 1)

    print(f"baseline (numpy workload)          {base * 1e3:8.2f} ms")
    print(f"one verification (1 point)         {one * 1e3:8.2f} ms   ratio to baseline {one / base:6.3f}   "
          f"target {TARGET_VERIFY_S * 1e3:.0f} ms: {'met' if one < TARGET_VERIFY_S else 'MISSED'}")
    print(f"full verdict (5 points)            {full * 1e3:8.2f} ms   ratio to baseline {full / base:6.3f}")
    print(f"transient, 150 cycles x 200 steps  {tran * 1e3:8.0f} ms   ratio to baseline {tran / base:6.1f}")
    print(f"verifications per second: {1 / one:.0f} (best of repeats)")


if __name__ == "__main__":
    main()
