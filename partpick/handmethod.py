"""The common hand method, as a baseline to measure partpick against.

Pick a round capacitor, compute R = 1 / (2 pi f C), round R to the nearest value of the
resistor series, set the gain with Rf = 2.2 Rg and put the diodes straight across Rf
(common practice, no published source). Used by the design benchmark and its test.
"""

from __future__ import annotations

import math

from partpick import series
from partpick.catalog import Catalog
from partpick.spec import Spec
from partpick.topologies.wien import WienCircuit

__all__ = ["hand_design"]


def hand_design(spec: Spec, catalog: Catalog, opamp_id: str, limiter_id: str = "d-si-signal") -> WienCircuit:
    """The hand-method circuit for ``spec`` with the given op-amp and diode pair."""
    f = spec.frequency.target_hz
    rfam = next(r for r in catalog.resistors if spec.parts.resistors is None or r.id in spec.parts.resistors)
    # the round capacitor (1, 10, 100 ... of a unit) that puts R nearest 10 kohm
    c = 10.0 ** round(math.log10(1 / (2 * math.pi * f * 10e3)))
    r = series.nearest(rfam.series, 1 / (2 * math.pi * f * c))
    lim = catalog.find("limiters", limiter_id)
    kw = {}
    if spec.supply.kind == "single":
        kw = dict(supply_kind="single", bias_r_ohm=47e3, bias_c_f=10e-6, coupling_c_f=22e-6)
    return WienCircuit(r, c, r, c, 10e3, 22e3, catalog.find("opamps", opamp_id), lim, **kw)
