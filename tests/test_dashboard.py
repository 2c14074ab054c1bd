"""The dashboard's first page (AppTest) and its figure and table builders."""

from __future__ import annotations

import sys
import tomllib
from pathlib import Path

import pytest
import streamlit as st
from streamlit.testing.v1 import AppTest

import lumped
from lumped.units import display

ROOT = Path(__file__).resolve().parents[1]
if str(ROOT) not in sys.path:
    sys.path.insert(0, str(ROOT))

from dashboard import figures, tables  # noqa: E402

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
