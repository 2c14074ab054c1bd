"""Summaries of a system for people and for scripts: what ``lumped show`` prints and
what the dashboard's summary tables hold. Values are SI; text columns carry units."""

from __future__ import annotations

from dataclasses import dataclass

import networkx as nx

from lumped.assemble import assemble
from lumped.model import (
    BumpInput,
    Damper,
    HarmonicInput,
    Inerter,
    RoadInput,
    Spring,
    StepInput,
    SweepInput,
    System,
    TableInput,
)
from lumped.static import StaticError, StaticState, static_equilibrium
from lumped.units import display

__all__ = ["SystemSummary", "summarize", "element_values", "input_values", "node_levels"]


@dataclass(frozen=True)
class SystemSummary:
    """Rows of the system's tables, and its static equilibrium (None with
    ``static_error`` when there is none)."""

    name: str
    description: str
    gravity: float
    bodies: list[dict]
    supports: list[dict]
    elements: list[dict]
    inputs: list[dict]
    forces: list[dict]
    static: StaticState | None
    static_error: str | None

    def to_json(self) -> dict:
        """SI values keyed by id: ``bodies.ID.{mass, static_deflection}``,
        ``elements.ID.{kind, between, static_force, static_deflection, ...}``."""
        return {
            "name": self.name,
            "description": self.description,
            "gravity": self.gravity,
            "static_error": self.static_error,
            "bodies": {b["id"]: {k: v for k, v in b.items() if k != "id"} for b in self.bodies},
            "supports": {s["id"]: {k: v for k, v in s.items() if k != "id"} for s in self.supports},
            "elements": {
                e["id"]: {k: v for k, v in e.items() if k not in ("id", "values")}
                for e in self.elements
            },
            "inputs": {i["id"]: {k: v for k, v in i.items() if k not in ("id", "values")} for i in self.inputs},
            "forces": {f["id"]: {k: v for k, v in f.items() if k != "id"} for f in self.forces},
        }


def element_values(element) -> str:
    """An element's parameters as one line of text with units."""
    if isinstance(element, Spring):
        parts = [display(element.stiffness, "stiffness")]
        if element.acts != "both":
            parts.append(f"{element.acts} only")
        if element.gap is not None:
            parts.append(
                f"end stop beyond ±{display(element.gap, 'length')} from static, {display(element.gap_stiffness, 'stiffness')}"
            )
        if element.preload:
            parts.append(f"preload {display(element.preload, 'force')}")
        return ", ".join(parts)
    if isinstance(element, Damper):
        if element.coefficient is not None:
            return display(element.coefficient, "damping")
        if element.curve is not None:
            return f"curve of {len(element.curve)} points, {display(element.linear_coefficient, 'damping')} at rest"
        return (
            f"rebound {display(element.rebound, 'damping')}, "
            f"compression {display(element.compression, 'damping')}"
        )
    if isinstance(element, Inerter):
        return display(element.inertance, "mass")
    return ""


def input_values(item) -> str:
    """An input's parameters as one line of text with units."""
    unit = {"length": "length", "force": "force"}.get(getattr(item, "amplitude_kind", None))

    def size(value: float) -> str:
        return display(value, unit) if unit else f"{value:.4g}"

    if isinstance(item, StepInput):
        return f"step of {size(item.amplitude)} at {display(item.time, 'time')}"
    if isinstance(item, BumpInput):
        return (f"bump {display(item.height, 'length')} high, {display(item.length, 'length')} long, "
                f"at {display(item.speed, 'velocity')} from {display(item.time, 'time')}")  # fmt: skip
    if isinstance(item, HarmonicInput):
        phase = f", phase {item.phase:.3g} rad" if item.phase else ""
        return f"{size(item.amplitude)} at {display(item.frequency, 'frequency')}{phase}"
    if isinstance(item, SweepInput):
        return (f"{size(item.amplitude)} swept {display(item.start, 'frequency')} → "
                f"{display(item.stop, 'frequency')} ({item.spacing}) over {display(item.duration, 'time')}")  # fmt: skip
    if isinstance(item, RoadInput):
        return f"ISO 8608 class {item.road_class} road at {display(item.speed, 'velocity')}, seed {item.seed}"
    if isinstance(item, TableInput):
        return f"table {item.file!r}: {len(item.times)} rows over {display(item.times[-1] - item.times[0], 'time')}"
    return ""


def summarize(system: System) -> SystemSummary:
    """The summary of ``system``, with its static equilibrium under gravity."""
    matrices = assemble(system)
    try:
        static = static_equilibrium(matrices)
        error = None
    except StaticError as exc:
        static, error = None, str(exc)
    bodies = [
        {
            "id": b.id,
            "label": b.label,
            "mass": b.mass,
            "static_deflection": static.deflection_of(b.id) if static else None,
        }
        for b in system.bodies.values()
    ]
    supports = [
        {
            "id": s.id,
            "label": s.label,
            "motion": s.motion,
            "motion_kind": system.inputs[s.motion].kind if s.motion in system.inputs else None,
            "delay": s.delay,
        }
        for s in system.supports.values()
    ]
    elements = []
    for e in system.elements.values():
        row = {
            "id": e.id,
            "kind": e.kind,
            "between": list(e.between),
            "values": element_values(e),
            "static_force": static.force_in(e.id) if static else None,
            "static_deflection": (
                float(static.element_deflection[static.element_ids.index(e.id)]) if static else None
            ),
        }
        for name in ("stiffness", "coefficient", "rebound", "compression", "inertance", "gap", "gap_stiffness", "preload"):
            value = getattr(e, name, None)
            if value is not None:
                row[name] = value
        if isinstance(e, Spring):
            row["acts"] = e.acts
        if isinstance(e, Damper) and e.curve is not None:
            row["curve"] = [list(p) for p in e.curve]
        elements.append(row)
    inputs = [
        {
            "id": i.id,
            "kind": i.kind,
            "values": input_values(i),
            **{k: v for k, v in vars(i).items() if k not in ("id", "units", "times", "values")},
        }
        for i in system.inputs.values()
    ]
    forces = [
        {"id": f.id, "on": f.on, "input": f.input, "scale": f.scale} for f in system.forces.values()
    ]
    return SystemSummary(
        name=system.name,
        inputs=inputs,
        forces=forces,
        description=system.description,
        gravity=system.gravity,
        bodies=bodies,
        supports=supports,
        elements=elements,
        static=static,
        static_error=error,
    )


def node_levels(system: System) -> dict[str, int]:
    """Each node's level for drawing: every node one above the highest of the lower
    nodes it hangs on (the first node of each ``between``), nodes that hang on nothing
    at 0, so that bodies stack by height above the supports and a body hanging below a
    support is drawn below it. Cycles of "lower" links fall back to path distance."""
    upward = nx.DiGraph()
    upward.add_nodes_from([*system.supports, *system.bodies])
    upward.add_edges_from(
        e.between for e in system.elements.values() if e.between[0] in upward and e.between[1] in upward
    )
    upward.remove_edges_from(nx.selfloop_edges(upward))
    if nx.is_directed_acyclic_graph(upward):
        level: dict[str, int] = {}
        for node in nx.topological_sort(upward):
            lower = list(upward.predecessors(node))
            level[node] = 1 + max(level[n] for n in lower) if lower else 0
        return level
    distance = nx.multi_source_dijkstra_path_length(system.graph, list(system.supports) or list(system.bodies)[:1])
    return {n: int(distance.get(n, 0)) for n in upward}
