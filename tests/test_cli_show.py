"""``lumped show FILE``: the readable summary lists bodies and elements with units;
``--json`` gives SI values whose static deflections match the quarter vehicle's closed
form (Gillespie, Fundamentals of Vehicle Dynamics, SAE 1992, ch. 5 [recalled from
memory]); a bad file or option exits 2 with one line per problem on stderr and no
traceback (the command-line contract in lumped/cli.py).
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

import pytest

import lumped
from lumped.cli import main

DEMOS = lumped.demo_systems()
QUARTER_CAR = DEMOS["quarter_car"]


def run(capsys, *argv) -> tuple[int, str, str]:
    code = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    return code, out, err


def test_show_lists_bodies_and_elements_with_units(capsys):
    code, out, err = run(capsys, "show", QUARTER_CAR)
    assert code == 0 and err == ""
    system = lumped.load(QUARTER_CAR)
    assert system.name in out
    lines = out.splitlines()
    for body in system.bodies.values():
        (line,) = [ln for ln in lines if ln.split()[:1] == [body.id]]
        assert f"{body.mass:g} kg" in line and " mm" in line
    for element in system.elements.values():
        (line,) = [ln for ln in lines if ln.split()[:1] == [element.id]]
        assert element.kind in line and " → ".join(element.between) in line
        assert " kN" in line  # its static force
    tyre = next(ln for ln in lines if ln.split()[:1] == ["tyre"])
    assert "230 kN/m" in tyre and "compression only" in tyre
    damper = next(ln for ln in lines if ln.split()[:1] == ["suspension_damper"])
    assert "N·s/m" in damper
    assert "road" in out and "speed_bump" in out  # the support and what moves it


def test_show_text_static_deflections_are_the_closed_form_in_mm(capsys):
    _, out, _ = run(capsys, "show", QUARTER_CAR)
    system = lumped.load(QUARTER_CAR)
    m_u, m_s = system.bodies["wheel"].mass, system.bodies["body"].mass
    k_t, k_s = system.springs["tyre"].stiffness, system.springs["suspension_spring"].stiffness
    wheel = -(m_u + m_s) * system.gravity / k_t
    body = wheel - m_s * system.gravity / k_s
    lines = out.splitlines()
    wheel_line = next(ln for ln in lines if ln.split()[:1] == ["wheel"])
    body_line = next(ln for ln in lines if ln.split()[:1] == ["body"])
    assert f"{wheel * 1e3:.3f} mm" in wheel_line
    assert f"{body * 1e3:.3f} mm" in body_line


def test_show_json_in_si_with_the_closed_form(capsys):
    code, out, err = run(capsys, "show", QUARTER_CAR, "--json")
    assert code == 0 and err == ""
    data = json.loads(out)
    system = lumped.load(QUARTER_CAR)
    m_u, m_s = system.bodies["wheel"].mass, system.bodies["body"].mass
    k_t, k_s = system.springs["tyre"].stiffness, system.springs["suspension_spring"].stiffness
    g = system.gravity
    assert set(data["bodies"]) == {"wheel", "body"}
    assert data["bodies"]["wheel"]["mass"] == 42.0  # kg, as in the file
    assert data["bodies"]["body"]["mass"] == 380.0
    wheel = -(m_u + m_s) * g / k_t  # negative: down
    body = wheel - m_s * g / k_s
    assert data["bodies"]["wheel"]["static_deflection"] == pytest.approx(wheel, rel=1e-12)
    assert data["bodies"]["body"]["static_deflection"] == pytest.approx(body, rel=1e-12)
    assert (
        data["bodies"]["body"]["static_deflection"]
        < data["bodies"]["wheel"]["static_deflection"]
        < 0
    )
    elements = data["elements"]
    assert set(elements) == {"tyre", "suspension_spring", "suspension_damper"}
    assert (
        elements["tyre"]["kind"] == "spring" and elements["suspension_damper"]["kind"] == "damper"
    )
    assert elements["tyre"]["static_force"] == pytest.approx(
        -(m_u + m_s) * g, rel=1e-12
    )  # N, compression
    assert elements["suspension_spring"]["static_force"] == pytest.approx(-m_s * g, rel=1e-12)
    assert elements["suspension_damper"]["static_force"] == 0.0
    assert elements["tyre"]["stiffness"] == 230e3  # N/m
    assert elements["suspension_spring"]["gap"] == pytest.approx(0.06)  # m


@pytest.mark.parametrize("name", sorted(DEMOS))
def test_show_json_for_every_demo(capsys, name):
    code, out, err = run(capsys, "show", DEMOS[name], "--json")
    assert code == 0 and err == ""
    data = json.loads(out)
    system = lumped.load(DEMOS[name])
    assert list(data["bodies"]) == list(system.bodies)
    assert list(data["elements"]) == list(system.elements)
    for body_id, body in data["bodies"].items():
        assert body["mass"] == system.bodies[body_id].mass
        assert body["static_deflection"] < 0  # every demo body sinks under gravity
    for element_id, element in data["elements"].items():
        assert element["kind"] == system.elements[element_id].kind


BAD = """\
format = "lumped/1"
name = "Three problems"

[bodies.cab]
mass = "-5 kg"

[supports.road]

[springs.tyre]
between = ["road", "cab"]
stifness = "200 kN/m"
"""


def test_bad_file_exits_2_with_one_line_per_problem(capsys, tmp_path):
    path = tmp_path / "bad.toml"
    path.write_text(BAD, encoding="utf-8")
    error = pytest.raises(lumped.ModelError, lumped.load, path).value
    assert len(error.problems) == 3  # mass, the misspelt key, the missing stiffness
    code, out, err = run(capsys, "show", path)
    assert code == 2 and out == ""
    lines = err.splitlines()
    assert len(lines) == len(error.problems)
    assert all(line.startswith(f"lumped: {path}: ") for line in lines)
    assert any("bodies.cab.mass" in line for line in lines)
    assert any("springs.tyre.stifness" in line and "'stiffness'" in line for line in lines)
    assert "Traceback" not in err


def test_bad_file_with_json_still_exits_2(capsys, tmp_path):
    path = tmp_path / "bad.toml"
    path.write_text(BAD, encoding="utf-8")
    code, _, err = run(capsys, "show", path, "--json")
    assert code == 2 and len(err.splitlines()) == 3 and "Traceback" not in err


@pytest.mark.parametrize("content", [b"format = ", b"\xff\xfe\x00", b""])
def test_unreadable_file_exits_2(capsys, tmp_path, content):
    path = tmp_path / "broken.toml"
    path.write_bytes(content)
    code, _, err = run(capsys, "show", path)
    assert code == 2 and len(err.splitlines()) == 1 and "Traceback" not in err


def test_missing_file_exits_2(capsys, tmp_path):
    code, _, err = run(capsys, "show", tmp_path / "nowhere.toml")
    assert code == 2
    (line,) = err.splitlines()
    assert "nowhere.toml" in line and "Traceback" not in err


@pytest.mark.parametrize(
    "argv",
    [
        ["show", str(QUARTER_CAR), "--bogus"],
        ["show"],
        ["shw", str(QUARTER_CAR)],
        [],
        ["show", "--json"],
    ],
)
def test_bad_option_exits_2_with_one_line(capsys, argv):
    code, out, err = run(capsys, *argv)
    assert code == 2 and out == ""
    assert len(err.splitlines()) == 1 and "Traceback" not in err


def test_no_static_equilibrium_exits_2_and_names_the_spring(capsys, tmp_path):
    # A lamp below the ceiling on a compression-only spring (invented example).
    path = tmp_path / "lamp.toml"
    path.write_text(
        'format = "lumped/1"\nname = "Lamp"\n\n[bodies.lamp]\nmass = "3 kg"\n\n[supports.ceiling]\n\n'
        '[springs.push_spring]\nbetween = ["lamp", "ceiling"]\nstiffness = "600 N/m"\nacts = "compression"\n',
        encoding="utf-8",
    )
    code, out, err = run(capsys, "show", path, "--json")
    assert code == 2
    data = json.loads(out)  # --json answers also when the exit code is not 0
    assert "push_spring" in data["static_error"]
    assert data["bodies"]["lamp"]["static_deflection"] is None
    (line,) = err.splitlines()
    assert "push_spring" in line and "Traceback" not in err


def python_m_lumped(*args, cwd: Path):
    env = {k: v for k, v in os.environ.items() if not k.startswith("PYTHON")}
    return subprocess.run(
        [sys.executable, "-m", "lumped", *map(str, args)],
        capture_output=True, text=True, timeout=120, cwd=cwd, env=env,
    )  # fmt: skip


def test_real_process_good_and_bad_file(tmp_path):
    good = python_m_lumped("show", QUARTER_CAR, "--json", cwd=tmp_path)
    assert good.returncode == 0, good.stderr
    data = json.loads(good.stdout)
    assert data["bodies"]["wheel"]["static_deflection"] < 0
    path = tmp_path / "bad.toml"
    path.write_text(BAD, encoding="utf-8")
    bad = python_m_lumped("show", path, cwd=tmp_path)
    assert bad.returncode == 2
    assert "Traceback" not in bad.stderr
    assert len(bad.stderr.splitlines()) == 3
    option = python_m_lumped("show", QUARTER_CAR, "--frobnicate", cwd=tmp_path)
    assert option.returncode == 2 and "Traceback" not in option.stderr
    assert len(option.stderr.splitlines()) == 1


def test_a_reader_that_stops_early_gets_exit_141_and_no_traceback(tmp_path):
    # `lumped show big.toml | head -1`: the answer (far more than a pipe holds) is cut
    # off, which the exit code says, as for a program stopped by SIGPIPE (128 + 13,
    # POSIX shells' convention — common practice); stderr stays quiet.
    bodies = 3000
    lines = ['format = "lumped/1"', 'name = "long chain (invented)"', "[supports.ground]"]
    for i in range(bodies):
        lines += [f"[bodies.b{i}]", 'mass = "1 kg"', f"[springs.k{i}]",
                  f'between = ["{"ground" if i == 0 else f"b{i - 1}"}", "b{i}"]', 'stiffness = "1 kN/m"']  # fmt: skip
    path = tmp_path / "chain.toml"
    path.write_text("\n".join(lines), encoding="utf-8")
    env = {k: v for k, v in os.environ.items() if not k.startswith("PYTHON")}
    process = subprocess.Popen([sys.executable, "-m", "lumped", "show", str(path)], stdout=subprocess.PIPE,
                               stderr=subprocess.PIPE, cwd=tmp_path, env=env)  # fmt: skip
    assert process.stdout.readline()
    process.stdout.close()
    stderr = process.stderr.read().decode()
    assert process.wait(timeout=120) == 141
    assert stderr == ""
