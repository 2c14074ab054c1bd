"""The ``lumped freq`` command and the text of the figures table (``lumped run --figures``).

``lumped freq FILE --from ID --to ID [--quantity Q] [--min F] [--max F]
[--points-per-decade N] [--json | --out FILE.csv]``: the frequency response of one
output to one input of the linearised system, per unit input. ``--from`` a support
is its prescribed displacement (1 m); ``--from`` a body, or a force item, is 1 N on
that body. ``--to`` a body (displacement, velocity, acceleration) or an element
(force, deflection = displacement, velocity, acceleration of the deflection).
Exit 0 done, 2 bad file or option (one line per problem on stderr).
"""

from __future__ import annotations

import csv
import json
import math
import os
import sys
import tempfile
from pathlib import Path

from lumped.cli import EXIT_BAD_INPUT, EXIT_OK, _quantity_arg, table
from lumped.errors import LumpedError

__all__ = ["add_commands", "cmd_freq", "format_transfer", "format_figures", "write_transfer_csv", "CAUTION"]

QUANTITIES = ("displacement", "velocity", "acceleration", "force", "deflection")
#: Grid rows shown in the text output (besides the peaks).
SAMPLE_ROWS = 12
CAUTION = (
    "Simulation supports, but does not replace, physical testing, the applicable standards "
    "and regulations, and licensed engineering sign-off."
)


def add_commands(commands) -> None:
    """Add ``freq`` to the argparse sub-parsers object ``commands`` (made with
    ``parser_class=_Parser`` by :mod:`lumped.cli`)."""
    from lumped.frequency import POINTS_PER_DECADE

    freq = commands.add_parser(
        "freq",
        help="frequency response of one output to one input (linearised), with its peaks",
        description="Frequency response of the system linearised at static equilibrium, per unit "
        "input: from a support (1 m of its prescribed displacement) or a body or force item "
        "(1 N on the body) to a body or an element. " + CAUTION,
    )
    freq.add_argument("file", help="system file (TOML)")
    freq.add_argument("--from", dest="source", required=True, metavar="ID",
                      help="input: a support (prescribed displacement), a body or a force item (unit force)")
    freq.add_argument("--to", dest="target", required=True, metavar="ID", help="output: a body or an element")
    freq.add_argument("--quantity", choices=QUANTITIES, default="displacement",
                      help="output quantity (default displacement; of an element: its deflection)")
    freq.add_argument("--min", dest="f_min", type=_quantity_arg("frequency"), metavar="F",
                      help="lowest frequency, Hz or with units (default a decade below the lowest mode)")
    freq.add_argument("--max", dest="f_max", type=_quantity_arg("frequency"), metavar="F",
                      help="highest frequency (default a decade above the highest mode)")
    freq.add_argument("--points-per-decade", type=int, default=POINTS_PER_DECADE, metavar="N",
                      help=f"density of the log-spaced grid (default {POINTS_PER_DECADE}; refined near each mode)")
    out = freq.add_mutually_exclusive_group()
    out.add_argument("--json", action="store_true", help="frequency_hz, magnitude, phase_deg and peaks as JSON")
    out.add_argument("--out", metavar="FILE.csv", help="write the whole response to a CSV file")


def _fail(lines) -> int:
    for line in lines:
        print(f"lumped freq: {line.strip()}", file=sys.stderr)
    return EXIT_BAD_INPUT


def cmd_freq(args) -> int:
    """Run ``lumped freq``; returns the exit code (0 done, 2 bad file or option)."""
    from lumped.files import load
    from lumped.frequency import transfer

    if args.out and Path(args.out).suffix.lower() != ".csv":
        return _fail([f"--out must end in .csv, got {args.out!r}"])
    if args.points_per_decade < 1:
        return _fail([f"--points-per-decade must be at least 1, got {args.points_per_decade}"])
    try:
        system = load(args.file)
        _check_range(system, args)
        result = transfer(system, args.source, args.target, args.quantity,
                          f_min=args.f_min, f_max=args.f_max, points_per_decade=args.points_per_decade)  # fmt: skip
        if args.out:
            write_transfer_csv(result, args.out)
    except LumpedError as exc:
        return _fail(exc.lines())
    except OSError as exc:
        return _fail([f"{args.out}: cannot write ({exc.strerror})"])
    if args.json:
        print(json.dumps(result.to_json(), indent=2, allow_nan=True))
    else:
        print(format_transfer(system.name, result, written=args.out))
    return EXIT_OK


def _check_range(system, args) -> None:
    """One of --min/--max alone must still leave a non-empty range."""
    from lumped.frequency import FrequencyError

    if args.f_min is not None and args.f_max is not None and not args.f_max > args.f_min:
        raise FrequencyError(
            f"frequency range: empty, --min {args.f_min:g} Hz to --max {args.f_max:g} Hz "
            "(the highest must exceed the lowest)"
        )
    for flag, value in (("--min", args.f_min), ("--max", args.f_max)):
        if value is not None and not (math.isfinite(value) and value > 0):
            raise FrequencyError(f"frequency range: {flag} must be a positive frequency, got {value:g} Hz")


def _number(value: float) -> str:
    return f"{value:.5g}" if math.isfinite(value) else str(value)


def format_transfer(name: str, result, written: str | None = None) -> str:
    """The text of ``lumped freq``: the peaks, then a few grid rows."""
    lines = [f"{name}: {result.label} ({result.unit}), linearised at static equilibrium"]
    f, mag, phase = result.frequency, result.magnitude, result.phase_deg
    lines.append(f"  {len(f)} frequencies from {f[0]:.5g} Hz to {f[-1]:.5g} Hz")
    if result.peaks:
        lines += ["", "Peaks"]
        lines.append(table(["frequency", f"magnitude [{result.unit}]", "phase"],
                           [[f"{p.frequency_hz:.6g} Hz", _number(p.magnitude), f"{p.phase_deg:.1f} deg"]
                            for p in result.peaks]))  # fmt: skip
    else:
        lines += ["", "Peaks: none in this range"]
    count = min(SAMPLE_ROWS, len(f))
    picks = sorted({round(i * (len(f) - 1) / max(count - 1, 1)) for i in range(count)})
    lines += ["", "Grid (a few rows; all in --json or --out)"]
    lines.append(table(["frequency", f"magnitude [{result.unit}]", "phase"],
                       [[f"{f[i]:.5g} Hz", _number(mag[i]), f"{phase[i]:.1f} deg"] for i in picks]))  # fmt: skip
    if written:
        lines += ["", f"  written to {written}"]
    lines += ["", f"  {CAUTION}"]
    return "\n".join(lines)


def write_transfer_csv(result, path: str | os.PathLike) -> Path:
    """Write ``frequency_hz, magnitude, phase_deg, real, imag`` rows of ``result`` to
    ``path``, replacing it atomically; the header names the unit."""
    from lumped.output import OutputError

    path = Path(path)
    folder = path.parent if str(path.parent) else Path(".")
    if not folder.is_dir():
        raise OutputError(f"{path}: folder {folder} does not exist")
    fd, tmp = tempfile.mkstemp(dir=folder, prefix=f".{path.name}.", suffix=".tmp")
    try:
        with os.fdopen(fd, "w", encoding="utf-8", newline="") as handle:
            writer = csv.writer(handle)
            writer.writerow(["frequency [Hz]", f"magnitude [{result.unit}]", "phase [deg]",
                             f"real [{result.unit}]", f"imag [{result.unit}]"])  # fmt: skip
            for row in zip(result.frequency, result.magnitude, result.phase_deg,
                           result.response.real, result.response.imag, strict=True):  # fmt: skip
                writer.writerow([repr(float(x)) for x in row])
        os.replace(tmp, path)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise
    return path


# --------------------------------------------------------------------------- figures


def _value(row) -> str:
    if not math.isfinite(row.value):
        return str(row.value)
    if row.unit == "1":
        if row.key.endswith("_share"):
            percent = 100 * row.value
            return "< 0.0001 %" if 0 < percent < 1e-4 else f"{percent:.3g} %"
        return f"{row.value:.4g}"
    return f"{row.value:.4g} {row.unit.replace('^2', '²')}"


def format_figures(rows) -> str:
    """The figures table (:func:`lumped.metrics.run_figures` or ``road_figures`` rows)
    as text: figure, item, value with unit, and the rule it follows."""
    if not rows:
        return f"Figures: none\n  {CAUTION}"
    sources = sorted({r.source for r in rows} - {"static"})
    head = "Figures" + (f" ({', '.join(sources)})" if sources else "")
    body = table(["figure", "item", "value", "rule"], [[r.name, r.item, _value(r), r.rule] for r in rows])
    return "\n".join([head, body, "", f"  {CAUTION}"])
