"""Monte Carlo yield with real junctions: partpick's yield of a design whose frequency
tolerance is tight against 200 builds simulated in ngspice with the same seeded draws.

partpick's Monte Carlo (partpick/tolerance.py) moves the verified operating point by
linearised terms; the limiter's junction charge enters only through them (the harmonic
pull at nominal, its slope in the gain excess, its change at the temperature ends). Here
each of the 200 builds the Monte Carlo draws (seed 1: part values at their drawn
temperature, supply, op-amp GBW, the limiter's forward-voltage spread) is built as a
netlist with SPICE's diode model and the catalog's charge parameters and run in ngspice
to its settled state; the build passes when it starts, its frequency and amplitude at
the load lie within the spec's tolerances, its THD is under the limit and the op-amp
stays inside its swing. Target (junction-charge issue): the two yields agree within two
binomial standard errors of the 200-build estimate. For contrast, the yield partpick
predicts when the same limiter is given one constant capacitance (CJO, M = 0, TT = 0,
what catalogs held before the charge model), against the same ngspice builds.

Two LED designs: the demo LED (VJ 1.6 V, M 0.35), and the same LED as a catalog giving
only CJO and TT has it (SPICE's default VJ 1 V, M 0.5), whose capacitance grows more
as it conducts. Each is designed by partpick for the spec below, then checked.

Run: python benchmarks/bench_junction_yield.py   (about 2 minutes on a 2-core machine)
"""

from __future__ import annotations

import dataclasses
import math
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))

import numpy as np  # noqa: E402

from partpick.catalog import load_catalog  # noqa: E402
from partpick.circuits import Conditions, build_netlist, linear  # noqa: E402
from partpick.physics.junction import T0_K, thermal_voltage  # noqa: E402
from partpick.physics.ngspice import ngspice_available, run_ngspice  # noqa: E402
from partpick.physics.opamp import swing_limits  # noqa: E402
from partpick.physics.waveform import analyse  # noqa: E402
from partpick.pipeline import design, evaluate_bom  # noqa: E402
from partpick.spec import Spec  # noqa: E402
from partpick.tolerance import draw_builds, frequency_and_startup, model_for, monte_carlo  # noqa: E402
from partpick.verify import transient_cycles_for  # noqa: E402

SPEC = """name: bench-led-4k
description: invented benchmark scenario, a 4.1 kHz reference tone held to 0.5 %
frequency: {target: 4.1 kHz, tolerance: 0.5 %}
amplitude: {target: 2 Vrms, tolerance: 10 %}
supply: {kind: dual, min: 11.4 V, max: 12.6 V}
load: {resistance: 10 kohm}
temperature: {min: 0 degC, max: 50 degC}
distortion: {max_thd: 10 %}
yield: {min: 80 %}
parts: {limiters: [led-red]}
results: 1
"""
BUILDS = 200
SEED = 1


def truncated_normal(rng, n: int) -> np.ndarray:
    """n draws in [-1, 1], normal with sigma 1/3 redrawn beyond +/-1: the limiter
    spread as partpick.tolerance.monte_carlo draws it, right after draw_builds."""
    x = rng.normal(0.0, 1.0 / 3.0, n)
    bad = np.abs(x) > 1
    while np.any(bad):
        x[bad] = rng.normal(0.0, 1.0 / 3.0, int(bad.sum()))
        bad = np.abs(x) > 1
    return x


def build(c, b: dict, vf_x: float, k: int):
    """Build k: the drawn values, GBW and forward-voltage shift (a saturation current
    scaled by exp(-dV / (n Vt)) moves the forward voltage at a fixed current by dV)."""
    op = c.opamp
    lim = c.part("limiter")
    dv = vf_x * lim.vf_spread_v
    parts = c.parts.replace(opamp=dataclasses.replace(op, gbw_hz=op.gbw_hz * b["gbw"][k]),
                            limiter=dataclasses.replace(lim, is_a=lim.is_a * math.exp(-dv / (lim.n * thermal_voltage(T0_K)))))
    values = c.values.replace(**{role: float(arr[k]) for role, arr in b["v"].items()})
    return dataclasses.replace(c, values=values, parts=parts)


def spice_build(c, spec: Spec, cond: Conditions) -> tuple[bool, float, dict]:
    """Simulate one build; (passes, frequency Hz or nan, the measurements)."""
    lin = linear(c, cond)
    cycles = transient_cycles_for(lin, c.f0_hz, spec.amplitude.peak_v) if lin.starts else 80
    t, v = run_ngspice(build_netlist(c, cond), cycles=cycles)
    st, osc = analyse(t, v["load"]), analyse(t, v["osc"])
    if st is None or st.peak_v < 0.05 or st.decaying:
        return False, math.nan, {"starts": False}
    lo, hi = swing_limits(c.opamp, cond.rails(c.supply_kind))
    ref = cond.rails(c.supply_kind)[2]
    tail = v["osc"][-20 * 200:] - ref
    f, a = spec.frequency, spec.amplitude
    got = {"starts": True, "f": st.freq_hz, "a": st.peak_v, "thd": st.thd_frac,
           "swing": bool(tail.max() <= hi + 1e-3 and tail.min() >= lo - 1e-3)}
    ok = (abs(st.freq_hz / f.target_hz - 1) <= f.tolerance_frac and abs(st.peak_v / a.peak_v - 1) <= a.tolerance_frac
          and st.thd_frac <= spec.max_thd_frac and got["swing"] and osc is not None)
    return ok, st.freq_hz, got


def run(name: str, cat, spec: Spec) -> None:
    t0 = time.perf_counter()
    best = design(spec, cat, results=1).ranked[0]
    c, bom = best.circuit, best.bom
    model = model_for(c, bom, cat, spec, best.verdict)
    ours = monte_carlo(model, spec, samples=BUILDS, seed=SEED)
    big = monte_carlo(model, spec, samples=20_000, seed=SEED)
    # the same BOM as the constant-capacitance model would have judged it
    led = c.part("limiter")
    flat = dataclasses.replace(led, m=0.0, tt_s=0.0)
    cat_flat = dataclasses.replace(cat, limiters=tuple(flat if x.id == led.id else x for x in cat.limiters))
    old = evaluate_bom(bom, spec, cat_flat, samples=BUILDS, seed=SEED).mc
    # the draws partpick's Monte Carlo made, build by build
    rng = np.random.default_rng(SEED)
    b = draw_builds(model, spec, BUILDS, rng)
    vf = truncated_normal(rng, BUILDS)
    f_model, _, starts_model = frequency_and_startup(model, b)
    passes, df = [], []
    for k in range(BUILDS):
        ck = build(c, b, float(vf[k]), k)
        cond = Conditions(float(b["vs"][k]), float(b["t"][k]), spec.load.resistance_ohm, spec.load.capacitance_f)
        ok, f_sp, _ = spice_build(ck, spec, cond)
        passes.append(ok)
        if math.isfinite(f_sp) and starts_model[k]:
            df.append(f_model[k] / f_sp - 1)
    y_sp = float(np.mean(passes))
    se = math.sqrt(max(y_sp * (1 - y_sp), 1.0 / BUILDS) / BUILDS)   # at least one build's worth
    dev = abs(ours.yield_frac - y_sp) / se
    df = np.array(df)
    print(f"{name}: #1 BOM {c.f0_hz:.1f} Hz textbook, nominal {best.verdict.nominal.freq_hz:.2f} Hz "
          f"({(best.verdict.nominal.freq_hz / spec.frequency.target_hz - 1) * 100:+.3f} %), limiter {led.id}")
    print(f"  ngspice, {BUILDS} builds:              yield {y_sp:6.1%} +/- {se:.1%} (binomial SE)")
    print(f"  partpick, same {BUILDS} draws:          yield {ours.yield_frac:6.1%}  ({dev:.2f} SE from ngspice: "
          f"{'within' if dev <= 2 else 'OUTSIDE'} 2 SE)   [20 000 draws: {big.yield_frac:.1%}]")
    print(f"  partpick, constant capacitance:     yield {old.yield_frac:6.1%}  "
          f"({abs(old.yield_frac - y_sp) / se:.2f} SE from ngspice)")
    print(f"  per-build frequency, partpick's linearised model vs ngspice: mean {df.mean() * 100:+.4f} %, "
          f"max |{np.max(np.abs(df)) * 100:.4f}| % over {df.size} builds; {time.perf_counter() - t0:.0f} s")


def main() -> None:
    if not ngspice_available():
        print("ngspice is not installed: nothing to compare against")
        return
    cat = load_catalog(ROOT / "catalogs")
    spec = Spec.from_text(SPEC, "bench-led-4k.yaml")
    run("demo LED (VJ 1.6 V, M 0.35)", cat, spec)
    led = cat.find("limiters", "led-red")
    spice_defaults = dataclasses.replace(led, vj_v=1.0, m=0.5, fc=0.5)
    cat2 = dataclasses.replace(cat, limiters=tuple(spice_defaults if x.id == led.id else x for x in cat.limiters))
    run("LED with CJO and TT only (SPICE's VJ 1 V, M 0.5)", cat2, spec)


if __name__ == "__main__":
    main()
