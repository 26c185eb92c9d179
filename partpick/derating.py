"""Derating rules: how much of a part's rating a design may use, by name.

Each rule has a name (the key in a spec's ``derating:`` section or a rules file), a
default, the unit it is written in and where the default comes from. A spec sets them
inline or names a YAML file of house rules shared by many specs::

    derating: {resistor_power: 50 %, thd_share: 70 %}
    derating: ../house-rules.yaml        # a file holding 'derating: {...}'

``verify`` judges the resistor, package, output-current and bias-drop rules; the search
aims with the THD share, and plans with the output-current share and the bias drop what
verify then judges (a design that breaks either, even one a brute-force search finds,
fails check). The op-amp package limit itself comes from the catalog's
``packages`` section (junction-to-ambient thermal resistance and maximum junction
temperature, see :mod:`partpick.catalog`); ``package_power`` is the share of it a design
may use, and ``unknown_package`` the limit for a package the catalog does not describe.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

from partpick.errors import SpecError
from partpick.yamlsrc import Fields, Mapping, read_yaml

__all__ = ["Rule", "RULES", "Derating", "read_derating", "package_limit", "bias_r_max"]


@dataclass(frozen=True, slots=True)
class Rule:
    """One named rule: key, default (SI: a fraction or W), its dimension, what it
    limits and the source of the default."""

    key: str
    default: float
    dim: str
    meaning: str
    source: str


RULES = (
    Rule("resistor_power", 0.5, "fraction", "share of a resistor's power rating it may dissipate",
         "common practice, no published source"),
    Rule("package_power", 1.0, "fraction",
         "share of the op-amp package's limit (max junction - max ambient) / theta_ja it may dissipate",
         "the junction-temperature rule of any thermal-design text; the share is house practice"),
    Rule("unknown_package", 0.5, "power", "op-amp package limit when the catalog gives no thermal data",
         "common practice for SOIC-8 class packages at 70 degC ambient, no published source"),
    Rule("thd_share", 1.0, "fraction",
         "share of distortion.max_thd a design's nominal THD may take (by the search's estimate; the Monte "
         "Carlo yield judges the spread)",
         "partpick's choice, no published source"),
    Rule("output_current", 0.6, "fraction",
         "share of the op-amp's rated output current a design may draw (the rest is peaks and spread)",
         "common practice, no published source"),
    Rule("bias_drop", 0.15, "voltage",
         "DC drop the op-amp's input bias current may make across a frequency-setting resistor (the oscillator's "
         "output carries it times the loop's DC gain, about 3x for a Wien bridge, as an offset: set it lower where "
         "the load must see no DC, a transducer winding on a dual supply)",
         "partpick's choice, no published source: brute-force designs up to 130 mV ran as predicted in ngspice"),
)
_BY_KEY = {r.key: r for r in RULES}


@dataclass(frozen=True, slots=True)
class Derating:
    """The rules in force (see module docstring); ``origin`` says, per rule key set away
    from its default, where it was set ('spec' or the rules file's path)."""

    resistor_power: float = 0.5
    package_power: float = 1.0
    unknown_package: float = 0.5
    thd_share: float = 1.0
    output_current: float = 0.6
    bias_drop: float = 0.15
    origin: tuple[tuple[str, str], ...] = ()

    def value(self, key: str) -> float:
        return getattr(self, key)

    def origin_of(self, key: str) -> str:
        return dict(self.origin).get(key, "default")


def read_derating(root: Fields, key: str, base: Path) -> Derating:
    """The ``derating`` field of a spec: a mapping of rule keys, or the path (relative to
    ``base``) of a YAML file holding one under ``derating:``. Shares must lie in
    (0, 100 %]; the unknown-package limit must be > 0 W, the bias drop > 0 V."""
    if not root.has(key):
        return Derating()
    node = root.node.items[key][1]
    if isinstance(node, Mapping):
        fields, origin = root.sub(key, tuple(_BY_KEY)), "spec"
    else:
        path = (base / root.text(key)).resolve()
        top = Fields(read_yaml(path, SpecError), str(path), SpecError, allowed=("derating", "description"))
        fields, origin = top.sub("derating", tuple(_BY_KEY)), str(path)
    values, where = {}, []
    for rule in RULES:
        if not fields.has(rule.key):
            continue
        v = fields.quantity(rule.key, rule.dim, positive=True)
        if rule.dim == "fraction" and v > 1.0:
            raise fields.error(rule.key, f"must be <= 100 % (got {v * 100:g} %)")
        values[rule.key] = v
        where.append((rule.key, origin))
    return Derating(**values, origin=tuple(where))


def package_limit(op, spec) -> tuple[float, str]:
    """(W, how it was found) the op-amp's package may dissipate at the spec's maximum
    ambient: derating.package_power x (max junction - max ambient) / theta_ja from the
    catalog's package data, or the derating.unknown_package limit without it."""
    d, t_amb, th = spec.derating, spec.temperature.max_k, op.thermal
    if th is None:
        return d.unknown_package, f"{d.unknown_package:.3g} W (no thermal data for package '{op.package}')"
    limit = d.package_power * th.limit_w(t_amb)
    return limit, (f"{op.package}: {d.package_power:.0%} x ({th.tj_max_k - 273.15:.4g} - {t_amb - 273.15:.4g} degC) / "
                   f"{th.theta_ja_k_per_w:.4g} K/W = {limit:.3g} W")


def bias_r_max(op, derating: Derating) -> float:
    """The largest frequency-setting resistor, ohm, op-amp ``op``'s input bias current
    (A) may flow through: the rule bias_drop (V) over the bias current, at most 1 Mohm
    (above it board leakage and the input capacitance start to count: common practice,
    no published source)."""
    return min(1e6, derating.bias_drop / op.input_bias_a) if op.input_bias_a > 0 else 1e6
