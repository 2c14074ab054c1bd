"""Many variants of one system run together: design parameters changed per variant,
all variants stepped by one call of the engine.

A change is addressed as ``"group.id.field"`` — ``"springs.tyre.stiffness"``,
``"dampers.corner_damper.coefficient"``, ``"bodies.body.mass"`` — with one value per
variant (SI). The variants are laid side by side as one system (each with its own
copy of every body, support and element, all following the same inputs), so that
the compiled kernel steps them all in one loop, with no Python between variants.
This is the building block of design sweeps: a sweep hands chunks of variants to
workers, each running one batch.
"""

from __future__ import annotations

import dataclasses
from collections.abc import Mapping, Sequence
from dataclasses import dataclass

import numpy as np

from lumped.errors import LumpedError
from lumped.model import System, check_system
from lumped.simulate import (
    Event,
    RunResult,
    channels_frame,
    motion_channels,
    prepare,
    prepare_copies,
    simulate,
)

__all__ = ["VariantError", "VariantRun", "VariantRuns", "variant_system", "simulate_variants"]

_GROUPS = ("bodies", "supports", "springs", "dampers", "inerters", "forces")


class VariantError(LumpedError):
    """A change that names no item or field, or values that do not fit."""


def _parse(path: str, system: System) -> tuple[str, str, str]:
    parts = path.split(".")
    if len(parts) != 3:
        raise VariantError(f"variant change {path!r}: write it as group.id.field, e.g. springs.tyre.stiffness")
    group, item_id, field = parts
    if group not in _GROUPS:
        raise VariantError(f"variant change {path!r}: group {group!r} is not one of {', '.join(_GROUPS)}")
    items = getattr(system, group)
    if item_id not in items:
        raise VariantError(f"variant change {path!r}: no item {item_id!r} in {group}")
    item = items[item_id]
    names = {f.name for f in dataclasses.fields(item)}
    value = getattr(item, field, None) if field in names else None
    if not isinstance(value, int | float) or isinstance(value, bool):
        numeric = sorted(n for n in names if isinstance(getattr(item, n), int | float) and not isinstance(getattr(item, n), bool))
        raise VariantError(
            f"variant change {path!r}: {group}.{item_id} has no numeric field {field!r} "
            f"(numeric fields: {', '.join(numeric)})"
        )
    return group, item_id, field


def variant_system(system: System, change: Mapping[str, float]) -> System:
    """``system`` with each ``"group.id.field"`` of ``change`` set to its value (SI)."""
    groups = {g: dict(getattr(system, g)) for g in _GROUPS}
    for path, value in change.items():
        group, item_id, field = _parse(path, system)
        groups[group][item_id] = dataclasses.replace(groups[group][item_id], **{field: float(value)})
    variant = dataclasses.replace(system, **groups)
    problems = check_system(variant)
    if problems:
        raise VariantError("; ".join(str(p) for p in problems))
    return variant


@dataclass
class VariantRuns:
    """The runs of all variants, as arrays (variants, samples, items), SI.

    ``parameters`` maps each changed ``"group.id.field"`` to its values per variant.
    ``events[i]`` are variant i's events; ``batch`` is the run of all variants laid
    side by side (its energy account covers the whole batch); ``base`` is the system
    the changes apply to (:meth:`system` builds variant i).
    """

    parameters: dict[str, np.ndarray]
    time: np.ndarray
    body_ids: tuple[str, ...]
    element_ids: tuple[str, ...]
    displacement: np.ndarray
    velocity: np.ndarray
    acceleration: np.ndarray
    events: list[list[Event]]
    status: str
    message: str
    batch: RunResult
    base: System

    @property
    def count(self) -> int:
        return self.displacement.shape[0]

    @property
    def deflection(self) -> np.ndarray:
        """Element deflections (variants, samples, elements), m, worked out when first read."""
        return _by_variant(self.batch.deflection, self.count)

    @property
    def force(self) -> np.ndarray:
        """Element forces (variants, samples, elements), N, worked out when first read."""
        return _by_variant(self.batch.force, self.count)

    def system(self, i: int) -> System:
        """Variant ``i`` as a system of its own."""
        return variant_system(self.base, {path: values[i] for path, values in self.parameters.items()})

    def variant(self, i: int) -> VariantRun:
        """Variant ``i``'s channels, in the shape the figures table reads."""
        return VariantRun(
            time=self.time, body_ids=self.body_ids, element_ids=self.element_ids,
            displacement=self.displacement[i], velocity=self.velocity[i],
            acceleration=self.acceleration[i], deflection=self.deflection[i], force=self.force[i],
            events=self.events[i], status=self.status, message=self.message,
        )  # fmt: skip

    def figures(self, **options) -> list[list]:
        """The figures table (:func:`lumped.metrics.run_figures`, same options) of every
        variant: the same rows, with the same rules, as for a single run."""
        from lumped.metrics import run_figures

        return [run_figures(self.system(i), self.variant(i), **options) for i in range(self.count)]


@dataclass(frozen=True)
class VariantRun:
    """One variant of a batch: time (s) and its channels (samples × items), SI."""

    time: np.ndarray
    body_ids: tuple[str, ...]
    element_ids: tuple[str, ...]
    displacement: np.ndarray
    velocity: np.ndarray
    acceleration: np.ndarray
    deflection: np.ndarray
    force: np.ndarray
    events: list[Event]
    status: str
    message: str

    def channels(self) -> dict[str, tuple[str, np.ndarray]]:
        """Time and the variant's body and element channels, ``"ID.quantity" → (unit, values)``."""
        return motion_channels(self)

    def to_frame(self):
        """The channels as a pandas DataFrame with ``"ID.quantity [unit]"`` columns."""
        return channels_frame(self.channels())


def _by_variant(array: np.ndarray, count: int) -> np.ndarray:
    """A batch's channels (samples, variants × items) as (variants, samples, items), a view."""
    return array.reshape(len(array), count, array.shape[1] // count).transpose(1, 0, 2)


def _prefix(i: int) -> str:
    return f"v{i}_"


def _unstacked(problem) -> str:
    """A problem of the stacked system, told of the variant: "variant 3: bodies.body.mass: …"."""
    group, _, item = problem.item.partition(".")
    head, _, rest = item.partition("_")
    if head.startswith("v") and head[1:].isdigit():
        return f"variant {head[1:]}: {dataclasses.replace(problem, item=f'{group}.{rest}')}"
    return str(problem)


def _refuse(problems: list, told) -> None:
    """Raise :class:`VariantError` listing the first five ``problems``, each as ``told`` tells it."""
    if problems:
        raise VariantError("; ".join(told(p) for p in problems[:5]) + (" …" if len(problems) > 5 else ""))


def _copy(item, **fields):
    """A copy of the frozen dataclass ``item`` with ``fields`` replaced — what
    ``dataclasses.replace`` gives, some ten times faster, for the thousands of items of
    a batch (the items have no ``__post_init__``; ``check_system`` checks the values)."""
    clone = object.__new__(type(item))
    clone.__dict__.update(item.__dict__)
    clone.__dict__.update(fields)
    return clone


def _stacked(base: System, values: Mapping[str, np.ndarray], count: int) -> System:
    """The ``count`` variants of ``base`` side by side, variant i's fields set from
    ``values`` (one array per ``"group.id.field"``): every body and element id of
    variant i prefixed ``v{i}_``; supports and inputs shared (a support is a
    prescribed motion, the same for every variant)."""
    changes: dict[tuple[str, str], list[tuple[str, np.ndarray]]] = {}
    for path, v in values.items():
        group, item_id, field = _parse(path, base)
        changes.setdefault((group, item_id), []).append((field, v))
    groups: dict[str, dict] = {g: {} for g in _GROUPS}
    groups["supports"] = dict(base.supports)
    for i in range(count):
        p = _prefix(i)

        def node(name: str, p=p) -> str:
            return name if name in base.supports else p + name

        def renamed(group: str, item, i=i, p=p, **fields):
            fields.update({f: float(v[i]) for f, v in changes.get((group, item.id), ())})
            return _copy(item, id=p + item.id, **fields)

        for body in base.bodies.values():
            groups["bodies"][p + body.id] = renamed("bodies", body)
        for group in ("springs", "dampers", "inerters"):
            for e in getattr(base, group).values():
                groups[group][p + e.id] = renamed(group, e, between=(node(e.between[0]), node(e.between[1])))
        for f in base.forces.values():
            groups["forces"][p + f.id] = renamed("forces", f, on=p + f.on)
    return dataclasses.replace(base, name=f"{base.name} ({count} variants)", **groups)


#: The changes :func:`simulate_variants` makes on copies of the base's matrices (group,
#: field → the matrices' array, see :func:`lumped.assemble.copies`). The rules on these
#: fields are bounds, so :func:`_values_fit` checks every value by the extremes.
_COPY_FIELDS = {
    ("bodies", "mass"): "mass",
    ("springs", "stiffness"): "stiffness",
    ("springs", "preload"): "preload",
    ("dampers", "coefficient"): "damping",
    ("inerters", "inertance"): "inertance",
}


def _copyable(system: System, group: str, item_id: str, field: str) -> bool:
    """True when the change of ``group.item_id.field`` is a value of the assembled
    matrices (not a gap, a rebound coefficient, an initial displacement, …)."""
    return (group, field) in _COPY_FIELDS and not (group == "dampers" and system.dampers[item_id].coefficient is None)


def _values_fit(system: System, values: Mapping[str, np.ndarray]) -> bool:
    """True when the system with every change at its smallest value, and with every
    change at its largest, passes the checks (all values do then: see :data:`_COPY_FIELDS`)."""
    try:
        for extreme in (np.min, np.max):
            variant_system(system, {path: extreme(v) for path, v in values.items()})
    except VariantError:
        return False
    return True


def simulate_variants(
    system: System,
    changes: Mapping[str, Sequence[float]],
    stepper: str | None = None,
    dt: float | None = None,
    duration: float | None = None,
    output_rate: float | None = None,
    output_every: int | None = None,
    specialise: bool | None = None,
) -> VariantRuns:
    """Run every variant of ``system`` given by ``changes`` (one array of values per
    ``"group.id.field"``, all of one length) in one call of the engine.

    Settings default to the file's ``[run]``, as in :func:`lumped.simulate.simulate`
    (``specialise`` too: small linear systems under explicit Runge–Kutta steppers
    then step every variant as a lane of one generated kernel).
    The step check of a batch is each variant's business (:func:`lumped.stability.check_step`);
    a batch that diverges reports it for the batch as a whole.
    """
    if not changes:
        raise VariantError("give at least one change, as {'springs.tyre.stiffness': [...]}")
    values = {path: np.asarray(v, dtype=float).ravel() for path, v in changes.items()}
    lengths = {len(v) for v in values.values()}
    if any(path.startswith("supports.") for path in values):
        raise VariantError("supports are shared by every variant; vary bodies, elements or forces")
    if len(lengths) != 1 or 0 in lengths:
        raise VariantError(f"every change needs the same, non-zero number of values; got {sorted(lengths)}")
    parsed = {path: _parse(path, system) for path in values}
    for path, v in values.items():
        if not np.all(np.isfinite(v)):
            raise VariantError(f"variant change {path!r}: every value must be finite")
    count = lengths.pop()
    _refuse(check_system(system), str)
    settings = (stepper, dt, duration, output_rate, output_every)
    prefixes = [_prefix(i) for i in range(count)]
    if all(_copyable(system, *parts) for parts in parsed.values()) and _values_fit(system, values):
        # Every change is a value of the assembled matrices: the copies are made from the
        # system's assembly by array operations (no system of copies is built).
        changes = {(_COPY_FIELDS[group, field], item_id): values[path]
                   for path, (group, item_id, field) in parsed.items()}  # fmt: skip
        prepared = prepare_copies(system, prefixes, changes)
    else:
        stacked = _stacked(system, values, count)
        # One check of every variant's values; each variant's graph is the base's, checked above.
        _refuse(check_system(stacked, connectivity=False), _unstacked)
        # Bodies are laid variant by variant; elements by group, so the batch's element
        # channels are put in variant order, and each variant's are a view.
        prepared = prepare(stacked, lanes=count)
        position = {element: k for k, element in enumerate(prepared.matrices.element_ids)}
        order = np.array([position[p + x] for p in prefixes for x in system.elements], dtype=np.int64)
        prepared = dataclasses.replace(prepared, element_order=order)
    batch = simulate(prepared, *settings, check=False, specialise=specialise)
    n, ne = len(batch.body_ids) // count, len(batch.element_ids) // count
    events: list[list[Event]] = [[] for _ in range(count)]
    for event in batch.events:
        head, _, rest = event.element.partition("_")
        if head.startswith("v") and head[1:].isdigit():
            events[int(head[1:])].append(dataclasses.replace(event, element=rest))
    first = _prefix(0)
    return VariantRuns(
        parameters=values,
        time=batch.time,
        body_ids=tuple(b[len(first):] for b in batch.body_ids[:n]),
        element_ids=tuple(e[len(first):] for e in batch.element_ids[:ne]),
        displacement=_by_variant(batch.displacement, count),
        velocity=_by_variant(batch.velocity, count),
        acceleration=_by_variant(batch.acceleration, count),
        events=events,
        status=batch.status,
        message=batch.message,
        batch=batch,
        base=system,
    )
