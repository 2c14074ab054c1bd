"""The ``lumped`` command line.

Exit codes: 0 done; 1 ``check`` found the run unstable; 2 bad file or option (one
line per problem on stderr, never a traceback); 3 a run that diverged; 141 the
reader of stdout stopped before the answer was written (``| head``), as for a
program stopped by SIGPIPE.
``--json`` prints a machine-readable answer on stdout, also when the exit code is not 0.
"""

from __future__ import annotations

import argparse
import json
import math
import os
import re
import sys
from pathlib import Path

from lumped.errors import LumpedError

__all__ = ["main"]

EXIT_OK, EXIT_UNSTABLE, EXIT_BAD_INPUT, EXIT_DIVERGED = 0, 1, 2, 3
EXIT_BROKEN_PIPE = 128 + 13  # what a shell reports for a program stopped by SIGPIPE


class UsageError(Exception):
    """A bad option; argparse's own message, one line."""


class _Parser(argparse.ArgumentParser):
    def error(self, message):  # one line, exit code 2, no usage dump
        raise UsageError(f"{self.prog}: {message} (see {self.prog} --help)")


def _parser() -> argparse.ArgumentParser:
    parser = _Parser(
        prog="lumped",
        description="Multi-body lumped-parameter mechanical systems: summaries, modes, step "
        "limits, runs and frequency response of system files (format lumped/1).",
        epilog="Exit codes: 0 done, 1 check found the run unstable, 2 bad file or option, "
        "3 run diverged. Simulation supports, but does not replace, physical testing, the "
        "applicable standards and regulations, and licensed engineering sign-off.",
    )
    commands = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)
    commands.required = True

    show = commands.add_parser("show", help="summary: bodies, supports, elements, static equilibrium")
    show.add_argument("file", help="system file (TOML)")
    show.add_argument("--json", action="store_true", help="SI values as JSON on stdout")

    serve = commands.add_parser("serve", help="start the dashboard in the browser")
    serve.add_argument("--port", type=int, default=None, help="port (default from .streamlit/config.toml)")
    _add_analysis_commands(commands)
    from lumped.cli_frequency import add_commands as _add_frequency_commands

    _add_frequency_commands(commands)
    return parser


def _add_analysis_commands(commands) -> None:
    """Commands built on modal analysis and the stepper catalogue."""
    from lumped.steppers import STEPPERS

    modes = commands.add_parser("modes", help="natural frequencies, damping ratios and mode shapes")
    modes.add_argument("file", help="system file (TOML)")
    modes.add_argument("--json", action="store_true", help="SI values as JSON on stdout")

    check = commands.add_parser(
        "check", help="will this stepper and step hold over this run? (exit 0 stable, 1 not)"
    )
    check.add_argument("file", help="system file (TOML)")
    check.add_argument("--stepper", choices=list(STEPPERS), metavar="ID",
                       help=f"stepper id, one of: {', '.join(STEPPERS)} (default: the file's [run])")
    check.add_argument("--dt", type=_quantity_arg("time"), help='time step, s or with units ("0.5 ms")')
    check.add_argument("--duration", type=_quantity_arg("time"), help="run length, s or with units")
    _newmark_arguments(check)
    check.add_argument("--json", action="store_true", help="the verdict as JSON on stdout")

    from lumped.simulate import ADAPTIVE_METHODS

    run = commands.add_parser("run", help="time simulation to CSV or Parquet (exit 3 if it diverged)")
    run.add_argument("file", help="system file (TOML)")
    run.add_argument("--stepper", choices=[*STEPPERS, *ADAPTIVE_METHODS], metavar="ID",
                     help=f"stepper id (default: the file's [run]); also {', '.join(ADAPTIVE_METHODS)}")
    run.add_argument("--dt", type=_quantity_arg("time"), help="time step, s or with units")
    run.add_argument("--duration", type=_quantity_arg("time"), help="run length, s or with units")
    _newmark_arguments(run)
    run.add_argument("--output-rate", type=_quantity_arg("frequency"),
                     help="samples per second, Hz (default: the file's, else every step)")
    run.add_argument("--out", help="output file, .csv or .parquet (replaced atomically)")
    run.add_argument("--convergence", action="store_true",
                     help="also run at dt/2, dt/4, dt/8 and report the observed order")
    run.add_argument("--quiet", action="store_true", help="print nothing but errors (no progress bar, no summary)")
    run.add_argument("--json", action="store_true", help="a summary of the run as JSON on stdout")
    run.add_argument("--figures", action="store_true",
                     help="ride, travel and load figures of the run (ISO 2631-1 weighted acceleration, VDV, ...)")
    run.add_argument("--ride", metavar="BODY[,BODY]",
                     help="bodies whose ride figures are reported, e.g. the seat (default: every body)")
    run.add_argument("--settle", type=_quantity_arg("time"), default=0.0,
                     help="leave the first part of the run out of the figures, s or with units")


def _newmark_arguments(parser) -> None:
    parser.add_argument("--beta", type=float, help="Newmark β (newmark only; default ¼, average acceleration)")
    parser.add_argument("--gamma", type=float, help="Newmark γ (newmark only; default ½)")


def _stepper(args, system):
    """The stepper asked for: its id (or the file's [run] stepper), made a Newmark
    stepper of its own when --beta or --gamma is given. Raises LumpedError for a bad
    combination."""
    from lumped.errors import LumpedError
    from lumped.steppers import get_stepper

    stepper_id = args.stepper or system.run.stepper
    if args.beta is None and args.gamma is None:
        return stepper_id
    if stepper_id != "newmark":
        raise LumpedError(f"--beta and --gamma apply to newmark only, not {stepper_id!r}")
    try:
        return get_stepper(stepper_id, beta=args.beta, gamma=args.gamma)
    except ValueError as exc:
        raise LumpedError(str(exc)) from None


def _quantity_arg(dimension: str):
    from lumped.units import QuantityError, parse_quantity

    def convert(text: str) -> float:
        try:
            value = parse_quantity(float(text), dimension)  # a plain number is SI
        except ValueError:
            pass
        else:
            return value
        try:
            value = parse_quantity(text, dimension)
        except QuantityError as exc:
            raise argparse.ArgumentTypeError(str(exc)) from None
        return value

    convert.__name__ = dimension
    return convert


def _attach_negative_values(argv: list[str]) -> list[str]:
    """``--dt -1ms`` as ``--dt=-1ms``: argparse takes a value that starts with a minus
    sign for an option, which would hide the real problem (a negative step) behind
    "expected one argument"."""
    out: list[str] = []
    for token in argv:
        if out and out[-1].startswith("--") and "=" not in out[-1] and re.match(r"-\.?\d", token):
            out[-1] = f"{out[-1]}={token}"
        else:
            out.append(token)
    return out


def main(argv: list[str] | None = None) -> int:
    """Run the command line; returns the exit code (the console script exits with it)."""
    try:
        args = _parser().parse_args(_attach_negative_values(sys.argv[1:] if argv is None else list(argv)))
    except UsageError as exc:
        print(str(exc), file=sys.stderr)
        return EXIT_BAD_INPUT
    except SystemExit as exc:  # --help
        return int(exc.code or 0)
    try:
        return _COMMANDS[args.command](args)
    except LumpedError as exc:
        for line in exc.lines():
            print(f"lumped: {line.strip()}", file=sys.stderr)
        return EXIT_BAD_INPUT
    except KeyboardInterrupt:
        print("lumped: interrupted", file=sys.stderr)
        return 130
    except BrokenPipeError:
        # Not all was written: say so in the exit code, and point stdout at the null
        # device so that the interpreter's last flush stays quiet (Python docs,
        # "Note on SIGPIPE").
        try:
            os.dup2(os.open(os.devnull, os.O_WRONLY), sys.stdout.fileno())
        except (OSError, ValueError):  # stdout is no file (captured in this process)
            pass
        return EXIT_BROKEN_PIPE


# --------------------------------------------------------------------------- commands


def _load(path: str):
    from lumped.files import load

    return load(path)


def _print_json(data) -> None:
    """``data`` as strict JSON (RFC 8259): an infinite number (a stepper without a step
    limit) is the string "Infinity" (or "-Infinity"), which ``float()`` and
    JavaScript's ``Number()`` read back; not a number is null."""
    print(json.dumps(_strict_json(data), indent=2, allow_nan=False))


def _strict_json(value):
    if isinstance(value, float) and not math.isfinite(value):
        return None if math.isnan(value) else ("Infinity" if value > 0 else "-Infinity")
    if isinstance(value, dict):
        return {key: _strict_json(item) for key, item in value.items()}
    if isinstance(value, list | tuple):
        return [_strict_json(item) for item in value]
    return value


def cmd_show(args) -> int:
    from lumped.report import summarize

    summary = summarize(_load(args.file))
    if args.json:
        _print_json(summary.to_json())
    else:
        print(format_summary(summary))
    if summary.static_error:
        print(f"lumped: {summary.static_error}", file=sys.stderr)
        return EXIT_BAD_INPUT
    return EXIT_OK


def cmd_serve(args) -> int:
    app = Path(__file__).resolve().parents[1] / "dashboard" / "app.py"
    if not app.exists():
        print(f"lumped: the dashboard is not installed beside the package ({app})", file=sys.stderr)
        return EXIT_BAD_INPUT
    command = [sys.executable, "-m", "streamlit", "run", str(app)]
    if args.port:
        command += ["--server.port", str(args.port)]
    # Become the server (same process id), so that stopping `lumped serve` stops it.
    os.chdir(app.parent.parent)
    os.execv(sys.executable, command)
    return EXIT_OK  # not reached


def cmd_modes(args) -> int:
    from lumped.assemble import assemble
    from lumped.modal import modal_analysis

    system = _load(args.file)
    result = modal_analysis(assemble(system))
    if args.json:
        _print_json(result.to_json())
    else:
        print(format_modes(system.name, result))
    return EXIT_OK


def cmd_check(args) -> int:
    from lumped.assemble import assemble
    from lumped.stability import check_step
    from lumped.steppers import get_stepper

    system = _load(args.file)
    stepper_id = args.stepper or system.run.stepper
    dt = args.dt if args.dt is not None else system.run.dt
    duration = args.duration if args.duration is not None else system.run.duration
    missing = [
        f"lumped check: give {flag} (the file's [run] table has no {key})"
        for flag, key, value in (("--stepper", "stepper", stepper_id), ("--dt", "dt", dt),
                                 ("--duration", "duration", duration))
        if value is None
    ]  # fmt: skip
    if missing:
        print("\n".join(missing), file=sys.stderr)
        return EXIT_BAD_INPUT
    stepper = _stepper(args, system)
    try:
        stepper = get_stepper(stepper) if isinstance(stepper, str) else stepper
    except KeyError as exc:
        print(f"lumped check: {exc.args[0]}", file=sys.stderr)
        return EXIT_BAD_INPUT
    verdict = check_step(assemble(system), stepper, dt, duration)
    if args.json:
        _print_json(verdict.to_json())
    else:
        print(format_check(system.name, verdict))
    if not verdict.runs:
        print(f"lumped check: {stepper.id} cannot run this system: {verdict.notes[-1]}", file=sys.stderr)
        return EXIT_BAD_INPUT
    return EXIT_OK if verdict.stable else EXIT_UNSTABLE


def _run_warnings(system, result, output_rate, figures) -> list[str]:
    """What a reader of a run must know before trusting it: a step the step check
    finds unstable, inputs too brief for the step, an output rate the step cannot
    give, figures left out of a run that diverged."""
    from lumped.excitation import brief_inputs
    from lumped.simulate import steps_per_sample

    warnings = []
    rate = output_rate if output_rate is not None else system.run.output_rate
    if rate:
        every = steps_per_sample(rate, result.dt)
        if abs(every * result.dt * rate - 1.0) > 0.01:
            warnings.append(
                f"output every {every} step{'s' if every > 1 else ''} of dt = {_seconds(result.dt)}: "
                f"{1 / (every * result.dt):.6g} Hz, not the {rate:.6g} Hz asked; take dt = {_seconds(1 / rate)} "
                "or a whole fraction of it"
            )
    if figures and result.diverged:
        warnings.append("no figures: the run diverged, so its samples stop early")
    check = result.check
    if check is not None and not check.stable:
        limit = ("no positive step is stable" if check.max_stable_dt is None
                 else f"stability limit {_seconds(check.max_stable_dt)}")  # fmt: skip
        warnings.append(
            f"the step check finds {result.stepper} unstable at dt = {_seconds(result.dt)} ({limit}): "
            "the run can grow without bound, or look calm only because nothing excited the unstable mode; "
            "`lumped check` explains"
        )
    return warnings + brief_inputs(system, result.dt)


def cmd_run(args) -> int:
    from lumped.output import write_result
    from lumped.simulate import simulate

    system = _load(args.file)
    if not (args.out or args.convergence or args.figures or args.json):
        print("lumped run: give --out FILE.csv or FILE.parquet (or --figures, --convergence, --json)",
              file=sys.stderr)  # fmt: skip
        return EXIT_BAD_INPUT
    if args.out and Path(args.out).suffix.lower() not in (".csv", ".parquet"):
        print(f"lumped run: --out must end in .csv or .parquet, got {args.out!r}", file=sys.stderr)
        return EXIT_BAD_INPUT
    if args.out and not Path(args.out).resolve().parent.is_dir():
        print(f"lumped run: --out folder {Path(args.out).parent} does not exist", file=sys.stderr)
        return EXIT_BAD_INPUT
    unknown = [b for b in (args.ride or "").split(",") if b.strip() and b.strip() not in system.bodies]
    if unknown:
        print(f"lumped run: --ride names {', '.join(map(repr, unknown))}, not a body of the system "
              f"(bodies: {', '.join(system.bodies)})", file=sys.stderr)  # fmt: skip
        return EXIT_BAD_INPUT
    bar = None if args.quiet or not sys.stderr.isatty() else _ProgressBar()
    result = simulate(system, stepper=_stepper(args, system), dt=args.dt, duration=args.duration,
                      output_rate=args.output_rate, progress=bar)  # fmt: skip
    if bar is not None:
        bar.close()
    if args.out:
        write_result(result, args.out)
    summary = {
        "status": result.status,
        "message": result.message,
        "stepper": result.stepper,
        "dt": result.dt,
        "duration": result.duration,
        "steps": result.steps,
        "samples": len(result.time),
        "events": [{"time": e.time, "element": e.element, "kind": e.kind} for e in result.events],
        "energy_balance_error": float(abs(result.balance_error).max()),
        "energy_balance_ratio": result.balance_ratio,
        "out": args.out,
        "warnings": _run_warnings(system, result, args.output_rate, args.figures),
    }
    if args.convergence:
        from lumped.convergence import convergence_study

        summary["convergence"] = convergence_study(system, result.stepper, result.dt, result.duration).to_json()
    rows = None
    if args.figures and not result.diverged:
        from lumped.metrics import run_figures

        bodies = [b.strip() for b in args.ride.split(",")] if args.ride else None
        rows = run_figures(system, result, bodies=bodies, start=args.settle)
        summary["figures"] = [row.to_json() for row in rows]
        summary["warnings"] += rows.notes
    if args.json:
        _print_json(summary)
    elif not args.quiet:
        print(format_run(summary))
        if rows is not None:
            from lumped.cli_frequency import format_figures

            print()
            print(format_figures(rows))
    else:
        for text in summary["warnings"]:
            print(f"lumped: warning: {text}", file=sys.stderr)
    if result.diverged:
        print(f"lumped run: {result.message}", file=sys.stderr)
        return EXIT_DIVERGED
    return EXIT_OK


class _ProgressBar:
    """A one-line progress bar with time left, on stderr, redrawn at most 10 times a second."""

    def __init__(self, width: int = 30):
        import time

        self.clock = time.monotonic
        self.start = self.clock()
        self.last = 0.0
        self.width = width

    def __call__(self, fraction: float) -> None:
        now = self.clock()
        if now - self.last < 0.1 and fraction < 1:
            return
        self.last = now
        elapsed = now - self.start
        left = elapsed * (1 - fraction) / fraction if fraction > 0 else math.inf
        filled = int(self.width * fraction)
        eta = f"{left:5.1f} s left" if math.isfinite(left) else "  ..."
        sys.stderr.write(f"\r  [{'#' * filled}{'.' * (self.width - filled)}] {100 * fraction:5.1f} %  {eta}")
        sys.stderr.flush()

    def close(self) -> None:
        sys.stderr.write("\r" + " " * (self.width + 30) + "\r")
        sys.stderr.flush()


def cmd_freq(args) -> int:
    from lumped.cli_frequency import cmd_freq as run_freq

    return run_freq(args)


_COMMANDS = {
    "show": cmd_show, "serve": cmd_serve, "modes": cmd_modes, "check": cmd_check,
    "run": cmd_run, "freq": cmd_freq,
}  # fmt: skip


# --------------------------------------------------------------------------- text output


_NUMBER_CELL = re.compile(r"[-+]?(\d[\d.]*(e[-+]?\d+)?|inf|nan)( [^\s,]+)?")


#: Columns of free text, always left-aligned even when a cell reads as a number.
TEXT_COLUMNS = ("values", "label", "motion", "kind", "between", "state")


def table(headers: list[str], rows: list[list[str]], indent: str = "  ") -> str:
    """Rows under headers, columns padded to their widest cell; numbers right-aligned
    (except in the free-text columns of :data:`TEXT_COLUMNS`)."""
    widths = [max(len(str(c)) for c in col) for col in zip(headers, *rows, strict=True)]
    text = [header in TEXT_COLUMNS for header in headers]

    def line(cells):
        out = []
        for cell, width, is_text in zip(cells, widths, text, strict=True):
            cell = str(cell)
            right = not is_text and bool(_NUMBER_CELL.fullmatch(cell))
            out.append(cell.rjust(width) if right else cell.ljust(width))
        return indent + "  ".join(out).rstrip()

    return "\n".join([line(headers)] + [line(r) for r in rows])


def _mm(value: float | None) -> str:
    return "-" if value is None or not math.isfinite(value) else f"{value * 1e3:.3f} mm"


def _kn(value: float | None) -> str:
    return "-" if value is None else f"{value / 1e3:.4g} kN"


def format_summary(summary) -> str:
    from lumped.units import display

    lines = [summary.name]
    if summary.description:
        lines.append(f"  {summary.description}")
    lines.append(f"  gravity {display(summary.gravity, 'acceleration')}")
    lines += ["", "Bodies"]
    lines.append(
        table(
            ["id", "mass", "static deflection", "label"],
            [[b["id"], display(b["mass"], "mass"), _mm(b["static_deflection"]), b["label"]] for b in summary.bodies],
        )
    )
    if summary.supports:
        lines += ["", "Supports"]
        rows = []
        for s in summary.supports:
            motion = f"follows input {s['motion']!r}" if s["motion"] else "fixed"
            if s["delay"]:
                motion += f", {s['delay']:g} s late"
            rows.append([s["id"], motion, s["label"]])
        lines.append(table(["id", "motion", "label"], rows))
    lines += ["", "Elements (force: tension positive; deflection: extension positive)"]
    lines.append(
        table(
            ["id", "kind", "between", "values", "static force", "static deflection"],
            [
                [e["id"], e["kind"], " → ".join(e["between"]), e["values"], _kn(e["static_force"]),
                 _mm(e["static_deflection"])]
                for e in summary.elements
            ],
        )  # fmt: skip
    )
    if summary.inputs:
        lines += ["", "Inputs"]
        lines.append(table(["id", "kind", "values"], [[i["id"], i["kind"], i["values"]] for i in summary.inputs]))
    if summary.forces:
        lines += ["", "Forces"]
        lines.append(table(["id", "on", "input", "scale"],
                           [[f["id"], f["on"], f["input"], f"{f['scale']:g}"] for f in summary.forces]))  # fmt: skip
    if summary.static_error:
        lines += ["", f"No static equilibrium: {summary.static_error}"]
    return "\n".join(lines)


def _seconds(value: float | None) -> str:
    if value is None:
        return "none stable"
    if not math.isfinite(value):
        return "no limit"
    return f"{value * 1e3:.6g} ms" if value < 1 else f"{value:.6g} s"


def _ratio(value: float | None, digits: int = 4) -> str:
    return "-" if value is None or (isinstance(value, float) and math.isnan(value)) else f"{value:.{digits}g}"


def format_modes(name: str, result) -> str:
    lines = [f"Modes of {name} ({'classical' if result.classical_damping else 'non-proportional'} damping)"]
    rows = []
    for k, mode in enumerate(result.modes, 1):
        kind = "rigid-body" if mode.rigid else "overdamped" if mode.overdamped else "oscillatory"
        top = sorted(mode.shape.items(), key=lambda kv: -abs(kv[1]))[:3]
        shape = ", ".join(f"{b} {v:+.3g}" for b, v in top)
        rows.append([
            str(k), f"{mode.natural_frequency_hz:.5g} Hz", f"{mode.damped_frequency_hz:.5g} Hz",
            f"{mode.undamped_frequency_hz:.5g} Hz", _ratio(mode.damping_ratio), kind, shape,
        ])  # fmt: skip
    lines.append(
        table(["mode", "natural", "damped", "undamped", "damping ratio", "kind", "largest shape entries [kg^-1/2]"],
              rows)  # fmt: skip
    )
    lines += ["", "Undamped modes: modal mass (shape scaled to unit largest entry), effective mass per support"]
    supports = list(result.effective_mass)
    rows = [
        [str(j + 1), f"{w / (2 * math.pi):.5g} Hz", f"{mm:.4g} kg"]
        + [f"{result.effective_mass[s][j]:.4g} kg" for s in supports]
        for j, (w, mm) in enumerate(zip(result.omega, result.modal_mass, strict=True))
    ]
    lines.append(table(["mode", "frequency", "modal mass", *[f"effective mass ({s})" for s in supports]], rows))
    lines.append("  natural = |λ|/2π of the damped eigenvalue; damping ratio = −Re λ/|λ|; shape entries of the "
                 "mass-normalised undamped shape (φᵀMφ = 1)")
    return "\n".join(lines)


def format_check(name: str, verdict) -> str:
    state = "STABLE" if verdict.stable else "UNSTABLE"
    if not verdict.runs:
        state += f", but {verdict.stepper} cannot run this system (see the note)"
    elif verdict.stable and verdict.dt > 2 * verdict.recommended_dt:
        state += f", but {verdict.dt / verdict.recommended_dt:.3g}× the recommended dt (see its rule)"
    lines = [
        f"{name}: {verdict.stepper} at dt = {_seconds(verdict.dt)} over {verdict.duration:g} s "
        f"({verdict.steps:,} steps): {state}",
    ]
    if verdict.limiting_mode is not None:
        mode = verdict.modes[verdict.limiting_mode]
        lines.append(
            f"  stability limit   {_seconds(verdict.max_stable_dt)}, set by the "
            f"{mode.natural_frequency_hz:.5g} Hz mode (damping ratio {mode.damping_ratio:.3g})"
        )
    else:
        lines.append("  stability limit   no limit on this system")
    lines.append(f"  growth over run   {verdict.growth_over_run:.6g} (largest amplitude factor of any mode)")
    lines.append(f"  recommended dt    {_seconds(verdict.recommended_dt)} ({verdict.recommendation_rule})")
    lines.append(f"  from              {verdict.source}")
    for note in verdict.notes:
        lines.append(f"  note: {note}")
    rows = [
        [
            str(k + 1), m.state, f"{m.natural_frequency_hz:.5g} Hz", _ratio(m.damping_ratio),
            _seconds(m.max_stable_dt if m.max_stable_dt > 0 else None), f"{m.spectral_radius:.9f}",
            _ratio(m.growth_over_run, 6), _ratio(m.numerical_damping_ratio),
            "-" if m.period_error is None else f"{m.period_error:+.3e}",
        ]
        for k, m in enumerate(verdict.modes)
    ]  # fmt: skip
    lines += ["", table(["mode", "state", "frequency", "damping ratio", "max stable dt", "radius/step",
                         "growth over run", "numerical damping", "period error"], rows)]  # fmt: skip
    return "\n".join(lines)


def format_run(summary: dict) -> str:
    from lumped.simulate import BALANCE_WARNING

    lines = [
        f"{summary['stepper']} at dt = {_seconds(summary['dt'])} over {summary['duration']:g} s: "
        f"{summary['status']} ({summary['steps']:,} steps, {summary['samples']:,} samples)"
    ]
    if summary["message"]:
        lines.append(f"  {summary['message']}")
    ratio = summary["energy_balance_ratio"]
    lines.append(
        f"  energy balance error  {summary['energy_balance_error']:.3e} J (largest over the run; "
        f"{ratio:.2%} of the energy through the system)"
    )
    if ratio > BALANCE_WARNING and summary["status"] == "completed":
        lines.append(
            f"  warning: the energy balance is off by {ratio:.1%}: this step is too large for an "
            "accurate run; `lumped check` gives a recommended step"
        )
    lines += [f"  warning: {text}" for text in summary.get("warnings", ())]
    if summary["out"]:
        lines.append(f"  written to            {summary['out']}")
    events = summary["events"]
    if events:
        lines.append(f"  events                {len(events)}")
        for e in events[:10]:
            lines.append(f"    {e['time']:10.6f} s  {e['element']:<20} {e['kind']}")
        if len(events) > 10:
            lines.append(f"    … {len(events) - 10} more (all in --json)")
    study = summary.get("convergence")
    if study:
        lines.append(f"  convergence ({study['method']})")
        lines.append("    error: the largest deviation of any displacement or velocity over the samples, "
                     "divided by that state's largest magnitude")
        for h, e in zip(study["dt"], study["error"], strict=True):
            lines.append(f"    dt = {_seconds(h):>12}  error {e:.3e}")
        order = study["observed_order"]
        lines.append(
            f"    observed order {order:.2f} (declared {study['declared_order']}; the slope of a least-squares line "
            "through log error against log dt)" if order is not None
            else "    observed order: errors at round-off, no slope to fit"
        )  # fmt: skip
        lines += [f"    note: {note}" for note in study.get("notes", ())]
    return "\n".join(lines)


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
