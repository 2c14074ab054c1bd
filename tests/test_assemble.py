"""Assembly: M, C, K, the support-coupling blocks, the state-space form and the
nonlinear tables, against textbook matrices written out here, closed-form natural
frequencies, and an independent element-by-element construction.

Equations of motion of a chain of masses and springs, M q'' + C q' + K q = f, with
K = [[k1+k2, −k2], [−k2, k2]] for two masses in a row — S. S. Rao, Mechanical
Vibrations, 6th ed., 2017, ch. 5 [recalled from memory]; the quarter vehicle —
T. D. Gillespie, Fundamentals of Vehicle Dynamics, SAE 1992, ch. 5 [recalled from
memory]. Support motion u enters on the right: a spring k from the support to body i
adds k·u to body i's equation, so the library's −K_s u has K_s[i, s] = −k.
"""

from __future__ import annotations

import math

import control
import numpy as np
import pytest
import scipy.linalg
import scipy.sparse.linalg as spla
from hypothesis import given, settings
from hypothesis import strategies as st

import lumped
from lumped import Body, Damper, Inerter, Spring, Support, System

DEMOS = lumped.demo_systems()


def dense(matrix) -> np.ndarray:
    return np.asarray(matrix.toarray(), dtype=float)


def linear_coefficient(damper: Damper) -> float:
    """A damper's coefficient at zero velocity, computed here from its parameters.

    Bilinear (rebound/compression): the mean of the two — common practice for
    linearising a bilinear damper about zero velocity. Curve: the mean of the slopes
    of the segments on either side of v = 0 (a point at v = 0 splits them).
    """
    if damper.coefficient is not None:
        return damper.coefficient
    if damper.curve is None:
        return 0.5 * (damper.rebound + damper.compression)
    points = sorted(damper.curve)
    segments = list(zip(points, points[1:], strict=False))

    def slope(segment):
        (v0, f0), (v1, f1) = segment
        return (f1 - f0) / (v1 - v0)

    # The segment just left of 0 and the one just right of it; at an end point the
    # curve goes on linearly, so the end segment serves for both sides.
    left = next((g for g in segments if g[0][0] < 0.0 <= g[1][0]), segments[0])
    right = next((g for g in segments if g[0][0] <= 0.0 < g[1][0]), segments[-1])
    return 0.5 * (slope(left) + slope(right))


def by_hand(system: System):
    """M, C, K, M_s, C_s, K_s and P built with plain loops over the system's items."""
    bodies = list(system.bodies)
    supports = list(system.supports)
    n, n_s = len(bodies), len(supports)
    M, C, K = np.zeros((n, n)), np.zeros((n, n)), np.zeros((n, n))
    M_s, C_s, K_s = np.zeros((n, n_s)), np.zeros((n, n_s)), np.zeros((n, n_s))
    for i, body in enumerate(system.bodies.values()):
        M[i, i] = body.mass

    def add(free, coupling, a, b, value):
        for end, other in ((a, b), (b, a)):
            if end in system.bodies:
                i = bodies.index(end)
                free[i, i] += value
                if other in system.bodies:
                    free[i, bodies.index(other)] -= value
                else:
                    coupling[i, supports.index(other)] -= value

    for spring in system.springs.values():
        add(K, K_s, *spring.between, spring.stiffness)
    for damper in system.dampers.values():
        add(C, C_s, *damper.between, linear_coefficient(damper))
    for inerter in system.inerters.values():
        add(M, M_s, *inerter.between, inerter.inertance)
    P = np.zeros((n, len(system.forces)))
    for j, force in enumerate(system.forces.values()):
        P[bodies.index(force.on), j] = force.scale
    return {"M": M, "C": C, "K": K, "M_s": M_s, "C_s": C_s, "K_s": K_s, "P": P}


def assert_matches_by_hand(system: System):
    matrices = lumped.assemble(system)
    assert matrices.body_ids == tuple(system.bodies)
    assert matrices.support_ids == tuple(system.supports)
    expected = by_hand(system)
    for name, value in expected.items():
        np.testing.assert_allclose(
            dense(getattr(matrices, name)), value, rtol=1e-12, atol=0, err_msg=name
        )
    return matrices


# ---------------------------------------------------------------------------- textbook forms


def test_quarter_car_matrices():
    system = lumped.load(DEMOS["quarter_car"])
    m = lumped.assemble(system)
    assert m.body_ids == ("wheel", "body") and m.support_ids == ("road",)
    m_u, m_s = system.bodies["wheel"].mass, system.bodies["body"].mass
    k_t, k_s = system.springs["tyre"].stiffness, system.springs["suspension_spring"].stiffness
    damper = system.dampers["suspension_damper"]
    c_s = 0.5 * (damper.rebound + damper.compression)  # linearised: mean (common practice)
    # The file's values, in SI.
    assert (m_u, m_s, k_t, k_s) == (42.0, 380.0, 230e3, 24e3)
    assert c_s == pytest.approx(0.5 * (2.4e3 + 1.3e3))
    np.testing.assert_array_equal(dense(m.M), [[m_u, 0], [0, m_s]])
    np.testing.assert_allclose(dense(m.K), [[k_t + k_s, -k_s], [-k_s, k_s]], rtol=1e-15)
    np.testing.assert_allclose(dense(m.C), [[c_s, -c_s], [-c_s, c_s]], rtol=1e-15)
    # Road displacement: m_u x_u'' + ... = k_t u, so K_s = [[−k_t], [0]]; no tyre damping.
    np.testing.assert_allclose(dense(m.K_s), [[-k_t], [0.0]], rtol=1e-15)
    np.testing.assert_array_equal(dense(m.C_s), [[0.0], [0.0]])
    np.testing.assert_array_equal(dense(m.M_s), [[0.0], [0.0]])


def test_machine_on_mounts_coupling_blocks():
    # Press on mounts on a floor bay on the building's columns: the floor's spring and
    # damper tie the floor bay to the support, so K_s and C_s carry −k_floor, −c_floor
    # in the floor bay's row (m_f x_f'' + ... = k_f u + c_f u').
    system = lumped.load(DEMOS["machine_on_mounts"])
    m = lumped.assemble(system)
    assert m.body_ids == ("press", "floor_bay") and m.support_ids == ("columns",)
    k_m, k_f = system.springs["mounts"].stiffness, system.springs["floor"].stiffness
    c_m, c_f = system.dampers["mounts_loss"].coefficient, system.dampers["floor_loss"].coefficient
    assert (k_m, k_f, c_m, c_f) == (
        pytest.approx(1.1e6),
        pytest.approx(48e6),
        pytest.approx(6.5e3),
        pytest.approx(28e3),
    )
    np.testing.assert_allclose(dense(m.K), [[k_m, -k_m], [-k_m, k_m + k_f]], rtol=1e-15)
    np.testing.assert_allclose(dense(m.C), [[c_m, -c_m], [-c_m, c_m + c_f]], rtol=1e-15)
    np.testing.assert_allclose(dense(m.K_s), [[0.0], [-k_f]], rtol=1e-15)
    np.testing.assert_allclose(dense(m.C_s), [[0.0], [-c_f]], rtol=1e-15)
    np.testing.assert_array_equal(dense(m.P), [[1.0], [0.0]])  # the unbalance acts on the press


def test_quarter_car_natural_frequencies():
    # Undamped quarter vehicle: ω⁴ − ω²(k_s/m_s + (k_s+k_t)/m_u) + k_s k_t/(m_s m_u) = 0
    # (Gillespie ch. 5; Wong, Theory of Ground Vehicles, 4th ed., ch. 7 [recalled from memory]).
    system = lumped.load(DEMOS["quarter_car"])
    m = lumped.assemble(system)
    m_u, m_s = system.bodies["wheel"].mass, system.bodies["body"].mass
    k_t, k_s = system.springs["tyre"].stiffness, system.springs["suspension_spring"].stiffness
    b = k_s / m_s + (k_s + k_t) / m_u
    c = k_s * k_t / (m_s * m_u)
    omega_sq = np.array([(b - math.sqrt(b * b - 4 * c)) / 2, (b + math.sqrt(b * b - 4 * c)) / 2])
    np.testing.assert_allclose(
        scipy.linalg.eigh(dense(m.K), dense(m.M), eigvals_only=True), omega_sq, rtol=1e-12
    )
    # The body mode sits near the series-spring estimate, the wheel hop near √((k_s+k_t)/m_u).
    f = np.sqrt(omega_sq) / (2 * math.pi)
    assert f[0] == pytest.approx(math.sqrt(k_s * k_t / (k_s + k_t) / m_s) / (2 * math.pi), rel=0.05)
    assert f[1] == pytest.approx(math.sqrt((k_s + k_t) / m_u) / (2 * math.pi), rel=0.05)


@pytest.mark.parametrize("demo", ["truck_cab_frame_axle", "shuttle_corner_with_seat"])
def test_three_body_chain_matrices(demo):
    system = lumped.load(DEMOS[demo])
    m = lumped.assemble(system)
    assert len(m.body_ids) == 3
    # In both demos the bodies form a chain support–1–2–3, springs k1, k2, k3 and
    # dampers c2 (between 1 and 2) and c3 (between 2 and 3), in file order.
    m1, m2, m3 = (b.mass for b in system.bodies.values())
    k1, k2, k3 = (s.stiffness for s in system.springs.values())
    c2, c3 = (linear_coefficient(d) for d in system.dampers.values())
    K = [[k1 + k2, -k2, 0], [-k2, k2 + k3, -k3], [0, -k3, k3]]
    C = [[c2, -c2, 0], [-c2, c2 + c3, -c3], [0, -c3, c3]]
    np.testing.assert_array_equal(dense(m.M), np.diag([m1, m2, m3]))
    np.testing.assert_allclose(dense(m.K), K, rtol=1e-15)
    np.testing.assert_allclose(dense(m.C), C, rtol=1e-15)
    np.testing.assert_allclose(dense(m.K_s), [[-k1], [0], [0]], rtol=1e-15)


def test_truck_curve_damper_is_linearised_by_its_slopes_at_zero():
    system = lumped.load(DEMOS["truck_cab_frame_axle"])
    m = lumped.assemble(system)
    # The axle damper's curve: (−0.3 m/s, −4.5 kN), (0, 0), (0.3 m/s, 7.5 kN) around
    # zero, so slopes of 15 and 25 kN·s/m: 20 kN·s/m at rest.
    expected = 0.5 * (4.5e3 / 0.3 + 7.5e3 / 0.3)
    assert linear_coefficient(system.dampers["axle_dampers"]) == pytest.approx(expected, rel=1e-12)
    assert m.damping[m.element_index("axle_dampers")] == pytest.approx(expected, rel=1e-12)


def two_masses_three_springs(m: float, k: float) -> System:
    """Two equal masses between two walls, three equal springs (Rao ch. 5)."""
    return System(
        name="two masses, three springs",
        bodies={"m1": Body("m1", m), "m2": Body("m2", m)},
        supports={"floor": Support("floor"), "ceiling": Support("ceiling")},
        springs={
            "k1": Spring("k1", ("floor", "m1"), k),
            "k2": Spring("k2", ("m1", "m2"), k),
            "k3": Spring("k3", ("m2", "ceiling"), k),
        },
    )


@pytest.mark.parametrize(("m", "k"), [(1.0, 1.0), (2.5, 4e4), (1200.0, 3.3e6)])
def test_two_equal_masses_three_equal_springs(m, k):
    # ω = √(k/m) (in phase) and √(3k/m) (out of phase) — Rao ch. 5 [recalled from memory].
    matrices = lumped.assemble(two_masses_three_springs(m, k))
    np.testing.assert_allclose(dense(matrices.K), [[2 * k, -k], [-k, 2 * k]], rtol=1e-15)
    omega_sq, shapes = scipy.linalg.eigh(dense(matrices.K), dense(matrices.M))
    np.testing.assert_allclose(
        np.sqrt(omega_sq), [math.sqrt(k / m), math.sqrt(3 * k / m)], rtol=1e-12
    )
    # Mode shapes [1, 1] and [1, −1].
    assert shapes[0, 0] * shapes[1, 0] > 0 and shapes[0, 1] * shapes[1, 1] < 0
    np.testing.assert_allclose(abs(shapes[0]), abs(shapes[1]), rtol=1e-12)
    np.testing.assert_allclose(dense(matrices.K_s), [[-k, 0], [0, -k]], rtol=1e-15)


# -- uniform chains: Strang, Computational Science and Engineering, 2007, §1.5; Yueh,
# Applied Mathematics E-Notes 5 (2005) 66–74 [both recalled from memory].


@pytest.mark.parametrize("n", [1, 10, 50])
@pytest.mark.parametrize(("mass", "k"), [(1.0, 1.0), (0.5, 40e6)])
def test_uniform_chain_fixed_free(n, mass, k):
    matrices = lumped.assemble(lumped.uniform_chain(n, mass, k))
    omega = np.sqrt(scipy.linalg.eigh(dense(matrices.K), dense(matrices.M), eigvals_only=True))
    j = np.arange(1, n + 1)
    expected = 2 * math.sqrt(k / mass) * np.sin((2 * j - 1) * math.pi / (2 * (2 * n + 1)))
    np.testing.assert_allclose(omega, expected, rtol=1e-10)
    assert omega.max() <= 2 * math.sqrt(k / mass)  # Gershgorin bound


@pytest.mark.parametrize("n", [1, 10, 50])
def test_uniform_chain_fixed_fixed(n):
    mass, k = 3.0, 7e3
    matrices = lumped.assemble(lumped.uniform_chain(n, mass, k, fixed_top=True))
    omega = np.sqrt(scipy.linalg.eigh(dense(matrices.K), dense(matrices.M), eigvals_only=True))
    j = np.arange(1, n + 1)
    expected = 2 * math.sqrt(k / mass) * np.sin(j * math.pi / (2 * (n + 1)))
    np.testing.assert_allclose(omega, expected, rtol=1e-10)
    assert omega.max() <= 2 * math.sqrt(k / mass)


@pytest.mark.parametrize("n", [2, 10, 50])
def test_uniform_chain_free_free(n):
    # No support (floating = true): one rigid-body mode at zero frequency.
    mass, k = 2.0, 5e3
    ids = [f"m{i}" for i in range(1, n + 1)]
    system = System(
        name="free chain",
        bodies={i: Body(i, mass) for i in ids},
        springs={
            f"k{j}": Spring(f"k{j}", (a, b), k)
            for j, (a, b) in enumerate(zip(ids, ids[1:], strict=False), 1)
        },
        floating=True,
    )
    assert lumped.check_system(system) == []
    matrices = lumped.assemble(system)
    omega_sq = scipy.linalg.eigh(dense(matrices.K), dense(matrices.M), eigvals_only=True)
    j = np.arange(1, n + 1)
    expected = 2 * math.sqrt(k / mass) * np.sin((j - 1) * math.pi / (2 * n))
    np.testing.assert_allclose(np.sqrt(np.clip(omega_sq, 0, None)), expected, rtol=1e-9, atol=1e-6)
    assert matrices.K_s.shape == (n, 0)


def test_mast_demo_is_a_uniform_fixed_free_chain():
    # The 2 000-segment mast: all its frequencies against the fixed–free formula. M is
    # m·I and K tridiagonal, so the tridiagonal eigen-solver serves.
    system = lumped.load(DEMOS["mast_2000_segments"])
    m = lumped.assemble(system)
    n = m.n
    mass = system.bodies["s1"].mass
    k = system.springs["k1"].stiffness
    assert n == 2000 and all(b.mass == mass for b in system.bodies.values())
    assert all(s.stiffness == k for s in system.springs.values())
    np.testing.assert_array_equal(m.M.diagonal(), np.full(n, mass))
    assert m.M.nnz == n and m.K.nnz == 3 * n - 2  # diagonal M, tridiagonal K
    K = m.K.tocsr()
    omega = np.sqrt(scipy.linalg.eigvalsh_tridiagonal(K.diagonal() / mass, K.diagonal(1) / mass))
    j = np.arange(1, n + 1)
    expected = 2 * math.sqrt(k / mass) * np.sin((2 * j - 1) * math.pi / (2 * (2 * n + 1)))
    np.testing.assert_allclose(omega, expected, rtol=1e-8)


# ---------------------------------------------------------------------------- independent construction


@pytest.mark.parametrize("name", sorted(DEMOS))
def test_every_demo_matches_a_construction_by_hand(name):
    system = lumped.load(DEMOS[name])
    matrices = assert_matches_by_hand(system)
    assert matrices.force_ids == tuple(system.forces)
    assert matrices.element_ids == tuple(system.elements)


def random_system(
    rng: np.random.Generator, n_bodies: int, n_supports: int, inerters: bool
) -> System:
    """A random connected system: a random tree over bodies and supports, then extra
    random elements of every kind (random values; invented)."""
    bodies = {f"b{i}": Body(f"b{i}", float(rng.uniform(0.1, 1e3))) for i in range(n_bodies)}
    supports = {f"s{i}": Support(f"s{i}") for i in range(n_supports)}
    nodes = [*bodies, *supports]
    springs, dampers, extra_inerters = {}, {}, {}
    order = [*rng.permutation(list(supports)), *rng.permutation(list(bodies))]
    for i in range(n_supports, len(order)):  # a spring tree hanging every body on the supports
        a = order[int(rng.integers(0, i))]
        b = order[i]
        pair = (a, b) if rng.random() < 0.5 else (b, a)
        springs[f"k{i}"] = Spring(f"k{i}", pair, float(rng.uniform(1.0, 1e6)))
    for j in range(int(rng.integers(0, 2 * n_bodies + 1))):
        a, b = rng.choice(nodes, size=2, replace=False)
        if a in supports and b in supports:
            continue
        kind = rng.integers(0, 4 if inerters else 3)
        if kind == 0:
            springs[f"ks{j}"] = Spring(f"ks{j}", (a, b), float(rng.uniform(0, 1e5)))
        elif kind == 1:
            dampers[f"c{j}"] = Damper(f"c{j}", (a, b), coefficient=float(rng.uniform(0, 1e4)))
        elif kind == 2:
            dampers[f"c{j}"] = Damper(
                f"c{j}",
                (a, b),
                rebound=float(rng.uniform(0, 1e4)),
                compression=float(rng.uniform(0, 1e4)),
            )
        else:
            extra_inerters[f"i{j}"] = Inerter(f"i{j}", (a, b), float(rng.uniform(0, 50)))
    return System("random", bodies, supports, springs, dampers, extra_inerters)


@settings(max_examples=60, deadline=None)
@given(
    seed=st.integers(0, 2**32 - 1),
    n_bodies=st.integers(1, 12),
    n_supports=st.integers(1, 3),
    inerters=st.booleans(),
)
def test_random_systems_match_a_construction_by_hand(seed, n_bodies, n_supports, inerters):
    system = random_system(np.random.default_rng(seed), n_bodies, n_supports, inerters)
    assert lumped.check_system(system) == []
    matrices = assert_matches_by_hand(system)
    # Symmetric, and K positive definite: every body is held by springs.
    for name in ("M", "C", "K"):
        np.testing.assert_allclose(dense(getattr(matrices, name)), dense(getattr(matrices, name)).T)
    assert np.linalg.eigvalsh(dense(matrices.K)).min() > 0


# ---------------------------------------------------------------------------- inerters


def test_inerter_between_two_bodies_couples_the_masses():
    # An inerter's force is b (a_2 − a_1) — M. C. Smith, "Synthesis of mechanical
    # networks: the inerter", IEEE Trans. Automatic Control 47 (2002) 1648–1662
    # [recalled from memory] — so it enters M like a spring enters K.
    m1, m2, b, k = 5.0, 2.0, 0.75, 1e3
    system = System(
        name="inerter between bodies",
        bodies={"lower": Body("lower", m1), "upper": Body("upper", m2)},
        supports={"ground": Support("ground")},
        springs={
            "k1": Spring("k1", ("ground", "lower"), k),
            "k2": Spring("k2", ("lower", "upper"), k),
        },
        inerters={"flywheel": Inerter("flywheel", ("lower", "upper"), b)},
    )
    m = lumped.assemble(system)
    np.testing.assert_allclose(dense(m.M), [[m1 + b, -b], [-b, m2 + b]], rtol=1e-15)
    np.testing.assert_array_equal(dense(m.M_s), [[0.0], [0.0]])
    assert not m.mass_is_diagonal


def test_inerter_to_a_support_adds_to_the_diagonal_and_to_M_s():
    m1, b, k = 5.0, 0.75, 1e3
    system = System(
        name="inerter to ground",
        bodies={"mass": Body("mass", m1)},
        supports={"ground": Support("ground")},
        springs={"k": Spring("k", ("ground", "mass"), k)},
        inerters={"flywheel": Inerter("flywheel", ("ground", "mass"), b)},
    )
    m = lumped.assemble(system)
    np.testing.assert_allclose(dense(m.M), [[m1 + b]], rtol=1e-15)
    # (m + b) x'' + k x = k u + b u'': M_s = [[−b]].
    np.testing.assert_allclose(dense(m.M_s), [[-b]], rtol=1e-15)
    assert m.mass_is_diagonal
    # Natural frequency √(k/(m+b)).
    omega_sq = scipy.linalg.eigh(dense(m.K), dense(m.M), eigvals_only=True)
    assert math.sqrt(omega_sq[0]) == pytest.approx(math.sqrt(k / (m1 + b)), rel=1e-14)


# ---------------------------------------------------------------------------- state space


def textbook_state_space(m: lumped.Matrices):
    """A = [[0, I], [−M⁻¹K, −M⁻¹C]], B = [[0], [M⁻¹ [−K_s, −C_s, −M_s, P]]] — Ogata,
    Modern Control Engineering, 5th ed., ch. 2 [recalled from memory] — with dense
    solves here."""
    M, K, C = dense(m.M), dense(m.K), dense(m.C)
    n = M.shape[0]
    A = np.block([[np.zeros((n, n)), np.eye(n)], [-np.linalg.solve(M, K), -np.linalg.solve(M, C)]])
    coupling = np.hstack([-dense(m.K_s), -dense(m.C_s), -dense(m.M_s), dense(m.P)])
    B = np.vstack([np.zeros((n, coupling.shape[1])), np.linalg.solve(M, coupling)])
    return A, B


def inerter_system() -> System:
    """Invented: a two-body mount with inerters between the bodies and to the base."""
    return System(
        name="inerter mount",
        bodies={"base_plate": Body("base_plate", 12.0), "payload": Body("payload", 30.0)},
        supports={"floor": Support("floor")},
        springs={"k1": Spring("k1", ("floor", "base_plate"), 2e5), "k2": Spring("k2", ("base_plate", "payload"), 5e4)},
        dampers={"c1": Damper("c1", ("floor", "base_plate"), coefficient=300.0),
                 "c2": Damper("c2", ("base_plate", "payload"), rebound=900.0, compression=500.0)},
        inerters={"b1": Inerter("b1", ("floor", "base_plate"), 4.0), "b2": Inerter("b2", ("base_plate", "payload"), 6.0)},
    )  # fmt: skip


CASES = ["quarter_car", "footbridge_tuned_absorber", "machine_on_mounts", "truck_cab_frame_axle",
         "shuttle_corner_with_seat", "inerters"]  # fmt: skip


def case(name: str) -> System:
    return inerter_system() if name == "inerters" else lumped.load(DEMOS[name])


@pytest.mark.parametrize("name", CASES)
def test_state_space_dense_against_the_textbook_form(name):
    m = lumped.assemble(case(name))
    A, B = textbook_state_space(m)
    ss = lumped.state_space(m, dense=True)
    np.testing.assert_allclose(ss.A, A, rtol=1e-12, atol=1e-12 * abs(A).max())
    np.testing.assert_allclose(ss.B, B, rtol=1e-12, atol=1e-12 * max(abs(B).max(), 1.0))
    n, n_s, n_f = m.n, len(m.support_ids), len(m.force_ids)
    assert ss.state_labels == tuple(f"{b}.displacement" for b in m.body_ids) + tuple(
        f"{b}.velocity" for b in m.body_ids
    )
    assert len(ss.input_labels) == 3 * n_s + n_f == B.shape[1]
    assert ss.A.shape == (2 * n, 2 * n)


@pytest.mark.parametrize("name", CASES)
def test_state_space_operator_gives_the_same_products(name):
    m = lumped.assemble(case(name))
    A, B = textbook_state_space(m)
    ss = lumped.state_space(m, dense=False)
    assert isinstance(ss.A, spla.LinearOperator) and isinstance(ss.B, spla.LinearOperator)
    rng = np.random.default_rng(7)
    for _ in range(5):
        x = rng.standard_normal(A.shape[1])
        w = rng.standard_normal(B.shape[1])
        np.testing.assert_allclose(ss.A @ x, A @ x, rtol=1e-10, atol=1e-10 * abs(A @ x).max())
        np.testing.assert_allclose(
            ss.B @ w, B @ w, rtol=1e-10, atol=1e-10 * max(abs(B @ w).max(), 1.0)
        )
    X = rng.standard_normal((A.shape[1], 3))
    np.testing.assert_allclose(ss.A @ X, A @ X, rtol=1e-10, atol=1e-10 * abs(A @ X).max())


@pytest.mark.parametrize("name", ["quarter_car", "truck_cab_frame_axle", "inerters"])
def test_support_displacement_moves_every_body_with_it_at_rest(name):
    # A steady support displacement u (u' = u'' = 0) carries every body rigidly: the
    # DC gain from u to each displacement is 1 (python-control, computed independently
    # of the library from its A and B).
    m = lumped.assemble(case(name))
    ss = lumped.state_space(m)
    n = m.n
    sys = control.ss(ss.A, ss.B[:, :1], np.hstack([np.eye(n), np.zeros((n, n))]), np.zeros((n, 1)))
    np.testing.assert_allclose(np.ravel(control.dcgain(sys)), np.ones(n), rtol=1e-9)


def test_quarter_car_modes_from_python_control():
    # The state matrix's eigenvalues against python-control's own damping analysis.
    m = lumped.assemble(lumped.load(DEMOS["quarter_car"]))
    A, _ = textbook_state_space(m)
    ss = lumped.state_space(m)
    wn_lib, zeta_lib, _ = control.damp(
        control.ss(ss.A, np.zeros((4, 1)), np.zeros((1, 4)), 0), doprint=False
    )
    wn_ref, zeta_ref, _ = control.damp(
        control.ss(A, np.zeros((4, 1)), np.zeros((1, 4)), 0), doprint=False
    )
    np.testing.assert_allclose(np.sort(wn_lib), np.sort(wn_ref), rtol=1e-10)
    np.testing.assert_allclose(np.sort(zeta_lib), np.sort(zeta_ref), rtol=1e-8)


def test_force_inputs_enter_B_through_their_scale():
    system = lumped.load(DEMOS["machine_on_mounts"])
    m = lumped.assemble(system)
    ss = lumped.state_space(m)
    column = ss.input_labels.index("press_unbalance.force")
    press = m.body_index("press")
    expected = np.zeros(2 * m.n)
    expected[m.n + press] = system.forces["press_unbalance"].scale / system.bodies["press"].mass
    np.testing.assert_allclose(ss.B[:, column], expected, rtol=1e-15)


# ---------------------------------------------------------------------------- nonlinear tables


def test_nonlinear_tables_of_the_quarter_car():
    system = lumped.load(DEMOS["quarter_car"])
    m = lumped.assemble(system)
    nl = m.nonlinear
    spring = system.springs["suspension_spring"]
    damper = system.dampers["suspension_damper"]
    assert [m.element_ids[i] for i in nl.end_stop_index] == ["suspension_spring"]
    np.testing.assert_array_equal(nl.end_stop_gap, [spring.gap])
    np.testing.assert_array_equal(nl.end_stop_stiffness, [spring.gap_stiffness])
    assert (spring.gap, spring.gap_stiffness) == (pytest.approx(0.06), pytest.approx(400e3))
    assert [m.element_ids[i] for i in nl.one_sided_index] == ["tyre"]
    np.testing.assert_array_equal(nl.one_sided_sign, [1.0])  # compression only
    assert [m.element_ids[i] for i in nl.asymmetric_index] == ["suspension_damper"]
    np.testing.assert_array_equal(nl.asymmetric_rebound, [damper.rebound])
    np.testing.assert_array_equal(nl.asymmetric_compression, [damper.compression])
    assert len(nl.curve_index) == 0 and nl.count == 3


def test_nonlinear_tables_of_the_truck():
    system = lumped.load(DEMOS["truck_cab_frame_axle"])
    m = lumped.assemble(system)
    nl = m.nonlinear
    assert [m.element_ids[i] for i in nl.end_stop_index] == ["leaf_springs"]
    assert [m.element_ids[i] for i in nl.one_sided_index] == ["tyres"]
    assert len(nl.asymmetric_index) == 0
    assert [m.element_ids[i] for i in nl.curve_index] == ["axle_dampers"]
    curve = system.dampers["axle_dampers"].curve
    o, p = nl.curve_offset[0], nl.curve_offset[1]
    np.testing.assert_array_equal(nl.curve_velocity[o:p], [v for v, _ in curve])
    np.testing.assert_array_equal(nl.curve_force[o:p], [f for _, f in curve])
    # The file's curve in SI: m/s and N.
    np.testing.assert_allclose(nl.curve_velocity[o:p], [-1, -0.3, 0, 0.3, 1])
    np.testing.assert_allclose(nl.curve_force[o:p], [-9e3, -4.5e3, 0, 7.5e3, 14e3])
    assert nl.count == 3


@pytest.mark.parametrize("name", sorted(DEMOS))
def test_nonlinear_tables_list_exactly_the_nonlinear_items(name):
    system = lumped.load(DEMOS[name])
    m = lumped.assemble(system)
    nl = m.nonlinear
    ids = m.element_ids
    assert {ids[i] for i in nl.end_stop_index} == {
        s.id for s in system.springs.values() if s.gap is not None
    }
    assert {ids[i] for i in nl.one_sided_index} == {
        s.id for s in system.springs.values() if s.acts != "both"
    }
    assert {ids[i] for i in nl.asymmetric_index} == {
        d.id for d in system.dampers.values() if d.rebound is not None
    }
    assert {ids[i] for i in nl.curve_index} == {
        d.id for d in system.dampers.values() if d.curve is not None
    }
    signs = {ids[i]: s for i, s in zip(nl.one_sided_index, nl.one_sided_sign, strict=True)}
    assert signs == {
        s.id: (1.0 if s.acts == "compression" else -1.0)
        for s in system.springs.values()
        if s.acts != "both"
    }


@pytest.mark.parametrize("name", DEMOS)
def test_the_system_graph_is_what_networkx_builds_from_the_same_items(name, monkeypatch):
    # The graph's edges are written into networkx's adjacency directly (for speed);
    # they must be what networkx's own add_edges_from builds from the same items: the
    # same nodes, edges, keys and data, one key dict shared by both directions
    # (networkx's MultiGraph structure is the reference here).
    import networkx as nx

    import lumped.model

    system = lumped.load(lumped.demo_path(name))
    monkeypatch.setattr(lumped.model, "_add_edges", lambda graph, edges: graph.add_edges_from(edges))
    reference = lumped.model.build_graph(system)
    graph = system.graph
    assert graph.graph == reference.graph
    assert list(graph.nodes(data=True)) == list(reference.nodes(data=True))
    assert list(graph.edges(keys=True, data=True)) == list(reference.edges(keys=True, data=True))
    assert nx.utils.graphs_equal(graph, reference)
    for u, v in reference.edges():
        assert graph._adj[u][v] is graph._adj[v][u]


@given(st.integers(0, 10_000), st.integers(2, 12), st.integers(0, 4), st.integers(1, 30))
@settings(max_examples=40, deadline=None)
def test_congruence_is_scipys_product_of_the_incidence(seed, bodies, supports, elements):
    # Dᵀ diag(x) R summed element by element equals scipy.sparse's product of the
    # three matrices; zero values leave no stored entries (a coupling block with no
    # inerter must have none: the engine reads its entries).
    import scipy.sparse as sp

    from lumped.assemble import congruence

    rng = np.random.default_rng(seed)
    nodes = bodies + supports
    ends = np.array([rng.choice(nodes, size=2, replace=False) for _ in range(elements)])
    signed = sp.csr_matrix((np.tile([-1.0, 1.0], elements), (np.repeat(np.arange(elements), 2), ends.ravel())),
                           shape=(elements, nodes))  # fmt: skip
    D, D_s = signed[:, :bodies].tocsr(), signed[:, bodies:].tocsr()
    values = rng.uniform(0.5, 2.0, elements) * (rng.random(elements) < 0.7)
    mass = rng.uniform(1.0, 3.0, bodies)
    expected = D.T @ sp.diags_array(values) @ D
    np.testing.assert_allclose(congruence(D, values).toarray(), expected.toarray(), rtol=1e-14, atol=0)
    np.testing.assert_allclose(congruence(D, values, D_s).toarray(), (D.T @ sp.diags_array(values) @ D_s).toarray(),
                               rtol=1e-14, atol=0)  # fmt: skip
    np.testing.assert_allclose(congruence(D, values, diagonal=mass).toarray(), expected.toarray() + np.diag(mass),
                               rtol=1e-14, atol=0)  # fmt: skip
    assert not np.any(congruence(D, np.zeros(elements), D_s).data != 0) and congruence(D, np.zeros(elements)).nnz == 0
