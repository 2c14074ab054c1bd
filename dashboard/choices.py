"""Widget choices, labels and defaults for the dashboard, built from a system and the
library's catalogues. Pure functions: no Streamlit, no physics.

Choice keys are ``"kind:id"`` strings (``"support:road"``, ``"body:wheel"``,
``"element:tyre"``), so that a body and a force sharing an id stay two choices.
"""

from __future__ import annotations

import lumped
from lumped.frequency import BODY_QUANTITIES, ELEMENT_QUANTITIES
from lumped.metrics import default_items
from lumped.units import QuantityError, display, parse_quantity

__all__ = [
    "FIGURE_ITEM_LIMIT",
    "LARGE_SYSTEM_BODIES",
    "LARGE_SYSTEM_DURATION",
    "PAGE_OUTPUT_RATE",
    "ROAD_CLASSES",
    "default_channels",
    "default_input",
    "default_output",
    "figure_items",
    "input_choices",
    "output_choices",
    "parse_positive",
    "quantity_choices",
    "split_choice",
    "stepper_label",
    "top_body",
]

#: Systems with more bodies than this start the page's run with a short duration …
LARGE_SYSTEM_BODIES = 500
#: … of at most this many seconds (the file's duration stays one edit away).
LARGE_SYSTEM_DURATION = 0.1
#: Output rate the page uses when the file's [run] table gives none (text as typed).
PAGE_OUTPUT_RATE = "1 kHz"
#: Above this many bodies plus elements, the run's figures table covers a few items.
FIGURE_ITEM_LIMIT = 60
#: ISO 8608 road classes, best first.
ROAD_CLASSES = tuple(lumped.model.ISO_8608_CLASSES)


def split_choice(choice: str) -> tuple[str, str]:
    """``"support:road"`` → ``("support", "road")``."""
    kind, _, item = choice.partition(":")
    return kind, item


def stepper_label(stepper_id: str) -> str:
    """One line on a stepper of :data:`lumped.STEPPERS`: name, order, explicit or
    implicit, and its cost per step."""
    s = lumped.STEPPERS[stepper_id]
    order = f"order {s.order}" if s.order is not None else "exact for linear systems"
    kind = "explicit" if s.explicit else "implicit"
    return f"{s.name} · {order} · {kind} · {s.cost}"


def parse_positive(text: str, dimension: str, what: str) -> tuple[float | None, str | None]:
    """A positive quantity typed by the user (``"0.5 ms"``; a plain number is SI):
    ``(value, None)``, or ``(None, message)`` when it cannot be read."""
    text = (text or "").strip()
    if not text:
        return None, f"{what}: give a value with its unit"
    try:
        value = parse_quantity(float(text), dimension)
    except ValueError:
        try:
            value = parse_quantity(text, dimension)
        except QuantityError as exc:
            return None, f"{what}: {exc}"
    if not value > 0:
        return None, f"{what}: must be positive, got {text!r}"
    return value, None


def top_body(system: lumped.System) -> str | None:
    """The body drawn highest above the supports (the last one of the file on a tie)."""
    if not system.bodies:
        return None
    levels = lumped.node_levels(system)
    order = list(system.bodies)
    return max(order, key=lambda b: (levels.get(b, 0), order.index(b)))


def _support_text(system: lumped.System, support: lumped.Support) -> str:
    if not support.motion:
        return f"support {support.id} (fixed; 1 m prescribed displacement)"
    inp = system.inputs.get(support.motion)
    kind = f", {inp.kind}" if inp is not None else ""
    return f"support {support.id} (moves with {support.motion}{kind})"


def input_choices(system: lumped.System) -> dict[str, str]:
    """Inputs of a frequency response, key → label: supports with motion first, then
    fixed supports (as a prescribed displacement), the file's forces, and a unit
    force on each body."""
    moving = [s for s in system.supports.values() if s.motion]
    fixed = [s for s in system.supports.values() if not s.motion]
    out = {f"support:{s.id}": _support_text(system, s) for s in [*moving, *fixed]}
    for f in system.forces.values():
        out[f"force:{f.id}"] = f"force {f.id} (1 N on {f.on})"
    for b in system.bodies:
        out[f"body:{b}"] = f"unit force on body {b}"
    return out


def default_input(system: lumped.System) -> str | None:
    """A support that moves, else a force of the file, else any support, else a body."""
    choices = list(input_choices(system))
    for prefer in (
        [f"support:{s.id}" for s in system.supports.values() if s.motion],
        [f"force:{f}" for f in system.forces],
        [f"support:{s}" for s in system.supports],
    ):
        if prefer:
            return prefer[0]
    return choices[0] if choices else None


def output_choices(system: lumped.System) -> dict[str, str]:
    """Outputs of a frequency response, key → label: bodies, then elements."""
    out = {f"body:{b}": f"body {b}" for b in system.bodies}
    for e in system.elements.values():
        out[f"element:{e.id}"] = f"{e.kind} {e.id} ({' → '.join(e.between)})"
    return out


def default_output(system: lumped.System) -> str | None:
    body = top_body(system)
    return f"body:{body}" if body is not None else None


def quantity_choices(output_kind: str) -> list[str]:
    """The quantities the library gives for a body or an element output."""
    if output_kind == "body":
        return list(BODY_QUANTITIES)
    return [q for q in ELEMENT_QUANTITIES if q != "displacement"]  # = deflection


def default_channels(system: lumped.System, channel_names) -> list[str]:
    """Channels plotted first after a run: body displacements (every body up to three,
    else the top one), then the deflection of up to two travel elements (suspension
    travel) and the force of up to two load elements (tyre or mount load), as
    :func:`lumped.metrics.default_items` names them."""
    names = set(channel_names)
    bodies, travel, loads = default_items(system)
    if len(bodies) > 3:
        bodies = [top_body(system)]
    wanted = (
        [f"{b}.displacement" for b in bodies]
        + [f"{e}.deflection" for e in travel[:2]]
        + [f"{e}.force" for e in loads[:2]]
    )
    return [w for w in wanted if w in names]


def figure_items(system: lumped.System) -> tuple[tuple[str, ...], ...] | None:
    """Items of the run's figures table: ``None`` (the library's default, every body,
    travel and load element) for systems up to :data:`FIGURE_ITEM_LIMIT` items, else
    the top and the lowest body, the first and last travel element and the first two
    load elements, so that the table of a large system stays quick and readable."""
    bodies, travel, loads = default_items(system)
    if len(bodies) + len(travel) + len(loads) <= FIGURE_ITEM_LIMIT:
        return None
    top = top_body(system)
    chosen_bodies = tuple(dict.fromkeys([top, *bodies[:1]]))
    chosen_travel = tuple(dict.fromkeys(travel[:1] + travel[-1:]))
    return chosen_bodies, chosen_travel, tuple(loads[:2])


def time_text(seconds: float) -> str:
    """A time as typed text that reads back to about the same value (4 digits)."""
    return display(seconds, "time")
