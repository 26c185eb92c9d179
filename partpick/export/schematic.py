"""A drawing of a candidate with designators and values, as SVG (schemdraw, a
general-purpose schematic library from PyPI; the ``report`` extra). The topology
plug-in draws its circuit; this module labels the slots from the BOM."""

from __future__ import annotations

from partpick import units
from partpick.bom import ROLES, Bom
from partpick.circuits import TOPOLOGIES
from partpick.errors import InputError

__all__ = ["schematic_svg"]


def _label(bom: Bom, role: str) -> str:
    ln = bom.line(role)
    if ln is None:
        return ""
    dim = ROLES[role][1]
    value = units.format_rkm(ln.value, dim) if dim else ln.family
    return f"{ln.ref} {value}"


def schematic_svg(bom: Bom) -> str:
    """The circuit of ``bom`` as SVG text."""
    try:
        import schemdraw
        import schemdraw.elements as elm
    except ImportError:
        raise InputError("needs schemdraw: pip install 'partpick[report]'", field="--report") from None
    schemdraw.use("svg")
    d = schemdraw.Drawing(show=False)
    d.config(fontsize=10, unit=2.2)
    TOPOLOGIES[bom.topology].draw(d, elm, lambda role: _label(bom, role), bom.stage, bom.supply_kind)
    svg = d.get_imagedata("svg")
    return svg.decode("utf-8") if isinstance(svg, bytes) else svg
