"""Property tests of the system-file reader: whatever text it is given, ``lumped.loads``
either returns a System or raises ``lumped.ModelError`` — never another exception.

Two sources of input: documents generated from the keys and value kinds of the file
format (the project's SYSTEM_FILES.md, format version 1), written out with tomli-w, with
wrong types, unit strings of every kind, non-finite and huge numbers, missing and
extra keys and random ``between`` lists; and the demo files' text with characters and
lines deleted, duplicated or replaced. A system that loads must also write back to a
file that loads equal (the format's round-trip promise), assemble, and either reach
static equilibrium or raise ``lumped.StaticError``.

Robustness of a parser against arbitrary input, and fuzzing with random and mutated
inputs, is common practice.
"""

from __future__ import annotations

import datetime as dt
import math

import numpy as np
import pytest
import tomli_w
from hypothesis import HealthCheck, event, given, settings
from hypothesis import strategies as st

import lumped

# ---------------------------------------------------------------------------- a folder
# beside the generated files, with table-input CSVs good and bad (invented data).

CSV_FILES = {
    "good.csv": "time,value\n0,0\n0.5,1.5\n1.0,-2\n",
    "no_header.csv": "0,0\n1,1\n",
    "three_columns.csv": "0,0,0\n1,1,1\n",
    "not_numbers.csv": "time,value\n0,zero\n1,one\n",
    "backwards.csv": "0,0\n2,1\n1,2\n",
    "non_finite.csv": "0,nan\n1,inf\n",
    "one_row.csv": "0,0\n",
    "empty.csv": "",
    "latin1.csv": None,  # written as bytes below: not UTF-8
}


@pytest.fixture(scope="module")
def table_dir(tmp_path_factory):
    folder = tmp_path_factory.mktemp("fuzz_tables")
    for name, text in CSV_FILES.items():
        if text is None:
            (folder / name).write_bytes("0,caf\xe9\n1,2\n".encode("latin-1"))
        else:
            (folder / name).write_text(text, encoding="utf-8")
    (folder / "sub").mkdir()
    (folder / "sub" / "inner.csv").write_text("0,0\n1,1\n", encoding="utf-8")
    return folder


def check_load(text, base_dir, note=event):
    """Load ``text``; only ModelError may come out. A loaded system must round-trip
    through the writer, assemble, and reach static equilibrium or raise StaticError."""
    try:
        system = lumped.loads(text, source="fuzz.toml", base_dir=base_dir)
    except lumped.ModelError as exc:
        assert exc.problems, "a ModelError lists at least one problem"
        assert str(exc).startswith("fuzz.toml: ")
        note("refused")
        return None
    note("loaded")
    again = lumped.loads(lumped.dumps(system), source="again.toml", base_dir=base_dir)
    assert again == system
    matrices = lumped.assemble(system)
    assert np.all(np.isfinite(matrices.K.data)) and np.all(np.isfinite(matrices.M.data))
    try:
        lumped.static_equilibrium(matrices)
    except lumped.StaticError as exc:
        assert str(exc)
        note("loaded; no static equilibrium")
    return system


# ---------------------------------------------------------------------------- generated
# documents: built around the keys of SYSTEM_FILES.md (format lumped/1). Each field
# mostly gets a value of its own kind, sometimes anything at all.

NODE_IDS = ["a", "b", "c", "g", "top", "ghost", "k1", "2x", "x y", "", "a.b", "é"]
ids = st.sampled_from(NODE_IDS[:7] * 3 + NODE_IDS[7:]) | st.text(min_size=0, max_size=5)

UNITS = [
    "kg", "t", "g", "lb", "N/m", "kN/m", "MN/m", "lbf/in", "N*s/m", "kN*s/m", "mm", "m", "km",
    "m/s", "km/h", "s", "ms", "min", "Hz", "kHz", "rad/s", "rpm", "deg/s", "N", "kN",
    "m/s**2", "g0", "degC", "delta_degC", "%", "", "1/0", "**", "e", "kg**1000", "m**-1",
    "dimensionless", "mile/hour", "m**3", "rad", "turn", "Hz*s", "N/m*m", "(", "kN/m)",
    "kg**9**9**9", "s**-2**3",
]  # fmt: skip
NUMBER_TEXT = ["0", "1", "-1", "22", "2.5e3", "1e308", "1e309", "-1e400", "nan", "inf", "-inf",
               "1_000", "0x10", ".", "--2", "1e", "3/4", "2**1024", "9**9**9", "1e-320", "12.6",
               "(2**64)**64", "1e-3"]  # fmt: skip

finite_floats = st.floats(allow_nan=False, allow_infinity=False)
numbers = st.one_of(
    st.integers(min_value=-(2**70), max_value=2**70),
    st.floats(),  # nan and ±inf included
    st.sampled_from([math.nan, math.inf, -math.inf, 0.0, -0.0, 1e308, -1e308, 5e-324, 1.0, -1.0]),
)
quantity_text = st.builds(
    lambda n, sep, u: f"{n}{sep}{u}", st.sampled_from(NUMBER_TEXT) | finite_floats.map(repr),
    st.sampled_from([" ", "", "  ", "\t"]), st.sampled_from(UNITS),
)  # fmt: skip
strings = st.one_of(quantity_text, st.text(max_size=12), st.sampled_from(NODE_IDS))
scalars = st.one_of(
    numbers,
    strings,
    st.booleans(),
    st.just(dt.datetime(2024, 5, 1, 12, 0)),
    st.just(dt.date(2024, 5, 1)),
    st.just(dt.time(12, 30)),
)
values = st.recursive(
    scalars,
    lambda inner: (
        st.lists(inner, max_size=3) | st.dictionaries(st.text(max_size=4), inner, max_size=3)
    ),
    max_leaves=6,
)


def mostly(good, bad=values, odds=10):
    """``good`` about ``odds`` times for each ``bad`` one (a whole document then often
    has just one or two wrong fields, and sometimes none)."""
    return st.sampled_from(range(odds + 1)).flatmap(lambda i: bad if i == odds else good)


def amount(*units, low=1e-3, high=1e6):
    """A plausible positive quantity: an SI number, or a number with one of ``units``."""
    magnitude = st.floats(low, high)
    return magnitude | st.builds(lambda x, u: f"{x:.6g} {u}", magnitude, st.sampled_from(units))


def signed(*units):
    return st.builds(lambda x, sign: sign * x, st.floats(0, 1e3), st.sampled_from([1, -1])) | (
        st.builds(lambda x, u: f"{x:.4g} {u}", st.floats(-1e3, 1e3), st.sampled_from(units))
    )


mass = mostly(amount("kg", "t", "g"), numbers | quantity_text)
stiffness = mostly(amount("N/m", "kN/m", "MN/m"), numbers | quantity_text)
damping = mostly(amount("N*s/m", "kN*s/m"), numbers | quantity_text)
length = mostly(signed("mm", "m"), numbers | quantity_text)
time = mostly(amount("s", "ms", low=0.0, high=10.0), numbers | quantity_text)
frequency = mostly(amount("Hz", "kHz", "rad/s", "rpm", high=1e3), numbers | quantity_text)
force = mostly(signed("N", "kN"), numbers | quantity_text)
signal = mostly(signed("mm", "m", "N", "kN"), numbers | quantity_text)
between = mostly(
    st.lists(ids, min_size=2, max_size=2), st.lists(ids | scalars, max_size=3) | scalars
)
curve_point = st.lists(
    st.floats(-5, 5) | signed("m/s", "N", "kN") | numbers, min_size=2, max_size=2
)
curve = mostly(
    st.lists(st.floats(-5, 5), min_size=1, max_size=6).map(
        lambda xs: [[v, 1000.0 * v] for v in sorted(set([0.0, *xs]))]  # monotone, through 0
    ),
    st.lists(curve_point | st.lists(scalars, max_size=3), max_size=6) | scalars,
)
label = mostly(st.text(max_size=10), scalars)

TABLE_KEYS = {
    "bodies": {"mass": mass, "label": label, "initial_displacement": length,
               "initial_velocity": mostly(signed("m/s"))},
    "supports": {"motion": mostly(st.sampled_from(["drive", "push", "ghost"])), "delay": time,
                 "label": label},
    "springs": {"between": between, "stiffness": stiffness, "gap": length, "gap_stiffness": stiffness,
                "acts": mostly(st.sampled_from(["both", "compression", "tension", "sideways"])),
                "preload": force, "label": label},
    "dampers": {"between": between, "coefficient": damping, "rebound": damping,
                "compression": damping, "curve": curve, "label": label},
    "inerters": {"between": between, "inertance": mass, "label": label},
    "forces": {"on": mostly(ids), "input": mostly(st.sampled_from(["drive", "push", "ghost"])),
               "scale": mostly(st.floats(-10, 10), quantity_text)},
}  # fmt: skip
INPUT_KEYS = {
    "step": {"amplitude": signal, "time": time},
    "bump": {"height": length, "length": length, "speed": mostly(amount("m/s", "km/h")), "time": time},
    "harmonic": {"amplitude": signal, "frequency": frequency, "phase": mostly(signed("rad", "deg"))},
    "sweep": {"amplitude": signal, "start": frequency, "stop": frequency, "duration": time,
              "spacing": mostly(st.sampled_from(["linear", "logarithmic", "cubic"]))},
    "road": {"class": mostly(st.sampled_from(list("ABCDEFGHZ"))), "speed": mostly(amount("m/s")),
             "seed": mostly(st.integers(-5, 2**65))},
    "table": {"file": mostly(st.sampled_from([*CSV_FILES, "missing.csv", "../x.csv", "/etc/hostname",
                                              "sub/inner.csv", "sub/../good.csv", "C:/x.csv", "sub",
                                              ""])),
              "unit": mostly(st.sampled_from(UNITS))},
}  # fmt: skip
RUN_KEYS = {
    "stepper": mostly(st.sampled_from(["rk4", "newmark", "euler", "nope"])),
    "dt": time,
    "duration": time,
    "output_rate": frequency,
}


def table_of(fields: dict, required=()):
    """A table with its ``required`` keys (mostly), a random subset of the others, and
    sometimes a stray key (a misspelling, or one from another table)."""
    known = st.fixed_dictionaries(
        {}, optional={k: v for k, v in fields.items() if k not in required}
    )
    needed = st.fixed_dictionaries({k: fields[k] for k in required}) | st.fixed_dictionaries(
        {}, optional={k: fields[k] for k in required}
    )
    stray = st.dictionaries(
        st.sampled_from(["stifness", "mas", "kind", "id", "x", "coefficient"]), values, max_size=1
    )
    return st.builds(lambda n, k, s: {**n, **k, **s}, needed, known, st.one_of(st.just({}), stray))


REQUIRED = {"bodies": ("mass",), "springs": ("between", "stiffness"), "dampers": ("between",),
            "inerters": ("between", "inertance"), "forces": ("on", "input"),
            "step": ("amplitude",), "bump": ("height", "length", "speed"),
            "harmonic": ("amplitude", "frequency"), "sweep": ("amplitude", "start", "stop", "duration"),
            "road": ("class", "speed"), "table": ("file",)}  # fmt: skip


def group_of(group: str):
    return st.dictionaries(
        ids, mostly(table_of(TABLE_KEYS[group], REQUIRED.get(group, ()))), max_size=4
    )


input_table = st.sampled_from(sorted(INPUT_KEYS)).flatmap(
    lambda kind: table_of(INPUT_KEYS[kind], REQUIRED[kind]).map(lambda t: {"kind": kind, **t})
) | table_of({"kind": scalars | st.just("wave")})
input_ids = st.sampled_from(["drive", "push", "ghost"]) | ids

documents = st.builds(
    lambda head, groups, extra: {**head, **groups, **extra},
    st.fixed_dictionaries(
        {
            "format": mostly(
                st.just("lumped/1"), st.sampled_from(["lumped/2", "lumped/0"]) | scalars
            )
        },
        optional={
            "name": mostly(st.text(max_size=12), scalars),
            "description": label,
            "gravity": mostly(amount("m/s**2", "g0", low=0.0, high=20.0), numbers | quantity_text),
            "floating": mostly(st.booleans(), scalars),
        },
    ),
    st.fixed_dictionaries(
        {},
        optional={
            **{group: mostly(group_of(group)) for group in TABLE_KEYS},
            "inputs": mostly(st.dictionaries(input_ids, mostly(input_table), max_size=3)),
            "run": mostly(table_of(RUN_KEYS)),
        },
    ),
    st.dictionaries(st.sampled_from(["format_version", "bodys", "units", "x"]), values, max_size=1),
)

# A skeleton that loads, so that generated documents reach the checks of meaning
# often: two bodies on a support through springs (invented example data).
SKELETON = {
    "format": "lumped/1",
    "name": "skeleton",
    "bodies": {"a": {"mass": 10.0}, "b": {"mass": "2 kg"}},
    "supports": {"g": {}},
    "springs": {"k1": {"between": ["g", "a"], "stiffness": "1 kN/m"},
                "k2": {"between": ["a", "b"], "stiffness": 500.0}},
}  # fmt: skip


def merged(base: dict, extra: dict) -> dict:
    """``base`` with ``extra`` merged in, one level deep into tables."""
    out = {k: (dict(v) if isinstance(v, dict) else v) for k, v in base.items()}
    for key, value in extra.items():
        if isinstance(out.get(key), dict) and isinstance(value, dict):
            out[key].update(value)
        else:
            out[key] = value
    return out


@settings(
    max_examples=1500,
    deadline=None,
    suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large],
)
@given(document=documents, on_skeleton=st.booleans())
def test_generated_documents_raise_only_model_error(document, on_skeleton, table_dir):
    if on_skeleton:
        document = merged(SKELETON, document)
    check_load(tomli_w.dumps(document), table_dir)


# ---------------------------------------------------------------------------- mutated
# demo files.

TABLE_SYSTEM = """\
format = "lumped/1"
name = "Lab shaker table with a recorded drive"
description = "Invented example: a test mass on a shaker table driven by a recorded signal."

[bodies.table_top]
mass = "25 kg"

[bodies.specimen]
mass = "4 kg"
initial_velocity = "0.1 m/s"

[supports.shaker]
motion = "recorded"
delay = "2 ms"

[springs.flexure]
between = ["shaker", "table_top"]
stiffness = "80 kN/m"
preload = "-50 N"

[springs.fixture]
between = ["table_top", "specimen"]
stiffness = "30 kN/m"
acts = "compression"

[dampers.fixture_loss]
between = ["table_top", "specimen"]
coefficient = "120 N*s/m"

[inerters.fluid]
between = ["shaker", "table_top"]
inertance = "3 kg"

[inputs.recorded]
kind = "table"
file = "good.csv"
unit = "mm"

[inputs.tap]
kind = "harmonic"
amplitude = "10 N"
frequency = "12.6 rad/s"

[forces.hammer]
on = "specimen"
input = "tap"
scale = 2

[run]
stepper = "rk4"
dt = "0.1 ms"
duration = "1 s"
"""

# The big mast demo is left out: 2 000 bodies make each load too slow for fuzzing.
CORPUS = [
    path.read_text(encoding="utf-8")
    for name, path in lumped.demo_systems().items()
    if name != "mast_2000_segments"
] + [TABLE_SYSTEM]

SNIPPETS = [
    "nan", "inf", "-inf", '"inf kg"', '"3 kg"', "-1", "0", "1e400", '"12.6 rad/s"', "[", "]",
    '"', "=", "\n", ".", "[bodies.x]\n", '[bodies."2wheel"]\n', 'between = ["a"]\n',
    'between = ["ghost", "wheel"]\n', "floating = true\n", "stifness = 1\n", "mass = -3\n",
    'acts = "tension"\n', "curve = [[0, 0], [1, -1]]\n", "gap = \"1 mm\"\n", "é", "\x00", "\t",
    "[[bodies]]\n", "[springs.tyre]\n", "format = \"lumped/2\"\n", '"', "'", "#", "{}", "{a = 1}",
]  # fmt: skip


def mutate(text: str, operations) -> str:
    lines = text.splitlines(keepends=True)
    for op, where, snippet in operations:
        if op in ("delete_line", "duplicate_line", "swap_lines", "replace_line") and lines:
            i = where % len(lines)
            if op == "delete_line":
                del lines[i]
            elif op == "duplicate_line":
                lines.insert(i, lines[i])
            elif op == "swap_lines":
                j = (where // 7) % len(lines)
                lines[i], lines[j] = lines[j], lines[i]
            else:
                lines[i] = snippet + "\n"
        else:
            flat = "".join(lines)
            i = where % (len(flat) + 1)
            if op == "delete_char":
                flat = flat[:i] + flat[i + 1 :]
            elif op == "duplicate_char":
                flat = flat[:i] + flat[i : i + 1] * 2 + flat[i + 1 :]
            elif op == "replace_char":
                flat = flat[:i] + snippet[:1] + flat[i + 1 :]
            else:  # insert
                flat = flat[:i] + snippet + flat[i:]
            lines = flat.splitlines(keepends=True)
    return "".join(lines)


operations = st.lists(
    st.tuples(
        st.sampled_from(["delete_line", "duplicate_line", "swap_lines", "replace_line",
                         "delete_char", "duplicate_char", "replace_char", "insert"]),
        st.integers(0, 10**6),
        st.sampled_from(SNIPPETS) | st.text(min_size=1, max_size=8),
    ),
    min_size=1,
    max_size=6,
)  # fmt: skip


@settings(max_examples=2500, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(
    document=st.sampled_from(CORPUS),
    ops=operations,
    as_bytes=st.sampled_from(["text", "bytes", "bad_byte"]),
    where=st.integers(0, 10**6),
)
def test_mutated_demo_files_raise_only_model_error(document, ops, as_bytes, where, table_dir):
    text = mutate(document, ops)
    if as_bytes == "text":
        check_load(text, table_dir)
        return
    data = text.encode("utf-8")
    if as_bytes == "bad_byte" and data:
        i = where % len(data)
        data = data[:i] + bytes([0x80 | (where % 64)]) + data[i + 1 :]  # a stray continuation byte
    check_load(data, table_dir)


def test_corpus_loads_unmutated(table_dir):
    # The mutations start from files that load: each corpus file loads as written.
    for text in CORPUS:
        assert check_load(text, table_dir, note=lambda _: None) is not None
