"""A directed mock search: barycentric resampling, lattice template banks, StackSlide.

This is the search a plan of :mod:`cwlimits.searchspace.searchsetup` describes, run on
simulated band data (:mod:`cwlimits.simulation.synthetic`) at one known sky position:

1. **Barycentric resampling.**  Per detector and segment the heterodyned series is
   demodulated by the known sky position: z'(t) = z(t) exp(-2 pi i f_ref Delta(t)), with
   Delta(t) the Roemer delay of astropy (:meth:`BandData.delay`), so that a signal becomes
   z' = A(t) exp(2 pi i [df tau_b + fdot tau_b^2 / 2]) in the barycentric time
   tau_b = t - t_ref + Delta(t).  z' is then interpolated to a grid uniform in tau_b
   (spacing 1/B) with a Kaiser-windowed sinc of ``taps`` samples, the band-limited
   interpolation of the sampled series (Smith & Gossett 1984, "A flexible sampling-rate
   conversion method", ICASSP; Kaiser window: Kaiser & Schafer 1980, IEEE Trans. ASSP 28,
   105; both from memory).  The amplitude patterns a(t), b(t) are interpolated linearly (they
   vary on half a sidereal day), the data mask is taken from the nearest sample.  This is
   the resampling technique of Patel et al. 2010 (arXiv:0912.4255, from memory).
2. **Coherent stage.**  Per segment the templates are the points of the setup's lattice
   (``cubic`` Z^2 or ``covering`` A_2*) in (f, fdot) at the segment's barycentric mid-time,
   laid out with the coherent metric (:func:`cwlimits.searchspace.metric.coherent_metric`)
   and the coherent maximum mismatch: in whitened coordinates u = sqrt(g) lambda / sqrt(mu)
   the lattice has covering radius 1.  The lattice is rotated (QR) so that one basis vector
   lies along f: its points then form rows of constant fdot, each row a comb in f of
   spacing df_lat with a row offset.  A row is one FFT of the resampled series (the chirp
   of fdot and the row offset applied in the time domain), of length L = r B / df_lat
   rounded up to an integer, so that every r-th FFT bin is a lattice point (the rounding
   makes the comb denser than the lattice by less than 1/L).  2F_k is the JKS F-statistic
   of :mod:`cwlimits.simulation.fstat` (JKS 1998 eq. 37 in that module's normalisation).
   Cost: one FFT per detector, segment, filter (a, b) and fdot row.
3. **Semicoherent stage.**  The fine templates are the points of the same lattice kind laid
   out with the semicoherent metric (:func:`cwlimits.searchspace.metric.semicoherent_metric`,
   at the segments' barycentric mid-times) and the semicoherent maximum mismatch, inside
   the searched box.  2F_sum(f, fdot) = sum_k 2F_k(nearest coherent template of the point
   (f + fdot (t_k - t_ref), fdot)) (StackSlide; Pletsch 2010, arXiv:1005.0395; Wette 2012,
   arXiv:1111.5650); the nearest coherent template is the lattice's nearest point
   (:meth:`cwlimits.searchspace.lattices.Lattice.nearest_point`, Conway & Sloane SPLAG
   Ch. 20).

:func:`demodulated_fstat` evaluates the same statistic without resampling, by explicit sums
of the exact Doppler phase at the detector samples (for checks and the benchmark), and
:func:`resampled_direct_fstat` evaluates the F-statistic on the resampled series by explicit
sums (no FFT), which the search equals to rounding.

Assumptions: known sky position (directed search); Roemer delay only (the Einstein and
Shapiro delays, <= 1.7 ms, are left out for injections and templates alike); frequency,
spin-down and (with ``fddot_box``) its derivative, no higher ones; known noise level per
detector and segment; the searched frequencies lie in the inner part of the band, where the
interpolator's response is flat.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING

import astropy.units as u
import numpy as np
from scipy.special import i0

from cwlimits._sizes import check_size
from cwlimits.errors import InputError
from cwlimits.searchspace.lattices import get_lattice
from cwlimits.searchspace.metric import coherent_metric, semicoherent_metric
from cwlimits.simulation.fstat import _abc, _coherent_stage, _psd_values, _two_f, _weights
from cwlimits.simulation.synthetic import BandData, _check_coord

if TYPE_CHECKING:
    from astropy.coordinates import SkyCoord

    from cwlimits.searchspace.searchsetup import SearchSetup

__all__ = [
    "BarycentricData",
    "TemplateBank",
    "MockSearchResult",
    "resample_to_barycentre",
    "lattice_rows",
    "mock_search",
    "resampled_direct_fstat",
    "demodulated_fstat",
]

FDOT_UNIT = u.Hz / u.s
FDDOT_UNIT = u.Hz / u.s**2

#: Default length of the windowed-sinc interpolator (samples) and the Kaiser shape.
DEFAULT_TAPS = 32
KAISER_BETA = 8.0


# ------------------------------------------------------------------- resampling

@dataclass(frozen=True, eq=False)
class BarycentricData:
    """Band data resampled to a grid uniform in barycentric time, per segment.

    Attributes
    ----------
    wz : ndarray complex (n_det, n_seg, M)
        Noise-weighted resampled series w z' (w = mask dt / S_n).
    a, b : ndarray (n_det, n_seg, M)
        sin(zeta) a(t), sin(zeta) b(t) at the resampled samples.
    w : ndarray (n_det, n_seg, M)
        The weights w.
    mid_s : ndarray (n_seg,)
        Barycentric mid-time of each segment's grid, seconds from the data's t_ref.
    dt_s : float
        Sample spacing 1/B (s).
    t_seg_s : float
        Segment length M / B (s).
    f_ref_hz, bandwidth_hz : float
    """

    wz: np.ndarray
    a: np.ndarray
    b: np.ndarray
    w: np.ndarray
    mid_s: np.ndarray
    dt_s: float
    t_seg_s: float
    f_ref_hz: float
    bandwidth_hz: float

    @property
    def n_seg(self):
        """Number of segments."""
        return int(self.wz.shape[1])

    @property
    def n_samples(self):
        """Samples per segment."""
        return int(self.wz.shape[2])


def _kaiser_sinc(d, half):
    """Kaiser-windowed sinc weights at distances ``d`` (samples), zero for |d| >= half."""
    x = np.clip(1.0 - (d / half) ** 2, 0.0, None)
    return np.sinc(d) * i0(KAISER_BETA * np.sqrt(x)) / i0(KAISER_BETA)


def resample_to_barycentre(data, coord: SkyCoord, *, noise="true",
                           taps: int = DEFAULT_TAPS) -> BarycentricData:
    """Demodulate by the sky position and resample to a uniform barycentric-time grid.

    Parameters
    ----------
    data : BandData
    coord : SkyCoord
        The known sky position.
    noise : {'true', 'median'} or Quantity ['1/frequency']
        Noise level per detector and segment (as in
        :func:`cwlimits.simulation.fstat.stackslide_fstat`).
    taps : int
        Length of the windowed-sinc interpolator (even, >= 4).

    Returns
    -------
    BarycentricData

    Notes
    -----
    Segment k's grid is tau_b = s_k + j / B, j = 0..M-1, with s_k = (start_k - t_ref) +
    Delta_1(mid_k) (Delta of the first detector at the segment middle, common to all
    detectors).  The detector time of each grid sample solves t + Delta(t) = tau_b (three
    fixed-point steps; Delta changes by < 1e-4 s per s).  Grid samples that fall outside the
    segment or into a gap carry no weight.  See the module notes for the interpolator.
    """
    if not isinstance(data, BandData):
        raise InputError("data must be a cwlimits.simulation.synthetic.BandData",
                         value=type(data).__name__)
    coord = _check_coord(coord)
    taps = int(taps)
    if taps < 4 or taps % 2:
        raise InputError("taps must be an even whole number >= 4", value=taps)
    n_det, n_seg, m = data.data.shape
    check_size("mock_samples", n_det * n_seg * m * taps,
               f"resampling {n_det} x {n_seg} x {m} samples x {taps} taps")
    dt = data.dt.to_value(u.s)
    f_ref = data.f_ref.to_value(u.Hz)
    tau = (data.times - data.t_ref).to_value(u.s)             # (n_seg, M)
    delta = data.delay(coord)                                 # (n_det, n_seg, M)
    a_det, b_det = data.modulation(coord)
    psd = _psd_values(data, noise)
    zd = data.data * np.exp(-2j * np.pi * f_ref * delta)
    s0 = tau[:, 0] + delta[0, :, (m - 1) // 2]
    grid = s0[:, None] + np.arange(m)[None, :] * dt          # (n_seg, M)
    half = taps // 2
    k_rel = np.arange(-half + 1, half + 1)
    out = np.zeros_like(zd)
    a = np.empty_like(a_det)
    b = np.empty_like(b_det)
    mask = np.zeros(data.mask.shape, bool)
    for i in range(n_det):
        for k in range(n_seg):
            t = grid[k] - np.interp(grid[k], tau[k], delta[i, k])
            for _ in range(2):
                t = grid[k] - np.interp(t, tau[k], delta[i, k])
            x = (t - tau[k, 0]) / dt                          # fractional sample index
            n0 = np.floor(x).astype(int)
            idx = n0[:, None] + k_rel[None, :]
            inside = (idx >= 0) & (idx < m)
            wts = _kaiser_sinc(x[:, None] - idx, half) * inside
            src = zd[i, k][np.clip(idx, 0, m - 1)]
            out[i, k] = np.sum(wts * src, axis=1)
            near = np.rint(x).astype(int)
            ok = (near >= 0) & (near < m)
            mask[i, k] = ok & data.mask[i, k][np.clip(near, 0, m - 1)]
            a[i, k] = np.interp(t, tau[k], a_det[i, k])
            b[i, k] = np.interp(t, tau[k], b_det[i, k])
    w = mask * (dt / psd)[..., None]
    return BarycentricData(w * out, a, b, w, s0 + (m - 1) / 2 * dt, dt, m * dt, f_ref,
                           data.bandwidth.to_value(u.Hz))


# ------------------------------------------------------------------ lattice banks

def lattice_rows(lattice, metric, max_mismatch: float) -> dict:
    """A lattice bank in (f, fdot) or (f, fdot, fddot) as rows of constant spin-down.

    Parameters
    ----------
    lattice : {'cubic', 'covering'}
    metric : ndarray (n, n)
        The phase metric in SI ((f, fdot[, fddot]) coordinates), n = 2 or 3.
    max_mismatch : float
        Maximum (covering) mismatch of the bank.

    Returns
    -------
    dict
        ``f_step`` (Hz, spacing along a row), ``fdot_step`` (Hz/s, spacing of the rows in
        fdot at fixed fddot), ``fddot_step`` (Hz/s^2, n = 3 only), ``row_shift`` and
        ``coupling`` (n = 2: row m starts at ``coupling * fdot + m * row_shift`` modulo
        f_step), ``n_dims``, and the matrices ``basis`` (lower-triangular lattice basis,
        one vector a row), ``rotation`` and ``whiten`` used by the row arithmetic.

    Notes
    -----
    Whitening u = R lambda / sqrt(mu) with g = R^T R (R upper triangular, Cholesky), so the
    last whitened axes depend on the spin-downs only; the lattice generator G (covering
    radius 1) is rotated by the QR decomposition G^T = Q T into the lower-triangular basis
    T^T, whose first vector lies along the first axis (Conway & Sloane SPLAG Ch. 2: a
    rotated lattice has the same covering radius and thickness).  A lattice point
    ``sum_j n_j b_j`` then has spin-downs set by ``(n_2, ..., n_n)`` alone: a row, a comb in
    f of spacing ``f_step``.
    """
    g = np.asarray(metric, float)
    if g.shape not in ((2, 2), (3, 3)):
        raise InputError("the mock search takes a metric in (f, fdot) or (f, fdot, fddot)",
                         value=g.shape)
    lat = get_lattice(lattice, g.shape[0])
    r = np.linalg.cholesky(g).T                  # upper triangular, g = r^T r
    q, t = np.linalg.qr(lat.generator.T)
    sign = np.sign(np.diag(t))
    q, t = q * sign, (t.T * sign).T              # positive diagonal
    basis = t.T                                  # rows (t11, 0), (t12, t22)
    s = np.sqrt(max_mismatch)
    whiten = r / s                               # lambda -> u (rotated lattice frame)
    out = {"lattice": lat, "basis": basis, "rotation": q, "whiten": whiten,
           "n_dims": int(g.shape[0]),
           "f_step": basis[0, 0] / whiten[0, 0],
           "fdot_step": basis[1, 1] / whiten[1, 1],
           "row_shift": basis[1, 0] / whiten[0, 0],
           "coupling": -whiten[0, 1] / whiten[0, 0]}
    if g.shape[0] == 3:
        out["fddot_step"] = basis[2, 2] / whiten[2, 2]
    return out


def _row_params(bank, idx):
    """Spin-downs (..., n-1) and f origin (...) of the rows of integer indices idx (..., n-1).

    The point ``sum_{j>=2} n_j b_j`` of the rotated lattice, unwhitened: its last n - 1
    coordinates fix the spin-downs (triangular whitening), its first the row's origin in f.
    """
    w = bank["whiten"]
    u_pt = np.asarray(idx, float) @ bank["basis"][1:]            # (..., n)
    spins = np.linalg.solve(w[1:, 1:], u_pt[..., 1:, None])[..., 0]
    origin = (u_pt[..., 0] - spins @ w[0, 1:]) / w[0, 0]
    return spins, origin


def _nearest_rows(bank, lam):
    """Row indices (..., n-1) and the nearest lattice point (..., n) to points ``lam``."""
    u_rot = lam @ bank["whiten"].T
    native = u_rot @ bank["rotation"].T          # into the Lattice's own orientation
    near = bank["lattice"].nearest_point(native) @ bank["rotation"]
    idx = np.rint(near @ np.linalg.inv(bank["basis"])).astype(int)[..., 1:]
    return idx, near @ np.linalg.inv(bank["whiten"]).T


@dataclass(frozen=True, eq=False)
class TemplateBank:
    """The fine (semicoherent) templates of a mock search.

    Attributes
    ----------
    frequency : Quantity ['frequency'] (n,)
        At the data's reference time t_ref (barycentric).
    fdot : Quantity ['frequency / time'] (n,)
    fddot : Quantity ['frequency / time2'] (n,)
        Zero for a search in (f, fdot).
    """

    frequency: u.Quantity
    fdot: u.Quantity
    fddot: u.Quantity = None

    def __len__(self):
        return int(self.frequency.size)


def _row_candidates(bank, spin_box):
    """Integer row indices (k, n-1) whose spin-downs lie in the box ((lo, hi) per spin-down).

    The last index fixes the last spin-down alone; the earlier ones are enumerated from the
    box given the later ones (triangular basis), with a margin of one row.
    """
    b, w = bank["basis"], bank["whiten"]
    n = bank["n_dims"]
    if n == 2:
        step = bank["fdot_step"]
        m = np.arange(int(np.floor(spin_box[0][0] / step)) - 1,
                      int(np.ceil(spin_box[0][1] / step)) + 2)
        cand = m[:, None]
    else:
        step3 = bank["fddot_step"]
        n3 = np.arange(int(np.floor(spin_box[1][0] / step3)) - 1,
                       int(np.ceil(spin_box[1][1] / step3)) + 2)
        rows = []
        for k3 in n3:
            fdd = k3 * step3
            # fdot = (n2 b22 + n3 b32 - w12 fddot) / w11 (whitened second axis)
            lo, hi = ((v * w[1, 1] + w[1, 2] * fdd - k3 * b[2, 1]) / b[1, 1]
                      for v in spin_box[0])
            for k2 in range(int(np.floor(min(lo, hi))) - 1, int(np.ceil(max(lo, hi))) + 2):
                rows.append((k2, k3))
        cand = np.array(rows, int).reshape(-1, 2)
    spins, _ = _row_params(bank, cand)
    keep = np.ones(len(cand), bool)
    for j, (lo, hi) in enumerate(spin_box):
        keep &= (spins[:, j] >= lo) & (spins[:, j] <= hi)
    return cand[keep]


def _fine_bank(bank, f_box, spin_box, s_ref):
    """All fine lattice points with f at t_ref and the spin-downs inside the box.

    Lattice coordinates are at the barycentric time ``s_ref`` (from t_ref): f at t_ref is
    f(s_ref) - fdot s_ref + fddot s_ref^2 / 2 and fdot at t_ref is fdot(s_ref) - fddot
    s_ref; the spin-down box applies at ``s_ref`` (the mean segment mid-time, about t_ref).
    Returns (f - f_ref, fdot[, fddot]) at t_ref, each (n,).
    """
    rows = _row_candidates(bank, spin_box)
    spins, origins = _row_params(bank, rows)
    fd = spins[:, 0]
    fdd = spins[:, 1] if spins.shape[1] > 1 else np.zeros_like(fd)
    f_step = bank["f_step"]
    drift = fd * s_ref - 0.5 * fdd * s_ref**2          # f(s_ref) - f(t_ref)
    width = (f_box[1] - f_box[0]) + abs(drift).max(initial=0) + 2 * f_step
    check_size("mock_templates", len(rows) * (width / f_step + 2),
               f"a fine bank of {len(rows)} rows x {width / f_step:.3g} templates")
    out = [[] for _ in range(spins.shape[1] + 1)]
    for j in range(len(rows)):
        lo, hi = f_box[0] + drift[j], f_box[1] + drift[j]
        i = np.arange(np.ceil((lo - origins[j]) / f_step),
                      np.floor((hi - origins[j]) / f_step) + 1)
        out[0].append(origins[j] + i * f_step - drift[j])
        out[1].append(np.full(i.size, fd[j] - fdd[j] * s_ref))
        if spins.shape[1] > 1:
            out[2].append(np.full(i.size, fdd[j]))
    return tuple(np.concatenate(o) if o else np.zeros(0) for o in out)


# ------------------------------------------------------------------ the search

@dataclass(frozen=True, eq=False)
class MockSearchResult:
    """2F_sum over the fine template bank of a mock search.

    Attributes
    ----------
    bank : TemplateBank
    two_f : Quantity ['dimensionless'] (n,)
        StackSlide 2F_sum; chi^2 with 4 N degrees of freedom per template in noise.
    two_f_segments : ndarray (n_seg, n) or None
    coarse : dict
        Per segment, the coherent template each fine template used: ``df_hz`` (offset from
        f_ref at the segment's barycentric mid-time) and ``fdot`` (n_seg, n).
    n_coherent : int
        Coherent templates evaluated (over all segments).
    fft_length : int
    assumptions : dict of str
    """

    bank: TemplateBank
    two_f: u.Quantity
    two_f_segments: object
    coarse: dict
    n_coherent: int
    fft_length: int
    assumptions: dict

    def loudest(self):
        """The loudest fine template: dict with ``frequency``, ``fdot``, ``two_f``, ``index``."""
        i = int(np.argmax(self.two_f.value))
        out = {"frequency": self.bank.frequency[i], "fdot": self.bank.fdot[i],
               "two_f": self.two_f[i], "index": i}
        if self.bank.fddot is not None:
            out["fddot"] = self.bank.fddot[i]
        return out


def _coherent_banks(setup_lattice, t_seg_s, mu_coh, n_dims=2):
    return lattice_rows(setup_lattice, coherent_metric(t_seg_s * u.s, n_dims), mu_coh)


def mock_search(data, coord: SkyCoord, setup: SearchSetup, f_box, fdot_box, *, fddot_box=None,
                noise="true", taps: int = DEFAULT_TAPS, keep_segments: bool = False,
                barycentric=None) -> MockSearchResult:
    """Run the directed mock search of a setup on band data.

    Parameters
    ----------
    data : BandData
        Its segments are the setup's (t_seg and n_seg are read from ``data``; the lattice and
        the two maximum mismatches from ``setup``).
    coord : SkyCoord
    setup : SearchSetup
    f_box : (Quantity, Quantity) ['frequency']
        Searched frequencies at the data's t_ref; within the inner half of the band.
    fdot_box : (Quantity, Quantity) ['frequency / time']
    fddot_box : (Quantity, Quantity) ['frequency / time2'], optional
        Searched second derivatives: the banks are then lattices in (f, fdot, fddot) of the
        three-parameter metrics (for a parameter space with fddot); default a search in
        (f, fdot).
    noise : {'true', 'median'} or Quantity ['1/frequency']
    taps : int
        Interpolator length for the resampling.
    keep_segments : bool
        Keep the per-segment 2F_k of every fine template.
    barycentric : BarycentricData, optional
        Resampled data already at hand (from :func:`resample_to_barycentre`).

    Returns
    -------
    MockSearchResult

    Raises
    ------
    InputError
        For a box outside the inner half of the band or bad inputs.

    Notes
    -----
    See the module notes.  For N = 1 the fine bank is the coherent bank itself.
    """
    f_lo, f_hi = (float(q.to_value(u.Hz)) for q in f_box)
    fd_lo, fd_hi = (float(q.to_value(FDOT_UNIT)) for q in fdot_box)
    spin_box = [(fd_lo, fd_hi)]
    if fddot_box is not None:
        spin_box.append(tuple(float(q.to_value(FDDOT_UNIT)) for q in fddot_box))
    n_dims = len(spin_box) + 1
    if not (f_lo <= f_hi and all(lo <= hi for lo, hi in spin_box)):
        raise InputError("the box must have f_min <= f_max and each spin-down's min <= max",
                         value=(f_box, fdot_box, fddot_box))
    bd = barycentric or resample_to_barycentre(data, coord, noise=noise, taps=taps)
    f_ref, bw = bd.f_ref_hz, bd.bandwidth_hz
    span_s = np.ptp(bd.mid_s) + bd.t_seg_s
    reach = max(abs(fd_lo), abs(fd_hi)) * span_s
    if n_dims == 3:
        reach += max(map(abs, spin_box[1])) * span_s**2 / 8
    if f_lo - reach < f_ref - bw / 4 or f_hi + reach > f_ref + bw / 4:
        raise InputError(
            f"the searched box [{f_lo:.9g}, {f_hi:.9g}] Hz (with its spin-down drift of "
            f"{reach:.3g} Hz) must lie in the inner half [{f_ref - bw / 4:.9g}, "
            f"{f_ref + bw / 4:.9g}] Hz of the band", value=(f_lo, f_hi))
    n_seg, m, dt = bd.n_seg, bd.n_samples, bd.dt_s
    coh = _coherent_banks(setup.lattice, bd.t_seg_s, setup.mismatch_coherent, n_dims)
    s_ref = float(np.mean(bd.mid_s))
    if n_seg == 1:
        fine = coh
    else:
        g_semi = semicoherent_metric(bd.t_seg_s * u.s, mid_times=bd.mid_s * u.s,
                                     n_dims=n_dims)
        fine = lattice_rows(setup.lattice, g_semi, setup.mismatch_semicoherent)
    fine_pts = _fine_bank(fine, (f_lo - f_ref, f_hi - f_ref), spin_box, s_ref)
    f_t, fd_t = fine_pts[0], fine_pts[1]
    fdd_t = fine_pts[2] if n_dims == 3 else np.zeros_like(f_t)
    n_fine = f_t.size
    # the coherent template of every fine template in every segment: the fine template's
    # (f, fdot, fddot) carried to the segment's mid-time (Taylor expansion)
    t_k = bd.mid_s[:, None]
    lam_k = [f_t + fd_t * t_k + 0.5 * fdd_t * t_k**2, fd_t + fdd_t * t_k,
             np.broadcast_to(fdd_t, (n_seg, n_fine))][:n_dims]
    idx, near = _nearest_rows(coh, np.stack(np.broadcast_arrays(*lam_k), axis=-1))
    df_c = near[..., 0].copy()
    rows, row = np.unique(idx.reshape(-1, n_dims - 1), axis=0, return_inverse=True)
    row = row.reshape(idx.shape[:-1])
    row_spins, row_origin = _row_params(coh, rows)
    spins_c = np.empty(idx.shape[:-1] + (n_dims - 1,))
    # FFT length: every r-th bin of spacing B / L lies on a lattice row
    f_step = coh["f_step"]
    r = max(1, int(np.ceil(m * f_step / bw)))
    length = int(np.ceil(r * bw / f_step))
    d = bw / length
    two_f_k = np.empty((n_seg, n_fine))
    A, B, C = _abc(bd.w, bd.a, bd.b)
    tl = (np.arange(m) - (m - 1) / 2.0) * dt
    n_coh = 0
    for mrow in range(len(rows)):
        fd_row = row_spins[mrow, 0]
        shift = row_origin[mrow]
        eps = shift - d * np.rint(shift / d)
        phase = eps * tl
        if n_dims == 3:                          # the fddot chirp about the mid-time
            phase = phase + row_spins[mrow, 1] * tl**3 / 6.0
        y = bd.wz * np.exp(-2j * np.pi * phase)
        fa, fb = _coherent_stage(y, bd.a, bd.b, fd_row, dt, length)
        tf = _two_f(fa, fb, A[:, None], B[:, None], C[:, None])   # (n_seg, L)
        n_coh += tf.size
        sel = row == mrow
        kk, jj = np.nonzero(sel)
        bins = np.rint((df_c[sel] - eps) / d).astype(int) + length // 2
        two_f_k[kk, jj] = tf[kk, bins]
        df_c[sel] = eps + (bins - length // 2) * d              # the bin actually used
        spins_c[sel] = row_spins[mrow]
    assumptions = {
        "statistic": "StackSlide sum of the JKS 1998 F-statistic (gr-qc/9804014) over "
                     "segments, chi^2 with 4 N_seg degrees of freedom in noise",
        "frame": "resampled to the solar-system barycentre at the known sky position "
                 "(astropy Roemer delay; Einstein and Shapiro delays left out)",
        "bank": f"{setup.lattice} lattice in {n_dims} parameters, coherent mismatch "
                f"{setup.mismatch_coherent:g}, "
                f"semicoherent mismatch {setup.mismatch_semicoherent:g} (quadratic metric)",
        "noise": "Gaussian, stationary per segment, known level per detector and segment",
    }
    bank = TemplateBank((f_ref + f_t) * u.Hz, fd_t * FDOT_UNIT, fdd_t * FDDOT_UNIT)
    coarse = {"df_hz": df_c, "fdot": spins_c[..., 0]}
    if n_dims == 3:
        coarse["fddot"] = spins_c[..., 1]
    return MockSearchResult(bank, two_f_k.sum(axis=0) << u.one,
                            two_f_k if keep_segments else None,
                            coarse, n_coh, length, assumptions)


# -------------------------------------------------------------- direct evaluations

def resampled_direct_fstat(bd, df_hz, fdot: u.Quantity, fddot: u.Quantity | None = None):
    """2F_k by explicit sums on the resampled series at given coherent templates.

    Parameters
    ----------
    bd : BarycentricData
    df_hz, fdot : ndarray (n_seg, n)
        Per segment, offset from f_ref at the segment's barycentric mid-time, and spin-down.
    fddot : ndarray (n_seg, n), optional
        Second derivative (default 0).

    Returns
    -------
    ndarray (n_seg, n)
        ``2F_k = 4 (B abs(Fa)^2 + A abs(Fb)^2 - 2 C Re(Fa conj(Fb))) / D`` with
        ``Fa = sum_j w z' a exp(-2 pi i (df t_j + fdot t_j^2 / 2 + fddot t_j^3 / 6))``,
        ``t_j`` from the
        mid-time (the F-statistic of Jaranowski, Krolak & Schutz 1998, gr-qc/9804014).
    """
    m = bd.n_samples
    tl = (np.arange(m) - (m - 1) / 2.0) * bd.dt_s
    A, B, C = _abc(bd.w, bd.a, bd.b)
    out = np.empty(np.shape(df_hz))
    fddot = np.zeros(np.shape(df_hz)) if fddot is None else np.asarray(fddot, float)
    for k in range(bd.n_seg):
        e = np.exp(-2j * np.pi * (df_hz[k][:, None] * tl + 0.5 * fdot[k][:, None] * tl**2
                                  + fddot[k][:, None] * tl**3 / 6.0))
        fa = (bd.wz[:, k] * bd.a[:, k]).sum(axis=0) @ e.T
        fb = (bd.wz[:, k] * bd.b[:, k]).sum(axis=0) @ e.T
        out[k] = _two_f(fa, fb, A[k], B[k], C[k])
    return out


def demodulated_fstat(data, coord: SkyCoord, frequency: u.Quantity, fdot: u.Quantity,
                      fddot: u.Quantity | None = None, *, noise="true"):
    """Per-segment 2F_k by explicit sums of the exact Doppler phase (no resampling).

    Parameters
    ----------
    data : BandData
    coord : SkyCoord
    frequency : Quantity ['frequency'] (n,)
        Template frequencies at the data's t_ref (barycentric).
    fdot : Quantity ['frequency / time'] (n,)
    fddot : Quantity ['frequency / time2'] (n,), optional
        Default 0.

    Returns
    -------
    ndarray (n_seg, n)

    Notes
    -----
    Fa_k = sum over detectors and samples of w z a exp(-i dPhi), dPhi the heterodyned
    template phase at the barycentric time t + Delta(t)
    (:meth:`cwlimits.simulation.synthetic.BandData.template_phase` with Doppler), and 2F_k of
    JKS 1998 eq. (37) in the normalisation of :mod:`cwlimits.simulation.fstat`.  O(samples)
    per template: for checks and the benchmark only.
    """
    coord = _check_coord(coord)
    f = np.atleast_1d(frequency.to_value(u.Hz))
    fd = np.broadcast_to(np.atleast_1d(fdot.to_value(FDOT_UNIT)), f.shape)
    fdd = (np.zeros(f.shape) if fddot is None else
           np.broadcast_to(np.atleast_1d(u.Quantity(fddot).to_value(FDDOT_UNIT)), f.shape))
    check_size("mock_samples", data.data.size * f.size,
               f"a direct F-statistic of {data.data.size} samples x {f.size} templates")
    psd = _psd_values(data, noise)
    w = _weights(data, psd)
    a, b = data.modulation(coord)
    A, B, C = _abc(w, a, b)
    wz = w * data.data
    out = np.empty((data.n_seg, f.size))
    for i in range(f.size):
        phase = data.template_phase(coord, f[i], fd[i], fdd[i], doppler=True)
        e = np.exp(-1j * phase)
        fa = np.sum(wz * a * e, axis=(0, 2))
        fb = np.sum(wz * b * e, axis=(0, 2))
        out[:, i] = _two_f(fa, fb, A, B, C)
    return out
