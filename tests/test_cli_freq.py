"""``lumped freq`` and the figures text, through a small argparse set-up of the
command's own ``add_commands``.

Check values come from 2×2 dynamic-stiffness matrices K − ω²M + iωC built here from
the demo files' element values (the linearised asymmetric damper is the mean of its
two coefficients, common practice for linearising a bilinear damper about zero
velocity), solved with ``numpy.linalg.solve``.
"""

from __future__ import annotations

import csv
import json
from pathlib import Path

import numpy as np
import pytest

import lumped
from lumped.cli import UsageError, _Parser
from lumped.cli_frequency import CAUTION, add_commands, cmd_freq, format_figures
from lumped.metrics import road_figures

DEMOS = Path(__file__).resolve().parents[1] / "demo_systems"
FOOTBRIDGE = str(DEMOS / "footbridge_tuned_absorber.toml")
QUARTER_CAR = str(DEMOS / "quarter_car.toml")


def run(argv: list[str]) -> int:
    parser = _Parser(prog="lumped")
    commands = parser.add_subparsers(dest="command", parser_class=_Parser)
    add_commands(commands)
    return cmd_freq(parser.parse_args(["freq", *argv]))


def footbridge_by_hand(f: np.ndarray) -> np.ndarray:
    """Span displacement per newton on the span (bodies span, absorber)."""
    s = lumped.load(FOOTBRIDGE)
    mp, ma = s.bodies["span"].mass, s.bodies["absorber"].mass
    kp, ka = s.springs["span_stiffness"].stiffness, s.springs["absorber_spring"].stiffness
    ca = s.dampers["absorber_damper"].coefficient
    M = np.diag([mp, ma])
    K = np.array([[kp + ka, -ka], [-ka, ka]])
    C = np.array([[ca, -ca], [-ca, ca]])
    out = []
    for w in 2 * np.pi * f:
        out.append(np.linalg.solve(K - w * w * M + 1j * w * C, [1.0, 0.0])[0])
    return np.array(out)


def quarter_car_by_hand(f: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Wheel and body displacement per metre of road (bodies wheel, body)."""
    s = lumped.load(QUARTER_CAR)
    mw, mb = s.bodies["wheel"].mass, s.bodies["body"].mass
    kt, ks = s.springs["tyre"].stiffness, s.springs["suspension_spring"].stiffness
    d = s.dampers["suspension_damper"]
    c = 0.5 * (d.rebound + d.compression)
    M = np.diag([mw, mb])
    K = np.array([[kt + ks, -ks], [-ks, ks]])
    C = np.array([[c, -c], [-c, c]])
    out = []
    for w in 2 * np.pi * f:
        out.append(np.linalg.solve(K - w * w * M + 1j * w * C, [kt, 0.0]))
    x = np.array(out)
    return x[:, 0], x[:, 1]


def test_json_matches_a_hand_solve(capsys):
    assert run([FOOTBRIDGE, "--from", "walkers", "--to", "span", "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    f = np.array(data["frequency_hz"])
    expected = footbridge_by_hand(f)
    np.testing.assert_allclose(data["magnitude"], np.abs(expected), rtol=1e-9)
    np.testing.assert_allclose(data["phase_deg"], np.degrees(np.angle(expected)), atol=1e-7)
    assert data["unit"] == "m/N"
    assert len(data["peaks"]) == 2
    for peak in data["peaks"]:
        assert set(peak) >= {"frequency_hz", "magnitude"}
        near = np.abs(f / peak["frequency_hz"] - 1) < 0.05
        assert peak["magnitude"] >= np.max(np.abs(expected[near])) * (1 - 1e-12)  # refined ≥ grid maximum nearby


def test_from_a_body_is_a_unit_force_on_it(capsys):
    assert run([FOOTBRIDGE, "--from", "span", "--to", "span", "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    np.testing.assert_allclose(data["magnitude"], np.abs(footbridge_by_hand(np.array(data["frequency_hz"]))), rtol=1e-9)


def test_human_output_lists_the_peaks(capsys):
    assert run([FOOTBRIDGE, "--from", "walkers", "--to", "span"]) == 0
    out = capsys.readouterr().out
    assert "Peaks" in out and "m/N" in out and CAUTION in out
    # The two peaks of the tuned span lie either side of the 2 Hz span mode.
    rows = [line.split() for line in out.splitlines() if line.strip().endswith("deg") and "Hz" in line]
    peak_rows = rows[:2]
    frequencies = [float(r[0]) for r in peak_rows]
    assert frequencies[0] < 2.0 < frequencies[1]
    assert len(out.splitlines()) < 40


def test_csv_output_and_quantities(tmp_path, capsys):
    path = tmp_path / "tyre.csv"
    assert run([QUARTER_CAR, "--from", "road", "--to", "tyre", "--quantity", "force",
                "--min", "0.5", "--max", "30 Hz", "--out", str(path)]) == 0  # fmt: skip
    with path.open() as handle:
        rows = list(csv.reader(handle))
    assert rows[0][0] == "frequency [Hz]" and rows[0][1] == "magnitude [N/m]"
    data = np.array(rows[1:], dtype=float)
    f = data[:, 0]
    assert f[0] == pytest.approx(0.5) and f[-1] == pytest.approx(30.0)
    wheel, _ = quarter_car_by_hand(f)
    kt = lumped.load(QUARTER_CAR).springs["tyre"].stiffness
    tyre = kt * (wheel - 1.0)  # tension positive, δ = x_wheel − u
    np.testing.assert_allclose(data[:, 1], np.abs(tyre), rtol=1e-9)
    np.testing.assert_allclose(data[:, 3] + 1j * data[:, 4], tyre, rtol=1e-9)
    assert str(path) in capsys.readouterr().out
    # body acceleration per metre of road: (iω)² X
    assert run([QUARTER_CAR, "--from", "road", "--to", "body", "--quantity", "acceleration", "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    f = np.array(data["frequency_hz"])
    _, body = quarter_car_by_hand(f)
    np.testing.assert_allclose(data["magnitude"], np.abs((2 * np.pi * f) ** 2 * body), rtol=1e-9)
    assert data["unit"] == "(m/s^2)/m"


@pytest.mark.parametrize(
    "argv, words",
    [
        (["--from", "ghost", "--to", "body"], ["'ghost'", "input"]),
        (["--from", "road", "--to", "ghost"], ["'ghost'", "output"]),
        (["--from", "road", "--to", "body", "--min", "10", "--max", "1"], ["empty", "10 Hz", "1 Hz"]),
        (["--from", "road", "--to", "body", "--min", "200"], ["empty", "200 Hz"]),
        (["--from", "road", "--to", "body", "--min", "-2"], ["--min", "positive"]),
        (["--from", "road", "--to", "body", "--quantity", "force"], ["'body'", "'force'"]),
        (["--from", "road", "--to", "body", "--out", "response.txt"], [".csv", "response.txt"]),
        (["--from", "road", "--to", "body", "--points-per-decade", "0"], ["--points-per-decade"]),
    ],
)
def test_bad_input_exits_2_with_one_line(argv, words, capsys):
    assert run([QUARTER_CAR, *argv]) == 2
    captured = capsys.readouterr()
    assert captured.out == ""
    lines = captured.err.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("lumped freq: ")
    for word in words:
        assert word in lines[0]


def test_missing_file_and_bad_option(capsys, tmp_path):
    assert run([str(tmp_path / "none.toml"), "--from", "road", "--to", "body"]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "none.toml" in err[0]
    with pytest.raises(UsageError, match="--quantity"):
        run([QUARTER_CAR, "--from", "road", "--to", "body", "--quantity", "torque"])


def test_format_figures_shows_every_row_with_its_unit_and_rule():
    system = lumped.System.from_items("body on a road", [
        lumped.Body("body", 300.0), lumped.Support("road", motion="track"),
        lumped.Spring("spring", ("road", "body"), 2e4, gap=0.01, gap_stiffness=1e6),
        lumped.Damper("damper", ("road", "body"), coefficient=1500.0), lumped.RoadInput("track", "D", 20.0),
    ])  # fmt: skip
    rows = road_figures(system, travel=["spring"])
    text = format_figures(rows)
    lines = text.splitlines()
    assert CAUTION in text
    for row in rows:
        assert any(row.name in line and row.item in line and row.rule[:30] in line for line in lines)
    share = next(r for r in rows if r.key == "end_stop_share")
    assert 1e-6 < share.value < 1
    assert f"{100 * share.value:.3g} %" in text
    sag = next(r for r in rows if r.key == "static_sag")
    assert f"{sag.value:.4g} m" in text
