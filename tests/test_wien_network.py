"""The Wien-bridge network and loop against independent derivations.

References: sympy (a general-purpose computer-algebra library from PyPI) derives the
network and loop symbolically from Kirchhoff's laws; textbook values from Sedra and
Smith, Microelectronic Circuits, chapter on sinusoidal oscillators (from memory):
f0 = 1/(2 pi R C) and amplifier gain 3 for equal arms; Vt = kT/q = 25.85 mV at 300 K
(CODATA constants via scipy.constants).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import sympy as sp

from partpick.physics.junction import thermal_voltage
from partpick.circuits import Conditions, build_loop, linear
from partpick.circuits.wien import TOPOLOGY as WIEN, circuit as WienCircuit

S, RS, RP, CS, CP, RG, RF, A0, WA, RO, RL = sp.symbols("s Rs Rp Cs Cp Rg Rf A0 wa Ro RL")


def _circuit(demo_catalog, **kw):
    base = dict(rs_ohm=12e3, cs_f=6.8e-9, rp_ohm=8.2e3, cp_f=10e-9, rg_ohm=10e3, rf_ohm=24e3,
                opamp=demo_catalog.find("opamps", "oa-gp-bip"))
    base.update(kw)
    return WienCircuit(**base)


def test_beta_matches_sympy(demo_catalog):
    zs = RS + 1 / (S * CS)
    zp = 1 / (1 / RP + S * CP)
    beta = sp.simplify(zp / (zs + zp))
    c = _circuit(demo_catalog)
    w_ref = 2 * math.pi * c.f0_hz
    ours = WIEN.beta(c, w_ref)
    subs = {RS: c.value("rs"), RP: c.value("rp"), CS: c.value("cs"), CP: c.value("cp")}
    f = sp.lambdify(S, beta.subs(subs), "numpy")
    for w in (100.0, 1e4, 2 * math.pi * c.f0_hz, 1e6):
        s = 1j * w
        assert ours(s / w_ref) == pytest.approx(complex(f(s)), rel=1e-10)


def test_f0_and_required_gain_from_sympy():
    rs, rp, cs, cp = sp.symbols("Rs Rp Cs Cp", positive=True)
    zs = rs + 1 / (S * cs)
    zp = 1 / (1 / rp + S * cp)
    beta = sp.together(zp / (zs + zp))
    w = sp.symbols("w", positive=True)
    b = sp.simplify(beta.subs(S, sp.I * w))
    # phase zero where the imaginary part vanishes; the gain needed is 1/beta there.
    w0 = sp.solve(sp.Eq(sp.im(sp.expand_complex(1 / b)), 0), w)
    w0 = [r for r in w0 if r.is_positive][0]
    assert sp.simplify(w0 - 1 / sp.sqrt(rs * rp * cs * cp)) == 0
    need = sp.simplify(sp.re(sp.expand_complex(1 / b)).subs(w, w0))
    assert sp.simplify(need - (1 + rs / rp + cp / cs)) == 0


def test_textbook_equal_arms(demo_catalog):
    # Sedra and Smith (from memory): f0 = 1/(2 pi R C), gain 3 with equal arms.
    c = _circuit(demo_catalog, rs_ohm=10e3, rp_ohm=10e3, cs_f=10e-9, cp_f=10e-9)
    assert c.f0_hz == pytest.approx(1 / (2 * math.pi * 10e3 * 10e-9), rel=1e-12)
    assert c.required_gain == pytest.approx(3.0, rel=1e-12)


def test_thermal_voltage_codata():
    # k T / q at 300 K = 25.852 mV (CODATA 2018 via scipy.constants)
    assert thermal_voltage(300.0) * 1e3 == pytest.approx(25.852, abs=5e-4)


def _sympy_loop_gain():
    """Loop gain broken at the non-inverting input, from nodal equations: op-amp
    A(s) = A0 wa / (s + wa), output resistance Ro, load RL, the Wien network as load."""
    vp, vo, vn, e = sp.symbols("vp vo vn e")
    zs = RS + 1 / (S * CS)
    zp = 1 / (1 / RP + S * CP)
    a = A0 * WA / (S + WA)
    eqs = [
        sp.Eq(e, a * (vp - vn)),
        sp.Eq((e - vo) / RO, vo / (zs + zp) + vo / RL + (vo - vn) / RF),  # KCL at the output
        sp.Eq((vo - vn) / RF, vn / RG),  # KCL at the inverting input
    ]
    sol = sp.solve(eqs, [vo, vn, e], dict=True)[0]
    return sp.simplify(sol[vo] / vp * zp / (zs + zp))


def test_loop_gain_with_real_opamp_matches_sympy(demo_catalog):
    op = demo_catalog.find("opamps", "oa-gp-bip")
    c = _circuit(demo_catalog)
    cond = Conditions(12.0, 298.15, 2e3)
    loop = build_loop(c, cond)
    expr = _sympy_loop_gain()
    subs = {RS: c.value("rs"), RP: c.value("rp"), CS: c.value("cs"), CP: c.value("cp"), RG: c.value("rg"), RF: c.value("rf"), A0: op.a0,
            WA: 2 * math.pi * op.gbw_hz / op.a0, RO: op.output_resistance_ohm, RL: 2e3}
    f = sp.lambdify(S, expr.subs(subs), "numpy")
    for w in np.geomspace(2 * math.pi * 10, 2 * math.pi * 1e6, 7):
        ours = loop.loop_gain(np.array([1j * w / loop.w_ref]), 0.0)[0]
        assert ours == pytest.approx(complex(f(1j * w)), rel=1e-8)


def test_poles_match_sympy_characteristic_polynomial(demo_catalog):
    op = demo_catalog.find("opamps", "oa-gp-bip")
    c = _circuit(demo_catalog)
    cond = Conditions(12.0, 298.15, 2e3)
    lin = linear(c, cond)
    num, _ = sp.fraction(sp.together(1 - _sympy_loop_gain()))
    subs = {RS: c.value("rs"), RP: c.value("rp"), CS: c.value("cs"), CP: c.value("cp"), RG: c.value("rg"), RF: c.value("rf"), A0: op.a0,
            WA: 2 * math.pi * op.gbw_hz / op.a0, RO: op.output_resistance_ohm, RL: 2e3}
    w0 = 2 * math.pi * c.f0_hz
    poly = sp.Poly(sp.expand(num.subs(subs).subs(S, w0 * S)), S)
    roots = np.roots([float(x) for x in poly.all_coeffs()]) * w0
    ref_pair = max((r for r in roots if abs(r.imag) > 1), key=lambda r: r.real)
    ours = max((p for p in lin.poles_rad_s if abs(p.imag) > 1), key=lambda p: p.real)
    assert ours.real == pytest.approx(ref_pair.real, rel=1e-6)
    assert abs(ours.imag) == pytest.approx(abs(ref_pair.imag), rel=1e-9)
    assert lin.starts == (ref_pair.real > 0)


def test_ideal_opamp_margin_limit(demo_catalog):
    # With a very fast op-amp the margin tends to (1 + Rf/Rg) / (1 + Rs/Rp + Cp/Cs) - 1.
    fast = demo_catalog.find("opamps", "oa-fast-50m")
    c = _circuit(demo_catalog, opamp=fast)
    lin = linear(c, Conditions(6.0, 298.15, math.inf))
    assert lin.margin == pytest.approx(c.ideal_margin, abs=2e-3)
    assert lin.phase_zero_hz == pytest.approx(c.f0_hz, rel=2e-3)
