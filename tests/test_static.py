"""Static equilibrium under gravity against closed forms: a body on a spring sinks
mg/k (Rao, Mechanical Vibrations, 6th ed., 2017, ch. 2 [recalled from memory]);
springs in series add compliances, k_eff = k1 k2/(k1 + k2) (Rao ch. 1 [recalled from
memory]); the quarter vehicle's wheel sinks (m_u + m_s)g/k_t and its body a further
m_s g/k_s (Gillespie, Fundamentals of Vehicle Dynamics, SAE 1992, ch. 5 [recalled
from memory]); and the supports carry the whole weight (Newton's first law).

Convention (SYSTEM_FILES.md): positive up, a static deflection is negative when the
body sinks, element force positive in tension.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

import lumped
from lumped import Body, Damper, Spring, Support, System

DEMOS = lumped.demo_systems()
G = 9.81  # m/s², the system-file default


def solve(system: System) -> lumped.StaticState:
    assert lumped.check_system(system) == []
    return lumped.static_equilibrium(lumped.assemble(system))


def single(mass: float, k: float, **spring) -> System:
    return System(
        name="single body",
        bodies={"mass": Body("mass", mass)},
        supports={"ground": Support("ground")},
        springs={"k": Spring("k", ("ground", "mass"), k, **spring)},
    )


@pytest.mark.parametrize(("mass", "k"), [(1.0, 1.0), (10.0, 1e3), (1800.0, 1.1e6), (0.5, 40e6)])
def test_single_body_sinks_mg_over_k(mass, k):
    state = solve(single(mass, k))
    assert state.deflection_of("mass") == pytest.approx(-mass * G / k, rel=1e-12)
    assert state.force_in("k") == pytest.approx(-mass * G, rel=1e-12)  # compressed: the weight
    assert state.iterations == 1


def test_gravity_of_the_file_is_used():
    text = lumped.dumps(single(4.0, 2e3)).replace(
        'name = "single body"', 'name = "on the Moon"\ngravity = "1.62 m/s**2"'
    )
    system = lumped.loads(text)  # invented: a rig on the Moon
    assert system.gravity == pytest.approx(1.62)
    state = lumped.static_equilibrium(lumped.assemble(system))
    assert state.deflection_of("mass") == pytest.approx(-4.0 * 1.62 / 2e3, rel=1e-12)


def test_body_hanging_below_a_support():
    # A lamp on a cord from the ceiling: the cord (between = [lamp, ceiling]) stretches
    # by mg/k; its force is the weight, in tension.
    mass, k = 3.0, 600.0
    system = System(
        name="hanging lamp",
        bodies={"lamp": Body("lamp", mass)},
        supports={"ceiling": Support("ceiling")},
        springs={"cord": Spring("cord", ("lamp", "ceiling"), k, acts="tension")},
    )
    state = solve(system)
    assert state.deflection_of("lamp") == pytest.approx(-mass * G / k, rel=1e-12)
    assert state.force_in("cord") == pytest.approx(mass * G, rel=1e-12)


def test_springs_in_series():
    # Ground – k1 – m1 – k2 – m2: m2 sinks m2 g/k_eff plus what m1's own weight adds,
    # m1 g/k1; with k_eff = k1 k2/(k1 + k2).
    m1, m2, k1, k2 = 0.25, 40.0, 3e4, 5e4
    system = System(
        name="series",
        bodies={"m1": Body("m1", m1), "m2": Body("m2", m2)},
        supports={"ground": Support("ground")},
        springs={"k1": Spring("k1", ("ground", "m1"), k1), "k2": Spring("k2", ("m1", "m2"), k2)},
    )
    state = solve(system)
    k_eff = k1 * k2 / (k1 + k2)
    assert state.deflection_of("m2") == pytest.approx(-m2 * G / k_eff - m1 * G / k1, rel=1e-12)
    assert state.deflection_of("m1") == pytest.approx(-(m1 + m2) * G / k1, rel=1e-12)


def test_springs_in_parallel():
    # Two springs side by side add: k = k1 + k2 (Rao ch. 1 [recalled from memory]).
    mass, k1, k2 = 20.0, 1e3, 3e3
    system = System(
        name="parallel",
        bodies={"mass": Body("mass", mass)},
        supports={"ground": Support("ground")},
        springs={
            "k1": Spring("k1", ("ground", "mass"), k1),
            "k2": Spring("k2", ("ground", "mass"), k2),
        },
    )
    state = solve(system)
    assert state.deflection_of("mass") == pytest.approx(-mass * G / (k1 + k2), rel=1e-12)
    assert state.force_in("k1") == pytest.approx(-mass * G * k1 / (k1 + k2), rel=1e-12)


def test_quarter_car_closed_form():
    system = lumped.load(DEMOS["quarter_car"])
    state = lumped.static_equilibrium(lumped.assemble(system))
    m_u, m_s = system.bodies["wheel"].mass, system.bodies["body"].mass
    k_t, k_s = system.springs["tyre"].stiffness, system.springs["suspension_spring"].stiffness
    g = system.gravity
    wheel = -(m_u + m_s) * g / k_t
    body = wheel - m_s * g / k_s
    assert state.deflection_of("wheel") == pytest.approx(wheel, rel=1e-12)
    assert state.deflection_of("body") == pytest.approx(body, rel=1e-12)
    assert state.force_in("tyre") == pytest.approx(-(m_u + m_s) * g, rel=1e-12)
    assert state.force_in("suspension_spring") == pytest.approx(-m_s * g, rel=1e-12)
    assert state.force_in("suspension_damper") == 0.0  # no static force in a damper
    assert all(state.active)  # the compression-only tyre is pressed, so engaged


def test_three_stage_truck_closed_form():
    system = lumped.load(DEMOS["truck_cab_frame_axle"])
    state = lumped.static_equilibrium(lumped.assemble(system))
    m_a, m_f, m_c = (system.bodies[i].mass for i in ("axle", "frame", "cab"))
    k_t, k_l, k_c = (system.springs[i].stiffness for i in ("tyres", "leaf_springs", "cab_mounts"))
    g = system.gravity
    axle = -(m_a + m_f + m_c) * g / k_t
    frame = axle - (m_f + m_c) * g / k_l
    cab = frame - m_c * g / k_c
    np.testing.assert_allclose(
        [state.deflection_of(i) for i in ("axle", "frame", "cab")], [axle, frame, cab], rtol=1e-12
    )


def support_reaction(system: System, state: lumped.StaticState) -> float:
    """The upward force the supports exert on the bodies, N, summed element by element:
    an element of tension f pulls its upper end down (−f) and its lower end up (+f)."""
    total = 0.0
    forces = dict(zip(state.element_ids, state.element_force, strict=True))
    for element in system.elements.values():
        lower, upper = element.between
        force = forces[element.id]
        if lower in system.supports and upper in system.bodies:
            total -= force
        elif upper in system.supports and lower in system.bodies:
            total += force
    return total


@pytest.mark.parametrize("name", sorted(DEMOS))
def test_supports_carry_the_whole_weight(name):
    system = lumped.load(DEMOS[name])
    state = lumped.static_equilibrium(lumped.assemble(system))
    weight = sum(b.mass for b in system.bodies.values()) * system.gravity
    assert support_reaction(system, state) == pytest.approx(weight, rel=1e-9)
    # And each body is in equilibrium: its weight against its elements' forces.
    net = {b.id: -b.mass * system.gravity for b in system.bodies.values()}
    forces = dict(zip(state.element_ids, state.element_force, strict=True))
    for element in system.elements.values():
        lower, upper = element.between
        if upper in net:
            net[upper] -= forces[element.id]
        if lower in net:
            net[lower] += forces[element.id]
    for body, residual in net.items():
        assert abs(residual) <= 1e-9 * weight, body


@pytest.mark.parametrize("name", sorted(DEMOS))
def test_element_deflections_follow_the_body_displacements(name):
    # δ = x_b − x_a (supports at rest) and a spring's force is k δ plus its preload.
    system = lumped.load(DEMOS[name])
    state = lumped.static_equilibrium(lumped.assemble(system))
    position = dict(zip(state.body_ids, state.displacement, strict=True))
    row = {e: i for i, e in enumerate(state.element_ids)}

    def x(node):
        return position.get(node, 0.0)  # supports at rest

    for element in system.elements.values():
        i = row[element.id]
        a, b = element.between
        assert state.element_deflection[i] == pytest.approx(x(b) - x(a), rel=1e-12, abs=1e-15)
        if isinstance(element, Spring):
            expected = element.preload + element.stiffness * (x(b) - x(a))
            assert state.element_force[i] == pytest.approx(expected, rel=1e-9, abs=1e-9)


def test_compression_only_spring_that_would_have_to_pull():
    # A lamp below the ceiling on a compression-only spring: holding it would need
    # tension, which the spring cannot carry; nothing else holds the lamp.
    system = System(
        name="lamp on a push-only spring",
        bodies={"lamp": Body("lamp", 3.0)},
        supports={"ceiling": Support("ceiling")},
        springs={
            "push_spring": Spring("push_spring", ("lamp", "ceiling"), 600.0, acts="compression")
        },
    )
    assert lumped.check_system(system) == []
    with pytest.raises(lumped.StaticError) as info:
        lumped.static_equilibrium(lumped.assemble(system))
    message = str(info.value)
    assert "'push_spring'" in message and "lamp" in message
    assert "tension" in message
    assert isinstance(info.value, lumped.LumpedError)


def test_tension_only_spring_that_would_have_to_push():
    system = System(
        name="body on a rope from below",
        bodies={"block": Body("block", 2.0)},
        supports={"floor": Support("floor")},
        springs={"rope": Spring("rope", ("floor", "block"), 1e3, acts="tension")},
    )
    with pytest.raises(lumped.StaticError) as info:
        lumped.static_equilibrium(lumped.assemble(system))
    assert "'rope'" in str(info.value) and "compression" in str(info.value)


def test_slack_one_sided_spring_carries_nothing():
    # A body on its spring, with a compression-only bump stop hung from above
    # (between = [body, roof]): as the body sinks, the stop would be stretched, so
    # it is slack: no force, and the body sinks as if it were not there.
    mass, k, k_stop = 50.0, 2e4, 5e5
    system = System(
        name="slack stop",
        bodies={"body": Body("body", mass)},
        supports={"floor": Support("floor"), "roof": Support("roof")},
        springs={
            "spring": Spring("spring", ("floor", "body"), k),
            "stop": Spring("stop", ("body", "roof"), k_stop, acts="compression"),
        },
    )
    state = solve(system)
    assert state.deflection_of("body") == pytest.approx(-mass * G / k, rel=1e-12)
    assert state.force_in("stop") == 0.0
    assert not state.active[state.element_ids.index("stop")]
    assert state.active[state.element_ids.index("spring")]


def test_floating_system_is_not_deformed_by_gravity():
    # Two bodies and a spring in free fall: uniform gravity deforms nothing.
    system = System(
        name="free flight",
        bodies={"left": Body("left", 2.0), "right": Body("right", 7.0)},
        springs={"link": Spring("link", ("left", "right"), 5e3)},
        dampers={"loss": Damper("loss", ("left", "right"), coefficient=10.0)},
        floating=True,
    )
    state = solve(system)
    assert state.force_in("link") == pytest.approx(0.0, abs=1e-9)
    assert state.element_deflection[state.element_ids.index("link")] == pytest.approx(
        0.0, abs=1e-12
    )
    assert state.deflection_of("left") == pytest.approx(state.deflection_of("right"), abs=1e-12)
    assert all(np.isfinite(state.displacement))


def test_floating_system_with_a_preload_deforms_by_it_alone():
    # Free flight again, with a spring preloaded by P in tension: the pair settles
    # where the spring is at zero force, a deflection of −P/k between the ends.
    preload, k = 40.0, 4e3
    system = System(
        name="free flight, preloaded",
        bodies={"left": Body("left", 2.0), "right": Body("right", 7.0)},
        springs={"link": Spring("link", ("left", "right"), k, preload=preload)},
        floating=True,
    )
    state = solve(system)
    assert state.element_deflection[0] == pytest.approx(-preload / k, rel=1e-12)
    assert state.force_in("link") == pytest.approx(0.0, abs=1e-9)


def test_unsupported_system_without_floating_is_refused():
    system = System(
        name="free flight",
        bodies={"left": Body("left", 2.0), "right": Body("right", 7.0)},
        springs={"link": Spring("link", ("left", "right"), 5e3)},
    )
    assert any("floating = true" in p.message for p in lumped.check_system(system))
    with pytest.raises(lumped.StaticError) as info:
        lumped.static_equilibrium(lumped.assemble(system))
    assert "floating = true" in str(info.value)


@pytest.mark.parametrize("preload", [150.0, -150.0, 0.0])
def test_preload_shifts_the_static_position_by_preload_over_k(preload):
    # A spring with preload P (its force, tension positive, with both ends at their
    # unloaded positions) on a body above the ground: force balance on the body,
    # P + k x = −m g, so x = −(m g + P)/k. A tension preload pulls the body down by
    # P/k; a compression preload (P < 0) pushes it up.
    mass, k = 12.0, 3e3
    base = solve(single(mass, k)).deflection_of("mass")
    state = solve(single(mass, k, preload=preload))
    assert state.deflection_of("mass") == pytest.approx(-(mass * G + preload) / k, rel=1e-12)
    assert state.deflection_of("mass") - base == pytest.approx(-preload / k, rel=1e-9, abs=1e-15)
    assert state.force_in("k") == pytest.approx(-mass * G, rel=1e-12)  # still the weight


def test_preload_on_a_spring_above_the_body():
    # The same spring turned over (between = [body, roof]): a tension preload now pulls
    # the body up by P/k.
    mass, k, preload = 12.0, 3e3, 150.0
    system = System(
        name="hung",
        bodies={"mass": Body("mass", mass)},
        supports={"roof": Support("roof")},
        springs={"k": Spring("k", ("mass", "roof"), k, preload=preload)},
    )
    state = solve(system)
    assert state.deflection_of("mass") == pytest.approx(-mass * G / k + preload / k, rel=1e-12)
    assert state.force_in("k") == pytest.approx(mass * G, rel=1e-12)


def test_preload_read_from_a_file(tmp_path):
    text = """\
format = "lumped/1"
name = "Preloaded mount (invented)"

[bodies.press]
mass = "1.8 t"

[supports.floor]

[springs.mount]
between = ["floor", "press"]
stiffness = "1.1 MN/m"
preload = "-2 kN"
"""
    system = lumped.loads(text)
    state = lumped.static_equilibrium(lumped.assemble(system))
    assert state.deflection_of("press") == pytest.approx(-(1.8e3 * G - 2e3) / 1.1e6, rel=1e-12)


def test_static_deflection_is_independent_of_damping_and_inerters():
    mass, k = 10.0, 1e3
    system = System(
        name="with extras",
        bodies={"mass": Body("mass", mass)},
        supports={"ground": Support("ground")},
        springs={"k": Spring("k", ("ground", "mass"), k)},
        dampers={"c": Damper("c", ("ground", "mass"), coefficient=50.0)},
        inerters={"b": lumped.Inerter("b", ("ground", "mass"), 3.0)},
    )
    state = solve(system)
    assert state.deflection_of("mass") == pytest.approx(-mass * G / k, rel=1e-12)
    assert state.force_in("c") == 0.0 and state.force_in("b") == 0.0
    assert math.isfinite(state.deflection_of("mass"))
