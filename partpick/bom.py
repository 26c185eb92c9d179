"""Bills of materials: the parts of one candidate, read and written in partpick's own
YAML and CSV forms, and turned into a circuit for the physics.

YAML form::

    topology: wien-bridge
    supply: dual            # dual | single
    stage: none             # none | follower | gain | attenuator
    parts:
      - {ref: R1, role: rs, family: mf-1, value: 10k}
      - {ref: U1, role: opamp, family: oa-jfet-4m}

CSV form: a header ``ref,role,family,value`` (more columns are ignored) and comment
lines ``# supply: dual`` / ``# stage: none`` before it.
"""

from __future__ import annotations

import csv
import io
from dataclasses import dataclass
from pathlib import Path

from partpick import units
from partpick.catalog import Catalog
from partpick.errors import InputError
from partpick.topologies.wien import DESIGNATORS, STAGES, WienCircuit
from partpick.yamlsrc import Fields, did_you_mean, parse_yaml, read_text

__all__ = ["ROLES", "BomLine", "Bom", "load_bom", "parse_bom", "bom_to_yaml", "bom_to_csv", "bom_from_circuit",
           "bom_to_purchase_csv", "PURCHASE_COLUMNS"]

# role -> (kind of family, value dimension or None)
ROLES = {
    "rs": ("resistors", "resistance"), "cs": ("capacitors", "capacitance"),
    "rp": ("resistors", "resistance"), "cp": ("capacitors", "capacitance"),
    "rg": ("resistors", "resistance"), "rf": ("resistors", "resistance"),
    "rd": ("resistors", "resistance"), "limiter": ("limiters", None), "opamp": ("opamps", None),
    "stage_ra": ("resistors", "resistance"), "stage_rb": ("resistors", "resistance"),
    "bias_top": ("resistors", "resistance"), "bias_bottom": ("resistors", "resistance"),
    "bias_c": ("capacitors", "capacitance"), "coupling_c": ("capacitors", "capacitance"),
}
_REQUIRED = ("rs", "cs", "rp", "cp", "rg", "rf", "opamp")


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
    """A complete candidate: its lines, the supply kind and the output stage."""

    lines: tuple[BomLine, ...]
    supply_kind: str
    stage: str
    topology: str = "wien-bridge"

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

    def to_circuit(self, catalog: Catalog) -> WienCircuit:
        """The circuit with exact catalog values (families must exist in ``catalog``)."""
        op = catalog.find("opamps", self.line("opamp").family)
        lim_line = self.line("limiter")
        lim = catalog.find("limiters", lim_line.family) if lim_line else None
        v = self.value
        return WienCircuit(
            rs_ohm=v("rs"), cs_f=v("cs"), rp_ohm=v("rp"), cp_f=v("cp"), rg_ohm=v("rg"), rf_ohm=v("rf"),
            opamp=op, limiter=lim, rd_ohm=v("rd"), stage=self.stage,
            stage_ra_ohm=v("stage_ra"), stage_rb_ohm=v("stage_rb"), supply_kind=self.supply_kind,
            bias_r_ohm=v("bias_top"), bias_c_f=v("bias_c"), coupling_c_f=v("coupling_c"),
        )


def load_bom(path: str | Path, catalog: Catalog) -> Bom:
    """Read a BOM file (``.csv`` or YAML) and check it against ``catalog``."""
    text = read_text(path, BomError)
    return parse_bom(text, str(path), catalog)


def parse_bom(text: str, source: str, catalog: Catalog) -> Bom:
    if source.lower().endswith(".csv"):
        return _parse_csv(text, source, catalog)
    root = Fields(parse_yaml(text, source, BomError), source, BomError,
                  allowed=("topology", "supply", "stage", "parts", "name", "verdict", "note"))
    root.text("topology", choices=("wien-bridge",), default="wien-bridge")
    supply = root.text("supply", choices=("dual", "single"), default="dual")
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
    return _complete(Bom(tuple(lines), supply, stage), lambda m: root.error("parts", m))


def _check_family(catalog: Catalog, kind: str, family: str, fail) -> None:
    if catalog.find(kind, family) is None:
        raise fail(f"names unknown {kind[:-1]} family '{family}'" + did_you_mean(family, catalog.ids(kind)))


def _parse_csv(text: str, source: str, catalog: Catalog) -> Bom:
    meta = {"supply": "dual", "stage": "none"}
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
    if meta["supply"] not in ("dual", "single") or meta["stage"] not in STAGES:
        raise BomError(f"'# supply:' must be dual or single and '# stage:' one of {', '.join(STAGES)}",
                       source=source, line=1)
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
    return _complete(Bom(tuple(lines), meta["supply"], meta["stage"]),
                     lambda m: BomError(m, source=source, line=rows[0][0]))


def _complete(bom: Bom, fail) -> Bom:
    """Refuse a BOM with a missing or doubled slot, or parts its stage/supply do not use."""
    roles = [ln.role for ln in bom.lines]
    for role in set(roles):
        if roles.count(role) > 1:
            raise fail(f"lists role '{role}' twice")
    need = list(_REQUIRED)
    if bom.stage in ("gain", "attenuator"):
        need += ["stage_ra", "stage_rb"]
    if bom.supply_kind == "single":
        need += ["bias_top", "bias_bottom", "bias_c", "coupling_c"]
    missing = [r for r in need if r not in roles]
    if missing:
        raise fail(f"misses role(s) {', '.join(missing)} (supply {bom.supply_kind}, stage {bom.stage})")
    if "rd" in roles and "limiter" not in roles:
        raise fail("has 'rd' (in series with the limiter) but no limiter")
    if bom.supply_kind == "single" and abs(bom.value("bias_top") - bom.value("bias_bottom")) > 1e-9 * bom.value("bias_top"):
        raise fail("needs equal bias_top and bias_bottom resistors (mid-rail bias)")
    return bom


def bom_from_circuit(c: WienCircuit, families: dict[str, str]) -> Bom:
    """A BOM for circuit ``c``; ``families`` maps each role to its family id."""
    vals = {"rs": c.rs_ohm, "cs": c.cs_f, "rp": c.rp_ohm, "cp": c.cp_f, "rg": c.rg_ohm, "rf": c.rf_ohm,
            "rd": c.rd_ohm, "stage_ra": c.stage_ra_ohm, "stage_rb": c.stage_rb_ohm, "bias_top": c.bias_r_ohm,
            "bias_bottom": c.bias_r_ohm, "bias_c": c.bias_c_f, "coupling_c": c.coupling_c_f}
    lines = []
    for role in ROLES:
        if role not in families:
            continue
        value = vals.get(role, 0.0)
        lines.append(BomLine(DESIGNATORS[role], role, families[role], value))
    return Bom(tuple(lines), c.supply_kind, c.stage)


def _value_text(line: BomLine) -> str:
    dim = ROLES[line.role][1]
    return units.format_rkm(line.value, dim) if dim else ""


def bom_to_yaml(bom: Bom, *, header: str = "") -> str:
    """The YAML form (see module docstring); ``header`` goes in as comment lines."""
    out = [f"# {h}" for h in header.splitlines()] if header else []
    out += [f"topology: {bom.topology}", f"supply: {bom.supply_kind}", f"stage: {bom.stage}", "parts:"]
    for ln in bom.lines:
        value = _value_text(ln)
        tail = f", value: {value}" if value else ""
        out.append(f"  - {{ref: '{ln.ref}', role: {ln.role}, family: {ln.family}{tail}}}")
    return "\n".join(out) + "\n"


def bom_to_csv(bom: Bom) -> str:
    """The CSV form (see module docstring)."""
    buf = io.StringIO()
    buf.write(f"# supply: {bom.supply_kind}\n# stage: {bom.stage}\n")
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(["ref", "role", "family", "value"])
    for ln in bom.lines:
        w.writerow([ln.ref, ln.role, ln.family, _value_text(ln)])
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


PURCHASE_COLUMNS = ("designator", "role", "quantity", "value", "description", "family", "tolerance", "tempco",
                    "rating", "package", "unit_cost", "line_cost", "stock")


def bom_to_purchase_csv(bom: Bom, catalog: Catalog, *, stock=None, builds: int = 1) -> str:
    """The CSV a purchasing or assembly flow expects: one row per designator, with the
    part's description, tolerance, tempco, rating and package from its catalog family,
    unit cost, the cost of its distinct BOM line (on the line's first row; parts of one
    value across slots share a line) and whether the shelf holds enough for ``builds``
    boards. `partpick check` reads it back (designator, role, family, value)."""
    from partpick.search import _line_price, _pricer

    price = _pricer(catalog, stock)
    use = bom.uses()
    buf = io.StringIO()
    buf.write(f"# supply: {bom.supply_kind}\n# stage: {bom.stage}\n")
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(PURCHASE_COLUMNS)
    seen = set()
    for ln in bom.lines:
        kind, dim = ROLES[ln.role]
        fam = catalog.find(kind, ln.family)
        qty = fam.parts if kind == "limiters" else 1
        if kind == "resistors":
            tol, tc, rating = f"{fam.tolerance_frac * 100:g} %", f"{fam.tempco_per_k * 1e6:g} ppm/K", \
                units.format_quantity(fam.power_w, "power")
        elif kind == "capacitors":
            tol = f"{fam.tolerance_frac * 100:g} %"
            tc = (f"+/-{fam.band_frac * 100:g} % band" if fam.has_band
                  else f"{fam.tempco_per_k * 1e6:g} +/- {fam.tempco_spread_per_k * 1e6:g} ppm/K")
            rating = units.format_quantity(fam.voltage_v, "voltage")
        elif kind == "opamps":
            tol, tc, rating = "", "", f"{fam.supply_min_v:g}..{fam.supply_max_v:g} V"
        else:
            tol, tc, rating = "", "", ""
        key = (ln.family, ln.value)
        line_cost = ""
        if key not in seen:
            seen.add(key)
            line_cost = f"{price(*key) * use[key] + _line_price(catalog, key, stock):.4f}"
        on_shelf = ""
        if stock is not None:
            on_shelf = "yes" if stock.quantity(*key) >= use[key] * builds else "no"
        w.writerow([ln.ref, ln.role, qty, _value_text(ln) if dim else "", fam.description, ln.family, tol, tc,
                    rating, fam.package, f"{price(*key) / (qty if kind == 'limiters' else 1):.4f}", line_cost,
                    on_shelf])
    return buf.getvalue()
