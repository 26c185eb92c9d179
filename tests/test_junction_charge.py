"""The limiter's junction charge: SPICE's depletion and diffusion charge, in the
catalog, the tables, the transient and harmonic balance.

References beside each check:
- the SPICE diode's charge as the ngspice manual gives it (chapter "Diodes", model
  parameters CJO, VJ, M, FC, TT, and the capacitance law with its linear continuation
  above FC VJ; the same equations as P. Antognetti and G. Massobrio, Semiconductor
  Device Modeling with SPICE, 2nd ed., 1993, chapter 1, from memory);
- sympy, which integrates the capacitance law into the charge independently of
  partpick's closed form;
- ngspice itself: a small-signal AC analysis of one junction at a DC bias, with the
  catalog's 25 degC parameters, TNOM = 25 and TEMP = T, so that ngspice's own
  temperature law for CJO and VJ (and IS) applies.
"""

from __future__ import annotations

import dataclasses
import math
import re
import subprocess

import numpy as np
import pytest
import sympy as sp

from partpick.catalog import load_catalog
from partpick.circuits import Conditions, branch, build_loop
from partpick.circuits.wien import circuit as WienCircuit
from partpick.errors import CatalogError
from partpick.physics.harmonic import harmonic_balance
from partpick.physics.junction import Junction, junctions_at, limiter_table
from partpick.physics.linear import analyse_linear
from partpick.physics.netlist import Kick, LimiterX, Netlist
from partpick.physics.ngspice import ngspice_available
from partpick.physics.transient import simulate
from tests.conftest import TINY_CATALOG

# -- the charge law ----------------------------------------------------------------------


def _sympy_depletion(cjo, vj, m, fc, v):
    """q(v) = integral from 0 to v of SPICE's depletion capacitance, and C(v) (sympy)."""
    x = sp.symbols("x", real=True)
    c_low = cjo * (1 - x / vj) ** (-m)
    c_high = cjo / (1 - fc) ** (1 + m) * (1 - fc * (1 + m) + m * x / vj)
    vfc = fc * vj
    if v <= vfc:
        q = sp.integrate(c_low, (x, 0, v))
        c = c_low.subs(x, v)
    else:
        q = sp.integrate(c_low, (x, 0, vfc)) + sp.integrate(c_high, (x, vfc, v))
        c = c_high.subs(x, v)
    return float(sp.N(q, 30)), float(sp.N(c, 30))


@pytest.mark.parametrize("m,vj,fc", [(sp.Rational(1, 2), 1, sp.Rational(1, 2)),
                                      (sp.Rational(7, 20), sp.Rational(8, 5), sp.Rational(1, 2)),
                                      (sp.Rational(1, 3), sp.Rational(3, 4), sp.Rational(9, 10)),
                                      (0, 1, sp.Rational(1, 2))])
def test_depletion_charge_is_the_integral_of_the_spice_capacitance(m, vj, fc):
    """Partpick's closed-form depletion charge equals sympy's integral of the SPICE
    capacitance law (both regions, either side of FC VJ); M = 0 is a constant
    capacitance, the form an old catalog's single 'capacitance' takes."""
    cjo = sp.Rational(15, 10**12)
    j = Junction(1e-15, 1.0, 0.0, 0.025, float(cjo), float(vj), float(m), float(fc), 0.0)
    for v in (-3.0, -0.4, 0.0, 0.2, float(fc * vj) - 1e-3, float(fc * vj) + 1e-3, 1.4, 2.5):
        q_ref, c_ref = _sympy_depletion(cjo, vj, m, fc, sp.nsimplify(v))
        q, c = j.depletion(np.array(v))
        assert float(q) == pytest.approx(q_ref, rel=1e-12, abs=1e-27), v
        assert float(c) == pytest.approx(c_ref, rel=1e-12), v
    if m == 0:
        q, c = j.depletion(np.array([-2.0, 0.5, 3.0]))
        assert np.allclose(c, float(cjo)) and np.allclose(q, float(cjo) * np.array([-2.0, 0.5, 3.0]))


def test_charge_adds_transit_time_times_current():
    """Diffusion charge TT I and capacitance TT dI/dv (SPICE's TT); with Rs the
    depletion sits at the junction's own voltage v - I Rs."""
    j = Junction(1e-14, 1.5, 5.0, 0.025, 2e-12, 0.7, 0.4, 0.5, 10e-9)
    v = np.array([0.3, 0.6, 0.75])
    q, c = j.charge(v)
    i = j.current(v)
    qd, _ = j.depletion(v - i * j.rs_ohm)
    assert np.allclose(q, qd + 10e-9 * i, rtol=1e-12)
    h = 1e-7
    dq = (j.charge(v + h)[0] - j.charge(v - h)[0]) / (2 * h)
    assert np.allclose(c, dq, rtol=1e-5)


# -- against ngspice's own small-signal capacitance and temperature law -----------------

def _ngspice_capacitance(lim, temp_c: float, biases, f_hz: float = 1e6) -> np.ndarray:
    """dq/dv of one junction (Rs = 0) at each bias (V), F, from ngspice's AC analysis:
    Im(Y) / (2 pi f), the catalog's values at TNOM = 25 and TEMP = temp_c."""
    model = (f".model dm D(IS={lim.is_a!r} N={lim.n!r} CJO={lim.cjo_f!r} VJ={lim.vj_v!r} M={lim.m!r} "
             f"FC={lim.fc!r} TT={lim.tt_s!r} EG={lim.eg_j / 1.602176634e-19!r} XTI={lim.xti!r})")
    deck = "\n".join(["junction capacitance", model, "V1 a 0 DC 0 AC 1", "D1 a 0 dm",
                      f".options TNOM=25 TEMP={temp_c!r}", ".control", "set numdgt=12",
                      f"foreach vb {' '.join(repr(b) for b in biases)}", "alter V1 dc = $vb",
                      f"ac lin 1 {f_hz!r} {f_hz!r}", "print i(v1)", "end", "quit", ".endc", ".end", ""])
    out = subprocess.run(["ngspice", "-b"], input=deck, capture_output=True, text=True, timeout=60).stdout
    im = [float(m.group(1)) for m in re.finditer(r"i\(v1\)\s*=\s*[-+0-9.eE]+,\s*([-+0-9.eE]+)", out)]
    assert len(im) == len(biases), out
    return -np.array(im) / (2 * math.pi * f_hz)   # current into the source's + terminal is -Y


@pytest.mark.ngspice
@pytest.mark.skipif(not ngspice_available(), reason="ngspice not installed")
@pytest.mark.parametrize("limiter", ["d-si-signal", "d-si-lowleak", "d-schottky", "led-red", "z-pair-3v3"])
@pytest.mark.parametrize("temp_c", [-40.0, 25.0, 85.0])
def test_capacitance_matches_ngspice_small_signal(demo_catalog, limiter, temp_c):
    """The forward junction's dq/dv at reverse, zero and forward bias (both sides of
    FC VJ, where the diffusion term shows) equals ngspice's, with ngspice applying its
    own temperature law to the 25 degC values: partpick's CJO(T), VJ(T) (and IS(T))
    are SPICE's."""
    lim = dataclasses.replace(demo_catalog.find("limiters", limiter), rs_ohm=0.0)
    fwd, _ = junctions_at(lim, temp_c + 273.15)
    knee = float(fwd.voltage(np.array(20e-6)))   # where a limiter works
    biases = [-2.0, -0.5, 0.0, 0.5 * lim.fc * lim.vj_v, 1.05 * lim.fc * fwd.vj_v, knee]
    ours = fwd.charge(np.array(biases))[1]
    theirs = _ngspice_capacitance(lim, temp_c, biases)
    assert ours == pytest.approx(theirs, rel=2e-4)
    if temp_c != 25.0:
        cold = junctions_at(lim, 298.15)[0]
        assert abs(fwd.cjo_f / cold.cjo_f - 1) > 1e-3   # the law really moved it


# -- the pair's tables -------------------------------------------------------------------

def test_pair_charge_tables(demo_catalog):
    """Two anti-parallel junctions present 2 CJO at rest, two opposed Zeners CJO / 2
    (capacitors in parallel and in series); q is odd, dq/dv even and q the integral
    of dq/dv along the table."""
    for lim in demo_catalog.limiters:
        tab = limiter_table(lim, 0.0, 298.15)
        c0 = float(tab.capacitance(np.array(0.0)))
        assert c0 == pytest.approx(2 * lim.cjo_f if lim.kind != "zener-pair" else lim.cjo_f / 2, rel=1e-4), lim.id
        v = np.linspace(-0.9, 0.9, 7)
        assert np.allclose(tab.charge(v), -tab.charge(-v), atol=1e-20)
        assert np.allclose(tab.capacitance(v), tab.capacitance(-v), rtol=1e-9)
        x = tab.v_v[(tab.v_v > -2) & (tab.v_v < 2)]
        integral = np.concatenate([[0.0], np.cumsum(0.5 * (tab.capacitance(x)[1:] + tab.capacitance(x)[:-1])
                                                    * np.diff(x))])
        assert np.allclose(tab.charge(x) - tab.charge(x[:1]), integral, rtol=1e-4, atol=1e-6 * c0), lim.id


def test_zener_element_table_splits_the_pair(demo_catalog):
    """With no charge moving, both Zeners carry the pair's current: the forward one at
    u, the other at u - v (the element's current at each equals the pair's)."""
    tab = limiter_table(demo_catalog.find("limiters", "z-pair-3v3"), 0.0, 298.15)
    el = tab.element
    for v in (-4.5, -1.0, 0.3, 2.0, 4.2):
        u = float(np.interp(v, tab.v_v, tab.split_v))
        i = float(tab.current(np.array(v)))
        assert float(el.current(np.array(u))) == pytest.approx(i, rel=2e-3, abs=1e-15)
        assert float(el.current(np.array(u - v))) == pytest.approx(-i, rel=2e-3, abs=1e-15)
    assert limiter_table(demo_catalog.find("limiters", "led-red"), 0.0, 298.15).element is None


# -- the catalog -------------------------------------------------------------------------

def _tiny(tmp_path, capacitance: str):
    text = TINY_CATALOG.replace("series_resistance: 0.6 ohm,", f"series_resistance: 0.6 ohm, capacitance: {capacitance},")
    folder = tmp_path / "cat"
    folder.mkdir(parents=True, exist_ok=True)
    (folder / "parts.yaml").write_text(text, encoding="utf-8")
    return folder


def test_catalog_reads_spice_charge_parameters_with_spice_defaults(tmp_path):
    """The mapping form takes SPICE's names; absent ones get SPICE's defaults (VJ 1 V,
    M 0.5, FC 0.5, TT 0: ngspice manual, diode model parameters); an old single
    capacitance is a constant one: CJO with M = 0."""
    lim = load_catalog(_tiny(tmp_path, "{cjo: 4 pF, tt: 6 ns}")).find("limiters", "lim-si")
    assert (lim.cjo_f, lim.vj_v, lim.m, lim.fc, lim.tt_s) == (pytest.approx(4e-12), 1.0, 0.5, 0.5, pytest.approx(6e-9))
    old = load_catalog(_tiny(tmp_path / "old", "3 pF")).find("limiters", "lim-si")
    assert (old.cjo_f, old.m, old.tt_s) == (pytest.approx(3e-12), 0.0, 0.0)
    none = load_catalog(_tiny(tmp_path / "none", "{}")).find("limiters", "lim-si")
    assert none.cjo_f == 0.0 and none.tt_s == 0.0


@pytest.mark.parametrize("text,field,words", [
    ("{cjo: 4 pF, m: 0.95}", "capacitance.m", "between 0 and 0.9"),
    ("{cjo: 4 pF, fc: 0.99}", "capacitance.fc", "between 0 and 0.95"),
    ("{cjo: 4 pF, vj: 2.5 V}", "capacitance.vj", "times fc must not exceed 1 V"),
    ("{cjo: 4 pF, tt: -1 ns}", "capacitance.tt", "must be >= 0"),
    ("{cjo: 4 pF, mj: 0.3}", "capacitance.mj", "did you mean 'm'"),
])
def test_bad_charge_parameters_are_refused(tmp_path, text, field, words):
    with pytest.raises(CatalogError) as err:
        load_catalog(_tiny(tmp_path, text))
    msg = str(err.value)
    assert f"'limiters[0].{field}'" in msg and words in msg, msg


def test_old_scalar_capacitance_is_a_linear_capacitor(demo_catalog):
    """A catalog with one capacitance (M = 0, TT = 0) gives the frequency a linear
    capacitor of 2 CJO across the pair gives (the model before the charge law):
    harmonic balance with the table's charge against the same table with the charge
    removed and a linear capacitance instead."""
    led = dataclasses.replace(demo_catalog.find("limiters", "led-red"), m=0.0, tt_s=0.0)
    c = WienCircuit(rs_ohm=3.9e3, cs_f=10e-9, rp_ohm=3.9e3, cp_f=10e-9, rg_ohm=10e3, rf_ohm=22e3,
                    opamp=demo_catalog.find("opamps", "oa-jfet-4m"), limiter=led)
    cond = Conditions(12, 298.15, 10e3)
    loop, br = build_loop(c, cond), branch(c, cond.temp_k)
    tab = br.table
    plain = dataclasses.replace(br, table=dataclasses.replace(tab, q_c=None, c_f=None), cap_f=2 * led.cjo_f,
                                series_table=br.series_table)
    rails = cond.rails("dual")
    a = harmonic_balance(loop, br, analyse_linear(loop, br), rails)
    b = harmonic_balance(loop, plain, analyse_linear(loop, plain), rails)
    assert a.freq_hz == pytest.approx(b.freq_hz, rel=2e-6)
    assert a.osc_peak_v == pytest.approx(b.osc_peak_v, rel=1e-5)


# -- transient and harmonic balance ------------------------------------------------------

def test_transient_conserves_the_charge(demo_catalog):
    """A current pulse into an LED pair and nothing else: the charge-based BDF2 stamp
    leaves exactly the delivered charge in the pair, q(v_end) = Q, however coarse the
    steps (a capacitance-based stamp C(v) dv/dt would not)."""
    lim = demo_catalog.find("limiters", "led-red")
    q_kick = 40e-12                     # C: about 1.2 V across 2 x 15 pF, the capacitance rising
    tab = limiter_table(lim, 0.0, 298.15)
    for ppc in (8, 40):
        net = Netlist("pulse", (Kick("I1", "a", q_kick, 0.1e-6, 1e-6), LimiterX("D1", "a", "0", lim)),
                      temp_k=298.15, f_hint_hz=200e3, probes={"osc": "a"})
        res = simulate(net, cycles=1, points_per_cycle=ppc, record=("osc",))
        v_end = res.v["osc"][-1]
        assert v_end > 0.8
        # what the LED leaks (tiny at 1 V) and GMIN (1e-12 S) take over 5 us is below 1e-6 Q
        assert float(tab.charge(np.array(v_end))) == pytest.approx(q_kick, rel=1e-6)


def _led_design(cat, lim=None, **kw):
    return WienCircuit(rs_ohm=3.9e3, cs_f=10e-9, rp_ohm=3.9e3, cp_f=10e-9, rg_ohm=10e3, rf_ohm=22e3,
                       opamp=cat.find("opamps", "oa-jfet-4m"), limiter=lim or cat.find("limiters", "led-red"), **kw)


@pytest.mark.parametrize("limiter,rd", [("led-red", 0.0), ("z-pair-3v3", 2.2e3), ("d-si-lowleak", 4.7e3)])
def test_frequency_sensitivity_to_capacitance_is_the_derivative(demo_catalog, limiter, rd):
    """The sensitivity harmonic balance reports (implicit-function theorem on its
    converged equations) is the derivative of its settled frequency in a capacitance
    added across the element (central difference of two more solutions)."""
    c = _led_design(demo_catalog, demo_catalog.find("limiters", limiter), rd_ohm=rd)
    cond = Conditions(12, 298.15, 10e3)
    loop, br = build_loop(c, cond), branch(c, cond.temp_k)
    rails = cond.rails("dual")
    hb = harmonic_balance(loop, br, analyse_linear(loop, br), rails)
    f = []
    for dc in (-0.05e-12, 0.05e-12):
        b2 = dataclasses.replace(br, cap_f=br.cap_f + dc)
        f.append(harmonic_balance(loop, b2, analyse_linear(loop, b2), rails, start=hb).freq_hz)
    assert hb.freq_per_cap_hz_f == pytest.approx((f[1] - f[0]) / 0.1e-12, rel=1e-3)
    assert hb.freq_per_cap_hz_f < 0                     # more capacitance, lower frequency
    assert 0.5 * br.c0_f < hb.cap_eff_f < 5 * br.c0_f    # what it presents at its amplitude


def test_check_shows_the_sensitivity_and_cautions_when_it_matters(demo_catalog):
    """verify adds the information row, and a caution when CAP_UNCERTAINTY of the
    limiter's capacitance moves the frequency by more than a quarter of its tolerance."""
    from partpick.spec import Spec
    from partpick.sensitivity import CAP_UNCERTAINTY
    from partpick.verify import verify

    c = _led_design(demo_catalog)
    spec_text = """name: t
frequency: {{target: 3950 Hz, tolerance: {tol}}}
amplitude: {{target: 2 Vpk, tolerance: 50 %}}
supply: {{kind: dual, min: 12 V}}
load: {{resistance: 10 kohm}}
distortion: {{max_thd: 20 %}}
"""
    from partpick.export.verdict import render_verdict

    for tol, cautioned in (("0.5 %", True), ("20 %", False)):
        spec = Spec.from_text(spec_text.format(tol=tol), "t.yaml")
        v = verify(c, spec)
        line = next(ln for ln in render_verdict(v, spec).splitlines()
                    if ln.startswith("frequency per pF at the limiter"))
        assert line.split()[8:11] == ["-", "info", "-"], line    # no limit, no verdict, no margin
        assert v.requirements() == tuple(ch for ch in v.checks if ch.name != "frequency per pF at the limiter")
        row = next(ch for ch in v.checks if ch.name == "frequency per pF at the limiter")
        assert row.is_info and row.passed and row.value < 0
        nom = v.nominal
        movement = abs(nom.freq_per_cap_hz_f / nom.freq_hz) * CAP_UNCERTAINTY * nom.cap_eff_f
        assert movement > 0.25 * 0.005                       # an LED pair at 4 kHz: it matters at 0.5 %
        assert any("limiter's capacitance" in x for x in v.cautions) == cautioned
