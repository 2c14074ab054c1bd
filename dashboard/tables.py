"""Tables and text for the dashboard, built from library results. Pure functions: no
Streamlit, no physics; values are formatted with :func:`lumped.units.display`."""

from __future__ import annotations

import math
import re
from functools import lru_cache

import pandas as pd

import lumped
from lumped.units import display

__all__ = [
    "NO_VALUE",
    "bodies_frame",
    "elements_frame",
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
