"""``lumped check`` and :func:`lumped.stability.check_step` against limits computed here.

Eigenvalues come from matrices built here by hand and python-control; each mode's step
limit from root finding on the stepper's closed-form stability function (E. Hairer &
G. Wanner, *Solving ODEs II*, 2nd ed., 1996, §IV.2 [recalled from memory]: Heun
1 + z + z²/2, RK4 the exponential truncated after z⁴/4!, explicit Euler 1 + z) or
from the closed-form limits of the second-order-form schemes (REFERENCES, Steppers:
central difference hω ≤ 2; semi-implicit Euler with damping on the old velocity
2(√(1 + ζ²) − ζ)). Large chains use the closed-form ω_j of the uniform chain (G.
Strang, *Computational Science and Engineering*, 2007, §1.5 [recalled from memory]).
Exit codes and messages follow the command's documented contract (0 stable, 1
unstable, 2 bad input with one line on stderr and no traceback).
"""

from __future__ import annotations

import contextlib
import io
import json
import math
import shutil
import subprocess
import sys
from dataclasses import dataclass
from pathlib import Path

import control
import numpy as np
import pytest
from scipy.optimize import brentq

import lumped
from lumped import Body, Damper, Spring, System, assemble, get_stepper, uniform_chain
from lumped.cli import main
from lumped.stability import STABILITY_SAFETY, STEPS_PER_PERIOD, check_step

DEMOS = Path(__file__).resolve().parents[1] / "demo_systems"
TWO_PI = 2 * math.pi

R = {
    "euler": lambda z: 1 + z,
    "heun": lambda z: 1 + z + z**2 / 2,
    "rk4": lambda z: 1 + z + z**2 / 2 + z**3 / 6 + z**4 / 24,
}


def _lumped_command() -> list[str]:
    exe = Path(sys.executable).with_name("lumped")
    return [str(exe)] if exe.exists() else [shutil.which("lumped") or "lumped"]


def run_console_script(*args):
    """The installed ``lumped`` command in a subprocess: exit code, stdout, stderr."""
    return subprocess.run(
        [*_lumped_command(), *map(str, args)], capture_output=True, text=True, timeout=120
    )


@dataclass
class Result:
    returncode: int
    stdout: str
    stderr: str


def run_cli(*args):
    """``lumped.cli.main`` in this process (faster than a subprocess), output captured."""
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        code = main([str(a) for a in args])
    return Result(code, out.getvalue(), err.getvalue())


def _mu(zeta):
    return complex(-zeta, math.sqrt(max(1 - zeta * zeta, 0.0)))


def rk_limit(stepper_id, zeta):
    """Largest stable Ω = hω on a mode of damping ratio ζ: first root of |R(Ωμ)|² = 1."""
    f = R[stepper_id]
    mu = _mu(zeta)
    grid = np.linspace(1e-6, 10.0, 20001)
    values = np.abs(f(grid * mu)) ** 2 - 1
    k = int(np.argmax(values > 1e-12))
    return brentq(lambda w: abs(f(w * mu)) ** 2 - 1, grid[k - 1], grid[k], xtol=1e-15, rtol=1e-15)


def steps_of(dt, duration):
    # whole steps plus one shortened step for any remainder (the run's step count)
    return math.ceil(duration / dt - 1e-9)


def sdof_file(path, mass, omega, zeta, run=""):
    """A body on a spring and damper to the ground, with its values in SI numbers."""
    k = mass * omega**2
    c = 2 * zeta * math.sqrt(k * mass)
    text = (
        'format = "lumped/1"\nname = "single body"\n\n[bodies.body]\nmass = '
        f'{mass!r}\n\n[supports.ground]\n\n[springs.spring]\nbetween = ["ground", "body"]\n'
        f"stiffness = {k!r}\n"
    )
    if c > 0:
        text += f'\n[dampers.damper]\nbetween = ["ground", "body"]\ncoefficient = {c!r}\n'
    text += run
    path.write_text(text, encoding="utf-8")
    return path


def _refuse_constant(name):
    raise ValueError(f"{name} is not JSON (RFC 8259)")


def _check_json(*args):
    result = run_cli("check", *args, "--json")
    assert "Traceback" not in result.stderr
    return result.returncode, json.loads(result.stdout, parse_constant=_refuse_constant)


# ---------------------------------------------------------------- JSON keys and values


def test_quarter_car_rk4_report():
    code, data = _check_json(
        DEMOS / "quarter_car.toml", "--stepper", "rk4", "--dt", "0.2ms", "--duration", "3s"
    )
    assert code == 0
    assert {
        "stepper",
        "dt",
        "stable",
        "max_stable_dt",
        "limiting_mode",
        "growth_over_run",
        "recommended_dt",
    } <= set(data)
    assert (
        data["stepper"] == "rk4"
        and data["dt"] == pytest.approx(2e-4, rel=1e-15)
        and data["stable"] is True
    )
    # Eigenvalues of the corner built here, with python-control, in its two states:
    # linearised at rest (end stop open, damper at the mean of rebound and compression,
    # common practice) and the stiffest contact state (end stop of 400 kN/m engaged,
    # damper at its larger coefficient); the limit must hold in both.
    M = np.diag([42.0, 380.0])
    kt = 230e3

    def poles_of(ks, cs):
        K = np.array([[ks + kt, -ks], [-ks, ks]])
        C = np.array([[cs, -cs], [-cs, cs]])
        A = np.block([[np.zeros((2, 2)), np.eye(2)], [-np.linalg.solve(M, K), -np.linalg.solve(M, C)]])
        p = np.asarray(control.ss(A, np.zeros((4, 1)), np.eye(4), np.zeros((4, 1))).poles())
        return p[p.imag > 0]

    linear = poles_of(24e3, 0.5 * (2.4e3 + 1.3e3))
    poles = np.concatenate([linear, poles_of(24e3 + 400e3, 2.4e3)])
    omega = np.abs(poles)
    zeta = -poles.real / omega
    limits = np.array([rk_limit("rk4", z) for z in zeta]) / omega
    k = int(np.argmin(limits))
    assert data["max_stable_dt"] == pytest.approx(limits[k], rel=1e-9)
    assert data["limiting_mode"]["natural_frequency_hz"] == pytest.approx(
        omega[k] / TWO_PI, rel=1e-10
    )
    assert data["limiting_mode"]["damping_ratio"] == pytest.approx(zeta[k], rel=1e-9)
    # The recommended step: the smaller of the safety fraction of the limit and the
    # steps-per-period rule on the linearised modes, halved a whole number of times.
    first = min(STABILITY_SAFETY * limits[k], TWO_PI / np.abs(linear).max() / STEPS_PER_PERIOD)
    halvings = math.log2(first / data["recommended_dt"])
    assert halvings == pytest.approx(round(halvings), abs=1e-9) and round(halvings) >= 0
    # growth over the run: the largest of |R(hλ)|^steps over the modes
    steps = steps_of(2e-4, 3.0)
    assert data["steps"] == steps
    growth = max(abs(R["rk4"](2e-4 * p)) ** steps for p in poles)
    assert isinstance(data["growth_over_run"], float)
    assert data["growth_over_run"] == pytest.approx(growth, rel=1e-9)


def test_explicit_euler_on_an_undamped_system(tmp_path):
    omega = TWO_PI * 5.0
    path = sdof_file(tmp_path / "undamped.toml", 12.0, omega, 0.0)
    code, data = _check_json(path, "--stepper", "euler", "--dt", "1ms", "--duration", "2s")
    assert code == 1
    assert data["stable"] is False
    assert data["max_stable_dt"] is None  # no positive step is stable
    # |R(iΩ)| = √(1 + Ω²) per step
    steps = steps_of(1e-3, 2.0)
    expected = math.exp(0.5 * steps * math.log1p((omega * 1e-3) ** 2))
    assert data["growth_over_run"] == pytest.approx(expected, rel=1e-9)
    assert any("no positive step" in note for note in data["notes"])


def test_unconditionally_stable_stepper_reports_no_limit(tmp_path):
    path = sdof_file(tmp_path / "sdof.toml", 3.0, TWO_PI * 40.0, 0.05)
    code, data = _check_json(path, "--stepper", "trapezoid", "--dt", "50ms", "--duration", "10s")
    assert code == 0 and data["stable"] is True
    # Strict JSON has no infinity: the string "Infinity", which float() reads back.
    assert data["max_stable_dt"] == "Infinity" and math.isinf(float(data["max_stable_dt"]))
    assert data["limiting_mode"] is None


def test_newmark_parameters_reach_the_check(tmp_path):
    # β = 1/6, γ = ½ (linear acceleration): hω ≤ 2√3 for any damping (Hughes, *The Finite
    # Element Method*, 1987, ch. 9 [recalled from memory])
    omega = TWO_PI * 40.0
    path = sdof_file(tmp_path / "sdof.toml", 3.0, omega, 0.05)
    code, data = _check_json(
        path,
        "--stepper",
        "newmark",
        "--beta",
        repr(1 / 6),
        "--gamma",
        "0.5",
        "--dt",
        "1ms",
        "--duration",
        "1s",
    )
    assert data["max_stable_dt"] == pytest.approx(2 * math.sqrt(3) / omega, rel=1e-9)
    assert code == (0 if 1e-3 <= 2 * math.sqrt(3) / omega else 1)


# ---------------------------------------------------------------- a weak instability caught


def test_heun_weak_instability_caught_over_a_long_run(tmp_path):
    omega, zeta, dt = TWO_PI * 80.0, 0.002, 0.52e-3
    limit = rk_limit("heun", zeta) / omega
    assert 1.0 < dt / limit < 1.05  # just above Heun's limit on this lightly damped mode
    path = sdof_file(tmp_path / "stiff.toml", 1.5, omega, zeta)
    rho = abs(R["heun"](dt * omega * _mu(zeta)))

    code_short, short = _check_json(path, "--stepper", "heun", "--dt", "0.52ms", "--duration", "1s")
    code_long, long_ = _check_json(path, "--stepper", "heun", "--dt", "0.52ms", "--duration", "60s")
    # over one second the amplitude grows by a few per cent only: a run looks fine
    assert short["growth_over_run"] == pytest.approx(rho ** steps_of(dt, 1.0), rel=1e-9)
    assert 1.0 < short["growth_over_run"] < 1.1
    # ... over a minute it has grown many times over; the check says so either way
    assert long_["growth_over_run"] == pytest.approx(rho ** steps_of(dt, 60.0), rel=1e-8)
    assert long_["growth_over_run"] > 10
    assert code_short == 1 and code_long == 1
    assert short["stable"] is False and long_["stable"] is False
    assert long_["max_stable_dt"] == pytest.approx(limit, rel=1e-9)
    # own Heun run of the oscillator over the first second agrees with the factor
    x, v = 1.0, 0.0
    peak_first, peak_last = 0.0, 0.0
    steps = steps_of(dt, 1.0)
    for n in range(steps):
        k1x, k1v = v, -(omega**2) * x - 2 * zeta * omega * v
        px, pv = x + dt * k1x, v + dt * k1v
        k2x, k2v = pv, -(omega**2) * px - 2 * zeta * omega * pv
        x, v = x + dt / 2 * (k1x + k2x), v + dt / 2 * (k1v + k2v)
        amplitude = math.hypot(x, v / omega)
        if n < 200:
            peak_first = max(peak_first, amplitude)
        if n >= steps - 200:
            peak_last = max(peak_last, amplitude)
    assert peak_last / peak_first == pytest.approx(short["growth_over_run"], rel=0.01)


def test_stable_setting_exit_zero_text_output():
    result = run_console_script(
        "check", DEMOS / "quarter_car.toml", "--stepper", "heun", "--dt", "1ms", "--duration", "60s"
    )
    assert result.returncode == 0, result.stderr
    assert "STABLE" in result.stdout and "UNSTABLE" not in result.stdout


# ---------------------------------------------------------------- bad input


@pytest.mark.parametrize(
    "args, needle",
    [
        (["--stepper", "bogus", "--dt", "1ms", "--duration", "1s"], "bogus"),
        (["--stepper", "rk4", "--dt=0s", "--duration", "1s"], "dt"),
        (["--stepper", "rk4", "--dt=-1ms", "--duration", "1s"], "dt"),
        (["--stepper", "rk4", "--dt", "1ms", "--duration=0s"], "duration"),
        (["--stepper", "rk4", "--dt", "1 kg", "--duration", "1s"], "dt"),
        (["--stepper", "heun", "--beta", "0.3", "--dt", "1ms", "--duration", "1s"], "newmark"),
    ],
)
def test_bad_options_exit_two_with_one_line(args, needle):
    result = run_cli("check", DEMOS / "quarter_car.toml", *args)
    assert result.returncode == 2
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1, result.stderr
    assert needle in lines[0]
    assert "Traceback" not in result.stderr
    assert result.stdout == ""


def test_console_script_bad_stepper_exits_two():
    result = run_console_script(
        "check", DEMOS / "quarter_car.toml", "--stepper", "bogus", "--dt", "1ms", "--duration", "1s"
    )
    assert result.returncode == 2
    assert len(result.stderr.strip().splitlines()) == 1 and "bogus" in result.stderr
    assert "Traceback" not in result.stderr


def test_missing_file_exits_two(tmp_path):
    missing = tmp_path / "no_such_system.toml"
    result = run_console_script(
        "check", missing, "--stepper", "rk4", "--dt", "1ms", "--duration", "1s"
    )
    assert result.returncode == 2
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1 and "no_such_system.toml" in lines[0]
    assert "Traceback" not in result.stderr


def test_missing_step_without_run_table_exits_two(tmp_path):
    path = sdof_file(tmp_path / "norun.toml", 2.0, 30.0, 0.1)
    result = run_cli("check", path, "--stepper", "rk4", "--duration", "1s")
    assert result.returncode == 2
    assert "--dt" in result.stderr and "Traceback" not in result.stderr


def test_run_table_supplies_defaults(tmp_path):
    omega = TWO_PI * 20.0
    path = sdof_file(
        tmp_path / "run.toml",
        2.0,
        omega,
        0.1,
        run='\n[run]\nstepper = "rk4"\ndt = "1 ms"\nduration = "2 s"\n',
    )
    code, data = _check_json(path)
    assert code == 0
    assert (
        data["stepper"] == "rk4"
        and data["dt"] == pytest.approx(1e-3)
        and data["duration"] == pytest.approx(2.0)
    )
    assert data["max_stable_dt"] == pytest.approx(rk_limit("rk4", 0.1) / omega, rel=1e-9)


# ---------------------------------------------------------------- above 2000 bodies


def _chain_modes(n, m, k):
    j = np.arange(1, n + 1)
    return 2 * math.sqrt(k / m) * np.sin((2 * j - 1) * math.pi / (2 * (2 * n + 1)))


def _stable_at(stepper_id, h, omega, zeta):
    """True per mode when the step h is stable on the mode (ω, ζ), from the closed forms."""
    w = h * omega
    if stepper_id in R:
        mu = -zeta + 1j * np.sqrt(np.maximum(1 - zeta**2, 0))
        return np.abs(R[stepper_id](w * mu)) <= 1 + 1e-12
    if stepper_id == "central-difference":
        return w <= 2 * (1 + 1e-12)
    if stepper_id == "symplectic-euler":
        return w <= 2 * (np.sqrt(1 + zeta**2) - zeta) * (1 + 1e-12)
    raise KeyError(stepper_id)


def _radius(stepper_id, w, zeta):
    """Spectral radius per step at Ω = w on a mode of damping ratio ζ, from the closed
    forms: |R(Ωμ)|, or the roots of the scheme's characteristic polynomial."""
    if stepper_id in R:
        return abs(R[stepper_id](w * _mu(zeta)))
    if stepper_id == "central-difference":
        # (1 + ζΩ)λ² − (2 − Ω²)λ + (1 − ζΩ) = 0
        polynomial = [1 + zeta * w, -(2 - w * w), 1 - zeta * w]
    else:  # semi-implicit Euler, damping on the old velocity: trace and determinant
        polynomial = [1.0, -(2 - w * w - 2 * zeta * w), 1 - 2 * zeta * w]
    return float(np.max(np.abs(np.roots(polynomial))))


def _exact_limit(stepper_id, omega, zeta):
    if stepper_id in R:
        return rk_limit(stepper_id, zeta) / omega if zeta > 0 or stepper_id == "rk4" else 0.0
    if stepper_id == "central-difference":
        return 2 / omega
    return 2 * (math.sqrt(1 + zeta**2) - zeta) / omega


@pytest.fixture(scope="module")
def chain_3000():
    n, m, k, c = 3000, 0.5, 4e7, 40.0
    return (n, m, k, c), assemble(uniform_chain(n, m, k, damping=c))


@pytest.mark.parametrize(
    "stepper_id", ["rk4", "central-difference", "symplectic-euler", "heun", "euler"]
)
def test_large_chain_uses_the_bound_and_errs_safe(stepper_id, chain_3000):
    (n, m, k, c), matrices = chain_3000
    report = check_step(matrices, get_stepper(stepper_id), 1e-5, 1.0)
    assert report.source == "bound on the stiffest mode"
    assert any("bound" in note for note in report.notes)
    omega = _chain_modes(n, m, k)
    zeta = (c / k) * omega / 2  # dampers beside the springs: C = (c/k) K
    exact = min(
        _exact_limit(stepper_id, omega[-1], zeta[-1]), _exact_limit(stepper_id, omega[0], zeta[0])
    )
    if report.max_stable_dt is None:
        assert stepper_id in ("heun", "euler")  # no step can be guaranteed
        assert report.stable is False
        return
    assert 0 < report.max_stable_dt <= exact
    # at the reported limit every one of the chain's modes is stable
    assert np.all(_stable_at(stepper_id, report.max_stable_dt, omega, zeta))
    assert report.stable is (1e-5 <= report.max_stable_dt)
    # the lowest mode barely decays over the run: the growth claimed is not below it
    lowest = _radius(stepper_id, 1e-5 * omega[0], zeta[0]) ** steps_of(1e-5, 1.0)
    assert 0.99 < lowest <= 1.0
    assert report.growth_over_run >= lowest


def test_large_chain_file_through_the_command(tmp_path):
    n, m, k, c = 3000, 0.5, 4e7, 40.0
    path = tmp_path / "chain.toml"
    lumped.save(uniform_chain(n, m, k, damping=c), path)
    code, data = _check_json(path, "--stepper", "rk4", "--dt", "0.05ms", "--duration", "1s")
    assert code == 0
    assert data["source"] == "bound on the stiffest mode"
    omega = _chain_modes(n, m, k)
    zeta = (c / k) * omega / 2
    exact = min(rk_limit("rk4", z) / w for w, z in ((omega[-1], zeta[-1]), (omega[0], zeta[0])))
    assert data["max_stable_dt"] <= exact


def _chain_with_extra_body(n, m, k, omega_s, zeta_s, mass_s=1.0):
    """An undamped uniform chain on the ground and, beside it, one more body on its own
    spring and damper to the ground: the spectrum is the chain's and (ω_s, ζ_s)."""
    chain = uniform_chain(n, m, k)
    bodies = dict(chain.bodies) | {"extra": Body("extra", mass_s)}
    springs = dict(chain.springs) | {
        "k_extra": Spring("k_extra", ("ground", "extra"), mass_s * omega_s**2)
    }
    dampers = {
        "c_extra": Damper("c_extra", ("ground", "extra"), coefficient=2 * zeta_s * omega_s * mass_s)
    }
    return System(
        name="chain and extra body",
        bodies=bodies,
        supports=dict(chain.supports),
        springs=springs,
        dampers=dampers,
    )


def test_regression_bound_limit_ignored_undamped_modes_for_heun():
    # 2999 undamped chain modes and one damped body: Heun is unstable at any step on the
    # undamped modes, so no step may be reported stable
    n, m, k = 2999, 0.5, 4e7
    matrices = assemble(_chain_with_extra_body(n, m, k, 0.999 * 2 * math.sqrt(k / m), 0.3))
    assert matrices.n > 2000
    report = check_step(matrices, get_stepper("heun"), 1e-6, 10.0)
    assert report.source == "bound on the stiffest mode"
    assert report.stable is False
    assert report.max_stable_dt is None
    assert report.growth_over_run > 1


@pytest.mark.parametrize("stepper_id, zeta_s", [("symplectic-euler", 0.5), ("rk4", 0.5)])
def test_regression_bound_limit_ignored_damped_modes(stepper_id, zeta_s):
    # a well-damped body almost as stiff as the chain's top: semi-implicit Euler's and
    # RK4's limits fall with damping there, so the bound must not use the chain's ζ ≈ 0
    n, m, k = 2999, 0.5, 4e7
    omega_s = 0.99 * 2 * math.sqrt(k / m)
    matrices = assemble(_chain_with_extra_body(n, m, k, omega_s, zeta_s))
    report = check_step(matrices, get_stepper(stepper_id), 1e-6, 1.0)
    assert report.source == "bound on the stiffest mode"
    omega = _chain_modes(n, m, k)
    exact = min(_exact_limit(stepper_id, omega[-1], 0.0), _exact_limit(stepper_id, omega_s, zeta_s))
    assert exact < _exact_limit(stepper_id, omega[-1], 0.0)  # the extra body sets it
    assert 0 < report.max_stable_dt <= exact


def test_regression_bound_growth_claimed_decay_of_every_mode(chain_3000):
    # the bound's stiff mode decays fast, but the chain's lowest mode barely decays over
    # the run: the reported growth must not claim a smaller factor
    (n, m, k, c), matrices = chain_3000
    report = check_step(matrices, get_stepper("rk4"), 5e-5, 1.0)
    omega, zeta = _chain_modes(n, m, k)[0], (c / k) * _chain_modes(n, m, k)[0] / 2
    lowest = abs(R["rk4"](5e-5 * omega * _mu(zeta))) ** steps_of(5e-5, 1.0)
    assert lowest > 0.99
    assert report.growth_over_run >= lowest


@pytest.mark.parametrize("stepper_id", ["central-difference", "symplectic-euler"])
def test_period_error_and_numerical_damping_per_mode(tmp_path, stepper_id):
    # undamped: ω̄h = 2 arcsin(Ω/2), so T_numerical/T − 1 = Ω/(2 arcsin(Ω/2)) − 1, and no
    # numerical damping (Chopra ch. 5; Hughes ch. 9 [recalled from memory])
    omega, dt = TWO_PI * 25.0, 2e-3
    path = sdof_file(tmp_path / "undamped.toml", 4.0, omega, 0.0)
    code, data = _check_json(path, "--stepper", stepper_id, "--dt", "2ms", "--duration", "1s")
    assert code == 0
    (mode,) = data["modes"]
    w = omega * dt
    assert mode["period_error"] == pytest.approx(w / (2 * math.asin(w / 2)) - 1, rel=1e-9)
    assert mode["numerical_damping_ratio"] == pytest.approx(0.0, abs=1e-12)
    assert data["max_stable_dt"] == pytest.approx(2 / omega, rel=1e-9)


def test_a_stable_step_far_above_the_recommended_one_says_so_in_the_headline():
    # Newmark's average acceleration is stable at any step (Hughes, The Finite Element
    # Method, 1987, ch. 9 [recalled from memory]), so 50 ms on the quarter-car demo
    # (invented) is STABLE, yet twelve times the step the accuracy rule recommends.
    import lumped

    path = lumped.demo_path("quarter_car")
    headline = run_cli("check", path, "--stepper", "newmark", "--dt", "50ms").stdout.splitlines()[0]
    assert headline.endswith("× the recommended dt (see its rule)") and "STABLE, but" in headline
    code, data = _check_json(path, "--stepper", "newmark", "--dt", "50ms")
    assert code == 0 and data["dt"] > 2 * data["recommended_dt"]
    fine = run_cli("check", path, "--stepper", "newmark", "--dt", "1ms").stdout.splitlines()[0]
    assert fine.endswith(": STABLE")


def test_a_stepper_that_cannot_run_the_system_exits_two_after_its_check():
    # The exact (matrix-exponential) stepper runs linear systems only; the quarter-car
    # demo (invented) has an end stop and a lifting tyre, so a run with it is refused:
    # check says so in its headline and exits 2, as `lumped run` would, so that a
    # script gating runs on check does not let it through.
    result = run_cli("check", DEMOS / "quarter_car.toml", "--stepper", "exact", "--dt", "1ms")
    assert result.returncode == 2
    assert "exact cannot run this system" in result.stdout.splitlines()[0]
    assert "runs linear systems only" in result.stderr and len(result.stderr.strip().splitlines()) == 1
    verdict = json.loads(run_cli("check", DEMOS / "quarter_car.toml", "--stepper", "exact", "--dt", "1ms",
                                 "--json").stdout)  # fmt: skip
    assert verdict["runs"] is False
    assert json.loads(run_cli("check", DEMOS / "quarter_car.toml", "--stepper", "rk4", "--dt", "1ms",
                              "--json").stdout)["runs"] is True  # fmt: skip
