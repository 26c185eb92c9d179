"""Speed of the Monte Carlo: build-evaluations per second for frequency + startup on
one core, and a full 20 000-sample yield of one candidate.

Targets (tolerance issue): at least 1e6 build-evaluations per second for frequency +
startup; a full 20 000-sample yield for one candidate under 100 ms. Printed beside a
baseline measured in the same run (drawing 20 000 uniform numbers 10 times with numpy).

Run: python benchmarks/bench_tolerance.py
"""

from __future__ import annotations

import os
import sys
import time
from pathlib import Path

os.environ.setdefault("OMP_NUM_THREADS", "1")  # one core, as the target says

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))

import numpy as np  # noqa: E402

from partpick.catalog import load_catalog  # noqa: E402
from partpick.pipeline import design  # noqa: E402
from partpick.spec import Spec  # noqa: E402
from partpick.tolerance import draw_builds, frequency_and_startup, model_for, monte_carlo  # noqa: E402


def best_of(fn, repeat=5):
    out = []
    for _ in range(repeat):
        t = time.perf_counter()
        fn()
        out.append(time.perf_counter() - t)
    return min(out)


def main() -> None:
    cat = load_catalog(ROOT / "catalogs")
    spec = Spec.from_yaml(ROOT / "specs" / "lvdt-exciter.yaml")
    r = design(spec, cat, results=1).ranked[0]
    model = model_for(r.circuit, r.bom, cat, spec, r.verdict)
    rng = np.random.default_rng(1)
    base = best_of(lambda: [rng.uniform(size=20_000) for _ in range(10)])
    n = 1_000_000
    builds = draw_builds(model, spec, n, rng)
    t_fs = best_of(lambda: frequency_and_startup(model, builds), 3)
    t_full = best_of(lambda: monte_carlo(model, spec, samples=20_000, seed=1))
    print(f"baseline (10 x 20 000 uniform draws)      {base * 1e3:8.2f} ms")
    print(f"frequency + startup, 1e6 drawn builds           {t_fs * 1e3:8.1f} ms  -> {n / t_fs:.3g} builds/s "
          f"(target 1e6/s: {'met' if n / t_fs >= 1e6 else 'MISSED'})  ratio to baseline {t_fs / base:.1f}")
    print(f"full yield, 20 000 builds (every check)   {t_full * 1e3:8.1f} ms  (target 100 ms: "
          f"{'met' if t_full < 0.1 else 'MISSED'})  ratio to baseline {t_full / base:.1f}")


if __name__ == "__main__":
    main()
