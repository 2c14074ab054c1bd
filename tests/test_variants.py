"""Variants stepped together must give, variant by variant, what a single run of the
same variant gives: the batch is a layout of the same equations, not another method
(checked against the engine's own single runs, which the other test files hold against
closed forms and reference libraries)."""

import numpy as np
import pytest

import lumped
from lumped.simulate import simulate
from lumped.variants import VariantError, simulate_variants, variant_system


def test_each_variant_equals_its_own_run():
    system = lumped.load(lumped.demo_path("quarter_car"))
    changes = {
        "springs.suspension_spring.stiffness": [18e3, 24e3, 30e3],
        "dampers.suspension_damper.rebound": [1.8e3, 2.4e3, 3.0e3],
        "bodies.body.mass": [340.0, 380.0, 420.0],
    }
    runs = simulate_variants(system, changes, "rk4", dt=2e-4, duration=1.0, output_rate=500)
    assert runs.status == "completed" and runs.count == 3
    for i in range(3):
        single = simulate(variant_system(system, {k: v[i] for k, v in changes.items()}), "rk4",
                          dt=2e-4, duration=1.0, output_rate=500)  # fmt: skip
        np.testing.assert_array_equal(runs.displacement[i], single.displacement)
        np.testing.assert_array_equal(runs.force[i], single.force)
        assert runs.events[i] == single.events
    # A stiffer suspension spring with a heavier body: different runs, as they must be.
    assert not np.array_equal(runs.displacement[0], runs.displacement[2])


def test_variants_with_tabulated_dampers_keep_each_curve_with_its_element():
    # The truck demo (invented) has a tabulated axle damper beside a linear cab damper:
    # the batch's element channels come out variant by variant, each curve with its own
    # element, as in the variant's own run.
    system = lumped.load(lumped.demo_path("truck_cab_frame_axle"))
    changes = {"springs.cab_mounts.stiffness": [80e3, 95e3, 110e3], "bodies.cab.mass": [700.0, 800.0, 900.0]}
    runs = simulate_variants(system, changes, "rk4", dt=5e-4, duration=0.5, output_rate=200)
    assert runs.element_ids == tuple(system.elements)
    for i in range(3):
        single = simulate(runs.system(i), "rk4", dt=5e-4, duration=0.5, output_rate=200)
        assert single.element_ids == runs.element_ids
        np.testing.assert_array_equal(runs.force[i], single.force)
        np.testing.assert_array_equal(runs.deflection[i], single.deflection)
    assert runs.batch.element_ids[: len(system.elements)] == tuple(f"v0_{e}" for e in system.elements)


@pytest.mark.parametrize(
    ("changes", "message"),
    [
        ({"springs.nothing.stiffness": [1.0]}, "no item 'nothing'"),
        ({"springs.tyre.stifness": [1.0]}, "no numeric field 'stifness'"),
        ({"tyre.stiffness": [1.0]}, "group.id.field"),
        ({"bodies.body.mass": [1.0, -2.0]}, r"variant 1: bodies\.body\.mass: must be finite and positive"),
        ({"bodies.body.mass": [1.0], "bodies.wheel.mass": [1.0, 2.0]}, "same, non-zero number"),
        ({}, "at least one change"),
    ],
)
def test_bad_changes_are_refused_with_the_path_named(changes, message):
    system = lumped.load(lumped.demo_path("quarter_car"))
    with pytest.raises(VariantError, match=message):
        simulate_variants(system, changes, "rk4", dt=1e-3, duration=0.01)


def test_figures_of_each_variant_equal_those_of_its_own_run():
    # The figures table is one source for runs and sweeps: a batch's variant gets the
    # same rows, values and rules as a single run of that variant.
    system = lumped.load(lumped.demo_path("shuttle_corner_with_seat"))
    changes = {"springs.seat_spring.stiffness": [5e3, 9e3]}
    runs = simulate_variants(system, changes, "rk4", dt=5e-4, duration=4.0, output_rate=500)
    tables = runs.figures(bodies=["seat"], start=1.0)
    for i, rows in enumerate(tables):
        variant = variant_system(system, {"springs.seat_spring.stiffness": changes["springs.seat_spring.stiffness"][i]})
        single = lumped.run_figures(variant, simulate(variant, "rk4", dt=5e-4, duration=4.0, output_rate=500),
                                    bodies=["seat"], start=1.0)  # fmt: skip
        assert [(r.key, r.item, r.rule) for r in rows] == [(r.key, r.item, r.rule) for r in single]
        np.testing.assert_array_equal([r.value for r in rows], [r.value for r in single])
    # the two seat springs give the seat different ride figures
    def seat_aw(rows):
        return next(r.value for r in rows if r.key == "weighted_acceleration_rms" and r.item == "seat")

    assert seat_aw(tables[0]) != seat_aw(tables[1])


def test_a_run_gives_its_element_channels_in_the_order_asked():
    # Two different tabulated dampers between a linear one (invented values): a run
    # whose element channels are asked in another order gives the same columns,
    # reordered, each curve staying with its own damper.
    import dataclasses

    from lumped.simulate import prepare

    system = lumped.System(
        name="two curves",
        bodies={"a": lumped.Body("a", 10.0, initial_velocity=0.4), "b": lumped.Body("b", 5.0, initial_velocity=-0.3)},
        supports={"g": lumped.Support("g")},
        springs={"ka": lumped.Spring("ka", ("g", "a"), 4e3), "kb": lumped.Spring("kb", ("a", "b"), 2e3)},
        dampers={
            "soft": lumped.Damper("soft", ("g", "a"), curve=((-1.0, -50.0), (0.0, 0.0), (1.0, 80.0))),
            "plain": lumped.Damper("plain", ("a", "b"), coefficient=15.0),
            "hard": lumped.Damper("hard", ("a", "b"), curve=((-1.0, -300.0), (0.0, 0.0), (0.5, 90.0), (1.0, 400.0))),
        },
    )
    prepared = prepare(system)
    order = np.array([4, 2, 0, 3, 1])
    plain = simulate(prepared, "rk4", 1e-3, 0.5, output_rate=100)
    reordered = simulate(dataclasses.replace(prepared, element_order=order), "rk4", 1e-3, 0.5, output_rate=100)
    assert reordered.element_ids == tuple(plain.element_ids[e] for e in order)
    np.testing.assert_array_equal(reordered.force, plain.force[:, order])
    np.testing.assert_array_equal(reordered.deflection, plain.deflection[:, order])
    np.testing.assert_array_equal(reordered.stored, plain.stored)


@pytest.mark.parametrize("name", ["quarter_car", "truck_cab_frame_axle", "machine_on_mounts", "shuttle_corner_with_seat"])
def test_copies_of_the_matrices_equal_the_assembly_of_the_copies_laid_out_as_one_system(name):
    # A batch whose changes are values of the matrices is made from the base's
    # assembly (lumped.assemble.copies); it must hold what assembling the copies laid
    # out as one system gives (the general path), element rows matched by id. The
    # demos (invented) bring end stops, lifting tyres and tabulated dampers.
    from lumped.assemble import copies
    from lumped.variants import _stacked

    system = lumped.load(lumped.demo_path(name))
    spring, body = next(iter(system.springs)), next(iter(system.bodies))
    stiffness, mass = np.array([1e4, 2e4, 3e4]), np.array([5.0, 50.0, 500.0])
    whole = lumped.assemble(_stacked(system, {f"springs.{spring}.stiffness": stiffness, f"bodies.{body}.mass": mass}, 3))
    made = copies(lumped.assemble(system), ["v0_", "v1_", "v2_"], {("stiffness", spring): stiffness, ("mass", body): mass})
    assert made.body_ids == whole.body_ids and made.support_ids == whole.support_ids
    assert made.force_ids == whole.force_ids and sorted(made.element_ids) == sorted(whole.element_ids)
    rows = np.array([whole.element_ids.index(e) for e in made.element_ids])
    assert made.element_kinds == tuple(whole.element_kinds[r] for r in rows)
    for field in ("mass", "stiffness", "damping", "inertance", "preload"):
        expected = getattr(whole, field) if field == "mass" else getattr(whole, field)[rows]
        np.testing.assert_array_equal(getattr(made, field), expected)
    for field in ("M", "C", "K", "M_s", "C_s", "K_s", "P"):
        np.testing.assert_array_equal(getattr(made, field).toarray(), getattr(whole, field).toarray())
    np.testing.assert_array_equal(made.D.toarray(), whole.D.toarray()[rows])
    np.testing.assert_array_equal(made.D_s.toarray(), whole.D_s.toarray()[rows])
    assert (made.gravity, made.floating) == (whole.gravity, whole.floating)

    def tables(m):
        t = m.nonlinear
        curves = {m.element_ids[e]: (tuple(t.curve_velocity[t.curve_offset[j]:t.curve_offset[j + 1]]),
                                     tuple(t.curve_force[t.curve_offset[j]:t.curve_offset[j + 1]]))
                  for j, e in enumerate(t.curve_index)}  # fmt: skip
        return (sorted(zip([m.element_ids[e] for e in t.end_stop_index], t.end_stop_gap, t.end_stop_stiffness, strict=True)),
                sorted(zip([m.element_ids[e] for e in t.one_sided_index], t.one_sided_sign, strict=True)),
                sorted(zip([m.element_ids[e] for e in t.asymmetric_index], t.asymmetric_rebound,
                           t.asymmetric_compression, strict=True)), curves)  # fmt: skip

    assert tables(made) == tables(whole)


def test_changes_of_matrix_values_skip_the_system_of_copies_and_others_build_it(monkeypatch):
    # Stiffness, damping coefficient and mass changes are made from the base's
    # assembly; a change the matrices do not hold (a rebound coefficient) builds the
    # system of copies. Either way each variant equals its own run (above).
    import lumped.variants as variants

    system = lumped.load(lumped.demo_path("quarter_car"))
    built = []
    stacked = variants._stacked
    monkeypatch.setattr(variants, "_stacked", lambda *args: built.append(args) or stacked(*args))
    settings = dict(dt=1e-3, duration=0.1, output_rate=100)
    simulate_variants(system, {"springs.tyre.stiffness": [2e5, 2.5e5], "bodies.body.mass": [300.0, 400.0]},
                      "rk4", **settings)  # fmt: skip
    assert built == []
    simulate_variants(system, {"dampers.suspension_damper.rebound": [1e3, 2e3]}, "rk4", **settings)
    assert len(built) == 1


def test_a_base_without_equilibrium_of_its_own_runs_variants_that_have_one():
    # The base's mount stiffness is a placeholder (0: nothing holds the press); each
    # variant's is real. Only the variants need a static equilibrium, as each
    # variant's own run does (the machine demo is invented).
    import dataclasses

    system = lumped.load(lumped.demo_path("machine_on_mounts"))
    base = dataclasses.replace(system, springs={**system.springs, "mounts": dataclasses.replace(
        system.springs["mounts"], stiffness=0.0)})  # fmt: skip
    changes = {"springs.mounts.stiffness": [0.8e6, 1.1e6]}
    runs = simulate_variants(base, changes, "rk4", dt=1e-3, duration=0.2, output_rate=100)
    for i in range(2):
        single = simulate(runs.system(i), "rk4", dt=1e-3, duration=0.2, output_rate=100)
        np.testing.assert_array_equal(runs.displacement[i], single.displacement)


def test_runs_and_batches_pickle_before_and_after_their_element_channels_are_read():
    # A batch is handed to other processes (design sweeps): its runs must pickle, the
    # element channels worked out or not.
    import pickle

    system = lumped.load(lumped.demo_path("quarter_car"))
    runs = simulate_variants(system, {"springs.tyre.stiffness": [2e5, 2.4e5]}, "rk4", dt=1e-3, duration=0.3)
    again = pickle.loads(pickle.dumps(runs))
    np.testing.assert_array_equal(again.force, runs.force)
    single = simulate(system, "rk4", 1e-3, 0.3)
    single.force  # noqa: B018 (read, so that the worked-out channels pickle too)
    np.testing.assert_array_equal(pickle.loads(pickle.dumps(single)).stored, single.stored)


def test_a_variants_frame_holds_the_columns_of_its_own_runs_frame():
    # One variant of a batch as a table: the body and element columns of the
    # variant's own run, same labels and values (the support, force and energy
    # columns are the batch's, not one variant's).
    system = lumped.load(lumped.demo_path("quarter_car"))
    changes = {"springs.suspension_spring.stiffness": [18e3, 30e3]}
    runs = simulate_variants(system, changes, "rk4", dt=1e-3, duration=0.5, output_rate=200)
    frame = runs.variant(1).to_frame()
    single = simulate(runs.system(1), "rk4", dt=1e-3, duration=0.5, output_rate=200).to_frame()
    assert list(frame.columns) == [c for c in single.columns if c in frame.columns]
    assert "body.displacement [m]" in frame.columns and "tyre.force [N]" in frame.columns
    np.testing.assert_array_equal(frame.to_numpy(), single[frame.columns].to_numpy())
