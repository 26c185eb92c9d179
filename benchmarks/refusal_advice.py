"""Reading a refusal's advice and applying it to the spec, for the coverage benchmark's
check that every refusal message is right: relaxing the requirement it names to the
value it gives must make the spec design.

The parser is deliberately tolerant, and the one place to adapt when the wording of
refusals changes. It looks, in order, for:

1. ``relax <field> to <value>`` or ``raise <field> to <value>`` (any number of them, e.g. "... binds: ... is +/-0.84 %;
   relax frequency.tolerance to +/-1 %", or "or distortion.max_thd binds: ...; relax
   distortion.max_thd to 2 %"), each applied alone, and ``relax jointly <field> to
   <value> and <field> to <value>``, applied together (field ``joint``);
2. ``allow family <id>[, <id>]`` or ``allow <kind> <id>[, <id>]`` (added to the spec's list of that kind); advice that
   follows ``with families <id>, <id> allowed, the spec still does not design`` (or ``with <field> at
   <value>, ...``) is applied together with adding them (setting it);
3. failing both, ``<field> binds: ... (is|reaches|of) <number unit>`` (the older wording:
   "amplitude.target binds: the nearest amplitude at the load is 2.48 V peak
   (wanted 1.33..1.5 V)");
4. a bound, ``a <field> under <value> cannot design`` (or ``over``): beyond it nothing designs,
   so every other piece of advice is applied together with setting it (alone only where the
   message gives nothing else).

``<field>`` is a dotted spec path (``frequency.tolerance``, ``yield.min``,
``parts.capacitors``); ``<value>`` is taken up to ``;``, ``,`` or ``(`` and written
into the spec as spec text ("+/-1 %" -> "1 %", "2.48 V peak" -> "2.48 Vpk", a family
list "[c0g-1, pp-2]" as a YAML list).

Run: python benchmarks/refusal_advice.py "MESSAGE"   (prints what it parses)
"""

from __future__ import annotations

import re
import sys
from dataclasses import dataclass

import yaml

__all__ = ["Advice", "parse_refusal", "apply_advice", "spec_value"]

FIELD = r"(?P<field>[a-z_]+(?:\.[a-z_]+)+)"
VALUE = r"(?P<value>[^;,(\n]+?)"
END = r"(?=\s*(?:[;,(\n]|$|\.\s|\.$|\bor\b))"
RELAX = re.compile(rf"(?:relax|raise|lower)\s+{FIELD}\s+to\s+{VALUE}{END}")
JOINT = re.compile(r"relax\s+jointly\s+(?P<items>[^\n]+)")
ITEM = re.compile(rf"{FIELD}\s+to\s+(?P<value>.+?)(?=\s+and\s+[a-z_]+\.|\s*$)")
NUMBER = r"(?P<value>(?:\+/-|±)?\s*-?\d[\d.]*(?:e[+-]?\d+)?\s*(?:[a-zA-Zµ%]+(?:\s*peak)?)?)"
BINDS = re.compile(rf"{FIELD}\s+binds:[^;]*?\b(?:is|reaches|of)\s+{NUMBER}")
ALLOW = re.compile(r"allow\s+(?:the\s+)?(?:famil(?:y|ies)|resistors|capacitors|opamps|limiters)\s+(?P<value>[A-Za-z0-9_.\-]+(?:\s*(?:,|and|or)\s*[A-Za-z0-9_.\-]+)*)")
BOUND = re.compile(rf"\ban?\s+{FIELD}\s+(?:under|over)\s+(?P<value>[^(;\n]+?)\s+cannot design")
OPENED = re.compile(r"with\s+(?:famil(?:y|ies)\s+(?P<value>[A-Za-z0-9_.\-]+(?:\s*,\s*[A-Za-z0-9_.\-]+)*)\s+allowed"
                    rf"|{FIELD}\s+at\s+(?P<at>[^,\n]+)),\s+the spec still does not design")
# numbers with a unit the spec reads; "V peak" is how older refusals print a peak voltage
_UNIT_WORDS = ((re.compile(r"\bV\s*peak\b"), "Vpk"), (re.compile(r"\bV\s*rms\b"), "Vrms"),
               (re.compile(r"\bV\s*pp\b"), "Vpp"))


@dataclass(frozen=True, slots=True)
class Advice:
    """One way out a refusal names: set spec field ``field`` to ``value`` (spec text)."""

    field: str
    value: str
    how: str          # 'relax' or 'allow' (the advice itself), 'binds' (the value a design reaches)


def spec_value(text: str) -> str:
    """A value as a refusal prints it, as the spec writes it."""
    v = text.strip().rstrip(".").strip()
    v = re.sub(r"^\+/-\s*", "", v)
    v = v.replace("±", "")
    for pat, unit in _UNIT_WORDS:
        v = pat.sub(unit, v)
    return v.strip()


def parse_refusal(message: str) -> list[Advice]:
    """Every piece of advice in a refusal message (empty when it gives none). A message
    printed on one line with its line breaks escaped ('\\n') reads as its lines. The
    advice after "with families <ids> allowed" holds with them: each piece is applied
    together with adding them (field ``joint``); so is every piece with a bound the
    message states."""
    message = message.replace("\\n", "\n")
    bounds = [f"{m['field']}={spec_value(m['value'])}" for m in BOUND.finditer(message)]
    advice = _parse(message)
    if not bounds or not advice:
        return advice or [Advice(*b.split("=", 1), "relax") for b in bounds]
    return _unique([Advice("joint", ";".join(bounds + [a.value if a.field == "joint" else f"{a.field}={a.value}"]),
                           a.how) for a in advice])


def _parse(message: str) -> list[Advice]:
    opened = OPENED.search(message)
    if opened is not None:
        add = ("parts.add=" + ",".join(re.split(r"\s*,\s*", opened["value"].strip())) if opened["value"] else
               f"{opened['field']}={spec_value(opened['at'])}")
        inner = _parse(message[opened.end():])
        return _unique(_parse(message[:opened.start()])
                       + [Advice("joint", ";".join([add, a.value if a.field == "joint" else f"{a.field}={a.value}"]),
                                 a.how) for a in inner])
    out = [Advice(m["field"], spec_value(m["value"]), "relax") for m in RELAX.finditer(message)]
    # a joint relaxation: its parts as field=value;field=value, applied together
    out += [Advice("joint", ";".join(f"{i['field']}={spec_value(i['value'])}" for i in ITEM.finditer(m["items"])),
                   "relax") for m in JOINT.finditer(message)]
    out += [Advice("parts.add", ",".join(re.split(r"\s*(?:,|and|or)\s*", m["value"].strip())), "allow")
            for m in ALLOW.finditer(message)]
    if not out:
        out = [Advice(m["field"], spec_value(m["value"]), "binds") for m in BINDS.finditer(message)]
    return _unique(out)


def _unique(advice: list[Advice]) -> list[Advice]:
    seen, unique = set(), []
    for a in advice:
        if (a.field, a.value) not in seen:
            seen.add((a.field, a.value))
            unique.append(a)
    return unique


def _as_yaml_value(value: str):
    if value.startswith("[") and value.endswith("]"):
        return [x.strip() for x in value[1:-1].split(",") if x.strip()]
    return value


def apply_advice(spec_text: str, advice: Advice, kind_of=None) -> str:
    """The spec text with ``advice.field`` set to ``advice.value`` (nested mappings
    created as needed); ``parts.add`` adds the named families to their kind's list
    (``kind_of(family id)`` -> 'resistors', ...; the shipped catalog's by default)."""
    if advice.field == "joint":
        for part in advice.value.split(";"):
            field, value = part.split("=", 1)
            spec_text = apply_advice(spec_text, Advice(field, value, advice.how), kind_of)
        return spec_text
    data = yaml.safe_load(spec_text) or {}
    if advice.field == "parts.add":
        if kind_of is None:
            from partpick.catalog import load_catalog
            kind_of = load_catalog().kind_of
        parts = data.setdefault("parts", {})
        for fam in advice.value.split(","):
            kind = kind_of(fam)
            if kind is None:
                raise ValueError(f"unknown family {fam!r}")
            if isinstance(parts.get(kind), list) and fam not in parts[kind]:
                parts[kind].append(fam)
        return yaml.safe_dump(data, sort_keys=False, default_flow_style=None, allow_unicode=True)
    node = data
    keys = advice.field.split(".")
    for k in keys[:-1]:
        if not isinstance(node.get(k), dict):
            node[k] = {}
        node = node[k]
    node[keys[-1]] = _as_yaml_value(advice.value)
    return yaml.safe_dump(data, sort_keys=False, default_flow_style=None, allow_unicode=True)


if __name__ == "__main__":
    for a in parse_refusal(" ".join(sys.argv[1:])):
        print(a)
