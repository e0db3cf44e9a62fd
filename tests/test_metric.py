import functools

import astropy.units as u
import numpy as np
import pytest
import sympy as sp
from references_cost import coherent_sqrt_det_3, refinement_fddot, refinement_fdot

from cwlimits.errors import InputError, UnitsMismatchError
from cwlimits.searchspace.metric import (
    coherent_metric,
    coherent_sqrt_det,
    contiguous_mid_times,
    numeric_coherent_metric,
    refinement_factors,
    semicoherent_metric,
    semicoherent_sqrt_det,
)

DAY = 86400.0
_t, _T = sp.symbols("t T", positive=True)


@functools.cache
def _sympy_metric(n, lo, hi):
    """Exact metric <d_k phi d_l phi> - <d_k phi><d_l phi> over [lo, hi] (reference: sympy)."""
    d = [2 * sp.pi * _t ** (k + 1) / sp.factorial(k + 1) for k in range(n)]
    length = hi - lo

    def avg(e):
        return sp.integrate(e, (_t, lo, hi)) / length

    return sp.Matrix(n, n, lambda i, j: sp.simplify(avg(d[i] * d[j]) - avg(d[i]) * avg(d[j])))


def _sympy_numeric(n, t_seg_s, offset_s=0.0):
    lo = sp.Rational(offset_s) - _T / 2
    hi = sp.Rational(offset_s) + _T / 2
    m = _sympy_metric(n, lo, hi)
    return np.array(m.subs(_T, sp.Rational(t_seg_s)).evalf(30), dtype=float)


@pytest.mark.parametrize("n", [1, 2, 3, 4])
def test_metric_entries_match_sympy(n):
    # reference: exact symbolic integration with sympy, spin-down orders 0 to n-1
    got = coherent_metric(2 * DAY * u.s, n)
    want = _sympy_numeric(n, 2 * DAY)
    np.testing.assert_allclose(got, want, rtol=1e-12, atol=0)


def test_metric_entries_with_offset_reference_time_match_sympy():
    # reference: sympy, segment [1.5 d - T/2, 1.5 d + T/2] about the reference time
    got = coherent_metric(1 * u.day, 3, ref_offset=1.5 * u.day)
    want = _sympy_numeric(3, DAY, 1.5 * DAY)
    np.testing.assert_allclose(got, want, rtol=1e-9)


@pytest.mark.parametrize("n", [1, 2, 3, 4])
def test_sqrt_det_matches_sympy(n):
    # reference: sqrt(det) of the exact sympy metric, as a function of T
    expr = sp.sqrt(_sympy_metric(n, -_T / 2, _T / 2).det())
    t = 3.3 * DAY
    want = float(expr.subs(_T, t).evalf(30))
    assert coherent_sqrt_det(t * u.s, n).to_value(u.s ** (n * (n + 1) // 2)) == \
        pytest.approx(want, rel=1e-12)


def test_sqrt_det_three_parameters_closed_form():
    # reference: pi^3 T^6 / (360 sqrt 105) in plain SI coordinates (references_cost), which
    # sympy confirms symbolically here
    expr = sp.simplify(sp.sqrt(_sympy_metric(3, -_T / 2, _T / 2).det()))
    assert sp.simplify(expr - sp.pi ** 3 * _T ** 6 / (360 * sp.sqrt(105))) == 0
    t = np.array([1.0, 10.0, 100.0]) * DAY
    got = coherent_sqrt_det(t * u.s, 3)
    assert got.unit == u.s ** 6
    np.testing.assert_allclose(got.value, [coherent_sqrt_det_3(x) for x in t], rtol=1e-12)


def test_sqrt_det_scalar_array_broadcast():
    # reference: the sympy closed form, scalar, array and 2-d broadcast
    scalar = coherent_sqrt_det(1 * u.day)
    assert scalar.shape == ()
    grid = coherent_sqrt_det(np.array([[1.0], [2.0]]) * np.array([1, 3, 9]) * u.day)
    assert grid.shape == (2, 3)
    np.testing.assert_allclose(grid[1, 2].value, coherent_sqrt_det_3(18 * DAY), rtol=1e-12)


def test_det_does_not_depend_on_reference_time():
    # reference: the Taylor map between reference times has unit determinant
    # (Prix 2007, gr-qc/0606088), so det g is the same for any reference time
    t = np.array([1.0, 5.0])[:, None] * u.day
    offsets = np.array([0.0, 0.3, -2.0, 7.5]) * u.day        # broadcast (2, 1) x (4,)
    g = coherent_metric(t, 3, ref_offset=offsets)
    assert g.shape == (2, 4, 3, 3)
    # scale each entry by T^(k+l+2) so the determinants are of order one before comparing
    k = np.arange(3) + 1
    scale = t.to_value(u.s)[..., None, None] ** (k[:, None] + k[None, :])
    dets = np.linalg.det(g / scale)
    # rtol: np.linalg.det of the far-offset metric (condition number ~1e12) loses digits
    np.testing.assert_allclose(dets, np.broadcast_to(dets[:, :1], dets.shape), rtol=1e-7)
    assert not np.allclose(g[0, 0], g[0, 2])       # the entries themselves do change


def test_numeric_metric_agrees_with_analytic():
    # reference: scipy.integrate.quad_vec quadrature of the phase derivatives against the
    # exact polynomial averages; scalar, array and broadcast inputs
    t = np.array([1.0, 4.0]) * u.day
    off = np.array([[0.0], [2.0]]) * u.day
    num = numeric_coherent_metric(t, 3, ref_offset=off)
    ana = coherent_metric(t, 3, ref_offset=off)
    assert num.shape == (2, 2, 3, 3)
    np.testing.assert_allclose(num, ana, rtol=1e-8, atol=1e-8 * np.abs(ana).max())
    np.testing.assert_allclose(numeric_coherent_metric(1 * u.day, 2),
                               coherent_metric(1 * u.day, 2), rtol=1e-9, atol=1e-3)


def test_numeric_metric_custom_phase_matches_sympy():
    # reference: sympy covariance of the derivatives of phi = a sin(w t) + b t over [-T/2, T/2]
    w = 2 * sp.pi / sp.Integer(86400)
    d = [sp.sin(w * _t), _t]
    t_seg = sp.Integer(50000)

    def avg(e):
        return sp.integrate(e, (_t, -t_seg / 2, t_seg / 2)) / t_seg

    want = np.array([[float((avg(a * b) - avg(a) * avg(b)).evalf(30)) for b in d] for a in d])
    got = numeric_coherent_metric(50000 * u.s, 2, derivatives=lambda ts: np.array(
        [np.sin(2 * np.pi / 86400 * ts), ts]))
    np.testing.assert_allclose(got, want, rtol=1e-9, atol=1e-12)


def test_refinement_factors_contiguous_pletsch():
    # reference: Pletsch 2010, arXiv:1005.0395: sqrt(5N^2-4) (fdot), and
    # sqrt((35N^4-140N^2+108)/3) (fddot) for N contiguous segments
    n = np.array([1, 2, 3, 7, 20, 100, 1000])
    gam = refinement_factors(n, n_dims=3)
    assert gam.shape == (7, 3)
    np.testing.assert_allclose(gam[:, 0], 1.0, rtol=1e-9)
    np.testing.assert_allclose(gam[:, 1], [refinement_fdot(x) for x in n], rtol=1e-9)
    np.testing.assert_allclose(gam[:, 2], [refinement_fddot(x) for x in n], rtol=1e-8)
    # scalar and broadcast (2-d) inputs
    two = refinement_factors(5, n_dims=2)
    assert float(two[1]) == pytest.approx(refinement_fdot(5), rel=1e-12)
    grid = refinement_factors(np.array([[2, 3], [4, 5]]))
    assert grid.shape == (2, 2, 3)
    assert float(grid[1, 1, 2]) == pytest.approx(refinement_fddot(5), rel=1e-10)


def test_semicoherent_ratio_of_determinants_is_product_of_refinements():
    # reference: Pletsch 2010: the template-density ratio is gamma_1 * gamma_2
    t = 2 * u.day
    ratio = semicoherent_sqrt_det(t, 12) / coherent_sqrt_det(t)
    assert ratio.to_value(u.one) == pytest.approx(refinement_fdot(12) * refinement_fddot(12),
                                                  rel=1e-9)


def test_semicoherent_sqrt_det_scalar_array_broadcast():
    # reference: sqrt(det g_semi) = gamma_1 gamma_2 sqrt(det g_coh) (Pletsch 2010) with
    # sqrt(det g_coh) = pi^3 T^6/(360 sqrt 105); T (2, 1) against N (3,) broadcasts to (2, 3)
    t = np.array([[1.0], [3.0]]) * u.day
    n = np.array([1, 4, 9])
    got = semicoherent_sqrt_det(t, n)
    assert got.shape == (2, 3) and got.unit == u.s ** 6
    want = np.array([[coherent_sqrt_det_3(ti * DAY) * refinement_fdot(ni) * refinement_fddot(ni)
                      for ni in n] for ti in (1.0, 3.0)])
    np.testing.assert_allclose(got.value, want, rtol=1e-9)
    assert semicoherent_sqrt_det(1 * u.day, 1).shape == ()


def test_semicoherent_with_gaps_matches_sympy_average():
    # reference: sympy, the average over the segments [m_i - T/2, m_i + T/2] of the exact
    # metric with one common reference time (the mean of the mid-times) - no Taylor map used
    t_seg = DAY
    mids = np.array([0.5, 3.5, 4.5, 10.0]) * DAY
    ref = mids.mean()
    want = sum(_sympy_numeric(3, t_seg, m - ref) for m in mids) / len(mids)
    got = semicoherent_metric(t_seg * u.s, mid_times=mids * u.s)
    np.testing.assert_allclose(got, want, rtol=1e-8, atol=1e-10 * np.abs(want).max())
    # gaps make the span longer, so the refinement is larger than for contiguous segments
    gaps = refinement_factors(mid_times=mids * u.s, t_seg=t_seg * u.s)
    assert np.all(gaps[1:] > refinement_factors(4)[1:])


def test_contiguous_mid_times_give_the_contiguous_metric():
    # reference: Pletsch 2010 definition (the two input forms describe the same segments)
    t = 3 * u.day
    a = semicoherent_metric(t, n_seg=6)
    b = semicoherent_metric(t, mid_times=contiguous_mid_times(t, 6) + 17 * u.day)
    np.testing.assert_allclose(a, b, rtol=1e-10)
    # array of segment counts broadcasts (padded internally)
    many = semicoherent_metric(t, n_seg=np.array([1, 6]))
    np.testing.assert_allclose(many[1], a, rtol=1e-12)
    np.testing.assert_allclose(many[0], coherent_metric(t), rtol=1e-12)


def test_bad_inputs():
    with pytest.raises(InputError, match="n_dims"):
        coherent_metric(1 * u.day, 5)
    with pytest.raises(InputError, match="positive"):
        coherent_sqrt_det(-1 * u.day)
    with pytest.raises(UnitsMismatchError):
        coherent_metric(1 * u.Hz)
    with pytest.raises(UnitsMismatchError):
        coherent_metric(86400.0)
    with pytest.raises(InputError, match="n_seg"):
        semicoherent_metric(1 * u.day, n_seg=0)
    with pytest.raises(InputError, match="n_seg"):
        contiguous_mid_times(1 * u.day, 0)
    with pytest.raises(InputError, match="t_seg"):
        refinement_factors(mid_times=[1, 2] * u.day)
