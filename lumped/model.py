"""The system model: plain frozen dataclasses for bodies, supports and elements, and the
networkx MultiGraph that holds them (bodies and supports as nodes, elements as edges).

All values are SI: kg, m, s, N, N/m, N·s/m, Hz. Conventions (see the system-file
format): one vertical axis, positive up; an element joins ``between = (a, b)`` with
``a`` the lower node; its deflection is ``x_b − x_a`` (positive in extension) and its
force is positive in tension.
"""

from __future__ import annotations

import math
import re
from collections.abc import Iterable, Mapping
from dataclasses import dataclass, field
from typing import Literal

import networkx as nx
import numpy as np

from lumped.errors import ModelError, Problem

__all__ = [
    "ID_PATTERN",
    "Problem",
    "ModelError",
    "Body",
    "Support",
    "Spring",
    "Damper",
    "Inerter",
    "StepInput",
    "BumpInput",
    "HarmonicInput",
    "SweepInput",
    "RoadInput",
    "TableInput",
    "Force",
    "RunSettings",
    "System",
    "check_system",
    "uniform_chain",
]

ID_PATTERN = re.compile(r"[A-Za-z][A-Za-z0-9_-]*")
STANDARD_GRAVITY = 9.81  # m/s², the system-file default
ISO_8608_CLASSES = "ABCDEFGH"


def _units_field():
    return field(default_factory=dict, compare=False, repr=False)


# --------------------------------------------------------------------------- nodes


@dataclass(frozen=True)
class Body:
    """A rigid body with one vertical coordinate. ``mass`` in kg; initial state from
    static equilibrium, in m and m/s."""

    id: str
    mass: float
    label: str = ""
    initial_displacement: float = 0.0
    initial_velocity: float = 0.0
    units: Mapping[str, str] = _units_field()


@dataclass(frozen=True)
class Support:
    """A node whose motion is prescribed: fixed, or following ``motion`` (an input id),
    ``delay`` seconds late (a rear wheel meeting the road after the front)."""

    id: str
    motion: str | None = None
    delay: float = 0.0
    label: str = ""
    units: Mapping[str, str] = _units_field()


# --------------------------------------------------------------------------- elements

Acts = Literal["both", "compression", "tension"]


@dataclass(frozen=True)
class Spring:
    """A linear spring, N/m, with optional end stop and one-sided action.

    ``gap`` (m) and ``gap_stiffness`` (N/m): an end stop that adds stiffness once the
    deflection has moved more than ``gap`` from its static value, either way.
    ``acts``: ``"compression"`` carries no tension in its total force (a tyre that
    lifts off), ``"tension"`` no compression. ``preload`` (N): the force with both
    ends at their unloaded positions, positive in tension.
    """

    id: str
    between: tuple[str, str]
    stiffness: float
    gap: float | None = None
    gap_stiffness: float | None = None
    acts: Acts = "both"
    preload: float = 0.0
    label: str = ""
    units: Mapping[str, str] = _units_field()

    kind = "spring"

    @property
    def is_linear(self) -> bool:
        return self.gap is None and self.acts == "both"


@dataclass(frozen=True)
class Damper:
    """A viscous damper, N·s/m: one ``coefficient``, or ``rebound`` (extension) and
    ``compression`` coefficients, or a monotone ``curve`` of (velocity m/s, force N)
    pairs, interpolated and extrapolated linearly."""

    id: str
    between: tuple[str, str]
    coefficient: float | None = None
    rebound: float | None = None
    compression: float | None = None
    curve: tuple[tuple[float, float], ...] | None = None
    label: str = ""
    units: Mapping[str, str] = _units_field()

    kind = "damper"

    @property
    def is_linear(self) -> bool:
        return self.coefficient is not None

    @property
    def linear_coefficient(self) -> float:
        """The coefficient of the linearised damper at zero velocity, N·s/m.

        Asymmetric: the mean of rebound and compression (common practice for
        linearising a bilinear damper about zero velocity). Curve: the slope of the
        interpolated curve through zero velocity (mean of the slopes on each side).
        An incompletely defined damper (which :func:`check_system` reports) gives 0.
        """
        if self.coefficient is not None:
            return self.coefficient
        if self.curve is not None:
            return curve_slope_at_zero(self.curve)
        if self.rebound is None or self.compression is None:
            return 0.0
        return 0.5 * (self.rebound + self.compression)


def curve_slope_at_zero(curve: tuple[tuple[float, float], ...]) -> float:
    """Mean of the left and right slopes of a piecewise-linear curve at x = 0."""
    x = np.array([p[0] for p in curve], dtype=float)
    y = np.array([p[1] for p in curve], dtype=float)
    if len(x) == 1:
        return 0.0
    slopes = np.diff(y) / np.diff(x)
    # Segment index containing 0 from the left and from the right (extrapolated ends).
    right = int(np.clip(np.searchsorted(x, 0.0, side="right") - 1, 0, len(slopes) - 1))
    left = int(np.clip(np.searchsorted(x, 0.0, side="left") - 1, 0, len(slopes) - 1))
    return float(0.5 * (slopes[left] + slopes[right]))


@dataclass(frozen=True)
class Inerter:
    """An inerter: force = inertance × relative acceleration; ``inertance`` in kg."""

    id: str
    between: tuple[str, str]
    inertance: float
    label: str = ""
    units: Mapping[str, str] = _units_field()

    kind = "inerter"
    is_linear = True


Element = Spring | Damper | Inerter

# --------------------------------------------------------------------------- inputs
# A signal's ``amplitude`` is a length when it drives a support and a force when it
# drives a force (times the force's ``scale``). ``amplitude_kind`` records what the
# file said ("length", "force", or None for a plain number).


@dataclass(frozen=True)
class StepInput:
    """0 before ``time`` (s), ``amplitude`` from then on."""

    id: str
    amplitude: float
    time: float = 0.0
    amplitude_kind: str | None = None
    units: Mapping[str, str] = _units_field()
    kind = "step"


@dataclass(frozen=True)
class BumpInput:
    """A smooth (1 − cos) bump of ``height`` (m) and ``length`` (m) passed at ``speed``
    (m/s), starting at ``time`` (s)."""

    id: str
    height: float
    length: float
    speed: float
    time: float = 0.0
    units: Mapping[str, str] = _units_field()
    kind = "bump"
    amplitude_kind = "length"


@dataclass(frozen=True)
class HarmonicInput:
    """``amplitude`` · sin(2π ``frequency`` t + ``phase``); frequency in Hz, phase in rad."""

    id: str
    amplitude: float
    frequency: float
    phase: float = 0.0
    amplitude_kind: str | None = None
    units: Mapping[str, str] = _units_field()
    kind = "harmonic"


@dataclass(frozen=True)
class SweepInput:
    """A sine sweep of ``amplitude`` from ``start`` to ``stop`` (Hz) over ``duration`` (s),
    ``spacing`` linear or logarithmic in frequency."""

    id: str
    amplitude: float
    start: float
    stop: float
    duration: float
    spacing: Literal["linear", "logarithmic"] = "linear"
    amplitude_kind: str | None = None
    units: Mapping[str, str] = _units_field()
    kind = "sweep"


@dataclass(frozen=True)
class RoadInput:
    """A random road profile of ISO 8608 class ``road_class`` (A–H) driven at ``speed``
    (m/s), reproducible from ``seed``."""

    id: str
    road_class: str
    speed: float
    seed: int = 0
    units: Mapping[str, str] = _units_field()
    kind = "road"
    amplitude_kind = "length"


@dataclass(frozen=True)
class TableInput:
    """A tabulated time series read from the CSV ``file`` (relative to the system file):
    ``times`` (s, strictly increasing) and ``values`` as written in the CSV, in ``unit``
    when given (``scale`` converts them to SI), else SI."""

    id: str
    file: str
    times: tuple[float, ...]
    values: tuple[float, ...]
    unit: str | None = None
    scale: float = 1.0
    amplitude_kind: str | None = None
    units: Mapping[str, str] = _units_field()
    kind = "table"


Input = StepInput | BumpInput | HarmonicInput | SweepInput | RoadInput | TableInput


@dataclass(frozen=True)
class Force:
    """A force on body ``on``: ``scale`` × the value of ``input`` (N when the input is a
    plain number)."""

    id: str
    on: str
    input: str
    scale: float = 1.0
    units: Mapping[str, str] = _units_field()


@dataclass(frozen=True)
class RunSettings:
    """Defaults for a run: stepper id, step ``dt`` (s), ``duration`` (s), ``output_rate`` (Hz)."""

    stepper: str | None = None
    dt: float | None = None
    duration: float | None = None
    output_rate: float | None = None
    units: Mapping[str, str] = _units_field()


# --------------------------------------------------------------------------- system


@dataclass
class System:
    """A lumped-parameter system and its graph.

    The items are kept in dicts by id, in the order given; ``graph`` is a
    :class:`networkx.MultiGraph` built from them, with nodes (bodies, then supports)
    carrying ``kind`` ("body" or "support") and their parameters, and one edge per
    element (key: the element id) carrying ``kind`` ("spring", "damper",
    "inerter"), ``item`` (the dataclass) and its SI parameters. Assembly reads the
    graph, so a power user may add to it directly.
    """

    name: str
    bodies: dict[str, Body]
    supports: dict[str, Support] = field(default_factory=dict)
    springs: dict[str, Spring] = field(default_factory=dict)
    dampers: dict[str, Damper] = field(default_factory=dict)
    inerters: dict[str, Inerter] = field(default_factory=dict)
    inputs: dict[str, Input] = field(default_factory=dict)
    forces: dict[str, Force] = field(default_factory=dict)
    run: RunSettings = field(default_factory=RunSettings)
    description: str = ""
    gravity: float = STANDARD_GRAVITY
    floating: bool = False
    units: Mapping[str, str] = field(default_factory=dict, compare=False, repr=False)
    graph: nx.MultiGraph = field(init=False, compare=False, repr=False)

    def __post_init__(self):
        self.graph = build_graph(self)

    @property
    def elements(self) -> dict[str, Element]:
        """Springs, dampers and inerters by id, in that order."""
        return {**self.springs, **self.dampers, **self.inerters}

    @property
    def body_ids(self) -> list[str]:
        return list(self.bodies)

    @classmethod
    def from_items(cls, name: str, items: Iterable, **settings) -> System:
        """Build a system from a flat list of item dataclasses (bodies, elements, ...)."""
        groups: dict[str, dict] = {
            k: {}
            for k in ("bodies", "supports", "springs", "dampers", "inerters", "inputs", "forces")
        }
        kinds = {
            Body: "bodies",
            Support: "supports",
            Spring: "springs",
            Damper: "dampers",
            Inerter: "inerters",
            Force: "forces",
        }
        for item in items:
            group = kinds.get(type(item), "inputs")
            groups[group][item.id] = item
        return cls(name=name, **groups, **settings)


def build_graph(system: System) -> nx.MultiGraph:
    """The MultiGraph of ``system``: nodes = bodies then supports, edges = elements."""
    graph = nx.MultiGraph(name=system.name, gravity=system.gravity, floating=system.floating)
    graph.add_nodes_from(
        (b.id, {"kind": "body", "mass": b.mass, "label": b.label, "item": b})
        for b in system.bodies.values()
    )
    graph.add_nodes_from(
        (s.id, {"kind": "support", "motion": s.motion, "delay": s.delay, "item": s})
        for s in system.supports.values()
    )
    edges = []
    for e in system.springs.values():
        edges.append(
            (*e.between, e.id, {"kind": "spring", "between": e.between, "stiffness": e.stiffness,
                                "preload": e.preload, "item": e})
        )
    for e in system.dampers.values():
        edges.append(
            (*e.between, e.id, {"kind": "damper", "between": e.between,
                                "coefficient": e.linear_coefficient, "item": e})
        )
    for e in system.inerters.values():
        edges.append(
            (*e.between, e.id, {"kind": "inerter", "between": e.between,
                                "inertance": e.inertance, "item": e})
        )
    # An edge to a node that is not a body or support would create a bare node; such
    # systems are reported by check_system, so leave those edges out of the graph.
    for order, edge in enumerate(edges):
        edge[3]["order"] = order  # file order, which assembly keeps for the element rows
    _add_edges(graph, [e for e in edges if e[0] in graph._node and e[1] in graph._node])
    return graph


def _add_edges(graph: nx.MultiGraph, edges: list[tuple]) -> None:
    """``graph.add_edges_from(edges)`` for (u, v, key, data) edges between existing
    nodes, written into networkx's adjacency dicts directly: the same graph (one key
    dict shared by both directions, data copied, a repeated key updating its edge),
    some ten times faster for the thousands of elements of a batch of variants."""
    adj, keys_of, data_of = graph._adj, graph.edge_key_dict_factory, graph.edge_attr_dict_factory
    for u, v, key, data in edges:
        keys = adj[u].get(v)
        if keys is None:
            keys = adj[u][v] = adj[v][u] = keys_of()
        if key in keys:
            keys[key].update(data)
        else:
            keys[key] = data_of()
            keys[key].update(data)
    nx._clear_cache(graph)


# --------------------------------------------------------------------------- checks


def check_system(system: System, connectivity: bool = True) -> list[Problem]:
    """Every problem of meaning in ``system`` (values, references, connectivity).

    Type and unit errors are the file reader's business; this checks what a system
    built in code can get wrong too. ``connectivity=False`` leaves out the graph
    checks (bodies tied to nothing, or to no support by springs), for a system whose
    graph is known to pass them: copies of a checked system side by side.
    """
    problems: list[Problem] = []
    add = problems.append
    seen: dict[str, str] = {}
    groups = {
        "bodies": system.bodies,
        "supports": system.supports,
        "springs": system.springs,
        "dampers": system.dampers,
        "inerters": system.inerters,
        "inputs": system.inputs,
        "forces": system.forces,
    }
    for group, items in groups.items():
        for key, item in items.items():
            if key != item.id:
                add(Problem(f"{group}.{key}", "id", f"item is filed under {key!r} but has id {item.id!r}"))
            if not ID_PATTERN.fullmatch(item.id):
                add(Problem(f"{group}.{item.id}", "id", "an id is a letter followed by letters, digits, '_' or '-'"))
            if item.id in seen:
                add(Problem(f"{group}.{item.id}", "id", f"id is used twice (also in {seen[item.id]})"))
            else:
                seen[item.id] = group

    if not system.bodies:
        add(Problem("", "bodies", "the system has no bodies"))
    for b in system.bodies.values():
        if not (math.isfinite(b.mass) and b.mass > 0):
            add(Problem(f"bodies.{b.id}", "mass", f"must be finite and positive, got {b.mass!r} kg"))
    for s in system.supports.values():
        if s.motion is not None and s.motion not in system.inputs:
            add(Problem(f"supports.{s.id}", "motion", f"names {s.motion!r}, which is not an input"))
        if not s.delay >= 0:
            add(Problem(f"supports.{s.id}", "delay", f"must not be negative, got {s.delay!r} s"))

    nodes = {**system.bodies, **system.supports}
    for group, items in (("springs", system.springs), ("dampers", system.dampers), ("inerters", system.inerters)):
        for e in items.values():
            where = f"{group}.{e.id}"
            a, b = e.between
            for end in (a, b):
                if end not in nodes:
                    add(Problem(where, "between", f"names {end!r}, which is not a body or support"))
            if a == b:
                add(Problem(where, "between", f"joins {a!r} to itself"))
            elif a in system.supports and b in system.supports:
                add(Problem(where, "between", "joins two supports; it would act on no body"))
    for s in system.springs.values():
        where = f"springs.{s.id}"
        if not s.stiffness >= 0:
            add(Problem(where, "stiffness", f"must not be negative, got {s.stiffness!r} N/m"))
        if (s.gap is None) != (s.gap_stiffness is None):
            add(Problem(where, "gap", "an end stop needs both gap and gap_stiffness"))
        if s.gap is not None and not s.gap >= 0:
            add(Problem(where, "gap", f"must not be negative, got {s.gap!r} m"))
        if s.gap_stiffness is not None and not s.gap_stiffness >= 0:
            add(Problem(where, "gap_stiffness", f"must not be negative, got {s.gap_stiffness!r} N/m"))
        if s.acts not in ("both", "compression", "tension"):
            add(Problem(where, "acts", f"must be 'both', 'compression' or 'tension', got {s.acts!r}"))
    for d in system.dampers.values():
        problems.extend(_check_damper(d))
    for i in system.inerters.values():
        if not i.inertance >= 0:
            add(Problem(f"inerters.{i.id}", "inertance", f"must not be negative, got {i.inertance!r} kg"))
    for inp in system.inputs.values():
        problems.extend(_check_input(inp))
    for f in system.forces.values():
        where = f"forces.{f.id}"
        if f.on not in system.bodies:
            add(Problem(where, "on", f"names {f.on!r}, which is not a body"))
        if f.input not in system.inputs:
            add(Problem(where, "input", f"names {f.input!r}, which is not an input"))
    problems.extend(_check_signal_kinds(system))
    problems.extend(_check_run(system.run))
    if not (math.isfinite(system.gravity) and system.gravity >= 0):
        add(Problem("", "gravity", f"must be finite and not negative, got {system.gravity!r} m/s²"))
    if connectivity and not any(p.item == "" or p.field == "between" for p in problems):
        problems.extend(_check_connectivity(system))
    return problems


def _check_damper(d: Damper) -> list[Problem]:
    where = f"dampers.{d.id}"
    out = []
    given = [d.coefficient is not None, d.rebound is not None or d.compression is not None, d.curve is not None]
    if sum(given) != 1:
        out.append(Problem(where, "coefficient", "give exactly one of coefficient, rebound and compression, or curve"))
        return out
    if (d.rebound is None) != (d.compression is None):
        out.append(Problem(where, "rebound", "an asymmetric damper needs both rebound and compression"))
    for name in ("coefficient", "rebound", "compression"):
        value = getattr(d, name)
        if value is not None and not value >= 0:
            out.append(Problem(where, name, f"must not be negative, got {value!r} N*s/m"))
    if d.curve is not None:
        if len(d.curve) < 2:
            out.append(Problem(where, "curve", "needs at least two [velocity, force] points"))
            return out
        v = [p[0] for p in d.curve]
        f = [p[1] for p in d.curve]
        if any(b <= a for a, b in zip(v, v[1:], strict=False)):
            out.append(Problem(where, "curve", "velocities must increase strictly from point to point"))
            return out  # the checks below read the curve in velocity order
        if any(b < a for a, b in zip(f, f[1:], strict=False)):
            out.append(Problem(where, "curve", "is not monotone: force must not fall as velocity rises"))
        if not v[0] <= 0 <= v[-1]:
            out.append(Problem(where, "curve", "must span zero velocity (a point at or below 0 and at or above 0)"))
        elif abs(np.interp(0.0, v, f)) > 1e-9 * max(1.0, max(abs(x) for x in f)):
            out.append(Problem(where, "curve", "must give zero force at zero velocity"))
    return out


def _check_input(inp) -> list[Problem]:
    where = f"inputs.{inp.id}"
    out = []

    def positive(name, unit):
        value = getattr(inp, name)
        if not value > 0:
            out.append(Problem(where, name, f"must be positive, got {value!r} {unit}"))

    if isinstance(inp, BumpInput):
        positive("length", "m")
        positive("speed", "m/s")
    elif isinstance(inp, HarmonicInput):
        positive("frequency", "Hz")
    elif isinstance(inp, SweepInput):
        positive("start", "Hz")
        positive("stop", "Hz")
        positive("duration", "s")
        if inp.spacing not in ("linear", "logarithmic"):
            out.append(Problem(where, "spacing", "must be 'linear' or 'logarithmic'"))
    elif isinstance(inp, RoadInput):
        positive("speed", "m/s")
        if inp.road_class not in ISO_8608_CLASSES:
            out.append(Problem(where, "class", f"must be an ISO 8608 class A to H, got {inp.road_class!r}"))
    elif isinstance(inp, TableInput):
        if len(inp.times) != len(inp.values) or len(inp.times) < 2:
            out.append(Problem(where, "file", "needs at least two rows of time and value"))
        elif any(b <= a for a, b in zip(inp.times, inp.times[1:], strict=False)):
            out.append(Problem(where, "file", "times must increase strictly from row to row"))
    return out


def _check_signal_kinds(system: System) -> list[Problem]:
    """A support's motion must be a length; a force's input times its scale a force."""
    out = []
    for s in system.supports.values():
        inp = system.inputs.get(s.motion) if s.motion else None
        if inp is not None and inp.amplitude_kind == "force":
            out.append(Problem(f"supports.{s.id}", "motion", f"input {inp.id!r} is a force, not a displacement"))
    for f in system.forces.values():
        inp = system.inputs.get(f.input)
        if inp is not None and inp.amplitude_kind == "length":
            out.append(Problem(f"forces.{f.id}", "input", f"input {inp.id!r} is a displacement, not a force"))
    return out


def _check_run(run: RunSettings) -> list[Problem]:
    out = []
    for name, unit in (("dt", "s"), ("duration", "s"), ("output_rate", "Hz")):
        value = getattr(run, name)
        if value is not None and not value > 0:
            out.append(Problem("run", name, f"must be positive, got {value!r} {unit}"))
    if run.stepper is not None:
        from lumped.steppers import STEPPERS

        if run.stepper not in STEPPERS:
            out.append(Problem("run", "stepper", f"unknown stepper {run.stepper!r}; known: {', '.join(STEPPERS)}"))
    return out


def _check_connectivity(system: System) -> list[Problem]:
    out = []
    graph = system.graph
    for body in system.bodies:
        if graph.degree(body) == 0:
            out.append(Problem(f"bodies.{body}", "", "is connected to nothing"))
    if system.floating:
        return out
    if not system.supports:
        out.append(
            Problem("", "supports", "the system has no support: it is floating (it has a rigid-body "
                    "mode); set floating = true to allow that")
        )
        return out
    # Bodies that no path of springs ties to a support have no static position.
    springs_only = nx.Graph()
    springs_only.add_nodes_from(graph.nodes)
    springs_only.add_edges_from(
        (a, b) for a, b, kind in graph.edges(data="kind") if kind == "spring"
    )
    held = set()
    for support in system.supports:
        held |= nx.node_connected_component(springs_only, support)
    loose = [b for b in system.bodies if b not in held and graph.degree(b) > 0]
    if loose:
        out.append(
            Problem(f"bodies.{loose[0]}", "", "no chain of springs ties "
                    + ("it" if len(loose) == 1 else f"it and {len(loose) - 1} other {'body' if len(loose) == 2 else 'bodies'} ({', '.join(loose[1:6])}{'…' if len(loose) > 6 else ''})")
                    + " to a support: the system has a rigid-body mode; set floating = true to allow that")
        )
    return out


# --------------------------------------------------------------------------- builders


def uniform_chain(
    n: int,
    mass: float,
    stiffness: float,
    damping: float = 0.0,
    fixed_top: bool = False,
    name: str | None = None,
) -> System:
    """A uniform chain of ``n`` bodies (kg), springs (N/m) and optional dampers (N·s/m)
    hanging on a support ``ground`` (fixed–free), or also tied to ``top`` (fixed–fixed).

    Bodies are ``m1`` … ``mn`` from the ground up; springs ``k1`` … and dampers ``c1`` …
    """
    ids = [f"m{i}" for i in range(1, n + 1)]
    nodes = ["ground", *ids] + (["top"] if fixed_top else [])
    pairs = list(zip(nodes[:-1], nodes[1:], strict=True))
    bodies = {i: Body(i, mass) for i in ids}
    supports = {"ground": Support("ground")}
    if fixed_top:
        supports["top"] = Support("top")
    springs = {f"k{j}": Spring(f"k{j}", p, stiffness) for j, p in enumerate(pairs, 1)}
    dampers = (
        {f"c{j}": Damper(f"c{j}", p, coefficient=damping) for j, p in enumerate(pairs, 1)}
        if damping > 0
        else {}
    )
    return System(
        name=name or f"uniform chain of {n} bodies",
        bodies=bodies,
        supports=supports,
        springs=springs,
        dampers=dampers,
    )
