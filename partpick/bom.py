"""Bills of materials: the parts of one candidate, read and written in partpick's own
YAML and CSV forms, and turned into a circuit for the physics. The roles a BOM may
hold, their kinds and designators come from the circuit plug-ins' slots.

YAML form::

    topology: wien-bridge
    control: diode-limiter  # the amplitude control (default: what the roles hold)
    supply: dual            # dual | single
    stage: none             # none | follower | gain | attenuator
    parts:
      - {ref: R1, role: rs, family: mf-1, value: 10k}
      - {ref: U1, role: opamp, family: oa-jfet-4m}

CSV form: a header ``ref,role,family,value`` (more columns are ignored) and comment
lines ``# supply: dual`` / ``# stage: none`` (and optionally ``# topology:``,
``# control:``) before it. The purchasing CSV (:mod:`partpick.export.purchase`) reads
the same way: its ``designators`` and ``roles`` cells list a line's parts (one role for
a limiter pair's two diodes or an op-amp's channels), and without the comment lines
the circuit's shape follows from the roles (bias parts: single supply) and the op-amp's
channels (one more than the topology's: a buffered output stage).
"""

from __future__ import annotations

import csv
import io
import re
from dataclasses import dataclass, field
from pathlib import Path

from partpick import series, units
from partpick.catalog import Catalog
from partpick.circuits import (CONTROLS, STAGES, SUPPLY_KINDS, TOPOLOGIES, Circuit, all_slots, control_for_roles,
                               designators, make_circuit, slots_for)
from partpick.circuits.periphery import BIAS_ROLES, BUFFERED, STAGE_ROLES
from partpick.errors import InputError
from partpick.pricing import maker_part
from partpick.spec import Spec
from partpick.yamlsrc import Fields, did_you_mean, parse_yaml, read_csv_rows, read_text

__all__ = ["ROLES", "BomLine", "Bom", "BomError", "load_bom", "parse_bom", "bom_to_yaml", "bom_to_csv",
           "bom_from_circuit", "part_data", "value_text", "check_bom_fits"]

# role -> (kind of family, value dimension or None), from the plug-ins' slots
ROLES = {role: (slot.kind, slot.dim) for role, slot in all_slots().items()}
DESIGNATORS = designators()
_DEFAULT_TOPOLOGY = "wien-bridge"


class BomError(InputError):
    """A BOM file that does not describe a complete candidate."""


@dataclass(frozen=True, slots=True)
class BomLine:
    """One slot filled: ref designator, role, catalog family id, value (ohm or F; 0
    for op-amps and limiters)."""

    ref: str
    role: str
    family: str
    value: float


@dataclass(frozen=True, slots=True)
class Bom:
    """A complete candidate: its lines, the supply kind, the output stage, the topology
    and the amplitude control (registry names)."""

    lines: tuple[BomLine, ...]
    supply_kind: str
    stage: str
    topology: str = _DEFAULT_TOPOLOGY
    control: str = "diode-limiter"
    source: str = field(default="", compare=False)
    where: dict = field(default_factory=dict, compare=False, hash=False, repr=False)

    def line(self, role: str) -> BomLine | None:
        for ln in self.lines:
            if ln.role == role:
                return ln
        return None

    def uses(self) -> dict[tuple[str, float], int]:
        """How many slots use each (family, value): parts of one value share a BOM line."""
        out: dict[tuple[str, float], int] = {}
        for ln in self.lines:
            out[(ln.family, ln.value)] = out.get((ln.family, ln.value), 0) + 1
        return out

    def value(self, role: str, default: float = 0.0) -> float:
        ln = self.line(role)
        return ln.value if ln else default

    def control_part(self) -> BomLine | None:
        """The line of the amplitude control's active part (the limiter pair, ...), or
        None for a control without one."""
        for slot in CONTROLS[self.control].slots:
            if not slot.dim:
                return self.line(slot.role)
        return None

    @property
    def channels(self) -> int:
        """Op-amp channels the circuit uses: the topology's, the output buffer's and the
        amplitude control's (an integrator)."""
        own = getattr(CONTROLS[self.control], "op_channels", None)
        extra = own(ln.role for ln in self.lines) if own is not None else 0
        return TOPOLOGIES[self.topology].channels + (1 if self.stage in BUFFERED else 0) + extra

    def to_circuit(self, catalog: Catalog) -> Circuit:
        """The circuit with exact catalog values (families must exist in ``catalog``)."""
        values, parts = {}, {}
        for ln in self.lines:
            kind, dim = ROLES[ln.role]
            if dim:
                values[ln.role] = ln.value
            else:
                parts[ln.role] = catalog.find(kind, ln.family)
        return make_circuit(self.topology, self.control, values, parts, stage=self.stage,
                            supply_kind=self.supply_kind)


def load_bom(path: str | Path, catalog: Catalog) -> Bom:
    """Read a BOM file (``.csv`` or YAML) and check it against ``catalog``."""
    text = read_text(path, BomError)
    return parse_bom(text, str(path), catalog)


def parse_bom(text: str, source: str, catalog: Catalog) -> Bom:
    if source.lower().endswith(".csv"):
        return _parse_csv(text, source, catalog)
    root = Fields(parse_yaml(text, source, BomError), source, BomError,
                  allowed=("topology", "control", "supply", "stage", "parts", "name", "verdict", "note"))
    topology = root.text("topology", choices=tuple(TOPOLOGIES), default=_DEFAULT_TOPOLOGY)
    control = root.text("control", choices=tuple(CONTROLS), default="") or None
    supply = root.text("supply", choices=SUPPLY_KINDS, default="dual")
    stage = root.text("stage", choices=STAGES, default="none")
    recs = root.records("parts", ("ref", "role", "family", "value", "quantity", "description", "cost", "maker",
                                  "maker_part"))
    if not recs:
        raise root.error("parts", "must list the parts (ref, role, family, value)")
    lines = []
    for rec in recs:
        role = rec.text("role", choices=tuple(ROLES))
        kind, dim = ROLES[role]
        family = rec.text("family")
        _check_family(catalog, kind, family, lambda m: rec.error("family", m))
        value = rec.quantity("value", dim, positive=True) if dim else 0.0
        if dim:
            _check_value(catalog.find(kind, family), dim, value, rec.node.items["value"][1].text,
                         lambda m: rec.error("value", m))
        lines.append(BomLine(rec.text("ref", default=DESIGNATORS[role]), role, family, value))
    where = {key: root.line_of(key) for key in ("topology", "supply", "stage", "parts")}
    bom = _complete(_shaped(tuple(lines), supply, stage, topology, control), lambda m: root.error("parts", m))
    return _located(bom, source, where)


def _located(bom: Bom, source: str, where: dict) -> Bom:
    return Bom(bom.lines, bom.supply_kind, bom.stage, bom.topology, bom.control, source, where)


def _check_value(fam, dim: str, value: float, text: str, fail) -> None:
    """Refuse a value outside its family's range or off its series, with the values it
    could have meant (a bare '47' is 47 F or 47 ohm: the prefixes that land in range)."""
    lo, hi = (fam.min_ohm, fam.max_ohm) if dim == "resistance" else (fam.min_f, fam.max_f)
    shown = units.format_quantity(value, dim)
    if not lo * (1 - 1e-9) <= value <= hi * (1 + 1e-9):
        hint = ""
        bare = text.strip()
        if bare.replace(".", "", 1).isdigit():
            near = [f"'{bare}{p}'" for p in ("p", "n", "u", "m", "k", "M", "G")
                    if _parses_within(f"{bare}{p}", dim, lo, hi)]
            hint = f"; a bare number is in {units.unit_symbol(dim)}: did you mean {' or '.join(near)}?" if near else ""
        raise fail(f"{shown} is outside the range of family {fam.id} ({units.format_quantity(lo, dim)} .. "
                   f"{units.format_quantity(hi, dim)}){hint}")
    if not series.is_preferred(fam.series, value):
        below, above = series.neighbours(fam.series, value)
        raise fail(f"{shown} is off the {fam.series} series of family {fam.id}; the nearest values are "
                   f"{units.format_quantity(below, dim)} and {units.format_quantity(above, dim)}")


def _parses_within(text: str, dim: str, lo: float, hi: float) -> bool:
    try:
        return lo <= units.parse_quantity(text, dim) <= hi
    except InputError:
        return False


def _shaped(lines: tuple[BomLine, ...], supply: str, stage: str, topology: str, control: str | None) -> Bom:
    """The BOM with its control named (inferred from the roles when not given) and its
    lines in the circuit's slot order, whatever order the file lists them in (so the
    seeded Monte Carlo draws the same builds for the same parts)."""
    if control is None:
        control = control_for_roles(topology, (ln.role for ln in lines))
    order = {role: i for i, role in enumerate(all_slots())}
    return Bom(tuple(sorted(lines, key=lambda ln: order[ln.role])), supply, stage, topology, control)


def _check_family(catalog: Catalog, kind: str, family: str, fail) -> None:
    if catalog.find(kind, family) is None:
        raise fail(f"names unknown {kind[:-1]} family '{family}'" + did_you_mean(family, catalog.ids(kind)))


def _parse_csv(text: str, source: str, catalog: Catalog) -> Bom:
    meta = {"supply": "dual", "stage": "none", "topology": _DEFAULT_TOPOLOGY, "control": ""}
    meta_lines: dict[str, int] = {}  # the shape lines the file has, and where
    rows = []
    for lineno, raw in enumerate(text.splitlines(), start=1):
        stripped = raw.strip()
        if not stripped:
            continue
        if stripped.startswith("#"):
            key, _, val = stripped[1:].partition(":")
            if key.strip() in meta:
                meta[key.strip()] = val.strip()
                meta_lines[key.strip()] = lineno
            continue
        rows.append((lineno, raw))
    if not rows:
        raise BomError("is empty; expected a header 'ref,role,family,value'", source=source, line=1)
    if meta["supply"] not in SUPPLY_KINDS or meta["stage"] not in STAGES:
        raise BomError(f"'# supply:' must be dual or single and '# stage:' one of {', '.join(STAGES)}",
                       source=source, line=1)
    if meta["topology"] not in TOPOLOGIES or (meta["control"] and meta["control"] not in CONTROLS):
        raise BomError(f"'# topology:' must be one of {', '.join(TOPOLOGIES)} and '# control:' one of "
                       f"{', '.join(CONTROLS)}", source=source, line=1)
    reader = read_csv_rows(rows, source, BomError)
    # the purchasing form (bom_to_purchase_csv) names its columns 'designators' and 'roles'
    aliases = {"designator": "ref", "designators": "ref", "roles": "role"}
    header = [aliases.get(h.strip().lower(), h.strip().lower()) for h in reader[0]]
    for col in ("ref", "role", "family", "value"):
        if col not in header:
            raise BomError(f"missing column '{col}'", source=source, line=rows[0][0])
    idx = {h: i for i, h in enumerate(header)}
    lines, channels, described = [], 1, None   # described: the output stage the op-amp's line names
    for (lineno, _), cells in zip(rows[1:], reader[1:]):
        get = lambda name: cells[idx[name]].strip() if idx[name] < len(cells) else ""  # noqa: E731

        def fail(message, col):
            return BomError(message, source=source, line=lineno, column=idx[col] + 1, field=col)

        roles = [r.strip() for r in get("role").split(",")]
        refs = [r.strip() for r in get("ref").split(",") if r.strip()]
        for role in roles:
            if role not in ROLES:
                raise fail(f"unknown role '{role}'; expected one of {', '.join(ROLES)}" + did_you_mean(role, ROLES),
                           "role")
        if len(roles) > 1 and len(refs) != len(roles):
            raise fail(f"lists {len(refs)} designator(s) for {len(roles)} roles; expected one per role", "ref")
        kind, dim = ROLES[roles[0]]
        if kind == "opamps":
            channels = max(len(refs), 1)  # the op-amp's designators are the channels the circuit uses
            said = re.search(r"output stage: ([a-z-]+)", get("description")) if "description" in idx else None
            described = said.group(1) if said and said.group(1) in STAGES else described
        _check_family(catalog, kind, get("family"), lambda m: fail(m, "family"))
        value = 0.0
        if dim:
            try:
                value = units.parse_quantity(get("value"), dim)
            except InputError as exc:
                raise fail(exc.message, "value") from None
            if value <= 0:
                raise fail("must be > 0", "value")
            _check_value(catalog.find(kind, get("family")), dim, value, get("value"), lambda m: fail(m, "value"))
        if len(roles) == 1:
            refs = [",".join(refs) if refs and (len(refs) == 1 or kind == "limiters") else DESIGNATORS[roles[0]]]
        for ref, role in zip(refs, roles):
            if ROLES[role] != (kind, dim):
                raise fail(f"mixes roles of different kinds ({roles[0]}, {role}) on one line", "role")
            lines.append(BomLine(ref, role, get("family"), value))
    if "topology" not in meta_lines:   # the purchasing form: the topology whose own parts it lists
        roles = {ln.role for ln in lines}
        meta["topology"] = next((t for t, topo in TOPOLOGIES.items() if {s.role for s in topo.slots} & roles),
                                meta["topology"])
    supply, stage = _shape_of(lines, meta["topology"], channels, meta["control"] or None)
    meta["supply"] = meta["supply"] if "supply" in meta_lines else supply
    meta["stage"] = meta["stage"] if "stage" in meta_lines else (described or stage)
    bom = _complete(_shaped(tuple(lines), meta["supply"], meta["stage"], meta["topology"], meta["control"] or None),
                    lambda m: BomError(m, source=source, line=rows[0][0]))
    return _located(bom, source, {key: meta_lines.get(key, 1) for key in ("topology", "supply", "stage")}
                    | {"parts": rows[0][0]})


def _shape_of(lines: list[BomLine], topology: str, channels: int, control: str | None = None) -> tuple[str, str]:
    """(supply kind, output stage) of a CSV without '# supply:' and '# stage:' lines: a
    single supply when it lists the bias parts, a buffered stage when the op-amp has one
    channel more than the topology and the amplitude control use, a gain stage or
    attenuator when it lists the stage resistors."""
    roles = {ln.role for ln in lines}
    supply = "single" if set(BIAS_ROLES) <= roles else "dual"
    own = getattr(CONTROLS[control or control_for_roles(topology, roles)], "op_channels", None)
    buffered = channels > TOPOLOGIES[topology].channels + (own(roles) if own else 0)
    if set(STAGE_ROLES) & roles:
        return supply, "gain" if buffered else "attenuator"
    return supply, "follower" if buffered else "none"


def _complete(bom: Bom, fail) -> Bom:
    """Refuse a BOM with a missing or doubled slot, or parts its circuit does not use."""
    roles = [ln.role for ln in bom.lines]
    for role in set(roles):
        if roles.count(role) > 1:
            raise fail(f"lists role '{role}' twice")
    shape = slots_for(bom.topology, bom.control, bom.stage, bom.supply_kind)
    need = [s.role for s in shape if not s.optional]
    missing = [r for r in need if r not in roles]
    if missing:
        raise fail(f"misses role(s) {', '.join(missing)} (supply {bom.supply_kind}, stage {bom.stage})")
    known = {s.role for s in shape}
    for role in roles:
        if role not in known:
            slot = all_slots()[role]
            raise fail(f"has '{role}' ({slot.description}), which a {bom.topology} circuit with control "
                       f"{bom.control}, stage {bom.stage} and a {bom.supply_kind} supply does not use")
    if bom.supply_kind == "single" and abs(bom.value("bias_top") - bom.value("bias_bottom")) > 1e-9 * bom.value("bias_top"):
        raise fail("needs equal bias_top and bias_bottom resistors (mid-rail bias)")
    return bom


def check_bom_fits(bom: Bom, spec: Spec) -> None:
    """Refuse a BOM built for another circuit than the spec asks for: another topology
    (any, for topology: auto) or another supply kind (a dual-supply BOM has no bias network for a single supply,
    and its sine would be centred on 0 V)."""
    for key, have, want, what in (("topology", bom.topology, spec.topology, "topology"),
                                  ("supply", bom.supply_kind, spec.supply.kind, "supply kind")):
        if have != want and not (key == "topology" and want == "auto"):   # auto: any topology
            raise BomError(f"is {have}, but {spec.source} asks for {what} {want}; design or edit the BOM "
                           f"for a {want} {'supply' if key == 'supply' else 'circuit'}",
                           source=bom.source or None, line=bom.where.get(key), field=key)


def bom_from_circuit(c: Circuit, families: dict[str, str]) -> Bom:
    """A BOM for circuit ``c``; ``families`` maps each role to its family id."""
    lines = []
    for slot in slots_for(c.topology.name, c.control.name, c.stage, c.supply_kind):
        if slot.role not in families:
            continue
        lines.append(BomLine(slot.designator, slot.role, families[slot.role], c.value(slot.role)))
    return Bom(tuple(lines), c.supply_kind, c.stage, c.topology.name, c.control.name)


def value_text(line: BomLine) -> str:
    """The line's value in the RKM code of IEC 60062 ('4k7', '2n2'); empty for active parts."""
    dim = ROLES[line.role][1]
    return units.format_rkm(line.value, dim) if dim else ""


def bom_to_yaml(bom: Bom, *, header: str = "", catalog: Catalog | None = None) -> str:
    """The YAML form (see module docstring); ``header`` goes in as comment lines; with
    ``catalog``, each part also carries its maker and maker's part number when the
    catalog names them (a ``{value}`` in the part number becomes the RKM value)."""
    out = [f"# {h}" for h in header.splitlines()] if header else []
    out += [f"topology: {bom.topology}", f"control: {bom.control}", f"supply: {bom.supply_kind}",
            f"stage: {bom.stage}", "parts:"]
    for ln in bom.lines:
        value = value_text(ln)
        tail = f", value: {value}" if value else ""
        fam = catalog.find(ROLES[ln.role][0], ln.family) if catalog is not None else None
        if fam is not None and fam.maker:
            tail += f", maker: {_quoted(fam.maker)}"
        if fam is not None and fam.maker_part:
            tail += f", maker_part: {_quoted(maker_part(fam, value))}"
        out.append(f"  - {{ref: '{ln.ref}', role: {ln.role}, family: {ln.family}{tail}}}")
    return "\n".join(out) + "\n"


def _quoted(text: str) -> str:
    """``text`` as a single-quoted YAML scalar."""
    return "'" + text.replace("'", "''") + "'"


def bom_to_csv(bom: Bom) -> str:
    """The CSV form (see module docstring)."""
    buf = io.StringIO()
    buf.write(f"# topology: {bom.topology}\n# control: {bom.control}\n# supply: {bom.supply_kind}\n"
              f"# stage: {bom.stage}\n")
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(["ref", "role", "family", "value"])
    for ln in bom.lines:
        w.writerow([ln.ref, ln.role, ln.family, value_text(ln)])
    return buf.getvalue()


def part_data(bom: Bom, catalog: Catalog) -> tuple[dict[str, float], dict[str, tuple[float, float]], dict[str, float]]:
    """Per role: value tolerance (fraction), tempco (nominal, spread) in 1/K, and power
    rating (W, resistors) from each line's catalog family. A class-2 capacitor's band
    is spread evenly over its band's temperature span as a tempco bound."""
    tol: dict[str, float] = {}
    tc: dict[str, tuple[float, float]] = {}
    rating: dict[str, float] = {}
    for ln in bom.lines:
        kind = ROLES[ln.role][0]
        fam = catalog.find(kind, ln.family)
        if kind == "resistors":
            tol[ln.role] = fam.tolerance_frac
            tc[ln.role] = (0.0, fam.tempco_per_k)
            rating[ln.role] = fam.power_w
        elif kind == "capacitors":
            tol[ln.role] = fam.tolerance_frac
            if fam.has_band:
                tc[ln.role] = (0.0, fam.band_frac / (0.5 * (fam.band_max_k - fam.band_min_k)))
            else:
                tc[ln.role] = (fam.tempco_per_k, fam.tempco_spread_per_k)
    return tol, tc, rating
