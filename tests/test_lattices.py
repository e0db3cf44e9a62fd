import itertools
import math

import astropy.units as u
import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from references_cost import (
    G_A2,
    G_A3STAR,
    G_ZN,
    THICKNESS_ANSTAR_TABLE,
    THICKNESS_TABLE_RTOL,
    normalised_thickness_anstar,
    normalised_thickness_zn,
)
from references_cost import ball_volume as ball_volume_ref
from scipy import optimize, stats

from cwlimits.errors import InputError
from cwlimits.searchspace.lattices import (
    Lattice,
    ball_volume,
    get_lattice,
    nearest_template,
    sample_mismatch,
)
from cwlimits.searchspace.metric import coherent_metric


def test_ball_volume_scalar_array_broadcast():
    # reference: V_1 = 2, V_2 = pi, V_3 = 4 pi / 3 (common practice) and the Gamma-function
    # form (SPLAG Ch. 1)
    assert float(ball_volume(1)) == pytest.approx(2.0)
    np.testing.assert_allclose(ball_volume(np.array([2, 3])), [math.pi, 4 * math.pi / 3])
    grid = ball_volume(np.array([[1], [4]]) + np.array([0, 1]))
    np.testing.assert_allclose(grid, [[ball_volume_ref(n) for n in row]
                                      for row in [[1, 2], [4, 5]]])


@pytest.mark.parametrize("n", [1, 2, 3, 4])
def test_thickness_matches_conway_sloane(n):
    # reference: closed forms of SPLAG Ch. 2/4 and Prix 2007 (see references_cost)
    zn, an = Lattice("cubic", n), Lattice("covering", n)
    assert zn.normalised_thickness == pytest.approx(normalised_thickness_zn(n), rel=1e-12)
    assert an.normalised_thickness == pytest.approx(normalised_thickness_anstar(n), rel=1e-12)
    # Theta = V_n theta (SPLAG Ch. 2, Sect. 1.2)
    assert an.thickness == pytest.approx(ball_volume_ref(n) * normalised_thickness_anstar(n),
                                         rel=1e-12)
    assert zn.thickness == pytest.approx(ball_volume_ref(n) * normalised_thickness_zn(n),
                                         rel=1e-12)
    # and the printed table of thinnest coverings (SPLAG Table 2.1, from memory)
    assert Lattice("covering", n).thickness == pytest.approx(THICKNESS_ANSTAR_TABLE[n],
                                                        rel=THICKNESS_TABLE_RTOL.rtol)


@pytest.mark.parametrize("kind, n", [("covering", 2), ("covering", 3), ("covering", 4),
                                     ("cubic", 3)])
def test_covering_radius_is_one(kind, n):
    # reference: the thickness closed forms assume a covering radius R; here the largest
    # distance to the nearest point is searched numerically (random starts, then
    # scipy.optimize from the worst ones) and must be R = 1 in the lattice's units
    lat = Lattice(kind, n)
    rng = np.random.default_rng(4)
    x = rng.random((20000, n)) @ lat.generator
    d2 = ((x - lat.nearest_point(x)) ** 2).sum(-1)
    assert d2.max() <= 1 + 1e-12
    best = 0.0
    for start in x[np.argsort(d2)[-5:]]:
        for _ in range(3):          # restarts: Nelder-Mead stalls on the cell's facets
            res = optimize.minimize(lambda p: -((p - lat.nearest_point(p)) ** 2).sum(),
                                    start, method="Nelder-Mead",
                                    options={"xatol": 1e-10, "fatol": 1e-13,
                                             "adaptive": True, "maxiter": 20000})
            start = res.x
        best = max(best, -res.fun)
    # a wrong covering radius in the closed forms would be off by far more than 1e-5
    assert best == pytest.approx(1.0, abs=1e-5)


@pytest.mark.parametrize("n", [1, 2, 3, 4])
def test_nearest_point_matches_brute_force(n):
    # reference: exhaustive search over lattice points near the rounded basis coordinates
    # (the definition of the nearest point), against the SPLAG Ch. 20 algorithm
    lat = Lattice("covering", n)
    rng = np.random.default_rng(n)
    x = rng.normal(scale=3.0, size=(3000, n))
    got = lat.nearest_point(x)
    g = lat.generator
    base = np.rint(np.linalg.solve(g.T, x.T).T)
    best = np.full(len(x), np.inf)
    for shift in itertools.product(range(-2, 3), repeat=n):
        p = (base + shift) @ g
        best = np.minimum(best, ((x - p) ** 2).sum(-1))
    np.testing.assert_allclose(((x - got) ** 2).sum(-1), best, rtol=1e-9, atol=1e-12)
    # the result is a lattice point: integer coordinates in the basis
    coeff = np.linalg.solve(g.T, got.T).T
    np.testing.assert_allclose(coeff, np.rint(coeff), atol=1e-9)


def test_nearest_point_shapes():
    lat = Lattice("covering", 2)
    assert lat.nearest_point([0.1, 0.2]).shape == (2,)
    assert lat.nearest_point(np.zeros((4, 5, 2))).shape == (4, 5, 2)
    with pytest.raises(InputError, match="last axis"):
        lat.nearest_point(np.zeros((3, 3)))


@pytest.mark.parametrize("n", [1, 2, 3, 4])
def test_mean_mismatch_factor_zn_is_one_third(n):
    # reference: offsets uniform on [-1/2, 1/2]^n: <|x|^2> = n/12, R^2 = n/4 (common practice)
    lat = Lattice("cubic", n)
    assert lat.mean_mismatch_factor == pytest.approx(1 / 3)
    assert lat.normalised_second_moment == pytest.approx(G_ZN, rel=1e-12)


def test_anstar_second_moment_matches_tables():
    # reference: G(A_2*) = 5/(36 sqrt 3) and G(A_3*) = 0.0785433 (SPLAG Table 2.3)
    assert Lattice("covering", 2).normalised_second_moment == pytest.approx(G_A2.value,
                                                                       rel=G_A2.rtol)
    assert Lattice("covering", 3).normalised_second_moment == pytest.approx(G_A3STAR.value,
                                                                       rel=G_A3STAR.rtol)
    # A_1* is the integer lattice: G = 1/12
    assert Lattice("covering", 1).normalised_second_moment == pytest.approx(1 / 12, rel=1e-4)


def test_sampler_z1_distribution():
    # reference: for Z^1 the offset is uniform, so mu/mu_max = (2u)^2 with u ~ U(0, 1/2)
    # has CDF sqrt(m); Kolmogorov-Smirnov test with scipy.stats (fixed seed)
    mu = sample_mismatch("cubic", 1, 0.5, size=4000, rng=11)
    assert mu.min() >= 0 and mu.max() <= 0.5
    res = stats.kstest(mu / 0.5, lambda m: np.sqrt(np.clip(m, 0, 1)))
    assert res.pvalue > 1e-3


@pytest.mark.parametrize("kind, n", [("covering", 2), ("covering", 3), ("cubic", 3),
                                     ("covering", 4)])
def test_sampler_mean_matches_factor(kind, n):
    # reference: the mean-mismatch factor (SPLAG second moments above); Monte-Carlo with a
    # fixed seed, tolerance 4 standard errors
    lat = get_lattice(kind, n)
    mu = lat.sample_mismatch(0.4, size=20000, rng=np.random.default_rng(7))
    assert mu.max() <= 0.4 * (1 + 1e-12)
    err = mu.std() / math.sqrt(mu.size)
    assert abs(mu.mean() - 0.4 * lat.mean_mismatch_factor) < 4 * err


def test_sampler_scalar_array_broadcast_and_seed():
    a = sample_mismatch("covering", 3, 0.3, size=5, rng=1)
    b = sample_mismatch("covering", 3, 0.3, size=5, rng=1)
    np.testing.assert_array_equal(a, b)                       # fixed seed reproduces
    assert np.ndim(sample_mismatch("cubic", 2, 0.3, size=(), rng=2)) == 0
    arr = sample_mismatch(Lattice("covering", 2), 2, np.array([0.1, 0.5]), size=(1000, 2), rng=3)
    assert arr.shape == (1000, 2)
    assert arr[:, 0].max() <= 0.1 and arr[:, 1].max() <= 0.5 and arr[:, 1].max() > 0.1
    grid = sample_mismatch("covering", 2, np.array([[0.1], [0.2]]), size=(2, 3), rng=4)
    assert grid.shape == (2, 3)
    with pytest.raises(InputError, match="max_mismatch"):
        sample_mismatch("covering", 2, 0.0)
    with pytest.raises(InputError, match="max_mismatch"):
        sample_mismatch("covering", 2, 1.5)


@pytest.mark.parametrize("kind", ["covering", "cubic"])
def test_covering_with_a_phase_metric(kind):
    # reference: the covering property (no point farther than mu_max from its template) and
    # the mean-mismatch factor; random points in a small (f, fdot, fddot) box spanning ~60
    # templates per direction; fixed seed; tolerance 4 standard errors plus a 1 % allowance
    # for the box edges (the box is not a whole number of lattice cells)
    g = coherent_metric(1 * u.day, 3)
    mu_max = 0.3
    widths = 60 * np.sqrt(mu_max / np.diag(g))
    rng = np.random.default_rng(2024)
    pts = np.array([100.0, -1e-9, 1e-18]) + rng.random((20000, 3)) * widths
    templates, mu = nearest_template(pts, g, mu_max, kind)
    assert templates.shape == pts.shape
    assert mu.max() <= mu_max * (1 + 1e-9)
    factor = get_lattice(kind, 3).mean_mismatch_factor
    err = mu.std() / math.sqrt(mu.size)
    assert abs(mu.mean() - factor * mu_max) < 4 * err + 0.01 * factor * mu_max


def test_nearest_template_single_point_and_origin():
    # reference: a template of the bank is its own nearest template (mismatch 0), and a
    # point at a known whitened offset has that mismatch (definition of the metric)
    g = coherent_metric(1 * u.day, 2)
    origin = np.array([100.0, -1e-9])
    t, mu = nearest_template(origin, g, 0.2, origin=origin)
    np.testing.assert_allclose(t, origin, rtol=0, atol=1e-15)
    assert mu.shape == () and float(mu) == pytest.approx(0.0, abs=1e-20)
    step = np.array([0.1 * math.sqrt(0.2 / g[0, 0]), 0.0])     # mismatch 0.01 * 0.2
    _, mu = nearest_template(origin + step, g, 0.2, origin=origin)
    assert float(mu) == pytest.approx(0.002, rel=1e-6)


def test_nearest_template_bad_inputs():
    g = coherent_metric(1 * u.day, 2)
    with pytest.raises(InputError, match="max_mismatch"):
        nearest_template(np.zeros(2), g, 0.0)
    with pytest.raises(InputError, match="metric"):
        nearest_template(np.zeros(3), g, 0.2)
    with pytest.raises(InputError, match="positive definite"):
        nearest_template(np.zeros(2), -g, 0.2)


def test_bad_lattice_names():
    with pytest.raises(InputError, match="unknown lattice"):
        Lattice("D4", 4)
    with pytest.raises(InputError, match="dimension"):
        Lattice("cubic", 0)
    assert Lattice("Covering", 2).kind == "covering" and Lattice("CUBIC", 2).kind == "cubic"
    # names of earlier versions get a message naming the new one
    with pytest.raises(InputError, match="now called 'covering'"):
        Lattice("An*", 2)
    with pytest.raises(InputError, match="now called 'cubic'"):
        Lattice("Zn", 2)


@settings(max_examples=60, deadline=None)
@given(n=st.integers(1, 4), kind=st.sampled_from(["covering", "cubic"]),
       x=st.lists(st.floats(-50, 50), min_size=4, max_size=4))
def test_nearest_point_properties(n, kind, x):
    # reference: definitions - the nearest point is within the covering radius (1 here),
    # is a fixed point of the map, and moving x by a lattice vector moves it by the same
    lat = get_lattice(kind, n)
    x = np.array(x[:n])
    p = lat.nearest_point(x)
    assert ((x - p) ** 2).sum() <= 1 + 1e-9
    np.testing.assert_allclose(lat.nearest_point(p), p, atol=1e-9)
    shift = np.array([3, -1, 2, 1][:n]) @ lat.generator
    d_shift = ((x + shift - lat.nearest_point(x + shift)) ** 2).sum()
    assert d_shift == pytest.approx(((x - p) ** 2).sum(), abs=1e-9)
