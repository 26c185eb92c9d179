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
``# control:``) before it.
"""

from __future__ import annotations

import csv
import io
from dataclasses import dataclass
from pathlib import Path

from partpick import units
from partpick.catalog import Catalog
from partpick.circuits import (CONTROLS, STAGES, SUPPLY_KINDS, TOPOLOGIES, Circuit, all_slots, control_for_roles,
                               designators, make_circuit, slots_for)
from partpick.circuits.periphery import BUFFERED
from partpick.errors import InputError
from partpick.yamlsrc import Fields, did_you_mean, parse_yaml, read_text

__all__ = ["ROLES", "BomLine", "Bom", "BomError", "load_bom", "parse_bom", "bom_to_yaml", "bom_to_csv",
           "bom_from_circuit", "part_data", "value_text"]

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
    recs = root.records("parts", ("ref", "role", "family", "value", "quantity", "description", "cost"))
    if not recs:
        raise root.error("parts", "must list the parts (ref, role, family, value)")
    lines = []
    for rec in recs:
        role = rec.text("role", choices=tuple(ROLES))
        kind, dim = ROLES[role]
        family = rec.text("family")
        _check_family(catalog, kind, family, lambda m: rec.error("family", m))
        value = rec.quantity("value", dim, positive=True) if dim else 0.0
        lines.append(BomLine(rec.text("ref", default=DESIGNATORS[role]), role, family, value))
    return _complete(_shaped(tuple(lines), supply, stage, topology, control), lambda m: root.error("parts", m))


def _shaped(lines: tuple[BomLine, ...], supply: str, stage: str, topology: str, control: str | None) -> Bom:
    """The BOM with its control named (inferred from the roles when not given)."""
    if control is None:
        control = control_for_roles(topology, (ln.role for ln in lines))
    return Bom(lines, supply, stage, topology, control)


def _check_family(catalog: Catalog, kind: str, family: str, fail) -> None:
    if catalog.find(kind, family) is None:
        raise fail(f"names unknown {kind[:-1]} family '{family}'" + did_you_mean(family, catalog.ids(kind)))


def _parse_csv(text: str, source: str, catalog: Catalog) -> Bom:
    meta = {"supply": "dual", "stage": "none", "topology": _DEFAULT_TOPOLOGY, "control": ""}
    rows = []
    for lineno, raw in enumerate(text.splitlines(), start=1):
        stripped = raw.strip()
        if not stripped:
            continue
        if stripped.startswith("#"):
            key, _, val = stripped[1:].partition(":")
            if key.strip() in meta:
                meta[key.strip()] = val.strip()
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
    reader = list(csv.reader(io.StringIO("\n".join(r for _, r in rows))))
    # the purchasing form (bom_to_purchase_csv) names the designator column 'designator'
    header = ["ref" if h.strip().lower() == "designator" else h.strip().lower() for h in reader[0]]
    for col in ("ref", "role", "family", "value"):
        if col not in header:
            raise BomError(f"missing column '{col}'", source=source, line=rows[0][0])
    idx = {h: i for i, h in enumerate(header)}
    lines = []
    for (lineno, _), cells in zip(rows[1:], reader[1:]):
        get = lambda name: cells[idx[name]].strip() if idx[name] < len(cells) else ""  # noqa: E731

        def fail(message, col):
            return BomError(message, source=source, line=lineno, column=idx[col] + 1, field=col)

        role = get("role")
        if role not in ROLES:
            raise fail(f"unknown role '{role}'; expected one of {', '.join(ROLES)}" + did_you_mean(role, ROLES), "role")
        kind, dim = ROLES[role]
        _check_family(catalog, kind, get("family"), lambda m: fail(m, "family"))
        value = 0.0
        if dim:
            try:
                value = units.parse_quantity(get("value"), dim)
            except InputError as exc:
                raise fail(exc.message, "value") from None
            if value <= 0:
                raise fail("must be > 0", "value")
        lines.append(BomLine(get("ref") or DESIGNATORS[role], role, get("family"), value))
    return _complete(_shaped(tuple(lines), meta["supply"], meta["stage"], meta["topology"], meta["control"] or None),
                     lambda m: BomError(m, source=source, line=rows[0][0]))


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


def bom_to_yaml(bom: Bom, *, header: str = "") -> str:
    """The YAML form (see module docstring); ``header`` goes in as comment lines."""
    out = [f"# {h}" for h in header.splitlines()] if header else []
    out += [f"topology: {bom.topology}", f"control: {bom.control}", f"supply: {bom.supply_kind}",
            f"stage: {bom.stage}", "parts:"]
    for ln in bom.lines:
        value = value_text(ln)
        tail = f", value: {value}" if value else ""
        out.append(f"  - {{ref: '{ln.ref}', role: {ln.role}, family: {ln.family}{tail}}}")
    return "\n".join(out) + "\n"


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
