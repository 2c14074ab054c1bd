"""The lumped dashboard: open a system (a demo or an uploaded file), read its summary
tables and see it drawn as a graph; find its modes and check a step against them;
plot frequency responses; run it and read its design figures.

Start it from the repository root with ``streamlit run dashboard/app.py`` (or
``lumped serve``). Every number shown comes from the library's public API.
"""

from __future__ import annotations

import hashlib
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
if str(ROOT) not in sys.path:  # streamlit puts only this folder on sys.path
    sys.path.insert(0, str(ROOT))

import streamlit as st  # noqa: E402

import lumped  # noqa: E402
from dashboard import figures, tables, views  # noqa: E402
from lumped.units import display  # noqa: E402

CAUTION = (
    "Simulation supports, but does not replace, physical testing, the applicable standards "
    "and regulations, and licensed engineering sign-off."
)
DEMO_NOTE = (
    "The demo systems are invented scenarios, not data from real vehicles, machines or structures."
)
DEFAULT_DEMO = "quarter_car"
TABS = ["System", "Modes & step limits", "Frequency response", "Run"]
UPLOAD_HELP = (
    "A system file in the lumped/1 format (TOML, UTF-8). Table inputs read a CSV file beside "
    "the system file, so a file that uses them can only be opened from disk."
)


# --------------------------------------------------------------------------- loading


@st.cache_resource(show_spinner=False)
def demo_system(stem: str) -> lumped.System:
    """A demo system, read once per server (never modified by the page)."""
    return lumped.load(lumped.demo_path(stem))


@st.cache_resource(show_spinner=False)
def demo_summary(stem: str) -> lumped.SystemSummary:
    return lumped.summarize(demo_system(stem))


def demo_names() -> dict[str, str]:
    """Display name of each demo by stem; a demo that cannot be read says so."""
    names = {}
    for stem in lumped.demo_systems():
        try:
            names[stem] = demo_system(stem).name
        except lumped.LumpedError:
            names[stem] = f"{stem} (cannot be read)"
    return names


def build_view(system: lumped.System, summary: lumped.SystemSummary) -> dict:
    """The tables and the drawing of a system, built once when it is opened."""
    return {
        "figure": figures.system_graph(system, summary),
        "bodies": tables.bodies_frame(summary),
        "supports": tables.supports_frame(summary, system),
        "elements": tables.elements_frame(summary),
    }


def show(system: lumped.System, summary: lumped.SystemSummary, source: str, key: str) -> None:
    """Make ``system`` the one on screen; ``key`` names it for the caches (the demo's
    stem, or the uploaded file's name and a hash of its bytes)."""
    state = st.session_state
    state.view = build_view(system, summary)
    state.system, state.summary, state.source = system, summary, source
    state.system_key = key


def show_demo(stem: str) -> None:
    """Make demo ``stem`` the system on screen; on failure keep the current one."""
    state = st.session_state
    state.demo_shown = stem
    state.upload_report = None
    try:
        system, summary = demo_system(stem), demo_summary(stem)
        show(system, summary, f"demo system · {stem}.toml", f"demo:{stem}")
    except Exception as exc:  # a broken demo file must not break the page
        state.upload_report = {"name": f"demo {stem}", "rows": tables.problem_rows(exc)}


def open_upload(name: str, data: bytes) -> None:
    """Make an uploaded file the system on screen, or list its problems and keep the
    current system."""
    state = st.session_state
    try:
        system = lumped.loads(data, source=name)
        digest = hashlib.sha256(data).hexdigest()[:16]
        show(system, lumped.summarize(system), f"uploaded file · {name}", f"upload:{name}:{digest}")
    except Exception as exc:  # nothing a user uploads may end in a traceback
        state.upload_report = {"name": name, "rows": tables.problem_rows(exc)}
        return
    state.upload_report = None


# --------------------------------------------------------------------------- page


def sidebar(names: dict[str, str]) -> None:
    state = st.session_state
    stems = list(names)
    with st.sidebar:
        st.markdown("### lumped")
        st.caption("Lumped-parameter mechanical systems: masses, springs and dampers on supports.")
        default = DEFAULT_DEMO if DEFAULT_DEMO in stems else stems[0]
        choice = st.selectbox(
            "Demo system", stems, index=stems.index(default), format_func=names.__getitem__,
            key="demo",
        )  # fmt: skip
        if choice != state.get("demo_shown"):
            show_demo(choice)
        back_slot = st.empty()  # filled once the upload below has been handled
        st.caption(DEMO_NOTE)
        st.divider()
        upload = st.file_uploader(
            "Open a system file", type=["toml"], key="upload", help=UPLOAD_HELP
        )
        if upload is None:
            if state.get("upload_seen") is not None:
                state.upload_seen = None
                state.upload_report = None
        elif upload.file_id != state.get("upload_seen"):
            state.upload_seen = upload.file_id
            open_upload(upload.name, upload.getvalue())
        if not state.source.startswith("demo"):
            back_slot.button(
                "Show this demo again", key="back_to_demo", on_click=show_demo, args=(choice,)
            )


def upload_problems() -> None:
    report = st.session_state.get("upload_report")
    if not report:
        return
    count = len(report["rows"])
    still = st.session_state.get("system")
    kept = f" Still showing **{tables.md_escape(still.name)}**." if still is not None else ""
    st.error(
        f"**{tables.md_escape(report['name'])}** could not be opened: "
        f"{count} problem{'s' if count != 1 else ''}, listed below by item and field.{kept}",
        icon=":material/error:",
    )
    st.dataframe(
        tables.problems_frame(report["rows"]), hide_index=True, key="problems",
        column_config={"problem": st.column_config.TextColumn("problem", width="large")},
    )  # fmt: skip


def _text_column(label: str, width: int | None, right: bool = False, help: str | None = None):
    return st.column_config.TextColumn(
        label, width=width, alignment="right" if right else "left", help=help
    )


def header(summary: lumped.SystemSummary) -> None:
    """Name, description, counts and the caution: above the tabs, so always in view."""
    st.title(tables.md_escape(summary.name), anchor=False)
    if summary.description:
        st.markdown(tables.md_escape(summary.description))
    n_b, n_s, n_e = len(summary.bodies), len(summary.supports), len(summary.elements)
    st.caption(
        f"{tables.md_escape(st.session_state.source)} · {n_b} bod{'ies' if n_b != 1 else 'y'} · "
        f"{n_s} support{'s' if n_s != 1 else ''} · {n_e} element{'s' if n_e != 1 else ''} · "
        f"gravity {display(summary.gravity, 'acceleration')}"
    )
    st.caption(f":material/health_and_safety: {CAUTION}")
    if summary.static_error:
        st.warning(
            f"**No static equilibrium under gravity.** {tables.md_escape(summary.static_error)} "
            "The tables and the drawing show the system without static values.",
            icon=":material/warning:",
        )


def system_tab(view: dict) -> None:
    left, right = st.columns(2, gap="large")
    with left:
        st.subheader("Graph", anchor=False)
        st.plotly_chart(
            view["figure"], key="graph",
            config={"displaylogo": False, "scrollZoom": True,
                    "toImageButtonOptions": {"filename": "system", "format": "png", "scale": 2}},
        )  # fmt: skip
        st.caption(
            "Height is the level above the supports, not a coordinate. Springs solid, dampers "
            "dashed, inerters dotted; hover over a line's midpoint for its static values."
        )
    with right:
        st.subheader("Bodies", anchor=False)
        st.dataframe(
            view["bodies"], hide_index=True, key="bodies",
            column_order=["id", "mass", "static deflection", "label"],
            column_config={
                "id": _text_column("id", 100),
                "mass": _text_column("mass", 85, right=True),
                "static deflection": _text_column(
                    "static deflection", 130, right=True,
                    help="Static position under gravity, from the unloaded position; "
                    "negative = down."),
            },
        )  # fmt: skip
        st.subheader("Supports", anchor=False)
        st.dataframe(
            view["supports"], hide_index=True, key="supports",
            column_order=["id", "motion", "delay", "label"],
            column_config={
                "id": _text_column("id", 100),
                "delay": _text_column("delay", 70, right=True),
            },
        )  # fmt: skip

    st.subheader("Elements", anchor=False)
    st.dataframe(
        view["elements"], hide_index=True, key="elements",
        # the long description last: on a narrow screen it is what runs out of room, not a number
        column_order=["id", "kind", "between", "static force", "static deflection", "values"],
        column_config={
            "id": _text_column("id", 160),
            "kind": _text_column("kind", 80),
            "between": _text_column("between", 180),
            "static force": _text_column(
                "static force", 110, right=True, help="Under gravity; positive = tension."),
            "static deflection": _text_column(
                "static deflection", 130, right=True,
                help="Change of length under gravity; positive = extension."),
        },
    )  # fmt: skip
    st.caption(
        "Static values under gravity, from the unloaded positions: body deflection negative = "
        "down; element force positive = tension, deflection positive = extension."
    )


def main() -> None:
    st.set_page_config(page_title="lumped · system", layout="wide")
    names = demo_names()
    if not names:
        st.error("No demo systems were found beside the package.")
    state = st.session_state
    views.keep_settings()  # before any widget: closed tabs keep their settings
    state.setdefault("system", None)
    state.setdefault("summary", None)
    state.setdefault("source", "")
    state.setdefault("upload_report", None)
    if names:
        sidebar(names)
    upload_problems()
    if state.system is not None:
        views.reset_settings(state.system, state.system_key)
        header(state.summary)
        # Lazy tabs: only the open one runs, so a closed tab's analysis costs nothing.
        tabs = st.tabs(TABS, key="section", on_change="rerun")
        pages = [
            lambda: system_tab(state.view),
            lambda: views.modes_tab(state.system, state.system_key),
            lambda: views.response_tab(state.system, state.system_key),
            lambda: views.run_tab(state.system, state.system_key),
        ]
        for tab, page in zip(tabs, pages, strict=True):
            with tab:
                if tab.open:
                    page()
    else:
        st.info("Choose a demo system or open a system file in the sidebar.")
        st.caption(f":material/health_and_safety: {CAUTION}")


main()
