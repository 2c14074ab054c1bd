"""``lumped run``: the output files and the exit codes.

The CSV layout (one header row, ``time [s]`` first, then ``ID.quantity [unit]``,
numbers only) is the project's own format; its values are held against a run of the
library with the same settings, compared exactly (Python's repr of a float reads
back to the same float: common practice). Parquet is read back with pandas.
The system files are invented for the test.
"""

from __future__ import annotations

import csv
import json
import math
import re
import subprocess
import sys

import numpy as np
import pandas as pd
import pytest

import lumped
from lumped.cli import main
from lumped.simulate import simulate

SEAT = """
format = "lumped/1"
name = "seat on a shaken floor"

[bodies.seat]
mass = "80 kg"
initial_velocity = "0.1 m/s"

[supports.floor]
motion = "shake"

[springs.cushion]
between = ["floor", "seat"]
stiffness = "60 kN/m"

[dampers.cushion_loss]
between = ["floor", "seat"]
coefficient = "900 N*s/m"

[inputs.shake]
kind = "harmonic"
amplitude = "2 mm"
frequency = "3 Hz"

[inputs.push]
kind = "harmonic"
amplitude = "20 N"
frequency = "5 Hz"

[forces.hand]
on = "seat"
input = "push"

[run]
stepper = "rk4"
dt = "1 ms"
duration = "0.5 s"
output_rate = "200 Hz"
"""

HEADER = re.compile(r"[A-Za-z][A-Za-z0-9_-]*\.[a-z_]+ \[[^\]\s]+\]")


@pytest.fixture
def seat_file(tmp_path):
    path = tmp_path / "seat.toml"
    path.write_text(SEAT, encoding="utf-8")
    return path


def read_csv(path):
    with open(path, newline="", encoding="utf-8") as handle:
        rows = list(csv.reader(handle))
    return rows[0], rows[1:]


def api_columns(result):
    """The library's channels by the CSV's column names."""
    return {f"{name} [{unit}]" if name != "time" else "time [s]": values
            for name, (unit, values) in result.channels().items()}  # fmt: skip


def test_csv_layout_and_exact_round_trip(seat_file, tmp_path, capsys):
    out = tmp_path / "run.csv"
    code = main(["run", str(seat_file), "--out", str(out), "--quiet"])
    assert code == 0
    header, rows = read_csv(out)
    assert header[0] == "time [s]"
    for name in header[1:]:
        assert HEADER.fullmatch(name), name
    assert len(set(header)) == len(header)
    # Exactly one header row: every other cell is a number.
    values = np.array([[float(cell) for cell in row] for row in rows])
    assert values.shape[1] == len(header)
    # Same settings through the library (the file's [run] table).
    result = simulate(lumped.load(seat_file))
    expected = api_columns(result)
    assert header == list(expected)
    for j, name in enumerate(header):
        np.testing.assert_array_equal(values[:, j], expected[name], err_msg=name)
    # The file's [run] table is what ran: rk4 at 1 ms, 0.5 s, 200 Hz (every 5th step).
    np.testing.assert_allclose(values[:, 0], np.arange(101) * 0.005, rtol=0, atol=1e-15)
    assert values[-1, 0] == 0.5
    assert set(header) >= {
        "seat.displacement [m]", "seat.velocity [m/s]", "seat.acceleration [m/s^2]",
        "cushion.force [N]", "cushion.deflection [m]", "cushion_loss.force [N]",
        "floor.displacement [m]", "floor.velocity [m/s]", "hand.force [N]",
    }  # fmt: skip
    # The support column is the input's own definition, 2 mm sin(2π·3 Hz·t).
    floor = header.index("floor.displacement [m]")
    np.testing.assert_allclose(
        values[:, floor], 0.002 * np.sin(2 * math.pi * 3 * values[:, 0]), rtol=0, atol=1e-15
    )


def test_options_override_the_run_table(seat_file, tmp_path):
    out = tmp_path / "heun.csv"
    code = main(["run", str(seat_file), "--stepper", "heun", "--dt", "0.5 ms", "--duration", "0.3",
                 "--output-rate", "1 kHz", "--out", str(out), "--quiet"])  # fmt: skip
    assert code == 0
    header, rows = read_csv(out)
    values = np.array([[float(cell) for cell in row] for row in rows])
    result = simulate(lumped.load(seat_file), "heun", 0.5e-3, 0.3, output_rate=1000.0)
    for j, name in enumerate(header):
        np.testing.assert_array_equal(values[:, j], api_columns(result)[name], err_msg=name)
    np.testing.assert_allclose(values[:, 0], np.arange(301) * 1e-3, rtol=0, atol=1e-15)


@pytest.mark.parametrize("value", ["-1ms", "-0.5 ms", "-.2"])
def test_a_negative_step_is_named_as_such(seat_file, tmp_path, capsys, value):
    code = main(["run", str(seat_file), "--dt", value, "--out", str(tmp_path / "x.csv"), "--quiet"])
    assert code == 2
    assert "dt must be a positive time step" in capsys.readouterr().err


def test_parquet_has_the_same_columns_and_values(seat_file, tmp_path):
    csv_out, parquet_out = tmp_path / "run.csv", tmp_path / "run.parquet"
    assert main(["run", str(seat_file), "--out", str(csv_out), "--quiet"]) == 0
    assert main(["run", str(seat_file), "--out", str(parquet_out), "--quiet"]) == 0
    header, rows = read_csv(csv_out)
    frame = pd.read_parquet(parquet_out)
    assert list(frame.columns) == header
    np.testing.assert_array_equal(
        frame.to_numpy(), np.array([[float(c) for c in row] for row in rows])
    )


def test_out_replaces_an_existing_file(seat_file, tmp_path):
    out = tmp_path / "run.csv"
    out.write_text("old content that is longer than nothing\n" * 1000, encoding="utf-8")
    assert main(["run", str(seat_file), "--out", str(out), "--quiet"]) == 0
    header, rows = read_csv(out)
    assert header[0] == "time [s]" and len(rows) == 101
    assert "old content" not in out.read_text(encoding="utf-8")
    # Nothing left beside it (the atomic write's temporary file is gone).
    assert sorted(p.name for p in tmp_path.iterdir()) == ["run.csv", "seat.toml"]


@pytest.mark.parametrize("suffix", [".csv", ".parquet"])
def test_out_files_get_the_permissions_the_umask_gives(seat_file, tmp_path, suffix):
    # An output file is shared as any new file is: mode 0666 less the umask (POSIX
    # open(2) — common practice), not the atomic write's private 0600.
    import os

    out = tmp_path / f"run{suffix}"
    previous = os.umask(0o022)
    try:
        assert main(["run", str(seat_file), "--out", str(out), "--quiet"]) == 0
    finally:
        os.umask(previous)
    assert out.stat().st_mode & 0o777 == 0o644


def test_diverged_run_exits_3_and_still_writes_its_samples(seat_file, tmp_path, capsys):
    out = tmp_path / "diverged.csv"
    code = main(["run", str(seat_file), "--stepper", "euler", "--dt", "0.1", "--duration", "20",
                 "--out", str(out), "--json"])  # fmt: skip
    assert code == 3
    captured = capsys.readouterr()
    summary = json.loads(captured.out)  # machine-readable also when the run failed
    assert summary["status"] == "diverged"
    assert "diverged" in captured.err and "Traceback" not in captured.err
    header, rows = read_csv(out)
    values = np.array([[float(cell) for cell in row] for row in rows])
    assert len(values) == summary["samples"] > 2
    assert values[-1, 0] < 20.0
    result = simulate(lumped.load(seat_file), "euler", 0.1, 20.0)
    assert result.status == "diverged"
    for j, name in enumerate(header):
        np.testing.assert_array_equal(values[:, j], api_columns(result)[name], err_msg=name)


def test_json_summary(seat_file, tmp_path, capsys):
    out = tmp_path / "run.csv"
    assert main(["run", str(seat_file), "--out", str(out), "--json"]) == 0
    summary = json.loads(capsys.readouterr().out)
    result = simulate(lumped.load(seat_file))
    assert summary["status"] == "completed"
    assert summary["stepper"] == "rk4" and summary["dt"] == 1e-3 and summary["duration"] == 0.5
    assert summary["steps"] == 500 and summary["samples"] == len(result.time) == 101
    assert summary["energy_balance_error"] == pytest.approx(
        float(np.max(np.abs(result.balance_error)))
    )


def test_convergence_option_reports_the_order(seat_file, capsys):
    code = main(["run", str(seat_file), "--dt", "10 ms", "--convergence", "--json"])
    assert code == 0
    study = json.loads(capsys.readouterr().out)["convergence"]
    assert study["declared_order"] == 4
    # Richardson estimate on a forced run (halving the step: errors fall ~2^4).
    assert study["observed_order"] == pytest.approx(4, abs=0.3)


def _one_line_error(capsys):
    err = capsys.readouterr().err
    lines = [line for line in err.splitlines() if line.strip()]
    assert len(lines) == 1, err
    assert "Traceback" not in err
    return lines[0]


def test_bad_file_exits_2_with_one_line(tmp_path, capsys):
    bad = tmp_path / "broken.toml"
    bad.write_text('format = "lumped/1"\nname = "unterminated\n', encoding="utf-8")
    assert main(["run", str(bad), "--out", str(tmp_path / "x.csv")]) == 2
    assert "broken.toml" in _one_line_error(capsys)
    assert not (tmp_path / "x.csv").exists()


def test_missing_file_exits_2_with_one_line(tmp_path, capsys):
    assert main(["run", str(tmp_path / "nowhere.toml"), "--out", str(tmp_path / "x.csv")]) == 2
    assert "nowhere.toml" in _one_line_error(capsys)


def test_bad_value_in_file_exits_2_with_one_line(tmp_path, capsys):
    bad = tmp_path / "negative.toml"
    bad.write_text(SEAT.replace('mass = "80 kg"', 'mass = "-80 kg"'), encoding="utf-8")
    assert main(["run", str(bad), "--out", str(tmp_path / "x.csv")]) == 2
    assert "mass" in _one_line_error(capsys)


def test_unknown_stepper_exits_2_with_one_line(seat_file, tmp_path, capsys):
    assert main(["run", str(seat_file), "--stepper", "rk5", "--out", str(tmp_path / "x.csv")]) == 2
    assert "rk5" in _one_line_error(capsys)
    assert not (tmp_path / "x.csv").exists()


def test_bad_out_suffix_exits_2_with_one_line(seat_file, tmp_path, capsys):
    assert main(["run", str(seat_file), "--out", str(tmp_path / "x.txt")]) == 2
    assert ".csv" in _one_line_error(capsys)
    assert not (tmp_path / "x.txt").exists()


def test_python_dash_m_lumped_run(seat_file, tmp_path):
    out = tmp_path / "sub.csv"
    done = subprocess.run(
        [sys.executable, "-m", "lumped", "run", str(seat_file), "--out", str(out), "--quiet"],
        capture_output=True,
        text=True,
        cwd=tmp_path,
        timeout=300,
    )
    assert done.returncode == 0, done.stderr
    assert "Traceback" not in done.stderr
    header, rows = read_csv(out)
    values = np.array([[float(cell) for cell in row] for row in rows])
    expected = api_columns(simulate(lumped.load(seat_file)))
    assert header == list(expected)
    for j, name in enumerate(header):
        np.testing.assert_array_equal(values[:, j], expected[name], err_msg=name)


def test_figures_for_chosen_ride_bodies_after_settling(capsys, tmp_path):
    # --ride limits the ride figures to the occupant's body; --settle leaves the start
    # out (ISO 2631-1 figures are about the exposure, not the start-up transient).
    from lumped.cli import main

    shuttle = str(lumped.demo_path("shuttle_corner_with_seat"))
    code = main(["run", shuttle, "--figures", "--ride", "seat", "--settle", "1 s", "--duration", "3 s",
                 "--output-rate", "500 Hz", "--json"])  # fmt: skip
    assert code == 0
    rows = json.loads(capsys.readouterr().out)["figures"]
    ride = {row["item"] for row in rows if row["key"] == "weighted_acceleration_rms"}
    assert ride == {"seat"}
    assert all("1–3 s" in row["rule"] for row in rows if row["key"] == "acceleration_rms")
    code = main(["run", shuttle, "--figures", "--ride", "sat", "--duration", "1 s"])
    assert code == 2 and "'sat'" in capsys.readouterr().err


def test_a_run_warns_of_an_unstable_step_and_a_bump_passed_between_steps(capsys, tmp_path):
    # RK4 at 1 s on the quarter-car demo (invented): far beyond its step limit, and
    # the 0.18 s bump falls between steps, so the run looks calm; it must say so.
    import lumped

    path = lumped.demo_path("quarter_car")
    assert main(["run", str(path), "--dt", "1s", "--json"]) == 0
    warnings = json.loads(capsys.readouterr().out)["warnings"]
    assert any("unstable" in w for w in warnings) and any("speed_bump" in w for w in warnings)
    assert main(["run", str(path), "--dt", "1s", "--quiet", "--out", str(tmp_path / "run.csv")]) == 0
    err = capsys.readouterr().err
    assert "unstable" in err and "speed_bump" in err and "Traceback" not in err
    # The file asks for 1 kHz; 0.3 ms steps give a sample every 3 steps, 1111 Hz.
    assert main(["run", str(path), "--dt", "0.3ms", "--duration", "0.1s", "--json"]) == 0
    (rate,) = json.loads(capsys.readouterr().out)["warnings"]
    assert "every 3 steps" in rate and "1111.11 Hz" in rate and "1000 Hz asked" in rate
    assert main(["run", str(path), "--json"]) == 0
    assert json.loads(capsys.readouterr().out)["warnings"] == []
    # A run that diverged has no figures, and says so.
    assert main(["run", str(path), "--dt", "0.1s", "--figures", "--json"]) == 3
    assert any("no figures" in w for w in json.loads(capsys.readouterr().out)["warnings"])


def test_newmark_parameters_reach_the_run(tmp_path):
    # Newmark with β = 0, γ = ½ is the central difference method (T. J. R. Hughes,
    # The Finite Element Method, 1987, §9.1 [recalled from memory]): the run with
    # --beta 0 --gamma 0.5 gives central difference's samples to rounding; the
    # parameters apply to newmark only.
    path = tmp_path / "seat.toml"
    path.write_text(SEAT)
    runs = {}
    for name, options in (("newmark", ["--stepper", "newmark", "--beta", "0", "--gamma", "0.5"]),
                          ("central", ["--stepper", "central-difference"])):  # fmt: skip
        out = tmp_path / f"{name}.csv"
        assert main(["run", str(path), *options, "--dt", "0.5ms", "--duration", "1s", "--out", str(out), "--quiet"]) == 0
        runs[name] = pd.read_csv(out)
    np.testing.assert_allclose(runs["newmark"]["seat.displacement [m]"], runs["central"]["seat.displacement [m]"],
                               rtol=0, atol=1e-12)  # fmt: skip
    assert main(["run", str(path), "--stepper", "rk4", "--beta", "0.3", "--out", str(tmp_path / "x.csv")]) == 2
