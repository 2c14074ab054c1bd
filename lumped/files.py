"""System files (format ``lumped/1``): read with tomllib, write with tomli-w.

Reading collects every problem before it gives up, and raises one
:class:`~lumped.model.ModelError` whose lines name the file, the item and the field.
Writing goes to a temporary file that then replaces the target, so a failed save
leaves the old file whole. A saved system loads back equal to the one saved.
"""

from __future__ import annotations

import csv
import difflib
import io
import math
import os
import tempfile
import tomllib
from pathlib import Path

import tomli_w

from lumped.errors import ModelError, Problem
from lumped.model import (
    Body,
    BumpInput,
    Damper,
    Force,
    HarmonicInput,
    Inerter,
    RoadInput,
    RunSettings,
    Spring,
    StepInput,
    Support,
    SweepInput,
    System,
    TableInput,
    check_system,
)
from lumped.units import DIMENSIONS, QuantityError, format_quantity, parse_quantity, unit_of

__all__ = ["FORMAT", "MAX_FILE_BYTES", "load", "loads", "save", "dumps", "dump_path"]

FORMAT = "lumped/1"
#: Files (system files and the CSV tables they name) above this size are refused unread.
MAX_FILE_BYTES = 20 * 1024 * 1024

_TOP_KEYS = (
    "format", "name", "description", "gravity", "floating",
    "bodies", "supports", "springs", "dampers", "inerters", "inputs", "forces", "run",
)  # fmt: skip
_GROUPS = ("bodies", "supports", "springs", "dampers", "inerters", "inputs", "forces")

# Field tables: name -> dimension (see lumped.units.DIMENSIONS) or a reader tag.
_BODY = {"mass": "mass", "label": "str", "initial_displacement": "length", "initial_velocity": "velocity"}
_SUPPORT = {"motion": "str", "delay": "time", "label": "str"}
_SPRING = {
    "between": "between", "stiffness": "stiffness", "gap": "length", "gap_stiffness": "stiffness",
    "acts": "str", "preload": "force", "label": "str",
}  # fmt: skip
_DAMPER = {
    "between": "between", "coefficient": "damping", "rebound": "damping",
    "compression": "damping", "curve": "curve", "label": "str",
}  # fmt: skip
_INERTER = {"between": "between", "inertance": "mass", "label": "str"}
_FORCE = {"on": "str", "input": "str", "scale": "dimensionless"}
_RUN = {"stepper": "str", "dt": "time", "duration": "time", "output_rate": "frequency"}
_INPUT_KINDS = {
    "step": (StepInput, {"amplitude": "signal", "time": "time"}),
    "bump": (BumpInput, {"height": "length", "length": "length", "speed": "velocity", "time": "time"}),
    "harmonic": (
        HarmonicInput,
        {"amplitude": "signal", "frequency": "frequency", "phase": "dimensionless"},
    ),
    "sweep": (
        SweepInput,
        {"amplitude": "signal", "start": "frequency", "stop": "frequency",
         "duration": "time", "spacing": "str"},
    ),  # fmt: skip
    "road": (RoadInput, {"class": "str", "speed": "velocity", "seed": "int"}),
    "table": (TableInput, {"file": "str", "unit": "str"}),
}
_REQUIRED = {
    "bodies": ("mass",),
    "springs": ("between", "stiffness"),
    "dampers": ("between",),
    "inerters": ("between", "inertance"),
    "forces": ("on", "input"),
    "step": ("amplitude",),
    "bump": ("height", "length", "speed"),
    "harmonic": ("amplitude", "frequency"),
    "sweep": ("amplitude", "start", "stop", "duration"),
    "road": ("class", "speed"),
    "table": ("file",),
}
# The placeholder a field takes after a problem, so that checks of meaning still run.
# A curve placeholder is (points, units), as the curve reader returns; its points pass
# the damper checks.
_FALLBACK = {
    "str": "", "int": 0, "between": ("?", "?"), "curve": (((0.0, 0.0), (1.0, 0.0)), {}),
    "signal": (1.0, None),
}  # fmt: skip


# --------------------------------------------------------------------------- reading


def load(path: str | os.PathLike) -> System:
    """Read a system file.

    Raises
    ------
    ModelError
        The file cannot be read or describes no usable system; ``problems`` lists
        each one with its item and field.
    """
    path = Path(path)
    source = str(path)
    try:
        size = path.stat().st_size
    except OSError as exc:
        raise ModelError([Problem("", "", f"cannot open the file ({exc.strerror})")], source) from None
    if size > MAX_FILE_BYTES:
        raise ModelError(
            [Problem("", "", f"file is {size / 2**20:.1f} MB; files above {MAX_FILE_BYTES / 2**20:.0f} MB are refused")],
            source,
        )
    try:
        data = path.read_bytes()
    except OSError as exc:
        raise ModelError([Problem("", "", f"cannot read the file ({exc.strerror})")], source) from None
    return loads(data, source=source, base_dir=path.resolve().parent)


def loads(text: str | bytes, source: str = "<text>", base_dir: str | os.PathLike | None = None) -> System:
    """Read a system from TOML text; ``base_dir`` is where table inputs' CSV files are
    looked for (None: table inputs cannot be read)."""
    if isinstance(text, bytes):
        if len(text) > MAX_FILE_BYTES:
            raise ModelError([Problem("", "", f"file is over {MAX_FILE_BYTES / 2**20:.0f} MB")], source)
        try:
            text = text.decode("utf-8")
        except UnicodeDecodeError as exc:
            raise ModelError([Problem("", "", f"not a text file in UTF-8 (byte {exc.start})")], source) from None
    elif len(text) > MAX_FILE_BYTES:
        raise ModelError([Problem("", "", f"file is over {MAX_FILE_BYTES / 2**20:.0f} MB")], source)
    try:
        document = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise ModelError([Problem("", "", f"not a TOML file: {exc}")], source) from None
    except RecursionError:
        raise ModelError([Problem("", "", "not a TOML file: nested too deeply")], source) from None
    reader = _Reader(Path(base_dir) if base_dir is not None else None)
    system = reader.read(document)
    problems = reader.problems
    if system is not None:
        # A field the reader could not use holds a placeholder: what the checks of
        # meaning would say about that field is about the placeholder, not the file.
        unusable = {(p.item, p.field.partition("[")[0]) for p in problems}
        problems += [p for p in check_system(system) if (p.item, p.field) not in unusable]
    if problems:
        raise ModelError(problems, source)
    return system


class _Reader:
    """Turns a parsed TOML document into a System, collecting problems as it goes."""

    def __init__(self, base_dir: Path | None):
        self.base_dir = base_dir
        self.problems: list[Problem] = []

    def problem(self, item: str, field: str, message: str) -> None:
        self.problems.append(Problem(item, field, message))

    def read(self, doc: dict) -> System | None:
        self._report_non_finite(doc, [])
        fmt = doc.get("format")
        if fmt is None:
            self.problem("", "format", f'missing; the first line of a system file is format = "{FORMAT}"')
            return None
        if fmt != FORMAT:
            self.problem("", "format", f"unknown format {fmt!r}; this tool reads {FORMAT!r}")
            return None
        self._unknown_keys("", doc, _TOP_KEYS)
        if "name" not in doc:
            self.problem("", "name", "missing; give the system a name")
        top_units: dict[str, str] = {}
        name = self._field("", "name", doc.get("name", ""), "str")
        description = self._field("", "description", doc.get("description", ""), "str")
        gravity = self._field("", "gravity", doc.get("gravity", 9.81), "acceleration", top_units)
        floating = doc.get("floating", False)
        if not isinstance(floating, bool):
            self.problem("", "floating", "must be true or false")
            floating = False

        groups = {g: self._group(doc, g) for g in _GROUPS}
        bodies = {k: self._item(f"bodies.{k}", v, _BODY, Body, k) for k, v in groups["bodies"].items()}
        supports = {k: self._item(f"supports.{k}", v, _SUPPORT, Support, k) for k, v in groups["supports"].items()}
        springs = {k: self._item(f"springs.{k}", v, _SPRING, Spring, k) for k, v in groups["springs"].items()}
        dampers = {k: self._item(f"dampers.{k}", v, _DAMPER, Damper, k) for k, v in groups["dampers"].items()}
        inerters = {k: self._item(f"inerters.{k}", v, _INERTER, Inerter, k) for k, v in groups["inerters"].items()}
        inputs = {k: self._input(k, v) for k, v in groups["inputs"].items()}
        forces = {k: self._item(f"forces.{k}", v, _FORCE, Force, k) for k, v in groups["forces"].items()}
        run_table = doc.get("run", {})
        if isinstance(run_table, dict):
            run = self._item("run", run_table, _RUN, RunSettings, None)
        else:
            self.problem("run", "", "must be a table")
            run = RunSettings()
        return System(
            name=name, description=description, gravity=gravity, floating=floating,
            bodies=bodies, supports=supports, springs=springs, dampers=dampers,
            inerters=inerters, inputs=inputs, forces=forces, run=run, units=top_units,
        )  # fmt: skip

    # -- structure

    def _report_non_finite(self, value, path: list[str]) -> None:
        if isinstance(value, float) and not math.isfinite(value):
            where = ".".join(path)
            item, _, field = where.rpartition(".")
            self.problem(item, field, f"{value!r} is not a finite number")
        elif isinstance(value, dict):
            for k, v in value.items():
                self._report_non_finite(v, [*path, str(k)])
        elif isinstance(value, list):
            for i, v in enumerate(value):
                self._report_non_finite(v, [*path[:-1], f"{path[-1]}[{i}]"] if path else [f"[{i}]"])

    def _unknown_keys(self, item: str, table: dict, known) -> None:
        for key in table:
            if key not in known:
                close = difflib.get_close_matches(str(key), known, n=1)
                hint = f" (did you mean {close[0]!r}?)" if close else f"; known keys: {', '.join(known)}"
                self.problem(item, str(key), f"unknown key{hint}")

    def _group(self, doc: dict, group: str) -> dict:
        table = doc.get(group, {})
        if not isinstance(table, dict):
            self.problem(group, "", f"must be a table of items, as [{group}.ID]")
            return {}
        items = {}
        for key, value in table.items():
            if isinstance(value, dict):
                items[key] = value
            else:
                self.problem(f"{group}.{key}", "", f"must be a table, as [{group}.{key}]")
        return items

    def _item(self, where: str, table: dict, fields: dict, cls, item_id):
        self._unknown_keys(where, table, fields)
        group = where.split(".")[0]
        for required in _REQUIRED.get(group, ()):
            if required not in table:
                self.problem(where, required, "missing")
        units: dict[str, str] = {}
        values = {
            name: self._field(where, name, table[name], tag, units)
            for name, tag in fields.items()
            if name in table
        }
        if group == "dampers" and "curve" in values:
            values["curve"], curve_units = values["curve"]
            units.update(curve_units)
        for name in _REQUIRED.get(group, ()):
            if name not in values:
                values[name] = _FALLBACK.get(fields[name], 1.0)
        if item_id is not None:
            values["id"] = item_id
        return cls(**values, units=units)

    def _input(self, key: str, table: dict):
        where = f"inputs.{key}"
        kind = table.get("kind")
        if not isinstance(kind, str) or kind not in _INPUT_KINDS:
            if kind is None:
                self.problem(where, "kind", f"missing; one of {', '.join(_INPUT_KINDS)}")
            else:
                self.problem(where, "kind", f"unknown kind {kind!r}; one of {', '.join(_INPUT_KINDS)}")
            return StepInput(key, 0.0)
        cls, fields = _INPUT_KINDS[kind]
        fields = {"kind": "str", **fields}
        self._unknown_keys(where, table, fields)
        for required in _REQUIRED[kind]:
            if required not in table:
                self.problem(where, required, "missing")
        units: dict[str, str] = {}
        values = {}
        for name, tag in fields.items():
            if name == "kind" or name not in table:
                continue
            values[name] = self._field(where, name, table[name], tag, units)
        for name in _REQUIRED[kind]:
            values.setdefault(name, _FALLBACK.get(fields[name], 1.0))
        if "amplitude" in values:
            values["amplitude"], values["amplitude_kind"] = values["amplitude"]
        if kind == "road":
            values["road_class"] = values.pop("class")
            if values.get("seed", 0) < 0:
                self.problem(where, "seed", "must not be negative")
                values["seed"] = 0
        if kind == "table":
            values.update(self._table(where, values["file"], values.get("unit")))
        return cls(id=key, **values, units=units)

    # -- fields

    def _field(self, where: str, name: str, value, tag: str, units: dict | None = None):
        fallback = _FALLBACK.get(tag, 1.0)
        if isinstance(value, float) and not math.isfinite(value):
            return fallback  # already reported by _report_non_finite
        if tag == "str":
            if isinstance(value, str):
                return value
            self.problem(where, name, "must be a string")
            return fallback
        if tag == "int":
            if isinstance(value, int) and not isinstance(value, bool):
                return value
            self.problem(where, name, "must be a whole number")
            return fallback
        if tag == "between":
            if isinstance(value, list) and len(value) == 2 and all(isinstance(v, str) for v in value):
                return tuple(value)
            self.problem(where, name, 'must be two node ids, as ["lower", "upper"]')
            return fallback
        if tag == "curve":
            return self._curve(where, value)
        if tag == "signal":
            return self._signal(where, name, value, units)
        try:
            number = parse_quantity(value, tag)
        except QuantityError as exc:
            self.problem(where, name, str(exc))
            return fallback
        unit = unit_of(value)
        if units is not None and unit is not None:
            units[name] = unit
        return number

    def _signal(self, where: str, name: str, value, units: dict):
        """An input amplitude: a length (support motion), a force, or a plain number."""
        if not isinstance(value, str):
            try:
                return parse_quantity(value, "dimensionless"), None
            except QuantityError as exc:
                self.problem(where, name, str(exc))
                return _FALLBACK["signal"]
        for kind in ("length", "force"):
            try:
                number = parse_quantity(value, kind)
            except QuantityError:
                continue
            units[name] = unit_of(value) or ""
            return number, kind
        try:
            return parse_quantity(value, "dimensionless"), None
        except QuantityError:
            self.problem(where, name, f"{value!r} is neither a length (support motion) nor a force")
            return _FALLBACK["signal"]

    def _curve(self, where: str, value):
        if not isinstance(value, list) or not value:
            self.problem(where, "curve", "must be a list of [velocity, force] pairs")
            return _FALLBACK["curve"]
        points, units = [], {}
        for i, pair in enumerate(value):
            if not (isinstance(pair, list) and len(pair) == 2):
                self.problem(where, f"curve[{i}]", "must be a [velocity, force] pair")
                return _FALLBACK["curve"]
            try:
                v = parse_quantity(pair[0], "velocity")
                f = parse_quantity(pair[1], "force")
            except QuantityError as exc:
                if not any(isinstance(x, float) and not math.isfinite(x) for x in pair):
                    self.problem(where, f"curve[{i}]", str(exc))  # non-finite: reported already
                return _FALLBACK["curve"]
            if i == 0:
                for axis, raw in (("curve_velocity", pair[0]), ("curve_force", pair[1])):
                    if unit_of(raw):
                        units[axis] = unit_of(raw)
            points.append((v, f))
        return tuple(points), units

    def _table(self, where: str, file: str, unit: str | None) -> dict:
        """Times and values of a table input, read from its CSV beside the system file."""
        empty = {"times": (), "values": (), "scale": 1.0, "amplitude_kind": None}
        if unit:
            for kind in ("length", "force"):
                try:
                    scale = parse_quantity(f"1 {unit}", kind)
                    empty.update(scale=scale, amplitude_kind=kind)
                    break
                except QuantityError:
                    continue
            else:
                self.problem(where, "unit", f"{unit!r} is neither a length nor a force unit")
                return empty
        if not file:
            return empty
        if self.base_dir is None:
            self.problem(where, "file", "a table input can only be read from a system file on disk, beside its CSV")
            return empty
        relative = Path(file)
        if relative.is_absolute() or file.startswith(("/", "\\")) or ":" in file:
            self.problem(where, "file", f"{file!r} is an absolute path; name a CSV beside the system file")
            return empty
        folder = self.base_dir.resolve()
        target = (folder / relative).resolve()
        if not target.is_relative_to(folder):
            self.problem(where, "file", f"{file!r} leaves the system file's folder; a shared file may only name files beside it")
            return empty
        try:
            size = target.stat().st_size
            if size > MAX_FILE_BYTES:
                self.problem(where, "file", f"{file!r} is over {MAX_FILE_BYTES / 2**20:.0f} MB")
                return empty
            text = target.read_text(encoding="utf-8")
        except FileNotFoundError:
            self.problem(where, "file", f"{file!r} not found beside the system file")
            return empty
        except (OSError, UnicodeDecodeError) as exc:
            self.problem(where, "file", f"cannot read {file!r} ({type(exc).__name__})")
            return empty
        times, values = [], []
        for row_number, row in enumerate(csv.reader(io.StringIO(text)), 1):
            if not row or all(not cell.strip() for cell in row):
                continue
            if len(row) != 2:
                self.problem(where, "file", f"{file!r} row {row_number}: expected 2 columns (time, value), found {len(row)}")
                return empty
            try:
                t, v = float(row[0]), float(row[1])
            except ValueError:
                if row_number == 1 and not times:
                    continue  # a header row
                self.problem(where, "file", f"{file!r} row {row_number}: not two numbers")
                return empty
            if not (math.isfinite(t) and math.isfinite(v)):
                self.problem(where, "file", f"{file!r} row {row_number}: not finite")
                return empty
            times.append(t)
            values.append(v)
        if len(times) < 2:
            self.problem(where, "file", f"{file!r} needs at least two rows of time and value")
            return empty
        if any(b <= a for a, b in zip(times, times[1:], strict=False)):
            self.problem(where, "file", f"{file!r}: times must increase strictly from row to row")
            return empty
        return {**empty, "times": tuple(times), "values": tuple(values)}


# --------------------------------------------------------------------------- writing


def dumps(system: System) -> str:
    """The system as TOML text (format ``lumped/1``) that :func:`loads` reads back equal."""
    doc: dict = {"format": FORMAT, "name": system.name}
    if system.description:
        doc["description"] = system.description
    if system.gravity != 9.81:
        doc["gravity"] = _quantity(system.gravity, "acceleration", system.units.get("gravity"))
    if system.floating:
        doc["floating"] = True
    groups = {
        "bodies": (system.bodies, _BODY),
        "supports": (system.supports, _SUPPORT),
        "springs": (system.springs, _SPRING),
        "dampers": (system.dampers, _DAMPER),
        "inerters": (system.inerters, _INERTER),
    }
    for group, (items, fields) in groups.items():
        if items:
            doc[group] = {key: _item_table(item, fields) for key, item in items.items()}
    if system.inputs:
        doc["inputs"] = {key: _input_table(item) for key, item in system.inputs.items()}
    if system.forces:
        doc["forces"] = {key: _item_table(item, _FORCE) for key, item in system.forces.items()}
    run = _item_table(system.run, _RUN)
    if run:
        doc["run"] = run
    return tomli_w.dumps(doc)


def dump_path(system: System) -> str:
    """A file name for ``system`` made from its name (``"Delivery van"`` → ``delivery_van.toml``)."""
    stem = "".join(ch if ch.isalnum() else "_" for ch in system.name.lower()).strip("_")
    return f"{'_'.join(filter(None, stem.split('_'))) or 'system'}.toml"


def save(system: System, path: str | os.PathLike) -> None:
    """Write ``system`` to ``path`` atomically (a temporary file, then a rename); table
    inputs' CSV files are written beside it when missing there."""
    path = Path(path)
    _atomic_write(path, dumps(system))
    for item in system.inputs.values():
        if isinstance(item, TableInput):
            target = path.parent / item.file
            if not target.exists():
                rows = "".join(f"{t!r},{v!r}\n" for t, v in zip(item.times, item.values, strict=True))
                target.parent.mkdir(parents=True, exist_ok=True)
                _atomic_write(target, "time,value\n" + rows)


def _atomic_write(path: Path, text: str) -> None:
    fd, tmp = tempfile.mkstemp(dir=path.parent, prefix=f".{path.name}.", suffix=".tmp")
    try:
        with os.fdopen(fd, "w", encoding="utf-8", newline="") as handle:
            handle.write(text)
        os.replace(tmp, path)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise


def _quantity(value: float, dimension: str, unit: str | None):
    return format_quantity(value, dimension, unit) if unit else value


_DEFAULTS = {"label": "", "description": "", "initial_displacement": 0.0, "initial_velocity": 0.0,
             "delay": 0.0, "acts": "both", "preload": 0.0, "scale": 1.0, "time": 0.0, "phase": 0.0,
             "spacing": "linear", "seed": 0}  # fmt: skip


def _item_table(item, fields: dict) -> dict:
    table = {}
    for name, tag in fields.items():
        value = getattr(item, name, None)
        if value is None or (name in _DEFAULTS and value == _DEFAULTS[name]):
            continue
        if tag == "between":
            table[name] = list(value)
        elif tag == "curve":
            vu, fu = item.units.get("curve_velocity"), item.units.get("curve_force")
            table[name] = [[_quantity(v, "velocity", vu), _quantity(f, "force", fu)] for v, f in value]
        elif tag in ("str", "int"):
            table[name] = value
        else:
            table[name] = _quantity(value, tag, item.units.get(name))
    return table


def _input_table(item) -> dict:
    _, fields = _INPUT_KINDS[item.kind]
    table = {"kind": item.kind}
    for name, tag in fields.items():
        attr = "road_class" if name == "class" else name
        value = getattr(item, attr, None)
        if value is None or (name in _DEFAULTS and value == _DEFAULTS[name]):
            continue
        if tag == "signal":
            kind = item.amplitude_kind
            unit = item.units.get(name) or (DIMENSIONS[kind].si_unit if kind else None)
            table[name] = _quantity(value, kind, unit) if kind else value
        elif tag in ("str", "int"):
            table[name] = value
        else:
            table[name] = _quantity(value, tag, item.units.get(name))
    return table
