"""System files (format lumped/1): the demos load, a saved system loads back equal, a
save is atomic, and every bad file raises one ``lumped.ModelError`` that names the
file, the item and the field, and lists every problem.

The file format is fixed in the project's SYSTEM_FILES.md (version 1); the checks
below hold the reader to that page, to the SI unit definitions and to tomllib (the
standard-library TOML reader) as an independent parser of the same files.
"""

from __future__ import annotations

import math
import os
import tomllib
from pathlib import Path

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

import lumped
import lumped.files
import lumped.units

DEMOS = lumped.demo_systems()

# A small valid system (invented example data): a body on a fixed support through a
# spring and a damper.
BASE = """\
format = "lumped/1"
name = "Test rig"

[bodies.mass_1]
mass = "10 kg"

[supports.ground]

[springs.spring_1]
between = ["ground", "mass_1"]
stiffness = "1 kN/m"

[dampers.damper_1]
between = ["ground", "mass_1"]
coefficient = "20 N*s/m"
"""


def write(folder: Path, text: str | bytes, name: str = "system.toml") -> Path:
    path = folder / name
    if isinstance(text, bytes):
        path.write_bytes(text)
    else:
        path.write_text(text, encoding="utf-8")
    return path


def refuse(path: Path) -> lumped.ModelError:
    """Load ``path``, expecting a ModelError (any other exception fails the test)."""
    with pytest.raises(lumped.ModelError) as info:
        lumped.load(path)
    error = info.value
    assert type(error) is lumped.ModelError
    assert error.source == str(path)
    lines = str(error).splitlines()
    # A head line, then one line per problem, each naming the file.
    assert (
        lines[0]
        == f"{path}: {len(error.problems)} problem{'s' if len(error.problems) != 1 else ''}"
    )
    assert len(lines) == 1 + len(error.problems)
    assert all(line.strip().startswith(f"{path}: ") for line in lines)
    assert error.lines() == [f"{path}: {p}" for p in error.problems]
    return error


def find(error: lumped.ModelError, item: str, field: str):
    """The problems of ``error`` at ``item`` and ``field``; at least one must exist."""
    found = [p for p in error.problems if p.item == item and p.field == field]
    assert found, f"no problem at {item}.{field}; problems: {error.problems}"
    where = ".".join(part for part in (item, field) if part)
    for p in found:
        assert str(p).startswith(f"{where}: ")  # the line names the item and the field
    return found


# ---------------------------------------------------------------------------- demos


@pytest.mark.parametrize("name", sorted(DEMOS))
def test_demo_loads_with_the_items_the_file_lists(name):
    path = DEMOS[name]
    system = lumped.load(path)
    raw = tomllib.loads(path.read_text(encoding="utf-8"))  # an independent reading
    assert raw["format"] == "lumped/1"
    assert system.name == raw["name"]
    for group in ("bodies", "supports", "springs", "dampers", "inerters", "inputs", "forces"):
        assert list(getattr(system, group)) == list(raw.get(group, {})), group
    for body_id, table in raw["bodies"].items():
        assert system.bodies[body_id].mass == lumped.units.parse_quantity(table["mass"], "mass")
    assert lumped.check_system(system) == []


@pytest.mark.parametrize("name", sorted(DEMOS))
def test_demo_round_trip_through_save_is_equal(name, tmp_path):
    system = lumped.load(DEMOS[name])
    target = tmp_path / "saved.toml"
    lumped.save(system, target)
    again = lumped.load(target)
    assert again == system
    assert lumped.loads(lumped.dumps(system)) == system
    # Saving the loaded copy again writes the same text: the writer is a fixed point.
    assert lumped.dumps(again) == lumped.dumps(system)


def test_saved_file_keeps_the_units_people_wrote(tmp_path):
    # The format lets a quantity carry its unit; a file the tool writes stays readable
    # for review: the quarter car's tyre is still in kN/m, not 230000.0.
    system = lumped.load(DEMOS["quarter_car"])
    lumped.save(system, tmp_path / "q.toml")
    saved = tomllib.loads((tmp_path / "q.toml").read_text(encoding="utf-8"))
    number, unit = saved["springs"]["tyre"]["stiffness"].split()
    assert (float(number), unit) == (230.0, "kN/m")
    number, unit = saved["bodies"]["body"]["mass"].split()
    assert (float(number), unit) == (380.0, "kg")
    assert saved["format"] == "lumped/1"


TABLE_SYSTEM = """\
format = "lumped/1"
name = "Seat on a recorded floor"
description = "Invented example: a seat on a floor whose motion was recorded."

[bodies.seat]
mass = "80 kg"

[supports.floor]
motion = "recorded_floor"

[springs.cushion]
between = ["floor", "seat"]
stiffness = "40 kN/m"

[inputs.recorded_floor]
kind = "table"
file = "floor.csv"
unit = "mm"
"""
FLOOR_CSV = "time,value\n0,0\n0.01,0.5\n0.02,1.25\n0.03,-0.75\n"  # invented data


def test_table_input_round_trip(tmp_path):
    source = tmp_path / "source"
    source.mkdir()
    write(source, FLOOR_CSV, "floor.csv")
    system = lumped.load(write(source, TABLE_SYSTEM))
    table = system.inputs["recorded_floor"]
    assert table.times == (0.0, 0.01, 0.02, 0.03)
    assert table.values == (0.0, 0.5, 1.25, -0.75)
    assert table.scale == pytest.approx(1e-3, rel=1e-15)  # 1 mm = 1e-3 m (SI)
    # Saved elsewhere, the CSV is written beside the new file and loads back equal.
    elsewhere = tmp_path / "elsewhere"
    elsewhere.mkdir()
    lumped.save(system, elsewhere / "copy.toml")
    assert (elsewhere / "floor.csv").exists()
    assert lumped.load(elsewhere / "copy.toml") == system
    # Saved over the source, the CSV there is left as it was.
    lumped.save(system, source / "system.toml")
    assert (source / "floor.csv").read_text(encoding="utf-8") == FLOOR_CSV
    assert lumped.load(source / "system.toml") == system


STIFFNESS_UNITS = ["N/m", "kN/m", "MN/m", "N/mm", "lbf/in"]


@settings(max_examples=200, deadline=None)
@given(
    stiffness=st.floats(0.0, 1e12),
    mass=st.floats(1e-6, 1e9),
    unit=st.sampled_from(STIFFNESS_UNITS),
    mass_unit=st.sampled_from(["kg", "t", "g", "lb"]),
)
def test_round_trip_is_exact_for_any_value_and_unit(stiffness, mass, unit, mass_unit):
    # The format promises that a written file loads back to the same system; with a
    # unit kept for display, the writer must still reproduce every bit.
    system = lumped.System(
        name="random",
        bodies={"m": lumped.Body("m", mass, units={"mass": mass_unit})},
        supports={"g": lumped.Support("g")},
        springs={"k": lumped.Spring("k", ("g", "m"), stiffness, units={"stiffness": unit})},
    )
    again = lumped.loads(lumped.dumps(system))
    assert again == system
    assert again.springs["k"].stiffness == stiffness
    assert again.bodies["m"].mass == mass


# ---------------------------------------------------------------------------- atomic save


def test_save_failing_in_the_writer_leaves_the_old_file(tmp_path, monkeypatch):
    target = write(tmp_path, BASE)
    system = lumped.load(target)
    system.name = "changed"

    def broken(*args, **kwargs):
        raise RuntimeError("disk full")

    monkeypatch.setattr(lumped.files.tomli_w, "dumps", broken)
    with pytest.raises(RuntimeError):
        lumped.save(system, target)
    assert target.read_text(encoding="utf-8") == BASE
    assert sorted(p.name for p in tmp_path.iterdir()) == ["system.toml"]


def test_save_failing_at_the_rename_leaves_the_old_file_and_no_temporary(tmp_path, monkeypatch):
    target = write(tmp_path, BASE)
    system = lumped.load(target)
    system.name = "changed"
    calls = []

    def broken(src, dst):
        calls.append((Path(src), Path(dst)))
        assert Path(src).exists()  # the new text was written in full to a temporary file
        raise OSError(28, "No space left on device")

    monkeypatch.setattr(lumped.files.os, "replace", broken)
    with pytest.raises(OSError):
        lumped.save(system, target)
    assert calls and calls[0][1] == target and calls[0][0].parent == tmp_path
    assert target.read_text(encoding="utf-8") == BASE
    assert sorted(p.name for p in tmp_path.iterdir()) == ["system.toml"]


def test_save_failing_midway_through_the_write_leaves_the_old_file(tmp_path, monkeypatch):
    target = write(tmp_path, BASE)
    system = lumped.load(target)
    real_fdopen = os.fdopen

    class HalfWriter:
        def __init__(self, handle):
            self.handle = handle

        def __enter__(self):
            return self

        def __exit__(self, *exc):
            self.handle.close()

        def write(self, text):
            self.handle.write(text[: len(text) // 2])
            raise OSError(5, "Input/output error")

    monkeypatch.setattr(lumped.files.os, "fdopen", lambda *a, **k: HalfWriter(real_fdopen(*a, **k)))
    with pytest.raises(OSError):
        lumped.save(system, target)
    assert target.read_text(encoding="utf-8") == BASE
    assert sorted(p.name for p in tmp_path.iterdir()) == ["system.toml"]


# ---------------------------------------------------------------------------- bad files


def test_not_toml(tmp_path):
    error = refuse(write(tmp_path, BASE + "\n[bodies.broken\nmass = 1\n"))
    assert len(error.problems) == 1
    assert "not a TOML file" in error.problems[0].message


def test_not_utf8(tmp_path):
    error = refuse(write(tmp_path, BASE.replace("Test rig", "Pr\xfcfstand").encode("latin-1")))
    assert len(error.problems) == 1
    assert "UTF-8" in error.problems[0].message


def test_missing_format(tmp_path):
    error = refuse(write(tmp_path, BASE.replace('format = "lumped/1"\n', "")))
    (problem,) = find(error, "", "format")
    assert "missing" in problem.message and "lumped/1" in problem.message


def test_unknown_format_version(tmp_path):
    error = refuse(write(tmp_path, BASE.replace("lumped/1", "lumped/7")))
    (problem,) = find(error, "", "format")
    assert "lumped/7" in problem.message and "lumped/1" in problem.message


def test_misspelt_key_is_an_error_that_suggests_the_right_one(tmp_path):
    error = refuse(write(tmp_path, BASE.replace('stiffness = "1 kN/m"', 'stifness = "1 kN/m"')))
    (problem,) = find(error, "springs.spring_1", "stifness")
    assert "unknown key" in problem.message and "'stiffness'" in problem.message
    find(error, "springs.spring_1", "stiffness")  # and the spring now lacks its stiffness


def test_unknown_top_level_key_and_table(tmp_path):
    error = refuse(write(tmp_path, "gravityy = 9.8\n" + BASE + "\n[bodys.x]\nmass = 1\n"))
    assert "'gravity'" in find(error, "", "gravityy")[0].message
    assert "'bodies'" in find(error, "", "bodys")[0].message


def test_duplicate_id_across_tables(tmp_path):
    text = (
        BASE + '\n[bodies.x]\nmass = 1\n\n[springs.x]\nbetween = ["mass_1", "x"]\nstiffness = 5\n'
    )
    error = refuse(write(tmp_path, text))
    (problem,) = find(error, "springs.x", "id")
    assert "twice" in problem.message and "bodies" in problem.message


@pytest.mark.parametrize("bad_id", ["2wheel", "wheel hub", "_hidden", "-x", "é"])
def test_malformed_id(tmp_path, bad_id):
    text = (
        BASE
        + f'\n[bodies."{bad_id}"]\nmass = 1\n\n[springs.hub]\nbetween = ["mass_1", "{bad_id}"]\nstiffness = 5\n'
    )
    error = refuse(write(tmp_path, text))
    (problem,) = find(error, f"bodies.{bad_id}", "id")
    assert "letter" in problem.message


def test_between_naming_a_missing_node(tmp_path):
    text = BASE + '\n[springs.spring_2]\nbetween = ["mass_1", "ghost"]\nstiffness = 5\n'
    error = refuse(write(tmp_path, text))
    (problem,) = find(error, "springs.spring_2", "between")
    assert "'ghost'" in problem.message


@pytest.mark.parametrize(
    "between", ['["mass_1"]', '["ground", "mass_1", "x"]', '"mass_1"', "[1, 2]", "[]"]
)
def test_between_not_two_ids(tmp_path, between):
    text = BASE + f"\n[springs.spring_2]\nbetween = {between}\nstiffness = 5\n"
    error = refuse(write(tmp_path, text))
    (problem,) = find(error, "springs.spring_2", "between")
    assert "two node ids" in problem.message


@pytest.mark.parametrize(
    ("old", "new", "item", "field"),
    [
        ('mass = "10 kg"', "mass = nan", "bodies.mass_1", "mass"),
        ('mass = "10 kg"', "mass = -inf", "bodies.mass_1", "mass"),
        ('mass = "10 kg"', 'mass = "inf kg"', "bodies.mass_1", "mass"),
        ('mass = "10 kg"', 'mass = "nan kg"', "bodies.mass_1", "mass"),
        ('mass = "10 kg"', 'mass = "1e400 kg"', "bodies.mass_1", "mass"),
        ('stiffness = "1 kN/m"', "stiffness = inf", "springs.spring_1", "stiffness"),
        ('coefficient = "20 N*s/m"', "coefficient = +inf", "dampers.damper_1", "coefficient"),
        (
            'coefficient = "20 N*s/m"',
            "curve = [[-1, -20], [0, nan], [1, 20]]",
            "dampers.damper_1",
            "curve[1][1]",
        ),
        (
            'coefficient = "20 N*s/m"',
            'curve = [[-1, -20], [0, 0], ["inf m/s", 20]]',
            "dampers.damper_1",
            "curve[2]",
        ),
        ('coefficient = "20 N*s/m"', "curve = nan", "dampers.damper_1", "curve"),
        ('name = "Test rig"', 'name = "Test rig"\ngravity = nan', "", "gravity"),
        ("[bodies.mass_1]", "[run]\ndt = inf\n\n[bodies.mass_1]", "run", "dt"),
        ('mass = "10 kg"', 'mass = "10 kg"\nlabel = nan', "bodies.mass_1", "label"),
        ('mass = "10 kg"', 'mass = "10 kg"\nunknown = [1, inf]', "bodies.mass_1", "unknown[1]"),
    ],
)
def test_non_finite_numbers_anywhere(tmp_path, old, new, item, field):
    assert old in BASE
    error = refuse(write(tmp_path, BASE.replace(old, new, 1)))
    problems = find(error, item, field)
    assert any("finite" in p.message for p in problems)


def test_non_finite_input_parameter(tmp_path):
    text = BASE.replace("[supports.ground]", '[supports.ground]\nmotion = "shake"') + (
        '\n[inputs.shake]\nkind = "harmonic"\namplitude = "1 mm"\nfrequency = nan\n'
    )
    error = refuse(write(tmp_path, text))
    assert "finite" in find(error, "inputs.shake", "frequency")[0].message


@pytest.mark.parametrize(
    ("old", "new", "item", "field", "kind"),
    [
        (
            'stiffness = "1 kN/m"',
            'stiffness = "3 kg"',
            "springs.spring_1",
            "stiffness",
            "stiffness",
        ),
        ('mass = "10 kg"', 'mass = "10 N"', "bodies.mass_1", "mass", "mass"),
        (
            'coefficient = "20 N*s/m"',
            'coefficient = "20 N/m"',
            "dampers.damper_1",
            "coefficient",
            "damping",
        ),
        (
            'coefficient = "20 N*s/m"',
            'coefficient = "20 kg"',
            "dampers.damper_1",
            "coefficient",
            "damping",
        ),
    ],
)
def test_unit_of_the_wrong_kind(tmp_path, old, new, item, field, kind):
    error = refuse(write(tmp_path, BASE.replace(old, new)))
    (problem,) = find(error, item, field)
    written = new.split('"')[1]
    assert repr(written) in problem.message and kind in problem.message


def test_unreadable_quantity_text(tmp_path):
    error = refuse(write(tmp_path, BASE.replace('"1 kN/m"', '"one kN/m"')))
    (problem,) = find(error, "springs.spring_1", "stiffness")
    assert "one kN/m" in problem.message


@pytest.mark.parametrize("mass", ["0", "-3", '"-3 kg"', '"0 t"'])
def test_non_positive_mass(tmp_path, mass):
    error = refuse(write(tmp_path, BASE.replace('"10 kg"', mass)))
    (problem,) = find(error, "bodies.mass_1", "mass")
    assert "positive" in problem.message


def test_negative_stiffness_and_damping(tmp_path):
    text = BASE.replace('"1 kN/m"', '"-1 kN/m"').replace('"20 N*s/m"', "-20")
    text += (
        '\n[dampers.damper_2]\nbetween = ["ground", "mass_1"]\nrebound = "-1 kN*s/m"\n'
        'compression = "500 N*s/m"\n'
        '\n[springs.stop]\nbetween = ["ground", "mass_1"]\nstiffness = 0\ngap = "-5 mm"\n'
        'gap_stiffness = "-1 MN/m"\n'
        '\n[inerters.flywheel]\nbetween = ["ground", "mass_1"]\ninertance = "-2 kg"\n'
    )
    error = refuse(write(tmp_path, text))
    assert "negative" in find(error, "springs.spring_1", "stiffness")[0].message
    assert "negative" in find(error, "dampers.damper_1", "coefficient")[0].message
    assert "negative" in find(error, "dampers.damper_2", "rebound")[0].message
    assert "negative" in find(error, "springs.stop", "gap")[0].message
    assert "negative" in find(error, "springs.stop", "gap_stiffness")[0].message
    assert "negative" in find(error, "inerters.flywheel", "inertance")[0].message
    assert len(error.problems) == 6


def test_body_connected_to_nothing(tmp_path):
    error = refuse(write(tmp_path, BASE + '\n[bodies.loose_bolt]\nmass = "0.1 kg"\n'))
    (problem,) = find(error, "bodies.loose_bolt", "")
    assert "connected to nothing" in problem.message


FLOATING = """\
format = "lumped/1"
name = "Two bodies in free flight"

[bodies.left]
mass = "2 kg"

[bodies.right]
mass = "3 kg"

[springs.link]
between = ["left", "right"]
stiffness = "5 kN/m"
"""


def test_system_with_no_support_is_refused_unless_floating(tmp_path):
    error = refuse(write(tmp_path, FLOATING))
    (problem,) = error.problems
    assert "floating" in problem.message and "rigid-body mode" in problem.message
    assert "floating = true" in problem.message
    system = lumped.load(
        write(tmp_path, FLOATING.replace("name =", "floating = true\nname ="), "f.toml")
    )
    assert system.floating and set(system.bodies) == {"left", "right"}


def test_body_held_only_by_a_damper_has_a_rigid_body_mode(tmp_path):
    text = (
        BASE
        + '\n[bodies.hanger]\nmass = 1\n\n[dampers.dashpot]\nbetween = ["mass_1", "hanger"]\ncoefficient = 5\n'
    )
    error = refuse(write(tmp_path, text))
    (problem,) = find(error, "bodies.hanger", "")
    assert "rigid-body mode" in problem.message and "floating = true" in problem.message


@pytest.mark.parametrize(
    ("curve", "words"),
    [
        ("[[-1, -50], [0, 0], [0.5, 30], [1, 20]]", "not monotone"),
        ("[[-1, -50], [0.5, 30], [0, 0], [1, 60]]", "increase strictly"),
        ("[[0.1, 5], [1, 60]]", "span zero"),
        ("[[-1, -50], [0, 3], [1, 60]]", "zero force"),
        ("[[0, 0]]", "two"),
        ('[[-1, -50], [0, 0], ["1 m/s", "3 kg"]]', "force"),
    ],
)
def test_bad_damper_curve(tmp_path, curve, words):
    error = refuse(write(tmp_path, BASE.replace('coefficient = "20 N*s/m"', f"curve = {curve}")))
    problems = [p for p in error.problems if p.item == "dampers.damper_1"]
    assert len(problems) == 1 and problems[0].field.startswith("curve")
    assert words in problems[0].message


def test_damper_given_two_ways(tmp_path):
    error = refuse(
        write(
            tmp_path,
            BASE.replace(
                'coefficient = "20 N*s/m"', "coefficient = 20\nrebound = 30\ncompression = 10"
            ),
        )
    )
    assert "exactly one" in find(error, "dampers.damper_1", "coefficient")[0].message


# -- table inputs


def table_system(file: str) -> str:
    return TABLE_SYSTEM.replace('file = "floor.csv"', f'file = "{file}"')


def table_problem(tmp_path: Path, file: str, csv: str | None = None):
    """The one problem of a table input reading ``file`` (``csv`` written to floor.csv)."""
    if csv is not None:
        write(tmp_path, csv, "floor.csv")
    error = refuse(write(tmp_path, table_system(file)))
    (problem,) = error.problems  # reported once, not again as "needs two rows"
    assert (problem.item, problem.field) == ("inputs.recorded_floor", "file")
    return problem


def test_table_csv_missing(tmp_path):
    assert "not found" in table_problem(tmp_path, "floor.csv").message


@pytest.mark.parametrize(
    ("csv", "words"),
    [
        ("time,value\n0,0\n0.01,0.5,7\n", "row 3: expected 2 columns"),
        ("0\n1\n", "row 1: expected 2 columns"),
        ("time,value\n0,0\n0.01,half\n", "row 3: not two numbers"),
        ("time,value\n0,0\n0.02,1\n0.01,2\n", "times must increase"),
        ("time,value\n0,0\n0,1\n", "times must increase"),
        ("time,value\n0,0\n0.01,nan\n", "row 3: not finite"),
        ("time,value\n0,0\n", "at least two rows"),
        ("", "at least two rows"),
    ],
)
def test_table_csv_malformed(tmp_path, csv, words):
    problem = table_problem(tmp_path, "floor.csv", csv)
    assert words in problem.message and "'floor.csv'" in problem.message


def test_table_csv_not_utf8(tmp_path):
    (tmp_path / "floor.csv").write_bytes("0,0\n1,caf\xe9\n".encode("latin-1"))
    assert "cannot read" in table_problem(tmp_path, "floor.csv").message


@pytest.mark.parametrize("file", ["/etc/hostname", "C:/data/floor.csv", "\\\\server\\floor.csv"])
def test_table_path_absolute(tmp_path, file):
    assert "absolute" in table_problem(tmp_path, file.replace("\\", "\\\\")).message


def test_table_path_leaving_the_folder(tmp_path):
    inner = tmp_path / "project"
    inner.mkdir()
    write(tmp_path, FLOOR_CSV, "x.csv")  # it exists, but outside
    assert "leaves" in table_problem(inner, "../x.csv").message
    assert "leaves" in table_problem(inner, "sub/../../x.csv").message


def test_table_symlink_pointing_outside(tmp_path):
    inner = tmp_path / "project"
    inner.mkdir()
    write(tmp_path, FLOOR_CSV, "secret.csv")
    (inner / "floor.csv").symlink_to(tmp_path / "secret.csv")
    assert "leaves" in table_problem(inner, "floor.csv").message


def test_table_path_inside_the_folder_through_a_subfolder(tmp_path):
    (tmp_path / "data").mkdir()
    write(tmp_path / "data", FLOOR_CSV, "floor.csv")
    system = lumped.load(write(tmp_path, table_system("data/../data/floor.csv")))
    assert system.inputs["recorded_floor"].values == (0.0, 0.5, 1.25, -0.75)


def test_table_input_from_text_without_a_folder():
    error = pytest.raises(lumped.ModelError, lumped.loads, TABLE_SYSTEM).value
    (problem,) = error.problems
    assert (problem.item, problem.field) == ("inputs.recorded_floor", "file")


# -- size limit


def test_file_over_20_mb_is_refused_unread(tmp_path, monkeypatch):
    path = tmp_path / "huge.toml"
    with path.open("wb") as handle:
        handle.truncate(21 * 2**20)  # sparse: no data written

    def no_reading(*args, **kwargs):
        raise AssertionError("the file was read")

    monkeypatch.setattr(Path, "read_bytes", no_reading)
    monkeypatch.setattr(Path, "read_text", no_reading)
    monkeypatch.setattr(lumped.files.tomllib, "loads", no_reading)
    error = refuse(path)
    (problem,) = error.problems
    assert "20 MB" in problem.message


def test_regression_file_size_and_limit_are_in_the_same_unit(tmp_path):
    # A 21 MB file (2**20-byte megabytes, as the limit) was said to be "22.0 MB".
    path = tmp_path / "huge.toml"
    with path.open("wb") as handle:
        handle.truncate(21 * 2**20)
    assert "file is 21.0 MB; files above 20 MB" in refuse(path).problems[0].message


def test_file_just_under_the_limit_is_read(tmp_path):
    # 20 MB exactly is allowed; the file is then read (and here refused as not TOML).
    path = tmp_path / "big.toml"
    with path.open("wb") as handle:
        handle.write(b"format = ")
        handle.truncate(lumped.files.MAX_FILE_BYTES)
    assert "MB" not in refuse(path).problems[0].message


def test_table_csv_over_20_mb_is_refused(tmp_path):
    with (tmp_path / "floor.csv").open("wb") as handle:
        handle.truncate(21 * 2**20)
    assert "MB" in table_problem(tmp_path, "floor.csv").message


def test_text_over_20_mb_is_refused_by_loads():
    error = pytest.raises(lumped.ModelError, lumped.loads, "#" * (21 * 2**20)).value
    assert "MB" in error.problems[0].message


# -- every problem at once


def test_every_problem_is_listed_not_just_the_first(tmp_path):
    text = """\
format = "lumped/1"
name = "Everything wrong"

[bodies.cab]
mass = nan

[bodies.frame]
mass = "-5 kg"

[bodies.2axle]
mass = 30

[supports.road]
motion = "nowhere"

[springs.tyre]
between = ["road", "axle"]
stifness = "1 MN/m"

[springs.mount]
between = ["frame", "cab"]
stiffness = "3 kg"

[dampers.shock]
between = ["frame", "cab"]
coefficient = "-1 kN*s/m"

[inerters.frame]
between = ["road", "frame"]
inertance = 2
"""
    error = refuse(write(tmp_path, text))
    expected = {
        ("bodies.cab", "mass"),  # nan
        ("bodies.frame", "mass"),  # negative
        ("bodies.2axle", "id"),  # malformed id
        ("supports.road", "motion"),  # no such input
        ("springs.tyre", "stifness"),  # misspelt key
        ("springs.tyre", "stiffness"),  # so the stiffness is missing
        ("springs.tyre", "between"),  # 'axle' is not a node
        ("springs.mount", "stiffness"),  # a mass, not a stiffness
        ("dampers.shock", "coefficient"),  # negative
        ("inerters.frame", "id"),  # 'frame' is a body's id too
    }
    assert {(p.item, p.field) for p in error.problems} == expected
    assert len(error.problems) == len(expected)
    text_of = {(p.item, p.field): p.message for p in error.problems}
    assert "'stiffness'" in text_of[("springs.tyre", "stifness")]
    assert "'axle'" in text_of[("springs.tyre", "between")]
    assert "'nowhere'" in text_of[("supports.road", "motion")]
    assert "'3 kg'" in text_of[("springs.mount", "stiffness")]


# ---------------------------------------------------------------------------- units


def harmonic_system(frequency: str) -> str:
    return BASE.replace("[supports.ground]", '[supports.ground]\nmotion = "shake"') + (
        f'\n[inputs.shake]\nkind = "harmonic"\namplitude = "1 mm"\nfrequency = {frequency}\n'
    )


@pytest.mark.parametrize(
    ("written", "hertz"),
    [
        # f = ω / (2π): the definition of angular frequency (Rao, Mechanical Vibrations,
        # 6th ed., ch. 1 [recalled from memory]); SYSTEM_FILES.md: never read rad/s as Hz.
        ('"12.6 rad/s"', 12.6 / (2 * math.pi)),
        ('"1 rad/s"', 1 / (2 * math.pi)),
        ('"360 deg/s"', 1.0),  # one turn per second
        ('"1 turn/s"', 1.0),
        ('"300 rpm"', 300 / 60),  # revolutions per minute: 5 per second
        ('"5 Hz"', 5.0),
        ('"1.5 kHz"', 1500.0),
        ("5", 5.0),
        ("2.5", 2.5),
    ],
)
def test_frequencies_in_hertz(written, hertz):
    frequency = lumped.loads(harmonic_system(written)).inputs["shake"].frequency
    assert frequency == pytest.approx(hertz, rel=1e-14)


@pytest.mark.parametrize(
    ("text", "dimension", "si"),
    [
        # SI prefixes and derived units — BIPM, The International System of Units (SI
        # Brochure), 9th ed., 2019, §3 and table 4 [recalled from memory]; the tonne,
        # table 8 [recalled from memory].
        ("22 kN/m", "stiffness", 22e3),
        ("1.1 MN/m", "stiffness", 1.1e6),
        ("1.6 kN*s/m", "damping", 1.6e3),
        ("38 kg", "mass", 38.0),
        ("12 t", "mass", 12e3),
        ("500 g", "mass", 0.5),
        ("0.5 ms", "time", 0.5e-3),
        ("2 min", "time", 120.0),
        ("40 mm", "length", 40e-3),
        ("-30 mm", "length", -30e-3),
        ("5 m/s", "velocity", 5.0),
        ("36 km/h", "velocity", 10.0),
        ("2.5 kN", "force", 2.5e3),
        ("9.81 m/s**2", "acceleration", 9.81),
        ("  22  kN/m ", "stiffness", 22e3),
        (22000, "stiffness", 22e3),
        (0.04, "length", 0.04),
    ],
)
def test_quantities_in_si(text, dimension, si):
    assert lumped.units.parse_quantity(text, dimension) == pytest.approx(si, rel=1e-15)


def test_quantities_in_a_file_are_si():
    system = lumped.load(DEMOS["quarter_car"])
    assert system.springs["tyre"].stiffness == pytest.approx(230e3, rel=1e-15)
    assert system.springs["suspension_spring"].gap == pytest.approx(60e-3, rel=1e-15)
    assert system.dampers["suspension_damper"].rebound == pytest.approx(2.4e3, rel=1e-15)
    assert system.run.dt == pytest.approx(0.2e-3, rel=1e-15)
    assert system.run.output_rate == pytest.approx(1e3, rel=1e-15)


@pytest.mark.parametrize("value", [True, [1], {"a": 1}, "", "   ", "3 kg kg", "x" * 200, "3 kg/0"])
def test_bad_quantity_values(value):
    with pytest.raises(lumped.units.QuantityError):
        lumped.units.parse_quantity(value, "mass")


# ---------------------------------------------------------------------------- regressions


def test_regression_damper_without_any_coefficient_is_a_model_error():
    # An incomplete damper once crashed while the system's graph was being built
    # (TypeError adding None), before the checks could report it.
    damper = lumped.Damper("d", ("g", "m"))
    system = lumped.System(
        "s", {"m": lumped.Body("m", 1.0)}, {"g": lumped.Support("g")},
        springs={"k": lumped.Spring("k", ("g", "m"), 1.0)}, dampers={"d": damper},
    )  # fmt: skip
    assert [(p.item, p.field) for p in lumped.check_system(system)] == [
        ("dampers.d", "coefficient")
    ]
    error = pytest.raises(
        lumped.ModelError, lumped.loads, BASE + '\n[dampers.d2]\nbetween = ["ground", "mass_1"]\n'
    ).value
    assert [(p.item, p.field) for p in error.problems] == [("dampers.d2", "coefficient")]
    only_rebound = BASE.replace('coefficient = "20 N*s/m"', "rebound = 20")
    error = pytest.raises(lumped.ModelError, lumped.loads, only_rebound).value
    assert [(p.item, p.field) for p in error.problems] == [("dampers.damper_1", "rebound")]


def test_regression_non_finite_curve_is_a_model_error():
    # `curve = nan` once raised TypeError (the placeholder was not a pair), and a nan
    # inside a curve was reported twice, then as a damper with no coefficient.
    for curve in ("nan", "inf", "[[-1, -20], [0, nan], [1, 20]]"):
        text = BASE.replace('coefficient = "20 N*s/m"', f"curve = {curve}")
        error = pytest.raises(lumped.ModelError, lumped.loads, text).value
        assert len(error.problems) == 1, error.problems
        assert error.problems[0].item == "dampers.damper_1"
        assert error.problems[0].field.startswith("curve")


def test_regression_input_kind_of_the_wrong_type_is_a_model_error():
    # An input whose kind was a list once raised TypeError (unhashable) instead.
    for kind in ('["step"]', "{a = 1}", "3", "true"):
        text = BASE + f"\n[inputs.shake]\nkind = {kind}\n"
        error = pytest.raises(lumped.ModelError, lumped.loads, text).value
        assert ("inputs.shake", "kind") in {(p.item, p.field) for p in error.problems}


@pytest.mark.timeout(20)
@pytest.mark.parametrize("text", ["9**9**9 s", "2**1024 s", "(2**64)**64 s", "10**400 s",
                                  "1 s**9**9**9", "(((((99**99)**99)**99)**99)**99)**99 s"])  # fmt: skip
def test_regression_power_towers_in_quantities_are_refused_at_once(text):
    # pint evaluated integer powers exactly: "2**1024 s" raised OverflowError, and
    # "9**9**9 s" (a number of 370 million digits) hung the reader.
    with pytest.raises(lumped.units.QuantityError):
        lumped.units.parse_quantity(text, "time")
    error = pytest.raises(
        lumped.ModelError, lumped.loads, BASE.replace('"1 kN/m"', f'"{text}"')
    ).value
    assert [(p.item, p.field) for p in error.problems] == [("springs.spring_1", "stiffness")]


def test_regression_integer_literals_still_read_exactly():
    # After integer literals became floats for pint, exact values stay exact.
    assert lumped.units.parse_quantity("1_000 kg", "mass") == 1000.0
    # A number expression is not "one number followed by a unit": refused, not evaluated.
    with pytest.raises(lumped.units.QuantityError, match="one number followed by a unit"):
        lumped.units.parse_quantity("2**10 N", "force")
    assert lumped.units.parse_quantity("1e-3 s", "time") == 1e-3
    assert lumped.units.parse_quantity("2.5E+3 N", "force") == 2500.0
    assert lumped.units.parse_quantity("3 m/s**2", "acceleration") == 3.0
    assert lumped.units.parse_quantity("123456789012345678901 kg", "mass") == float(
        123456789012345678901
    )


def test_regression_rpm_is_revolutions_not_radians():
    # "300 rpm" was read as 300·2π/60 Hz: the angle folded into the unit was missed.
    assert lumped.units.parse_quantity("300 rpm", "frequency") == pytest.approx(5.0, rel=1e-14)
    assert lumped.units.parse_quantity("2 rps", "frequency") == pytest.approx(2.0, rel=1e-14)


def test_regression_unsorted_curve_is_reported_once():
    # A curve out of velocity order was also said to give non-zero force at zero
    # velocity (interpolation of the unsorted points), though (0, 0) was given.
    text = BASE.replace(
        'coefficient = "20 N*s/m"', "curve = [[-1, -50], [0.5, 30], [0, 0], [1, 60]]"
    )
    error = pytest.raises(lumped.ModelError, lumped.loads, text).value
    assert [(p.item, p.field) for p in error.problems] == [("dampers.damper_1", "curve")]
    assert "increase strictly" in error.problems[0].message


def test_regression_a_field_the_reader_could_not_use_is_reported_once():
    # A spring without `between` also drew "names '?'" (twice) and "joins '?' to
    # itself" from the checks, which saw the placeholder.
    error = pytest.raises(
        lumped.ModelError, lumped.loads, BASE + "\n[springs.k2]\nstiffness = 5\n"
    ).value
    assert [(p.item, p.field, p.message) for p in error.problems] == [
        ("springs.k2", "between", "missing")
    ]


@pytest.mark.parametrize("text", ["2 3 kg", "kg", "2 kg + 3 kg", "1.5e-3.5 m"])
def test_regression_loose_quantity_text_is_refused(text):
    # pint alone read "2 3 kg" as 6 kg, "kg" as 1 kg and "2 kg + 3 kg" as 5 kg: a typo
    # in a shared file must not pass silently.
    with pytest.raises(lumped.units.QuantityError, match="one number followed by a unit"):
        lumped.units.parse_quantity(text, "mass" if "kg" in text else "length")


def test_saved_quantities_keep_their_short_form(tmp_path):
    # A saved file is reviewed in diffs: "230 kN/m" stays "230 kN/m", not "230.0 kN/m".
    system = lumped.load(lumped.demo_path("quarter_car"))
    text = lumped.dumps(system)
    assert 'stiffness = "230 kN/m"' in text and 'mass = "380 kg"' in text
