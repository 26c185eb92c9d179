"""What every circuit plug-in shares: slots, the circuit record, operating conditions,
and the two protocols a plug-in implements.

A candidate oscillator is a **topology** (the frequency-setting network and its
amplifier: Wien bridge, ...) with an **amplitude control** at one of the topology's
control ports (a diode limiter, ...) and the shared **periphery** (the op-amp type, the
output stage, the single-supply bias). Each declares its part slots; a circuit holds the
values by role (ohm, F) and the catalog records of its active parts. The physics sees
none of this: a topology turns a circuit into a loop at the control branch and a
netlist (:mod:`partpick.physics.loop`, :mod:`partpick.physics.netlist`), and the
control gives the branch.
"""

from __future__ import annotations

import math
from collections.abc import Iterator, Mapping
from dataclasses import dataclass, field
from typing import Any, Protocol

import numpy as np

__all__ = ["Slot", "Values", "Circuit", "Conditions", "Core", "Topology", "AmplitudeControl", "DIMS", "STAGES",
           "SUPPLY_KINDS"]

STAGES = ("none", "follower", "gain", "attenuator", "buffered-attenuator")
SUPPLY_KINDS = ("dual", "single")
DIMS = {"resistors": "resistance", "capacitors": "capacitance"}


@dataclass(frozen=True, slots=True)
class Slot:
    """One part position: role (its name in BOMs, 'rs'), the catalog kind it is filled
    from, its reference designator, a description, and whether a circuit may leave it
    out (an optional resistor is absent when its value is 0)."""

    role: str
    kind: str
    designator: str
    description: str
    optional: bool = False

    @property
    def dim(self) -> str | None:
        """The value's dimension ('resistance', 'capacitance') or None for active parts."""
        return DIMS.get(self.kind)


class Values(Mapping):
    """An immutable, hashable mapping role -> value (ohm, F, or a catalog record)."""

    __slots__ = ("_d", "_h")

    def __init__(self, items: Mapping | tuple = ()) -> None:
        d = dict(items)
        object.__setattr__(self, "_d", d)
        object.__setattr__(self, "_h", None)

    def __getitem__(self, key: str) -> Any:
        return self._d[key]

    def __iter__(self) -> Iterator[str]:
        return iter(self._d)

    def __len__(self) -> int:
        return len(self._d)

    def __hash__(self) -> int:
        if self._h is None:
            object.__setattr__(self, "_h", hash(frozenset(self._d.items())))
        return self._h

    def __setattr__(self, name, value):  # pragma: no cover - immutability guard
        raise AttributeError("Values is immutable")

    def __repr__(self) -> str:
        return f"Values({self._d!r})"

    def __reduce__(self):   # pickled as its items (verification runs in worker processes)
        return (Values, (self._d,))

    def replace(self, **changes) -> "Values":
        return Values({**self._d, **changes})


@dataclass(frozen=True, slots=True)
class Conditions:
    """One operating point: supply_v (V; per rail for a dual supply, the one rail for
    a single supply), temp_k (K), the load load_r_ohm (ohm, inf = open) || load_c_f (F),
    and the load of a topology's second output (a quadrature oscillator's cosine)
    load2_r_ohm (ohm, inf = open) || load2_c_f (F)."""

    supply_v: float
    temp_k: float
    load_r_ohm: float
    load_c_f: float = 0.0
    load2_r_ohm: float = math.inf
    load2_c_f: float = 0.0

    def rails(self, supply_kind: str) -> tuple[float, float, float]:
        """(positive rail, negative rail, signal reference), V."""
        if supply_kind == "dual":
            return self.supply_v, -self.supply_v, 0.0
        return self.supply_v, 0.0, self.supply_v / 2


@dataclass(frozen=True, slots=True)
class Circuit:
    """One complete candidate with exact values.

    topology, control: the plug-ins (objects of the registry); values: role -> ohm or F
    (an optional slot is absent or 0); parts: role -> catalog record of each active part
    (the op-amp, the limiter element, ...); stage: the output stage kind; supply_kind:
    'dual' or 'single'.
    """

    topology: Any
    control: Any
    values: Values
    parts: Values
    stage: str = "none"
    supply_kind: str = "dual"

    def __post_init__(self) -> None:
        if self.stage not in STAGES:
            raise ValueError(f"stage must be one of {STAGES}")
        if self.supply_kind not in SUPPLY_KINDS:
            raise ValueError("supply_kind must be 'dual' or 'single'")

    def value(self, role: str, default: float = 0.0) -> float:
        """The value of ``role`` (ohm, F), ``default`` when the slot is empty."""
        return self.values.get(role, default)

    def part(self, role: str) -> Any:
        """The catalog record filling ``role``, or None."""
        return self.parts.get(role)

    @property
    def opamp(self):
        """The op-amp type every channel of the circuit uses."""
        return self.parts["opamp"]

    def with_values(self, **changes: float) -> "Circuit":
        """The same circuit with some values changed."""
        return Circuit(self.topology, self.control, self.values.replace(**changes), self.parts, self.stage,
                       self.supply_kind)

    @property
    def f0_hz(self) -> float:
        """Textbook frequency of the topology with an ideal amplifier, Hz."""
        return float(self.topology.f0_hz(self.values))

    @property
    def required_gain(self) -> float:
        """Amplifier gain the frequency network needs for a loop gain of one, V/V."""
        return float(self.topology.required_gain(self.values))

    @property
    def gain(self) -> float:
        """Small-signal amplifier gain with the amplitude control at rest, V/V (with the
        conductance a control that conducts at rest adds at its port)."""
        rest = getattr(self.control, "rest_conductance", None)
        if rest is None:
            return float(self.topology.gain(self.values))
        return float(self.topology.port_gain(self.values, self.control.port, rest(self)))

    @property
    def ideal_margin(self) -> float:
        """Startup margin with an ideal op-amp: gain / required gain - 1."""
        return self.gain / self.required_gain - 1.0


class Topology(Protocol):
    """An oscillator topology plug-in (one module under ``partpick/circuits``; see
    DEVELOPERS.md, "Adding a topology"). Attributes: name (the spec's word), title,
    network_name (words for messages), slots (its own passives), network_roles (the
    frequency-setting slots), channels (op-amp channels it uses), ports (control ports
    it offers: 'feedback' = a branch across the feedback resistor, whose conductance
    lowers the gain), stages and supplies (the output stages and supply kinds it can be
    built with), outputs (the probe names of further outputs beyond the first, each
    driving a load of its own: a quadrature oscillator's cosine 'load2'), output_labels
    and output_phase_rad (each further output's word in messages and its intended phase
    lead over the first, rad), input_note (how its op-amp inputs swing, for the
    common-mode check's note), input_cap_role (the frequency-setting capacitor an op-amp
    input's node shares, whose frequency that input's capacitance moves: a caution,
    :mod:`partpick.sensitivity`; None where the inputs sit at virtual grounds),
    gain_levels (the impedance levels, Rg in ohm, the search puts the gain network at:
    the control's surrogate tables hold them),
    reads_supply (whether its loop depends on the supply voltage; where neither it nor
    the control's branch does, a supply corner's loop is the nominal point's: a test
    builds both).

    Search hooks (:mod:`partpick.search.enumerate`): ``network_table`` (every
    frequency-setting network of a family pair in a frequency window, as a
    :class:`~partpick.circuits.options.NetTable`), ``gain_values`` /
    ``port_conductance`` / ``port_conductance_slope`` / ``osc_per_port_k`` /
    ``gain_sensitivity`` / ``thd_transfer`` (how the gain network and the port turn a
    control branch's state into the loop's), ``reference`` / ``reference_gain_values``
    (the equal-arm reference a control tabulates its surrogate on), ``opamp_reference``
    (where an op-amp's pull and loss are measured); ``draw`` (its part of the schematic
    on a :class:`partpick.export.schematic.Sheet`, returning where the output stage and
    each port's control attach) and ``hand_design`` (the hand-method baseline of the
    benchmarks).
    """

    name: str
    title: str
    network_name: str
    slots: tuple[Slot, ...]
    network_roles: tuple[str, ...]
    channels: int
    ports: tuple[str, ...]
    stages: tuple[str, ...]
    supplies: tuple[str, ...]
    outputs: tuple[str, ...]
    output_labels: dict
    output_phase_rad: dict
    input_note: str
    input_cap_role: str | None
    gain_levels: tuple[float, ...]

    def f0_hz(self, v: Mapping[str, np.ndarray]) -> np.ndarray:
        """Textbook frequency over arrays of builds (role -> values), Hz."""

    def required_gain(self, v: Mapping[str, np.ndarray]) -> np.ndarray:
        """Amplifier gain the network needs for a loop gain of one, V/V."""

    def gain(self, v: Mapping[str, np.ndarray]) -> np.ndarray:
        """Small-signal amplifier gain with the control at rest, V/V."""

    def loop(self, c: Circuit, cond: Conditions, w_ref: float | None = None):
        """The loop at the control's port (:class:`partpick.physics.loop.Loop`), with
        probes 'osc', 'load' and each op-amp's internal voltage and output current."""

    def netlist(self, c: Circuit, ref: str, neg: str) -> "Core":
        """Elements of the core between the signal reference node ``ref`` and the
        negative rail ``neg``, its output node, port nodes and kick node."""

    def input_swing_v(self, c: Circuit, osc_peak_v: float) -> float:
        """Peak swing of the op-amp inputs around the reference, V."""

    def dissipation(self, c: Circuit, freq_hz: float, osc_peak_v: float) -> dict[str, float]:
        """Average power in each of its resistors, W."""

    def nudge_gain(self, c: Circuit, rel: float) -> Circuit:
        """The circuit with its gain raised by about the fraction rel (for slopes)."""


class AmplitudeControl(Protocol):
    """An amplitude-control plug-in (one module under ``partpick/circuits``; see
    DEVELOPERS.md, "Adding an amplitude control"). Attributes: name (the word in BOMs
    and specs), slots, port (the topology port it sits at), reads_supply (whether its
    branch at rest depends on the supply voltage). Its search surrogate is its own
    business: the diode limiter's is :mod:`partpick.circuits.limiter_surface`.
    """

    name: str
    slots: tuple[Slot, ...]
    port: str

    def branch(self, c: Circuit, temp_k: float, cond: "Conditions | None" = None):
        """The control branch (:class:`partpick.physics.loop.Branch`, or an object with
        its interface) at temp_k (K), at rest under ``cond``: its small-signal form is
        what the linear analysis closes the loop with."""

    def balance(self, c: Circuit, cond: Conditions, loop, lin, *, kmax: int = 21, start=None):
        """The settled oscillation (:class:`partpick.physics.harmonic.BalanceResult`) at
        ``cond`` given the loop and its linear analysis, or None when the control does
        not set the amplitude (the transient simulation then answers)."""

    def netlist(self, c: Circuit, a: str, b: str, nodes: dict | None = None) -> list:
        """Elements of the control between port nodes a and b; ``nodes`` names the
        others it may tie to: 'out' (the oscillator output), 'ref' (the signal
        reference), 'vcc' and 'neg' (the rails)."""

    def amplitude_spread(self, c: Circuit, temp_k: float, cond: "Conditions | None" = None) -> float:
        """Part-to-part spread of the amplitude it sets, relative (3 sigma), at temp_k
        (K) under ``cond`` when the amplitude depends on the supply."""

    def draw(self, sheet, a, b, up: float, out=None) -> None:
        """Draw its parts on the schematic sheet between the port's ends a and b (the
        netlist's port nodes, in order) on the clear side ``up`` (+1: above); ``out`` is
        where the oscillator output is drawn, for a control that senses it."""


@dataclass(frozen=True, slots=True)
class Core:
    """A topology's part of the netlist: its elements, its output node, the node pair
    of each control port (port -> (a, b)), where the start-up kick goes (node, and
    the capacitance, F, that turns the kick voltage into its charge), and the node of
    each further output (probe name -> node: 'load2', the second output, which drives
    the operating point's second load directly)."""

    elements: tuple
    out: str
    ports: dict
    kick_node: str
    kick_cap_f: float
    outputs: dict = field(default_factory=dict)
