"""Tables and text for the dashboard, built from library results. Pure functions: no
Streamlit, no physics; values are formatted with :func:`lumped.units.display`."""

from __future__ import annotations

import math
import re
import tempfile
from functools import lru_cache
from pathlib import Path

import pandas as pd

import lumped
from lumped.output import write_result
from lumped.units import display

__all__ = [
    "NO_VALUE",
    "as_text",
    "bodies_frame",
    "check_modes_frame",
    "elements_frame",
    "events_frame",
    "figures_frame",
    "mode_kind",
    "modes_frame",
    "number_text",
    "peaks_frame",
    "run_csv_bytes",
    "step_text",
    "unit_text",
    "force_text",
    "length_text",
    "mass_text",
    "md_escape",
    "problem_rows",
    "problems_frame",
    "supports_frame",
]

#: Shown where a value does not exist (no static equilibrium, fixed support's delay).
NO_VALUE = "—"

_MARKDOWN_SPECIAL = re.compile(r"([\\`*_{}\[\]<>()#+!|~$:])")


def md_escape(text: object) -> str:
    """``text`` (which may come from an uploaded file) shown literally in Streamlit
    markdown: markdown punctuation, colour/emoji directives and math are escaped."""
    out = _MARKDOWN_SPECIAL.sub(r"\\\1", str(text))
    # A leading "-", "1." or "=" would start a list or a heading underline.
    out = re.sub(r"^(\s*)([-=])", r"\1\\\2", out, flags=re.M)
    return re.sub(r"^(\s*\d+)\.", r"\1\\.", out, flags=re.M)


@lru_cache(maxsize=65536)
def _display(value: float, dimension: str, unit: str | None, digits: int) -> str:
    # Large systems repeat many values (equal masses, zero damper forces); formatting
    # each distinct value once keeps their tables and drawing quick to build.
    return display(value, dimension, unit=unit, digits=digits)


def length_text(value: float | None) -> str:
    """A length (m) as text in mm, or NO_VALUE when there is none."""
    if value is None or not math.isfinite(value):
        return NO_VALUE
    return _display(float(value) + 0.0, "length", None, 5)


def force_text(value: float | None) -> str:
    """A force (N) as text in kN, or NO_VALUE when there is none."""
    if value is None or not math.isfinite(value):
        return NO_VALUE
    return _display(float(value) + 0.0, "force", "kN", 4)


def mass_text(value: float) -> str:
    """A mass (kg) as text with its unit."""
    return _display(float(value), "mass", None, 4)


def bodies_frame(summary: lumped.SystemSummary) -> pd.DataFrame:
    """One row per body: id, label, mass, static deflection (mm, negative = down)."""
    return pd.DataFrame(
        [
            {
                "id": b["id"],
                "label": b["label"],
                "mass": mass_text(b["mass"]),
                "static deflection": length_text(b["static_deflection"]),
            }
            for b in summary.bodies
        ],
        columns=["id", "label", "mass", "static deflection"],
    )


def supports_frame(
    summary: lumped.SystemSummary, system: lumped.System | None = None
) -> pd.DataFrame:
    """One row per support: id, label, motion (fixed, or the input it follows and that
    input's kind when ``system`` is given) and delay."""
    rows = []
    for s in summary.supports:
        if s["motion"]:
            inp = system.inputs.get(s["motion"]) if system is not None else None
            motion = f"follows input {s['motion']}" + (f" ({inp.kind})" if inp is not None else "")
            delay = display(s["delay"], "time")
        else:
            motion, delay = "fixed", NO_VALUE
        rows.append({"id": s["id"], "label": s["label"], "motion": motion, "delay": delay})
    return pd.DataFrame(rows, columns=["id", "label", "motion", "delay"])


def elements_frame(summary: lumped.SystemSummary) -> pd.DataFrame:
    """One row per element: id, kind, between ("a → b"), values with units, static force
    (kN, tension positive) and static deflection (mm, extension positive)."""
    return pd.DataFrame(
        [
            {
                "id": e["id"],
                "kind": e["kind"],
                "between": " → ".join(e["between"]),
                "values": e["values"],
                "static force": force_text(e["static_force"]),
                "static deflection": length_text(e["static_deflection"]),
            }
            for e in summary.elements
        ],
        columns=["id", "kind", "between", "values", "static force", "static deflection"],
    )


def problem_rows(error: Exception) -> list[dict]:
    """The problems of a failed load, one dict per problem (item, field, problem)."""
    if isinstance(error, lumped.ModelError) and error.problems:
        problems = [(p.item, p.field, p.message) for p in error.problems]
    elif isinstance(error, lumped.LumpedError):
        problems = [("", "", line.strip()) for line in error.lines() if line.strip()]
    else:
        problems = [("", "", f"the file could not be read ({type(error).__name__})")]
    return [
        {"item": item or "(whole file)", "field": field or NO_VALUE, "problem": message}
        for item, field, message in problems
    ]


def problems_frame(rows: list[dict]) -> pd.DataFrame:
    """Problem rows from :func:`problem_rows` as a table."""
    return pd.DataFrame(rows, columns=["item", "field", "problem"])


# --------------------------------------------------------------------------- modes and step limits


def mode_kind(mode) -> str:
    """ "rigid-body", "overdamped" or "oscillatory" for a :class:`lumped.modal.Mode`."""
    if mode.rigid:
        return "rigid-body"
    return "overdamped" if mode.overdamped else "oscillatory"


def modes_frame(modal) -> pd.DataFrame:
    """One row per mode of a :class:`lumped.modal.ModalResult`, numbered from 1:
    natural, damped and undamped frequency (Hz), damping ratio (None for a rigid-body
    mode) and kind."""
    return pd.DataFrame(
        [
            {
                "mode": k,
                "natural [Hz]": m.natural_frequency_hz,
                "damped [Hz]": m.damped_frequency_hz,
                "undamped [Hz]": m.undamped_frequency_hz,
                "damping ratio": m.damping_ratio,
                "kind": mode_kind(m),
            }
            for k, m in enumerate(modal.modes, 1)
        ],
        columns=["mode", "natural [Hz]", "damped [Hz]", "undamped [Hz]", "damping ratio", "kind"],
    )


def step_text(value: float | None) -> str:
    """A step limit as text: "no limit" for inf, "none stable" for None or 0."""
    if value is None or value == 0:
        return "none stable"
    if math.isinf(value):
        return "no limit"
    if math.isnan(value):
        return NO_VALUE
    return display(float(value), "time", digits=5)


def number_text(value: float | None, digits: int = 4) -> str:
    """A plain number as text (NO_VALUE for None or NaN, ∞ for infinity)."""
    if value is None or (isinstance(value, float) and math.isnan(value)):
        return NO_VALUE
    if math.isinf(value):
        return "∞" if value > 0 else "−∞"
    return f"{value:.{digits}g}"


def as_text(frame: pd.DataFrame, columns, digits: int = 4) -> pd.DataFrame:
    """A copy of ``frame`` with the number ``columns`` as text of ``digits``
    significant digits (values of very different sizes stay readable)."""
    out = frame.copy()
    for column in columns:
        out[column] = [number_text(None if v is None else float(v), digits) for v in out[column]]
    return out


def check_modes_frame(check) -> pd.DataFrame:
    """One row per mode of a :class:`lumped.stability.StepCheck`, numbered from 1: the
    state it belongs to (linearised, stiffest contact state, or bound), frequency,
    damping ratio, its step limit, spectral radius per step, growth over the run, the
    stepper's numerical damping ratio and period error; ``limit`` marks the mode that
    sets the system's limit."""
    rows = []
    for k, m in enumerate(check.modes, 1):
        rows.append(
            {
                "mode": k,
                "state": getattr(m, "state", ""),
                "frequency [Hz]": number_text(m.natural_frequency_hz, 6),
                "damping ratio": number_text(m.damping_ratio),
                "max stable dt": step_text(m.max_stable_dt),
                "radius per step": f"{m.spectral_radius:.9f}",
                "growth over run": number_text(m.growth_over_run, 6),
                "numerical damping": number_text(m.numerical_damping_ratio),
                "period error": NO_VALUE if m.period_error is None else f"{m.period_error:+.3e}",
                "limit": "sets the limit" if check.limiting_mode == k - 1 else "",
            }
        )
    columns = ["mode", "state", "frequency [Hz]", "damping ratio", "max stable dt", "radius per step",
               "growth over run", "numerical damping", "period error", "limit"]  # fmt: skip
    return pd.DataFrame(rows, columns=columns)


# --------------------------------------------------------------------------- responses and runs


def unit_text(unit: str) -> str:
    """A library unit for people: "m/s^2" → "m/s²", "1" (a ratio or share) → "ratio"."""
    if unit == "1":
        return "ratio"
    return unit.replace("^2", "²")


def peaks_frame(transfer) -> pd.DataFrame:
    """The peaks of a :class:`lumped.frequency.Transfer`: frequency (Hz), magnitude (in
    the transfer's unit per unit input) and phase (degrees)."""
    unit = unit_text(transfer.unit)
    return pd.DataFrame(
        [
            {"peak": k, "frequency [Hz]": p.frequency_hz, f"|H| [{unit}]": p.magnitude,
             "phase [deg]": p.phase_deg}
            for k, p in enumerate(transfer.peaks, 1)
        ],
        columns=["peak", "frequency [Hz]", f"|H| [{unit}]", "phase [deg]"],
    )  # fmt: skip


def figures_frame(rows) -> pd.DataFrame:
    """Figure rows of :func:`lumped.metrics.run_figures` or ``road_figures`` as a table:
    figure (its name), item, value (SI), unit and the rule it follows."""
    return pd.DataFrame(
        [
            {"figure": r.name, "item": r.item, "value": r.value, "unit": unit_text(r.unit),
             "rule": r.rule}
            for r in rows
        ],
        columns=["figure", "item", "value", "unit", "rule"],
    )  # fmt: skip


def events_frame(events) -> pd.DataFrame:
    """The events of a run (contact changes, support jumps): time (s), element, event."""
    return pd.DataFrame(
        [{"time [s]": e.time, "element": e.element, "event": e.kind} for e in events],
        columns=["time [s]", "element", "event"],
    )


def run_csv_bytes(result) -> bytes:
    """The CSV file of a run, as :func:`lumped.output.write_result` writes it."""
    with tempfile.TemporaryDirectory(prefix="lumped-run-") as folder:
        path = write_result(result, Path(folder) / "run.csv")
        return path.read_bytes()
