"""The dashboard in a real browser: first view, switching demos, a bad upload."""

from __future__ import annotations

import shutil

import pytest

import lumped

pytestmark = pytest.mark.browser

SHOT = "/tmp/lumped_dashboard.png"
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


def _name(stem: str) -> str:
    return lumped.load(lumped.demo_path(stem)).name


def _settle(page) -> None:
    """Let plotly finish drawing after the page went idle."""
    page.locator(".js-plotly-plot .main-svg").first.wait_for()
    page.wait_for_timeout(500)


def test_first_view_shows_the_default_demo_and_its_graph(page, tmp_path):
    from playwright.sync_api import expect

    expect(page.get_by_role("heading", name=_name("quarter_car"))).to_be_visible()
    chart = page.get_by_test_id("stPlotlyChart")
    expect(chart).to_be_visible()
    expect(chart.locator(".scatterlayer .trace")).to_have_count(6)
    expect(chart.get_by_text("suspension_damper")).to_be_visible()
    expect(page.get_by_text("does not replace, physical testing")).to_be_visible()
    expect(page.get_by_text("invented scenarios")).to_be_visible()
    expect(page.get_by_test_id("stDataFrame")).to_have_count(3)
    _settle(page)
    shot = tmp_path / "first_view.png"
    page.screenshot(path=str(shot))
    assert shot.stat().st_size > 10_000
    shutil.copyfile(shot, SHOT)


def test_switching_demo_shows_the_new_system(page, wait_idle, tmp_path):
    from playwright.sync_api import expect

    new = _name("truck_cab_frame_axle")
    page.get_by_test_id("stSelectbox").click()
    page.get_by_role("option", name=new).click()
    expect(page.get_by_role("heading", name=new)).to_be_visible()
    wait_idle(page)
    expect(page.get_by_role("heading", name=_name("quarter_car"))).to_have_count(0)
    expect(page.get_by_test_id("stPlotlyChart").get_by_text("leaf_springs")).to_be_visible()
    _settle(page)
    page.screenshot(path=str(tmp_path / "switched.png"))
    assert (tmp_path / "switched.png").stat().st_size > 10_000


def test_bad_upload_lists_problems_and_keeps_the_system(page, wait_idle, tmp_path):
    from playwright.sync_api import expect

    page.get_by_test_id("stFileUploader").locator("input[type=file]").set_input_files(
        {"name": "broken.toml", "mimeType": "application/toml", "buffer": BAD_FILE}
    )
    alert = page.get_by_test_id("stAlert").filter(has_text="broken.toml")
    expect(alert).to_contain_text("2 problems")
    wait_idle(page)
    expect(page.get_by_role("heading", name=_name("quarter_car"))).to_be_visible()
    expect(page.get_by_test_id("stDataFrame")).to_have_count(4)  # problems + 3 tables
    page.screenshot(path=str(tmp_path / "bad_upload.png"))
