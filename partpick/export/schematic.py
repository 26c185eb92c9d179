"""A drawing of the Wien-bridge candidate with designators and values, as SVG
(schemdraw, a general-purpose schematic library from PyPI; the ``report`` extra)."""

from __future__ import annotations

from partpick import units
from partpick.bom import ROLES, Bom
from partpick.errors import InputError

__all__ = ["wien_svg"]


def _label(bom: Bom, role: str) -> str:
    ln = bom.line(role)
    if ln is None:
        return ""
    dim = ROLES[role][1]
    value = units.format_rkm(ln.value, dim) if dim else ln.family
    return f"{ln.ref} {value}"


def wien_svg(bom: Bom) -> str:
    """The oscillator core (Wien arms, gain network, limiter branch across Rf, op-amp) and
    a note of the output stage and, on a single supply, the bias network, as SVG text.
    Ground symbols stand for the signal reference (mid-rail on a single supply)."""
    try:
        import schemdraw
        import schemdraw.elements as elm
    except ImportError:
        raise InputError("needs schemdraw: pip install 'partpick[report]'", field="--report") from None
    schemdraw.use("svg")
    d = schemdraw.Drawing(show=False)
    d.config(fontsize=10, unit=2.2)
    op = d.add(elm.Opamp(leads=True).label(_label(bom, "opamp"), loc="center", ofst=(0, -1.2)))
    d.add(elm.Line().at(op.out).right(1.0))
    out = d.here
    d.add(elm.Dot())
    # gain network: Rf over the top, Rg down to the reference
    d.add(elm.Line().at(op.in1).left(1.0))
    d.add(elm.Dot())
    d.add(elm.Line().up(1.6))
    top = d.here
    d.add(elm.Resistor().right().tox(out).label(_label(bom, "rf")))
    d.add(elm.Line().down().toy(out))
    # Rg leaves the junction to the left, clear of the Wien network below
    d.add(elm.Resistor().at(top).left(2.6).label(_label(bom, "rg")))
    d.add(elm.Ground())
    # limiter branch across Rf
    if bom.line("limiter") is not None:
        d.add(elm.Line().at(top).up(1.6))
        if bom.line("rd") is not None:
            d.add(elm.Resistor().right(2.4).label(_label(bom, "rd")))
        d.add(elm.Diode().right(2.4).label(_label(bom, "limiter") + " (pair)"))
        d.add(elm.Line().right().tox(out))
        d.add(elm.Line().down().toy(top))
    # shunt arm Rp || Cp at the non-inverting input
    d.add(elm.Line().at(op.in2).left(1.0))
    plus = d.here
    d.add(elm.Dot())
    d.add(elm.Resistor().down(2.4).label(_label(bom, "rp"), loc="bottom"))
    d.add(elm.Ground())
    d.add(elm.Line().at(plus).left(1.6))
    d.add(elm.Capacitor().down(2.4).label(_label(bom, "cp"), loc="bottom"))
    d.add(elm.Ground())
    # series arm Rs + Cs from the output back to the non-inverting input
    d.add(elm.Line().at(out).down(4.2))
    d.add(elm.Resistor().left(3.0).label(_label(bom, "rs"), loc="bottom"))
    d.add(elm.Capacitor().left(3.0).label(_label(bom, "cs"), loc="bottom"))
    d.add(elm.Line().left().tox(plus.x - 3.4))
    d.add(elm.Line().up().toy(plus))
    d.add(elm.Line().right().tox(plus.x - 1.6))
    # output stage and supply notes
    note = {"none": "load", "follower": "follower, load",
            "gain": f"gain stage {_label(bom, 'stage_ra')}, {_label(bom, 'stage_rb')}, load",
            "attenuator": f"attenuator {_label(bom, 'stage_ra')}, {_label(bom, 'stage_rb')}, load"}[bom.stage]
    d.add(elm.Line().at(out).right(1.2))
    d.add(elm.Dot(open=True).label(note, loc="bottom"))
    d.add(elm.Gap().right(3.5))  # room for the note inside the drawing's bounds
    if bom.supply_kind == "single":
        d.add(elm.Label().at((plus.x - 3.4, plus.y - 6.0)).label(
            f"single supply: reference = mid-rail from {_label(bom, 'bias_top')} / {_label(bom, 'bias_bottom')}, "
            f"{_label(bom, 'bias_c')}; output through {_label(bom, 'coupling_c')}", loc="right"))
    svg = d.get_imagedata("svg")
    return svg.decode("utf-8") if isinstance(svg, bytes) else svg
