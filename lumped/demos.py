"""The demo systems shipped in ``demo_systems/`` (invented scenarios)."""

from __future__ import annotations

from pathlib import Path

__all__ = ["DEMO_DIR", "demo_systems", "demo_path"]

#: Folder of the demo system files, beside the package in the source tree.
DEMO_DIR = Path(__file__).resolve().parents[1] / "demo_systems"


def demo_systems() -> dict[str, Path]:
    """Demo system files by stem (e.g. ``"quarter_car"``), sorted by name."""
    return {p.stem: p for p in sorted(DEMO_DIR.glob("*.toml"))}


def demo_path(name: str) -> Path:
    """The path of demo ``name`` (a stem of :func:`demo_systems`)."""
    demos = demo_systems()
    if name not in demos:
        raise KeyError(f"no demo system {name!r}; known: {', '.join(demos)}")
    return demos[name]
