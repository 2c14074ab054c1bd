"""The analysis tabs in a real browser: each tab renders (a screenshot of each is saved
for people to look at), and a short run from the Run tab draws its channels and
downloads as CSV."""

from __future__ import annotations

import shutil

import pytest

import lumped

pytestmark = pytest.mark.browser

SHOTS = "/tmp/lumped_tabs_{}.png"
#: Each tab, the file name of its screenshot, and text that only it shows.
TABS = [
    ("System", "1_system", "Elements"),
    ("Modes & step limits", "2_modes", "Step check"),
    ("Frequency response", "3_frequency", "Peaks"),
    ("Run", "4_run", "Road figures (spectral)"),
]


def _settle(page) -> None:
    """Let plotly finish drawing after the page went idle."""
    page.locator(".js-plotly-plot .main-svg").first.wait_for()
    page.wait_for_timeout(600)


def _open_tab(page, wait_idle, name: str, marker: str) -> None:
    from playwright.sync_api import expect

    page.get_by_role("tab", name=name).click()
    expect(page.get_by_role("tab", name=name)).to_have_attribute("aria-selected", "true")
    expect(page.get_by_text(marker, exact=True).first).to_be_visible()  # the tab's own content
    wait_idle(page)


def test_each_tab_renders(page, wait_idle, tmp_path):
    from playwright.sync_api import expect

    name = lumped.load(lumped.demo_path("quarter_car")).name
    for label, slug, marker in TABS:
        _open_tab(page, wait_idle, label, marker)
        expect(page.get_by_role("heading", name=name)).to_be_visible()
        expect(page.get_by_text("does not replace, physical testing")).to_be_visible()
        if label != "Run":
            expect(page.get_by_test_id("stPlotlyChart").first).to_be_visible()
            _settle(page)
        shot = tmp_path / f"{slug}.png"
        page.screenshot(path=str(shot))
        assert shot.stat().st_size > 10_000
        shutil.copyfile(shot, SHOTS.format(slug))
    # Only the open tab's content is on the page: the Run tab has no graph yet.
    expect(page.get_by_test_id("stPlotlyChart")).to_have_count(0)
    expect(page.get_by_role("button", name="Run", exact=True)).to_be_enabled()


def test_a_short_run_draws_its_channels_and_downloads(page, wait_idle, tmp_path):
    from playwright.sync_api import expect

    _open_tab(page, wait_idle, "Run", "Road figures (spectral)")
    duration = page.get_by_role("textbox", name="Duration", exact=True)
    duration.fill("0.5 s")
    duration.press("Enter")
    expect(page.get_by_test_id("stAlert").filter(has_text="over 500 ms")).to_be_visible()
    wait_idle(page)

    page.get_by_role("button", name="Run", exact=True).click()
    expect(page.get_by_text("Run completed in")).to_be_visible()
    wait_idle(page)
    chart = page.get_by_test_id("stPlotlyChart")
    expect(chart).to_have_count(1)
    expect(chart.locator(".scatterlayer .trace")).to_have_count(4)  # the default channels
    expect(chart.get_by_text("tyre.force")).to_be_visible()
    expect(page.get_by_test_id("stMetricValue").filter(has_text="completed")).to_be_visible()
    expect(page.get_by_text("Figures of the run")).to_be_visible()
    _settle(page)
    shot = tmp_path / "run.png"
    page.screenshot(path=str(shot))
    shutil.copyfile(shot, SHOTS.format("5_after_run"))

    with page.expect_download() as info:
        page.get_by_role("button", name="Download the run (CSV)").click()
    path = tmp_path / "run.csv"
    info.value.save_as(path)
    lines = path.read_text(encoding="utf-8").splitlines()
    assert lines[0].startswith("time [s],") and "tyre.force [N]" in lines[0]
    assert len(lines) == 1 + 501  # 0.5 s at the file's 1 kHz output rate, both ends kept
    assert float(lines[-1].split(",")[0]) == 0.5


def test_newmark_runs_the_nonlinear_corner_with_its_events(page, wait_idle, tmp_path):
    """The quarter-car demo lifts its tyre and meets its end stop: Newmark runs it
    (Newton's method in every step) from the browser, and the events are listed."""
    from playwright.sync_api import expect

    _open_tab(page, wait_idle, "Run", "Road figures (spectral)")
    page.get_by_test_id("stSelectbox").filter(has_text="Stepper").click()
    page.get_by_role("option").filter(has_text="newmark —").click()
    wait_idle(page)
    duration = page.get_by_role("textbox", name="Duration", exact=True)
    duration.fill("0.5 s")
    duration.press("Enter")
    wait_idle(page)
    page.get_by_role("button", name="Run", exact=True).click()
    expect(page.get_by_text("Run completed in")).to_be_visible()
    wait_idle(page)
    expect(page.get_by_test_id("stMetricValue").filter(has_text="completed")).to_be_visible()
    expect(page.get_by_test_id("stMetricValue").filter(has_text="4")).to_be_visible()  # the events
    _settle(page)
    shot = tmp_path / "newmark.png"
    page.screenshot(path=str(shot))
    shutil.copyfile(shot, SHOTS.format("6_newmark_run"))
