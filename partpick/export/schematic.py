"""A drawing of a candidate a technician can build from, as SVG (schemdraw, a
general-purpose schematic library from PyPI; the ``report`` extra).

The circuit plug-ins draw their own parts on a :class:`Sheet` (the topology its core,
the amplitude control its branch at the topology's port, the periphery the output
stage, the single-supply bias and the supply pins); this module labels every part from
the BOM (designator and value), places a junction dot wherever three or more
connections meet, and reads the drawing's connections back from its geometry: wires
join the points they end on, a point on a wire's run joins the wire (a T), ground
symbols join ground, net flags of one name join each other, and each drawn part's
terminals land on the nets so formed (:func:`schematic_nets`). Tests compare these
nets with the netlist the physics simulates.
"""

from __future__ import annotations

from dataclasses import dataclass, field

from partpick import units
from partpick.bom import ROLES, Bom
from partpick.circuits import CONTROLS, TOPOLOGIES, periphery
from partpick.errors import InputError

__all__ = ["Sheet", "Drawn", "Drawing", "draw_bom", "schematic_svg", "schematic_nets"]

Point = tuple[float, float]
_GRID = 3  # decimals to which points are compared (drawing units)


def _pt(p) -> Point:
    return (round(float(p[0]), _GRID), round(float(p[1]), _GRID))


@dataclass(frozen=True, slots=True)
class Drawn:
    """One drawn part: its designator and its terminals' points, in the netlist's
    terminal order (two-terminal parts: start, end, with a diode's anode and a polarised
    capacitor's + at the start; an op-amp: +in, -in, out, V+, V-); ``polar`` marks a
    part whose orientation matters."""

    ref: str
    points: tuple[Point, ...]
    polar: bool = False


@dataclass
class Drawing:
    """What a sheet holds once drawn: the parts, the wires (point pairs), the ground
    symbols' and net flags' points, the junction dots placed and the wire crossings
    found (a crossing joins nothing; a tidy drawing has none)."""

    parts: list[Drawn] = field(default_factory=list)
    wires: list[tuple[Point, Point]] = field(default_factory=list)
    grounds: list[Point] = field(default_factory=list)
    flags: list[tuple[str, Point]] = field(default_factory=list)
    dots: list[Point] = field(default_factory=list)
    crossings: list[Point] = field(default_factory=list)


class Sheet:
    """The drawing surface the plug-ins' ``draw`` hooks receive: text from the BOM,
    parts placed between points, wires, ground, net flags and notes. Points are (x, y)
    in drawing units, y upwards. ``rails`` names the flags of the positive and the
    negative supply (None: the negative rail is ground); ``reference_flag`` the signal
    reference's flag (None: ground)."""

    def __init__(self, bom: Bom, catalog, d, elm, *, rails: tuple[str, str | None], reference_flag: str | None):
        self.bom, self.catalog, self.d, self.elm = bom, catalog, d, elm
        self.rails, self.reference_flag = rails, reference_flag
        self.drawing = Drawing()

    # -- text from the BOM -------------------------------------------------------------------
    def has(self, role: str) -> bool:
        return self.bom.line(role) is not None

    def ref(self, role: str) -> str:
        """The designator of ``role`` ('R1'; 'D1,D2' for a pair; 'U1' for the op-amp)."""
        return self.bom.line(role).ref

    def family(self, role: str):
        """The catalog family filling ``role``."""
        ln = self.bom.line(role)
        return self.catalog.find(ROLES[role][0], ln.family)

    def value(self, role: str) -> str:
        """The value of ``role`` in RKM code (IEC 60062), or the family of an active part."""
        ln = self.bom.line(role)
        dim = ROLES[role][1]
        return units.format_rkm(ln.value, dim) if dim else ln.family

    def polar(self, role: str) -> bool:
        """Whether the capacitor filling ``role`` is polarised (electrolytic)."""
        return "electrolytic" in getattr(self.family(role), "dielectric", "").lower()

    # -- drawing --------------------------------------------------------------------------------
    def part(self, ref: str, element, a: Point, b: Point, text: str, *, loc: str = "top", polar: bool = False):
        """Place a two-terminal ``element`` (a schemdraw element class instance) from a to
        b (a: anode, +) labelled ``text``; record it as part ``ref``."""
        e = self.d.add(element.endpoints(a, b).label(text, loc=loc, fontsize=9))
        self.drawing.parts.append(Drawn(ref, (_pt(e.absanchors["start"]), _pt(e.absanchors["end"])), polar))
        return e

    def resistor(self, role: str, a: Point, b: Point, *, loc: str = "top"):
        return self.part(self.ref(role), self.elm.Resistor(), a, b, f"{self.ref(role)}\n{self.value(role)}", loc=loc)

    def capacitor(self, role: str, a: Point, b: Point, *, loc: str = "top"):
        """A capacitor slot: the polarised symbol, + at a, for an electrolytic family."""
        polar = self.polar(role)
        return self.part(self.ref(role), self.elm.Capacitor(polar=polar), a, b,
                         f"{self.ref(role)}\n{self.value(role)}", loc=loc, polar=polar)

    def opamp(self, channel: str, text: str, plus_in: Point) -> dict[str, Point]:
        """An op-amp channel with its +input at ``plus_in`` (-input above it, output to
        the right), supply pins wired to the rails' flags; returns its pins."""
        e = self.d.add(self.elm.Opamp(leads=True).right().anchor("in2").at(plus_in).label(text, loc="center", fontsize=8,
                                                                                   ofst=(0.15, -0.05)))
        pins = {k: _pt(e.absanchors[k]) for k in ("in2", "in1", "out", "vd", "vs")}
        up = (pins["vd"][0], pins["vd"][1] + 0.45)
        down = (pins["vs"][0], pins["vs"][1] - 0.45)
        self.wire(pins["vd"], up)
        self.flag(self.rails[0], up, "up")
        self.wire(pins["vs"], down)
        if self.rails[1] is None:
            self.ground(down)
        else:
            self.flag(self.rails[1], down, "down")
        self.drawing.parts.append(Drawn(channel, (pins["in2"], pins["in1"], pins["out"], up, down), True))
        return pins

    def jfet(self, role: str, source: Point, *, gate_side: float = 1.0, up: float = 1.0) -> dict[str, Point]:
        """The n-channel JFET filling ``role`` with its source at ``source``, its drain
        above it (``up`` +1) or below (-1) and its gate to the right (``gate_side`` +1) or
        left (-1); recorded as a part with terminals (drain, gate, source), the netlist's
        order. Returns its pins."""
        e = self.elm.JFetN().right().at(source).anchor("source")
        if up < 0:
            e = e.flip()
        if gate_side < 0:
            e = e.reverse()
        ref = self.ref(role)
        e = self.d.add(e.label(f"{ref}\n{self.value(role)}", loc="right" if gate_side < 0 else "left", fontsize=9))
        pins = {k: _pt(e.absanchors[k]) for k in ("drain", "gate", "source")}
        self.drawing.parts.append(Drawn(ref, (pins["drain"], pins["gate"], pins["source"]), True))
        return pins

    def wire(self, *points: Point) -> None:
        """A wire through ``points`` (straight runs between consecutive points)."""
        for a, b in zip(points, points[1:]):
            if _pt(a) != _pt(b):
                self.d.add(self.elm.Line().endpoints(a, b))
                self.drawing.wires.append((_pt(a), _pt(b)))

    def ground(self, at: Point) -> None:
        self.d.add(self.elm.Ground().right().at(at))
        self.drawing.grounds.append(_pt(at))

    def reference(self, at: Point) -> None:
        """The signal reference at ``at``: ground, or the reference's flag."""
        if self.reference_flag is None:
            self.ground(at)
        else:
            self.flag(self.reference_flag, at, "down")

    def flag(self, name: str, at: Point, direction: str = "right") -> None:
        """A net flag: every flag of one name is one net. 'up' draws a rail symbol, 'down'
        the negative rail's symbol or a reference symbol (a triangle) named ``name``,
        'right' or 'left' a tag pointing that way."""
        if direction == "up":
            self.d.add(self.elm.Vdd().right().at(at).label(name, fontsize=9))
        elif direction == "down" and name == self.rails[1]:
            self.d.add(self.elm.Vss().right().at(at).label(name, fontsize=9))
        elif direction == "down":
            self.d.add(self.elm.GroundSignal().right().at(at).label(name, loc="bottom", fontsize=8))
        elif direction == "left":
            self.d.add(self.elm.Tag(width=1.6, height=0.55).at(at).left().label(name, fontsize=9))
        else:
            self.d.add(self.elm.Tag(width=1.6, height=0.55).at(at).right().label(name, fontsize=9))
        self.drawing.flags.append((name, _pt(at)))

    def connector(self, name: str, at: Point, text: str) -> None:
        """An off-sheet connection (the load), recorded as a one-terminal part ``name``."""
        self.d.add(self.elm.Dot(open=True).at(at).label(text, loc="right", fontsize=9))
        self.drawing.parts.append(Drawn(name, (_pt(at),)))

    def note(self, text: str, at: Point) -> None:
        self.d.add(self.elm.Label().at(at).label(text, loc="right", fontsize=9, halign="left"))

    # -- finishing --------------------------------------------------------------------------------
    def finish(self) -> Drawing:
        """Junction dots wherever three or more connections meet (wire ends, part
        terminals, a point on a wire's run), and the wire crossings, recorded."""
        ends: dict[Point, int] = {}
        for a, b in self.drawing.wires:
            for p in (a, b):
                ends[p] = ends.get(p, 0) + 1
        for part in self.drawing.parts:
            for p in part.points:
                ends[p] = ends.get(p, 0) + 1
        for p in list(ends):
            if any(_inside(p, w) for w in self.drawing.wires):
                ends[p] += 2  # a T: the wire runs on through the point
        for p, n in sorted(ends.items()):
            if n >= 3:
                self.d.add(self.elm.Dot(radius=0.09).at(p))
                self.drawing.dots.append(p)
        ws = self.drawing.wires
        for i, w in enumerate(ws):
            for v in ws[i + 1:]:
                x = _crossing(w, v)
                if x is not None:
                    self.drawing.crossings.append(x)
        return self.drawing


def _inside(p: Point, w: tuple[Point, Point]) -> bool:
    """p lies on wire w strictly between its ends (wires run horizontally or vertically)."""
    (x1, y1), (x2, y2) = w
    if x1 == x2 == p[0]:
        return min(y1, y2) < p[1] < max(y1, y2)
    if y1 == y2 == p[1]:
        return min(x1, x2) < p[0] < max(x1, x2)
    return False


def _crossing(w, v) -> Point | None:
    """Where a horizontal and a vertical wire cross inside both runs, else None."""
    for h, u in ((w, v), (v, w)):
        (hx1, hy), (hx2, hy2) = h
        (ux, uy1), (ux2, uy2) = u
        if hy == hy2 and ux == ux2 and min(hx1, hx2) < ux < max(hx1, hx2) and min(uy1, uy2) < hy < max(uy1, uy2):
            return (ux, hy)
    return None


def schematic_nets(drawing: Drawing) -> dict[str, tuple[int, ...]]:
    """Each drawn part's terminals as net numbers, read from the geometry alone (see
    module docstring). Ground is one net, each flag name one net."""
    parent: dict[object, object] = {}

    def find(x):
        parent.setdefault(x, x)
        while parent[x] != x:
            parent[x] = parent[parent[x]]
            x = parent[x]
        return x

    def join(a, b) -> None:
        parent[find(a)] = find(b)

    points = {p for w in drawing.wires for p in w} | {p for d in drawing.parts for p in d.points}
    points |= set(drawing.grounds) | {p for _, p in drawing.flags}
    for a, b in drawing.wires:
        join(a, b)
    for p in points:
        for w in drawing.wires:
            if _inside(p, w):
                join(p, w[0])
    for p in drawing.grounds:
        join(p, "ground")
    for name, p in drawing.flags:
        join(p, ("flag", name))
    numbers: dict[object, int] = {}
    out = {}
    for part in drawing.parts:
        out[part.ref] = tuple(numbers.setdefault(find(p), len(numbers)) for p in part.points)
    return out


def draw_bom(bom: Bom, catalog, d, elm) -> Drawing:
    """Draw ``bom`` on schemdraw drawing ``d``: the topology's core, the control at its
    port, the periphery (output stage, bias, supplies), then the junction dots."""
    sheet = Sheet(bom, catalog, d, elm, rails=periphery.rail_flags(bom.supply_kind),
                  reference_flag=periphery.reference_flag(bom.supply_kind))
    topo = TOPOLOGIES[bom.topology]
    ctl = CONTROLS[bom.control]
    at = topo.draw(sheet)
    ctl.draw(sheet, *at["ports"][ctl.port], out=at["out"])
    periphery.draw(sheet, at["out"], bom.stage, bom.supply_kind)
    return sheet.finish()


def _schemdraw():
    try:
        import schemdraw
        import schemdraw.elements as elm
    except ImportError:
        raise InputError("needs schemdraw: pip install 'partpick[report]'", field="--report") from None
    return schemdraw, elm


def schematic_svg(bom: Bom, catalog) -> str:
    """The circuit of ``bom`` as SVG text."""
    schemdraw, elm = _schemdraw()
    schemdraw.use("svg")
    d = schemdraw.Drawing(show=False)
    d.config(fontsize=10, unit=2.5, margin=1.5)  # room for labels that run past the last part
    draw_bom(bom, catalog, d, elm)
    svg = d.get_imagedata("svg")
    return svg.decode("utf-8") if isinstance(svg, bytes) else svg
