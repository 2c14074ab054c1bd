"""The dashboard's first page (AppTest) and its figure and table builders."""

from __future__ import annotations

import math
import sys
import tomllib
from pathlib import Path

import numpy as np
import pytest
import streamlit as st
from streamlit.testing.v1 import AppTest
from streamlit.testing.v1.errors import AppTestError

import lumped
import lumped.frequency
import lumped.metrics
import lumped.modal
import lumped.simulate
import lumped.stability
from lumped.units import display

ROOT = Path(__file__).resolve().parents[1]
if str(ROOT) not in sys.path:
    sys.path.insert(0, str(ROOT))

from dashboard import choices, figures, tables, views  # noqa: E402

APP = str(ROOT / "dashboard" / "app.py")
CAUTION = "Simulation supports, but does not replace, physical testing"

BAD_FILE = b"""format = "lumped/1"
name = "Broken corner"

[bodies.wheel]
mass = "-5 kg"

[supports.road]

[springs.tyre]
between = ["road", "wheel"]
stiffness = "200 kN/m"

[springs.link]
between = ["wheel", "chassis"]
stiffness = "20 kN/m"
"""

GOOD_FILE = b"""format = "lumped/1"
name = "Test rig, single mass"
description = "A mass on a spring and a damper."

[bodies.sled]
mass = "25 kg"

[supports.base]

[springs.k]
between = ["base", "sled"]
stiffness = "10 kN/m"

[dampers.c]
between = ["base", "sled"]
coefficient = "120 N*s/m"
"""

NO_EQUILIBRIUM_FILE = b"""format = "lumped/1"
name = "Lamp on a push-only spring"

[bodies.lamp]
mass = "3 kg"

[supports.ceiling]

[springs.hanger]
between = ["lamp", "ceiling"]
stiffness = "2 kN/m"
acts = "compression"
"""

TABLE_INPUT_FILE = b"""format = "lumped/1"
name = "Replayed road"

[bodies.m]
mass = "10 kg"

[supports.g]
motion = "measured"

[springs.k]
between = ["g", "m"]
stiffness = "1 kN/m"

[inputs.measured]
kind = "table"
file = "road.csv"
"""


@pytest.fixture(autouse=True)
def _fresh_caches():
    st.cache_data.clear()
    st.cache_resource.clear()
    yield
    st.cache_data.clear()
    st.cache_resource.clear()


def _open() -> AppTest:
    at = AppTest.from_file(APP, default_timeout=60)
    at.run()
    assert not at.exception, [e.message for e in at.exception]
    return at


def _upload(at: AppTest, name: str, data: bytes) -> AppTest:
    at.get("file_uploader")[0].set_value((name, data, "application/toml")).run()
    assert not at.exception, [e.message for e in at.exception]
    return at


def _shown_name(at: AppTest) -> str:
    return at.title[0].value.replace("\\", "")


# Each table on the page, told apart by a column only it has.
_TABLE_COLUMN = {"bodies": "mass", "supports": "motion", "elements": "kind", "problems": "problem"}


def _frame(at: AppTest, table: str):
    found = [f.value for f in at.dataframe if _TABLE_COLUMN[table] in f.value.columns]
    assert len(found) == 1, f"expected one {table} table, found {len(found)}"
    return found[0]


def _captions(at: AppTest) -> str:
    return "\n".join(c.value for c in at.caption)


# --------------------------------------------------------------------------- page


def test_opens_with_the_quarter_car_demo():
    at = _open()
    quarter_car = lumped.load(lumped.demo_path("quarter_car"))
    assert _shown_name(at) == quarter_car.name
    assert at.selectbox(key="demo").value == "quarter_car"
    assert CAUTION in _captions(at)
    assert "invented scenarios" in _captions(at)
    assert not at.error and not at.warning

    bodies = _frame(at, "bodies")
    assert list(bodies.columns) == ["id", "label", "mass", "static deflection"]
    assert list(bodies["id"]) == ["wheel", "body"]
    assert list(bodies["mass"]) == [display(42.0, "mass"), display(380.0, "mass")]
    assert all(v.endswith(" kg") for v in bodies["mass"])
    assert all(v.startswith("-") and v.endswith(" mm") for v in bodies["static deflection"])

    supports = _frame(at, "supports")
    assert list(supports["id"]) == ["road"]
    assert "speed_bump" in supports["motion"][0]

    elements = _frame(at, "elements")
    assert list(elements.columns) == [
        "id", "kind", "between", "values", "static force", "static deflection",
    ]  # fmt: skip
    assert list(elements["between"]) == ["road → wheel", "wheel → body", "wheel → body"]
    assert list(elements["kind"]) == ["spring", "spring", "damper"]
    summary = lumped.summarize(quarter_car)
    assert list(elements["values"]) == [e["values"] for e in summary.elements]
    assert "230 kN/m" in elements["values"][0]
    assert all(v.endswith(" kN") for v in elements["static force"])
    assert len(at.get("plotly_chart")) == 1


def test_every_demo_can_be_shown_in_turn():
    at = _open()
    seen = []
    for stem, path in lumped.demo_systems().items():
        at.selectbox(key="demo").set_value(stem).run()
        assert not at.exception, (stem, [e.message for e in at.exception])
        name = lumped.load(path).name
        assert _shown_name(at) == name
        assert len(_frame(at, "bodies")) == len(lumped.load(path).bodies)
        assert CAUTION in _captions(at)
        seen.append(name)
    assert len(set(seen)) == len(seen) >= 2


def test_bad_upload_lists_problems_and_keeps_the_shown_system():
    at = _open()
    at.selectbox(key="demo").set_value("truck_cab_frame_axle").run()
    truck = lumped.load(lumped.demo_path("truck_cab_frame_axle")).name
    _upload(at, "broken.toml", BAD_FILE)

    problems = _frame(at, "problems")
    assert list(problems.columns) == ["item", "field", "problem"]
    pairs = set(zip(problems["item"], problems["field"], strict=True))
    assert ("bodies.wheel", "mass") in pairs
    assert ("springs.link", "between") in pairs
    messages = " ".join(problems["problem"])
    assert "positive" in messages and "chassis" in messages
    assert len(at.error) == 1
    assert "broken.toml" in at.error[0].value and "2 problems" in at.error[0].value
    assert truck in at.error[0].value.replace("\\", "")
    # The truck is still the system on screen, with its tables.
    assert _shown_name(at) == truck
    assert list(_frame(at, "bodies")["id"]) == ["axle", "frame", "cab"]


@pytest.mark.parametrize(
    ("data", "expected"),
    [
        (bytes(range(256)) * 4, "UTF-8"),
        (b"\x89PNG\r\n\x1a\n\x00\x00\x00\rIHDR", "UTF-8"),
        (b"this = is = not toml [[", "not a TOML file"),
        (b'format = "something/else"\nname = "x"\n', "format"),
    ],
)
def test_unreadable_upload_gives_a_clear_message(data, expected):
    at = _open()
    _upload(at, "blob.toml", data)
    problems = _frame(at, "problems")
    assert len(problems) >= 1
    assert expected in " ".join(problems["problem"]) + " ".join(problems["field"])
    assert _shown_name(at) == lumped.load(lumped.demo_path("quarter_car")).name


def test_table_input_upload_says_it_needs_the_file_on_disk():
    at = _open()
    _upload(at, "replay.toml", TABLE_INPUT_FILE)
    problems = _frame(at, "problems")
    rows = problems[problems["item"] == "inputs.measured"]
    assert "on disk" in " ".join(rows["problem"])
    assert set(rows["field"]) == {"file"}


def test_good_upload_is_shown_and_the_demo_can_come_back():
    at = _open()
    _upload(at, "rig.toml", GOOD_FILE)
    assert _shown_name(at) == "Test rig, single mass"
    assert not at.error
    assert "rig.toml" in _captions(at).replace("\\", "")
    assert list(_frame(at, "elements")["id"]) == ["k", "c"]

    at.button(key="back_to_demo").click().run()
    assert not at.exception
    assert _shown_name(at) == lumped.load(lumped.demo_path("quarter_car")).name


def test_a_failed_upload_after_a_good_one_keeps_the_uploaded_system():
    at = _open()
    _upload(at, "rig.toml", GOOD_FILE)
    _upload(at, "broken.toml", BAD_FILE)
    assert _shown_name(at) == "Test rig, single mass"
    assert len(_frame(at, "problems")) == 2


def test_no_static_equilibrium_is_a_warning_and_the_rest_is_shown():
    at = _open()
    _upload(at, "lamp.toml", NO_EQUILIBRIUM_FILE)
    assert _shown_name(at) == "Lamp on a push-only spring"
    assert len(at.warning) == 1
    assert "No static equilibrium" in at.warning[0].value
    assert "hanger" in at.warning[0].value.replace("\\", "")
    assert list(_frame(at, "bodies")["static deflection"]) == [tables.NO_VALUE]
    assert list(_frame(at, "elements")["static force"]) == [tables.NO_VALUE]
    assert len(at.get("plotly_chart")) == 1


def test_uploaded_text_is_shown_literally():
    text = GOOD_FILE.replace(b'"Test rig, single mass"', b'"Rig :red[loud] **bold** $x$"')
    at = _open()
    _upload(at, "rig.toml", text)
    assert _shown_name(at) == "Rig :red[loud] **bold** $x$"
    assert "\\*\\*bold\\*\\*" in at.title[0].value


def test_server_config_is_locked_down():
    config = tomllib.loads((ROOT / ".streamlit" / "config.toml").read_text())
    server = config["server"]
    assert server["headless"] is True
    assert server["address"] == "127.0.0.1"
    assert server["port"] == 8501
    assert server["maxUploadSize"] == 5
    assert server["enableXsrfProtection"] is True and server["enableCORS"] is True
    assert server["fileWatcherType"] == "none"
    assert config["browser"]["gatherUsageStats"] is False
    assert config["client"]["toolbarMode"] == "minimal"
    assert config["client"]["showErrorDetails"] in ("none", "type")
    assert config["runner"]["magicEnabled"] is False


# --------------------------------------------------------------------------- figure


def _quarter_car():
    system = lumped.load(lumped.demo_path("quarter_car"))
    return system, lumped.summarize(system)


def _trace(fig, name):
    matches = [t for t in fig.data if t.name == name]
    assert len(matches) == 1, (name, [t.name for t in fig.data])
    return matches[0]


def test_graph_of_the_quarter_car():
    system, summary = _quarter_car()
    fig = figures.system_graph(system, summary)
    names = [t.name for t in fig.data]
    assert names == ["spring", "damper", "spring values", "damper values", "body", "support"]
    assert len(fig.layout.annotations) == len(system.elements) == 3
    labels = [a.text for a in fig.layout.annotations]
    assert any("suspension_damper" in t and "rebound" in t for t in labels)
    assert any("tyre" in t and "230 kN/m" in t for t in labels)

    levels = lumped.node_levels(system)
    positions = figures.node_positions(system)
    assert {n: y for n, (x, y) in positions.items()} == {n: float(v) for n, v in levels.items()}
    bodies, supports = _trace(fig, "body"), _trace(fig, "support")
    assert list(bodies.y) == [levels["wheel"], levels["body"]]
    assert list(supports.y) == [levels["road"]] == [0]
    assert levels["road"] < levels["wheel"] < levels["body"]
    assert bodies.marker.symbol == "square" and supports.marker.symbol != bodies.marker.symbol


def test_parallel_elements_are_drawn_apart():
    system, summary = _quarter_car()
    fig = figures.system_graph(system, summary)
    spring_mid, damper_mid = _trace(fig, "spring values"), _trace(fig, "damper values")
    x_wheel = figures.node_positions(system)["wheel"][0]
    # The tyre is alone: its midpoint is on the node column; the suspension spring and
    # damper between wheel and body sit on either side of it.
    tyre_x, spring_x = spring_mid.x
    (damper_x,) = damper_mid.x
    assert tyre_x == pytest.approx(x_wheel)
    assert spring_x < x_wheel < damper_x
    assert spring_mid.y[1] == pytest.approx(damper_mid.y[0])


def test_line_styles_differ_by_kind():
    system = lumped.System(
        name="absorber with inerter",
        bodies={"m": lumped.Body("m", 10.0), "n": lumped.Body("n", 2.0)},
        supports={"g": lumped.Support("g")},
        springs={
            "k": lumped.Spring("k", ("g", "m"), 1e4),
            "k2": lumped.Spring("k2", ("m", "n"), 1e3),
        },
        dampers={"c2": lumped.Damper("c2", ("m", "n"), coefficient=50.0)},
        inerters={"b2": lumped.Inerter("b2", ("m", "n"), 1.0)},
    )
    fig = figures.system_graph(system)
    dashes = {kind: _trace(fig, kind).line.dash for kind in ("spring", "damper", "inerter")}
    assert len(set(dashes.values())) == 3
    # Three parallel elements between m and n: three different midpoints.
    mids = [
        (x, y)
        for kind in ("spring", "damper", "inerter")
        for x, y in zip(
            _trace(fig, f"{kind} values").x, _trace(fig, f"{kind} values").y, strict=True
        )
        if y > 1
    ]
    assert len(mids) == 3 and len({x for x, _ in mids}) == 3
    assert any("kg" in a.text for a in fig.layout.annotations if "b2" in a.text)


def test_nodes_of_one_level_are_spread_sideways():
    system = lumped.System(
        name="two machines on one floor",
        bodies={"a": lumped.Body("a", 100.0), "b": lumped.Body("b", 50.0)},
        supports={"floor": lumped.Support("floor")},
        springs={
            "ka": lumped.Spring("ka", ("floor", "a"), 1e5),
            "kb": lumped.Spring("kb", ("floor", "b"), 1e5),
        },
    )
    positions = figures.node_positions(system)
    assert positions["a"][1] == positions["b"][1] == 1.0
    assert positions["a"][0] != positions["b"][0]
    assert positions["floor"] == (0.0, 0.0)


def test_large_system_drops_labels_but_keeps_hover():
    system = lumped.uniform_chain(120, mass=1.0, stiffness=1e5, damping=10.0)
    fig = figures.system_graph(system)
    assert len(fig.layout.annotations) == 1  # the note that labels are hidden
    assert "hover" in fig.layout.annotations[0].text
    assert _trace(fig, "body").mode == "markers"
    assert len(_trace(fig, "spring values").hovertext) == 120
    assert len(_trace(fig, "damper values").hovertext) == 120
    assert max(_trace(fig, "body").y) == 120


def test_hover_text_has_static_values_and_is_escaped():
    system = lumped.System(
        name="labels",
        bodies={"m": lumped.Body("m", 2.0, label="<b onmouseover=x>mass</b>")},
        supports={"g": lumped.Support("g")},
        springs={"k": lumped.Spring("k", ("g", "m"), 1e4)},
    )
    summary = lumped.summarize(system)
    fig = figures.system_graph(system, summary)
    body_hover = _trace(fig, "body").hovertext[0]
    assert "&lt;b onmouseover=x&gt;" in body_hover and "<b onmouseover" not in body_hover
    spring_hover = _trace(fig, "spring values").hovertext[0]
    assert tables.force_text(summary.elements[0]["static_force"]) in spring_hover
    assert tables.length_text(summary.bodies[0]["static_deflection"]) in body_hover


# --------------------------------------------------------------------------- tables


def test_tables_without_static_equilibrium():
    system = lumped.loads(NO_EQUILIBRIUM_FILE)
    summary = lumped.summarize(system)
    assert summary.static_error
    assert list(tables.bodies_frame(summary)["static deflection"]) == [tables.NO_VALUE]
    frame = tables.elements_frame(summary)
    assert list(frame["between"]) == ["lamp → ceiling"]
    assert list(frame["static force"]) == [tables.NO_VALUE]
    assert list(tables.supports_frame(summary, system)["motion"]) == ["fixed"]


def test_problem_rows_name_item_and_field():
    with pytest.raises(lumped.ModelError) as info:
        lumped.loads(BAD_FILE, source="broken.toml")
    rows = tables.problem_rows(info.value)
    assert [(r["item"], r["field"]) for r in rows] == [
        ("bodies.wheel", "mass"),
        ("springs.link", "between"),
    ]
    assert tables.problem_rows(RuntimeError("boom"))[0]["problem"].endswith("(RuntimeError)")


def test_md_escape():
    assert tables.md_escape("a_b *c* [d](e) $x$ :red[y]") == (
        "a\\_b \\*c\\* \\[d\\]\\(e\\) \\$x\\$ \\:red\\[y\\]"
    )
    assert tables.md_escape("- item\n1. two") == "\\- item\n1\\. two"
    assert tables.md_escape("Delivery van, front corner") == "Delivery van, front corner"


# --------------------------------------------------------------------------- analysis tabs

TWO_DEMOS = ["quarter_car", "machine_on_mounts"]
TABS = ["System", "Modes & step limits", "Frequency response", "Run"]


def _demo(stem: str) -> AppTest:
    at = _open()
    if stem != "quarter_car":
        at.selectbox(key="demo").set_value(stem).run()
        assert not at.exception, [e.message for e in at.exception]
    return at


def _tab(at: AppTest, name: str) -> AppTest:
    at.session_state["section"] = name
    at.run()
    assert not at.exception, [e.message for e in at.exception]
    return at


def _table(at: AppTest, column: str):
    """The one table on the page with ``column``."""
    found = [f.value for f in at.dataframe if column in f.value.columns]
    assert len(found) == 1, f"expected one table with {column!r}, found {len(found)}"
    return found[0]


def _tables_with(at: AppTest, columns: list[str]):
    return [f.value for f in at.dataframe if list(f.value.columns) == columns]


def _plain(text: str) -> str:
    return text.replace("\\", "")


def _demo_system(stem: str) -> lumped.System:
    return lumped.load(lumped.demo_path(stem))


def _set_step(at: AppTest, stepper: str, dt: str, duration: str | None = None) -> AppTest:
    at.selectbox(key="step_stepper").set_value(stepper)
    at.text_input(key="step_dt").input(dt)
    if duration is not None:
        at.text_input(key="step_duration").input(duration)
    at.run()
    assert not at.exception, [e.message for e in at.exception]
    return at


def _run(at: AppTest) -> AppTest:
    at.button(key="run_button").click().run()
    assert not at.exception, [e.message for e in at.exception]
    return at


def test_the_page_has_four_tabs_and_opens_on_the_system():
    at = _open()
    assert [t.label for t in at.tabs] == TABS
    assert at.session_state["section"] == "System"
    # Only the open tab runs: no analysis widgets yet, the caution above the tabs.
    assert not [w for w in at.selectbox if w.key == "step_stepper"]
    assert CAUTION in _captions(at)


@pytest.mark.parametrize("stem", TWO_DEMOS)
def test_modes_tab_lists_the_modes_and_draws_a_shape(stem):
    at = _tab(_demo(stem), "Modes & step limits")
    system = _demo_system(stem)
    modal = lumped.modal.modal_analysis(lumped.assemble(system))
    frame = _table(at, "natural [Hz]")
    assert list(frame.columns) == [
        "mode", "natural [Hz]", "damped [Hz]", "undamped [Hz]", "damping ratio", "kind",
    ]  # fmt: skip
    assert list(frame["mode"]) == list(range(1, len(modal.modes) + 1))
    assert list(frame["natural [Hz]"]) == [f"{m.natural_frequency_hz:.5g}" for m in modal.modes]
    assert list(frame["kind"]) == [tables.mode_kind(m) for m in modal.modes]
    assert set(frame["kind"]) == {"oscillatory"}
    assert at.selectbox(key="mode_pick").value == 0
    charts = at.get("plotly_chart")
    assert len(charts) == 1
    assert "Mode 1" in charts[0].proto.spec
    assert CAUTION in _captions(at)

    at.selectbox(key="mode_pick").set_value(1).run()
    assert not at.exception
    assert "Mode 2" in at.get("plotly_chart")[0].proto.spec


@pytest.mark.parametrize("stem", TWO_DEMOS)
def test_step_check_flags_euler_at_a_big_step_and_passes_rk4_at_a_small_one(stem):
    at = _tab(_demo(stem), "Modes & step limits")
    matrices = lumped.assemble(_demo_system(stem))

    _set_step(at, "euler", "50 ms", "2 s")
    expected = lumped.stability.check_step(matrices, lumped.get_stepper("euler"), 0.05, 2.0)
    assert not expected.stable
    assert len(at.error) == 1 and not at.success
    verdict = _plain(at.error[0].value)
    assert "Unstable" in verdict and "too large" in verdict
    limiting = expected.modes[expected.limiting_mode]
    assert f"{limiting.natural_frequency_hz:.5g} Hz" in verdict
    assert tables.step_text(expected.max_stable_dt) in verdict
    metrics = {m.label: m.value for m in at.metric}
    assert metrics["Stability limit"] == tables.step_text(expected.max_stable_dt)
    assert metrics["Recommended dt"] == tables.step_text(expected.recommended_dt)
    assert metrics["Growth over the run"] == tables.number_text(expected.growth_over_run)
    per_mode = _table(at, "max stable dt")
    assert len(per_mode) == len(expected.modes)
    assert list(per_mode["limit"]).count("sets the limit") == 1
    assert per_mode["limit"][expected.limiting_mode] == "sets the limit"

    _set_step(at, "rk4", "0.1 ms", "2 s")
    assert not at.error and len(at.success) == 1
    assert "Stable" in _plain(at.success[0].value)
    expected = lumped.stability.check_step(matrices, lumped.get_stepper("rk4"), 1e-4, 2.0)
    assert expected.stable
    assert {m.label: m.value for m in at.metric}["Stability limit"] == tables.step_text(
        expected.max_stable_dt
    )
    assert _plain(expected.recommendation_rule) in _plain(_captions(at))


def test_step_check_shows_the_notes_and_the_contact_state_of_a_nonlinear_system():
    at = _tab(_open(), "Modes & step limits")
    check = lumped.stability.check_step(
        lumped.assemble(_demo_system("quarter_car")), lumped.get_stepper("rk4"), 2e-4, 3.0
    )
    assert check.notes
    infos = _plain(" ".join(i.value for i in at.info))
    for note in check.notes:
        assert _plain(tables.md_escape(note)) in infos
    states = list(_table(at, "max stable dt")["state"])
    assert states == [m.state for m in check.modes]


def test_a_step_that_cannot_be_read_is_a_message_not_a_traceback():
    at = _tab(_open(), "Modes & step limits")
    at.text_input(key="step_dt").input("fast").run()
    assert not at.exception
    assert any("step dt" in _plain(e.value) for e in at.error)
    at.text_input(key="step_dt").input("-1 ms").run()
    assert any("must be positive" in _plain(e.value) for e in at.error)
    assert not [t for t in at.dataframe if "max stable dt" in t.value.columns]


@pytest.mark.parametrize("stem", TWO_DEMOS)
def test_frequency_response_tab_draws_the_response_and_its_peaks(stem):
    at = _tab(_demo(stem), "Frequency response")
    system = _demo_system(stem)
    kind, input_id = choices.split_choice(at.selectbox(key="fr_input").value)
    out_kind, output_id = choices.split_choice(at.selectbox(key="fr_output").value)
    assert (out_kind, output_id) == ("body", choices.top_body(system))
    expected = lumped.frequency.transfer(system, input_id, output_id, "displacement")
    charts = at.get("plotly_chart")
    assert len(charts) == 1
    assert expected.label in charts[0].proto.spec
    peaks = _table(at, "phase [deg]")
    assert len(peaks) == len(expected.peaks) >= 1
    assert list(peaks["frequency [Hz]"]) == [f"{p.frequency_hz:.5g}" for p in expected.peaks]
    assert f"|H| [{tables.unit_text(expected.unit)}]" in peaks.columns

    # An element output offers the element's quantities; force per input has its unit.
    element = next(iter(system.springs))
    at.selectbox(key="fr_output").set_value(f"element:{element}").run()
    assert at.selectbox(key="fr_quantity").options == ["force", "deflection", "velocity",
                                                       "acceleration"]  # fmt: skip
    at.selectbox(key="fr_quantity").set_value("force").run()
    assert not at.exception and not at.error
    force = lumped.frequency.transfer(system, input_id, element, "force")
    assert force.unit.startswith("N/")
    assert f"|H| [{force.unit}]" in _table(at, "phase [deg]").columns
    assert len(at.get("plotly_chart")) == 1


def test_frequency_response_inputs_cover_supports_forces_and_bodies():
    at = _tab(_demo("machine_on_mounts"), "Frequency response")
    options = at.selectbox(key="fr_input").options
    system = _demo_system("machine_on_mounts")
    assert at.selectbox(key="fr_input").value == "force:press_unbalance"  # no support moves
    assert any("columns" in o and "fixed" in o for o in options)
    assert sum("unit force on body" in o for o in options) == len(system.bodies)
    at.selectbox(key="fr_input").set_value("support:columns").run()
    assert not at.exception and not at.error
    expected = lumped.frequency.transfer(system, "columns", "press", "displacement")
    assert expected.unit == "m/m"
    assert len(_table(at, "phase [deg]")) == len(expected.peaks)


@pytest.mark.parametrize("stem", TWO_DEMOS)
def test_a_short_run_shows_channels_events_figures_and_a_download(stem):
    at = _tab(_demo(stem), "Run")
    system = _demo_system(stem)
    assert at.text_input(key="step_duration").value == choices.time_text(system.run.duration)
    at.text_input(key="step_duration").input("0.5 s").run()
    assert len(at.success) == 1  # the step check's verdict before the run
    assert at.button(key="run_button").disabled is False
    _run(at)
    assert at.progress[0].value == 100
    assert "completed" in at.progress[0].proto.text
    metrics = {m.label: m.value for m in at.metric}
    assert metrics["Status"] == "completed"

    rate = lumped.parse_quantity(at.text_input(key="run_rate").value, "frequency")
    result = lumped.simulate.simulate(system, system.run.stepper, system.run.dt, 0.5,
                                      output_rate=rate)  # fmt: skip
    assert metrics["Samples"] == f"{len(result.time):,}"
    assert metrics["Events"] == f"{len(result.events):,}"

    expected = lumped.metrics.run_figures(system, result)
    run_tables = _tables_with(at, ["figure", "item", "value", "unit", "rule"])
    assert len(run_tables) == 2  # the run's figures and the road figures
    figures_table = run_tables[0]
    assert list(figures_table["figure"]) == [r.name for r in expected]
    assert list(figures_table["item"]) == [r.item for r in expected]
    assert list(figures_table["value"]) == [tables.number_text(r.value) for r in expected]

    if result.events:
        events = _table(at, "event")
        assert list(events["element"]) == [e.element for e in result.events]
    else:
        assert "No events" in _captions(at)
    assert at.get("download_button")[0].proto.label == "Download the run (CSV)"
    chart = at.get("plotly_chart")
    assert len(chart) == 1
    for channel in choices.default_channels(system, result.channels()):
        assert channel in at.multiselect(key="run_channels").value
        assert channel in chart[0].proto.spec


def test_quarter_car_run_lists_the_contact_events():
    at = _tab(_open(), "Run")
    at.text_input(key="step_duration").input("0.5 s").run()
    _run(at)
    events = _table(at, "event")
    assert list(events["event"]) == ["stop-contact", "stop-release", "lift-off", "landing"]
    assert set(events["element"]) == {"suspension_spring", "tyre"}


def test_exact_on_the_nonlinear_quarter_car_shows_the_library_message_and_keeps_results():
    at = _tab(_open(), "Run")
    at.text_input(key="step_duration").input("0.5 s").run()
    _run(at)
    assert {m.label: m.value for m in at.metric}["Status"] == "completed"

    system = _demo_system("quarter_car")
    with pytest.raises(lumped.LumpedError) as info:
        lumped.simulate.simulate(system, "exact", 2e-4, 0.5)
    at.selectbox(key="step_stepper").set_value("exact").run()
    _run(at)
    messages = [_plain(e.value) for e in at.error]
    assert any(_plain(tables.md_escape(str(info.value))) in m for m in messages), messages
    assert any("could not start" in m for m in messages)
    # The previous run is still on screen, marked as made with other settings.
    assert {m.label: m.value for m in at.metric}["Status"] == "completed"
    assert any("not the current ones" in i.value for i in at.info)
    assert _tables_with(at, ["figure", "item", "value", "unit", "rule"])


def test_an_unstable_step_is_refused_until_run_anyway_is_ticked():
    at = _tab(_open(), "Run")
    _set_step(at, "euler", "20 ms", "3 s")
    assert "Unstable" in _plain(at.error[0].value)
    assert at.button(key="run_button").disabled is True
    assert "refused" in _captions(at)
    with pytest.raises(AppTestError, match="disabled"):  # as in a browser: no click
        at.button(key="run_button").click()
    assert not at.progress and not at.metric

    at.checkbox(key="run_anyway").check().run()
    assert at.button(key="run_button").disabled is False
    _run(at)
    result = lumped.simulate.simulate(_demo_system("quarter_car"), "euler", 0.02, 3.0,
                                      output_rate=1000.0)  # fmt: skip
    assert result.diverged  # the library's own verdict on this run
    assert {m.label: m.value for m in at.metric}["Status"] == "diverged"
    stopped = [_plain(e.value) for e in at.error if "Stopped early" in e.value]
    assert len(stopped) == 1 and _plain(tables.md_escape(result.message[1:])) in stopped[0]
    # A diverged run has no figures; the library says why.
    assert any("diverged" in _plain(w.value) for w in at.warning)


def test_a_bump_too_brief_for_the_step_is_a_warning_on_the_run_tab():
    # The demo's bump passes in 0.18 s (invented values): at 30 ms the steps may pass
    # over it, which the library's note says; at the file's 0.2 ms it does not.
    at = _tab(_open(), "Run")
    assert not any("speed_bump" in _plain(w.value) for w in at.warning)
    _set_step(at, "rk4", "30 ms", "3 s")
    (note,) = [_plain(w.value) for w in at.warning if "speed_bump" in _plain(w.value)]
    assert note == _plain(tables.md_escape(lumped.excitation.brief_inputs(_demo_system("quarter_car"), 0.03)[0]))


def test_the_same_settings_reuse_the_kept_run():
    at = _tab(_open(), "Run")
    at.text_input(key="step_duration").input("0.5 s").run()
    _run(at)
    first = at.session_state["run_shown"]
    kept = at.session_state["runs"][first]["result"]
    at.text_input(key="step_duration").input("0.4 s").run()
    _run(at)
    assert at.session_state["run_shown"] != first
    at.text_input(key="step_duration").input("0.5 s").run()
    _run(at)
    assert at.session_state["run_shown"] == first
    assert at.session_state["runs"][first]["result"] is kept
    assert not at.info  # the shown run matches the settings


@pytest.mark.parametrize("stem", TWO_DEMOS)
def test_road_figures_are_the_library_s_for_the_chosen_class_and_speed(stem):
    at = _tab(_demo(stem), "Run")
    system = _demo_system(stem)
    supports = tuple(at.multiselect(key="road_supports").value)
    assert supports == tuple(s.id for s in system.supports.values() if s.motion) or supports == (
        tuple(system.supports)
    )
    road = _tables_with(at, ["figure", "item", "value", "unit", "rule"])
    assert len(road) == 1  # no run yet: the road figures only
    expected = lumped.metrics.road_figures(system, road_class="C", speed=20.0, supports=supports)
    assert list(road[0]["value"]) == [tables.number_text(r.value) for r in expected]

    at.selectbox(key="road_class").set_value("E")
    at.number_input(key="road_speed").set_value(12.5).run()
    assert not at.exception and not at.error
    expected = lumped.metrics.road_figures(system, road_class="E", speed=12.5, supports=supports)
    road = _tables_with(at, ["figure", "item", "value", "unit", "rule"])[0]
    assert list(road["value"]) == [tables.number_text(r.value) for r in expected]
    assert all("class E at 12.5 m/s" in rule for rule in road["rule"] if "spectral" in rule)


def test_road_figures_of_a_system_with_a_road_use_its_road():
    at = _tab(_demo("shuttle_corner_with_seat"), "Run")
    system = _demo_system("shuttle_corner_with_seat")
    road = next(i for i in system.inputs.values() if isinstance(i, lumped.RoadInput))
    assert at.selectbox(key="road_class").value == road.road_class
    assert at.number_input(key="road_speed").value == road.speed
    assert not [w for w in at.multiselect if w.key == "road_supports"]
    expected = lumped.metrics.road_figures(system, road_class=road.road_class, speed=road.speed)
    table = _tables_with(at, ["figure", "item", "value", "unit", "rule"])[0]
    assert list(table["value"]) == [tables.number_text(r.value) for r in expected]


def test_settings_are_shared_kept_across_tabs_and_reset_with_the_system():
    at = _tab(_open(), "Modes & step limits")
    _set_step(at, "heun", "1 ms", "600 s")
    _tab(at, "Frequency response")
    _tab(at, "Run")
    assert at.selectbox(key="step_stepper").value == "heun"
    assert at.text_input(key="step_dt").value == "1 ms"
    assert at.text_input(key="step_duration").value == "600 s"
    at.selectbox(key="demo").set_value("machine_on_mounts").run()
    assert not at.exception
    machine = _demo_system("machine_on_mounts")
    assert at.selectbox(key="step_stepper").value == machine.run.stepper
    assert at.text_input(key="step_dt").value == choices.time_text(machine.run.dt)
    assert at.session_state["section"] == "Run"


def test_the_big_mast_starts_with_a_short_run():
    at = _tab(_demo("mast_2000_segments"), "Run")
    mast = _demo_system("mast_2000_segments")
    assert len(mast.bodies) > choices.LARGE_SYSTEM_BODIES
    assert mast.run.duration > choices.LARGE_SYSTEM_DURATION
    assert at.text_input(key="step_duration").value == choices.time_text(
        choices.LARGE_SYSTEM_DURATION
    )
    assert "so that a run does not hold the page" in _plain(_captions(at))
    # Road figures of a large system wait for a click, and cover a few items.
    assert not _tables_with(at, ["figure", "item", "value", "unit", "rule"])
    at.button(key="road_button").click().run()
    assert not at.exception and not at.error
    bodies, travel, loads = choices.figure_items(mast)
    expected = lumped.metrics.road_figures(
        mast, road_class="C", speed=20.0, supports=["base"],
        bodies=list(bodies), travel=list(travel), loads=list(loads),
    )  # fmt: skip
    (road,) = _tables_with(at, ["figure", "item", "value", "unit", "rule"])
    assert list(road["value"]) == [tables.number_text(r.value) for r in expected]
    assert set(road["item"]) == {*bodies, *travel, *loads}
    assert "the table covers" in _captions(at)
    at.run()  # asked once, the figures for these settings stay on the page
    assert len(_tables_with(at, ["figure", "item", "value", "unit", "rule"])) == 1
    # The file's duration is one edit away; long runs come with a warning.
    matrices = lumped.assemble(mast)
    for duration in (mast.run.duration, 10.0):
        at.text_input(key="step_duration").input(choices.time_text(duration)).run()
        steps = lumped.stability.check_step(
            matrices, lumped.get_stepper(mast.run.stepper), mast.run.dt, duration
        ).steps
        long = steps * len(mast.bodies) > views.LONG_RUN_BODY_STEPS
        assert any("long run" in w.value for w in at.warning) == long
    assert long  # 10 s of the mast is a long run


# --------------------------------------------------------------------------- analysis builders


def _machine():
    system = _demo_system("machine_on_mounts")
    return system, lumped.assemble(system)


def test_modes_frame_and_mode_shape_figure():
    system, matrices = _machine()
    modal = lumped.modal.modal_analysis(matrices)
    frame = tables.modes_frame(modal)
    assert list(frame["natural [Hz]"]) == [m.natural_frequency_hz for m in modal.modes]
    assert list(frame["damping ratio"]) == [m.damping_ratio for m in modal.modes]
    fig = figures.mode_shape(modal.modes[1], 2)
    (bar,) = fig.data
    assert list(bar.x) == list(system.bodies)
    assert list(bar.y) == [modal.modes[1].shape[b] for b in system.bodies]
    assert fig.layout.title.text.startswith("Mode 2 · ")
    assert f"{modal.modes[1].natural_frequency_hz:.4g} Hz" in fig.layout.title.text


def test_mode_kind_names_rigid_and_overdamped_modes():
    floating = lumped.System(
        name="two floating masses",
        bodies={"a": lumped.Body("a", 1.0), "b": lumped.Body("b", 1.0)},
        supports={},
        springs={"k": lumped.Spring("k", ("a", "b"), 100.0)},
        dampers={"c": lumped.Damper("c", ("a", "b"), coefficient=200.0)},
    )
    modal = lumped.modal.modal_analysis(lumped.assemble(floating))
    kinds = [tables.mode_kind(m) for m in modal.modes]
    assert "rigid-body" in kinds and "overdamped" in kinds
    frame = tables.modes_frame(modal)
    rigid = frame[frame["kind"] == "rigid-body"]
    assert rigid["damping ratio"].isna().all()
    assert tables.as_text(frame, ["damping ratio"])["damping ratio"][rigid.index[0]] == (
        tables.NO_VALUE
    )


def test_check_frame_marks_the_limiting_mode_and_names_limits():
    _, matrices = _machine()
    check = lumped.stability.check_step(matrices, lumped.get_stepper("euler"), 0.05, 1.0)
    frame = tables.check_modes_frame(check)
    assert len(frame) == len(check.modes)
    assert frame["limit"][check.limiting_mode] == "sets the limit"
    assert frame["max stable dt"][check.limiting_mode] == tables.step_text(check.max_stable_dt)
    assert tables.step_text(math.inf) == "no limit"
    assert tables.step_text(None) == tables.step_text(0.0) == "none stable"
    assert tables.step_text(2e-4) == "0.2 ms"
    exact = lumped.stability.check_step(matrices, lumped.get_stepper("exact"), 0.05, 1.0)
    assert set(tables.check_modes_frame(exact)["max stable dt"]) == {"no limit"}


def test_response_plot_data_and_peaks_table():
    system, _ = _machine()
    transfer = lumped.frequency.transfer(system, "columns", "press", "acceleration")
    fig = figures.response_plot(transfer)
    magnitude, phase, peaks, peak_phase = fig.data
    keep = transfer.frequency > 0
    assert list(magnitude.x) == list(transfer.frequency[keep])
    assert list(magnitude.y) == list(transfer.magnitude[keep])
    assert list(phase.y) == list(transfer.phase_deg[keep])
    assert list(peaks.x) == [p.frequency_hz for p in transfer.peaks]
    assert list(peak_phase.y) == [p.phase_deg for p in transfer.peaks]
    assert fig.layout.xaxis.type == "log" and fig.layout.yaxis.type == "log"
    assert transfer.unit in fig.layout.title.text.replace("²", "^2")
    frame = tables.peaks_frame(transfer)
    assert list(frame.columns) == ["peak", "frequency [Hz]", "|H| [(m/s²)/m]", "phase [deg]"]
    assert list(frame["|H| [(m/s²)/m]"]) == [p.magnitude for p in transfer.peaks]


def test_response_plot_labels_a_few_peaks_of_a_long_chain():
    chain = lumped.uniform_chain(60, mass=1.0, stiffness=1e5, damping=1.0)
    transfer = lumped.frequency.transfer(chain, next(iter(chain.supports)),
                                         list(chain.bodies)[-1])  # fmt: skip
    assert len(transfer.peaks) > figures.PEAK_LABELS
    peaks = figures.response_plot(transfer).data[2]
    labels = [t for t in peaks.text if t]
    assert 1 <= len(labels) <= figures.PEAK_LABELS
    assert len(peaks.x) == len(transfer.peaks)


def test_time_series_stacks_one_panel_per_unit_and_thins_long_runs():
    time = np.linspace(0.0, 1.0, 50_001)
    series = [("a.displacement", "m", np.sin(time)), ("b.deflection", "m", np.cos(time)),
              ("k.force", "N", 3 * time)]  # fmt: skip
    fig = figures.time_series(time, series, max_points=10_000)
    assert [t.name for t in fig.data] == ["a.displacement", "b.deflection", "k.force"]
    assert [t.yaxis for t in fig.data] == ["y", "y", "y2"]
    stride = 6  # ceil(50 001 / 10 000)
    assert list(fig.data[2].x) == list(time[::stride])
    assert list(fig.data[2].y) == list((3 * time)[::stride])
    assert "1 sample in 6" in fig.layout.title.text
    short = figures.time_series(time[:100], [("x", "m", time[:100])])
    assert len(short.data[0].x) == 100 and "sample in" not in short.layout.title.text


def test_run_tables_and_csv_bytes():
    system = _demo_system("quarter_car")
    result = lumped.simulate.simulate(system, "rk4", 2e-4, 0.5, output_rate=500.0)
    rows = lumped.metrics.run_figures(system, result)
    frame = tables.figures_frame(rows)
    assert list(frame.columns) == ["figure", "item", "value", "unit", "rule"]
    assert list(frame["value"]) == [r.value for r in rows]
    assert "m/s²" in set(frame["unit"]) and "m/s^2" not in set(frame["unit"])
    assert set(frame["unit"][[r.unit == "1" for r in rows]]) <= {"ratio"}
    events = tables.events_frame(result.events)
    assert list(events["time [s]"]) == [e.time for e in result.events]

    data = tables.run_csv_bytes(result)
    lines = data.decode("utf-8").splitlines()
    header = lines[0].split(",")
    assert header[0] == "time [s]" and "tyre.force [N]" in header
    assert len(lines) == 1 + len(result.time)
    times = [float(line.split(",")[0]) for line in lines[1:]]
    assert times == list(result.time)


def test_choices():
    quarter = _demo_system("quarter_car")
    assert list(choices.input_choices(quarter)) == ["support:road", "body:wheel", "body:body"]
    assert choices.default_input(quarter) == "support:road"
    assert choices.default_output(quarter) == "body:body"
    assert choices.quantity_choices("body") == ["displacement", "velocity", "acceleration"]
    assert choices.figure_items(quarter) is None
    for stepper_id, stepper in lumped.STEPPERS.items():
        label = choices.stepper_label(stepper_id)
        assert stepper.name in label and stepper.cost in label
        assert (f"order {stepper.order}" in label) == (stepper.order is not None)
    assert choices.parse_positive("0.5 ms", "time", "dt") == (0.0005, None)
    assert choices.parse_positive("2", "time", "dt") == (2.0, None)
    assert choices.parse_positive("1 kHz", "frequency", "rate") == (1000.0, None)
    for bad in ("", "soon", "0 s", "-1 ms", "3 Hz"):
        value, message = choices.parse_positive(bad, "time", "dt")
        assert value is None and message.startswith("dt:")
    mast = _demo_system("mast_2000_segments")
    bodies, travel, loads = choices.figure_items(mast)
    assert bodies == (choices.top_body(mast), "s1") and len(travel) == 2 and len(loads) == 1


@pytest.mark.parametrize("stem", [s for s in lumped.demo_systems() if s != "mast_2000_segments"])
def test_every_tab_of_every_small_demo_opens_without_a_problem(stem):
    at = _demo(stem)
    for name in TABS[1:]:
        _tab(at, name)
        assert not at.error, (stem, name, [e.value for e in at.error])
        assert CAUTION in _captions(at)
    assert len(at.success) == 1  # the file's own [run] settings pass the step check


def test_a_run_anyway_tick_holds_for_one_setting_only():
    at = _tab(_open(), "Run")
    _set_step(at, "euler", "20 ms", "1 s")
    at.checkbox(key="run_anyway").check().run()
    assert at.button(key="run_button").disabled is False
    at.text_input(key="step_dt").input("30 ms").run()
    assert at.checkbox(key="run_anyway").value is False
    assert at.button(key="run_button").disabled is True


def test_a_system_beyond_full_modal_analysis_gets_the_stiffest_mode_bound():
    chain = lumped.uniform_chain(2100, mass=0.5, stiffness=4e7, damping=40.0)
    at = _open()
    _upload(at, "long_chain.toml", lumped.dumps(chain).encode())
    assert not at.error
    _tab(at, "Modes & step limits")
    matrices = lumped.assemble(chain)
    with pytest.raises(lumped.LumpedError) as info:
        lumped.modal.modal_analysis(matrices)
    top = lumped.modal.stiffest_mode(matrices)
    infos = [_plain(i.value) for i in at.info]
    assert any(_plain(tables.md_escape(str(info.value))) in i and f"{top.bound:.6g}" in i
               for i in infos), infos  # fmt: skip
    assert not [f for f in at.dataframe if "natural [Hz]" in f.value.columns]
    # No [run] table: the page starts from the step the check recommends for rk4, 1 s.
    recommended = lumped.stability.check_step(matrices, lumped.get_stepper("rk4"), 1e-3, 1.0)
    assert at.text_input(key="step_dt").value == choices.time_text(recommended.recommended_dt)
    check = lumped.stability.check_step(
        matrices, lumped.get_stepper("rk4"),
        lumped.parse_quantity(at.text_input(key="step_dt").value, "time"),
        lumped.parse_quantity(at.text_input(key="step_duration").value, "time"),
    )  # fmt: skip
    assert check.source == "bound on the stiffest mode" and check.notes
    for note in check.notes:
        assert any(_plain(tables.md_escape(note)) in i for i in infos)
    assert set(_table(at, "max stable dt")["state"]) == {"bound"}
