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
Shapiro delays, <= 1.7 ms, are left out for injections and templates alike); frequency and
spin-down only (no fddot); known noise level per detector and segment; the searched
frequencies lie in the inner part of the band, where the interpolator's response is flat.
"""

from dataclasses import dataclass

import astropy.units as u
import numpy as np
from scipy.special import i0

from cwlimits._sizes import check_size
from cwlimits.errors import InputError
from cwlimits.searchspace.lattices import get_lattice
from cwlimits.searchspace.metric import coherent_metric, semicoherent_metric
from cwlimits.simulation.fstat import _abc, _coherent_stage, _psd_values, _two_f, _weights
from cwlimits.simulation.synthetic import BandData, _check_coord

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


def resample_to_barycentre(data, coord, *, noise="true", taps=DEFAULT_TAPS):
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

def lattice_rows(lattice, metric, max_mismatch):
    """A 2-D lattice bank in (f, fdot) as rows of constant fdot.

    Parameters
    ----------
    lattice : {'cubic', 'covering'}
    metric : ndarray (2, 2)
        The phase metric in SI ((f, fdot) coordinates).
    max_mismatch : float
        Maximum (covering) mismatch of the bank.

    Returns
    -------
    dict
        ``f_step`` (Hz, spacing along a row), ``fdot_step`` (Hz/s, spacing of the rows),
        ``row_shift`` (Hz: row m starts at m * row_shift modulo f_step, before the metric's
        f-fdot coupling), ``coupling`` (df/dfdot of the whitened f axis, -R12 / R11) and
        ``to_lattice`` / ``from_lattice`` (matrices between (f, fdot) and the native
        coordinates of :class:`cwlimits.searchspace.lattices.Lattice`).

    Notes
    -----
    Whitening u = R lambda / sqrt(mu) with g = R^T R (R upper triangular, Cholesky), so the
    second whitened axis depends on fdot only; the lattice generator G (covering radius 1)
    is rotated by the QR decomposition G^T = Q T into the lower-triangular basis T^T, whose
    first vector lies along the first axis (Conway & Sloane SPLAG Ch. 2: a rotated lattice
    has the same covering radius and thickness).
    """
    lat = get_lattice(lattice, 2)
    g = np.asarray(metric, float)
    r = np.linalg.cholesky(g).T                  # upper triangular, g = r^T r
    q, t = np.linalg.qr(lat.generator.T)
    sign = np.sign(np.diag(t))
    q, t = q * sign, (t.T * sign).T              # positive diagonal
    basis = t.T                                  # rows (t11, 0), (t12, t22)
    s = np.sqrt(max_mismatch)
    whiten = r / s                               # lambda -> u (rotated lattice frame)
    return {"lattice": lat, "basis": basis, "rotation": q, "whiten": whiten,
            "f_step": basis[0, 0] / whiten[0, 0],
            "fdot_step": basis[1, 1] / whiten[1, 1],
            "row_shift": basis[1, 0] / whiten[0, 0],
            "coupling": -whiten[0, 1] / whiten[0, 0]}


def _nearest_rows(bank, df_hz, fdot):
    """Row index and along-row position (Hz) of the nearest lattice point to each point."""
    u_rot = np.stack([df_hz, fdot], axis=-1) @ bank["whiten"].T
    native = u_rot @ bank["rotation"].T          # into the Lattice's own orientation
    near = bank["lattice"].nearest_point(native) @ bank["rotation"]
    row = np.rint(near[..., 1] / bank["basis"][1, 1]).astype(int)
    lam = near @ np.linalg.inv(bank["whiten"]).T
    return row, lam[..., 0], lam[..., 1]


@dataclass(frozen=True, eq=False)
class TemplateBank:
    """The fine (semicoherent) templates of a mock search.

    Attributes
    ----------
    frequency : Quantity ['frequency'] (n,)
        At the data's reference time t_ref (barycentric).
    fdot : Quantity ['frequency / time'] (n,)
    """

    frequency: u.Quantity
    fdot: u.Quantity

    def __len__(self):
        return int(self.frequency.size)


def _fine_bank(bank, f_box, fdot_box, s_ref):
    """All fine lattice points with (f, fdot) at t_ref inside the box.

    Lattice coordinates are at the barycentric time ``s_ref`` (from t_ref); f at t_ref is
    f(s_ref) - fdot s_ref.  Rows of constant fdot are enumerated from the box.
    """
    fd_step = bank["fdot_step"]
    m_lo = int(np.floor(fdot_box[0] / fd_step)) - 1
    m_hi = int(np.ceil(fdot_box[1] / fd_step)) + 1
    rows = np.arange(m_lo, m_hi + 1)
    fdots = rows * fd_step
    keep = (fdots >= fdot_box[0]) & (fdots <= fdot_box[1])
    rows, fdots = rows[keep], fdots[keep]
    f_step = bank["f_step"]
    width = (f_box[1] - f_box[0]) + abs(fdots).max(initial=0) * abs(s_ref) + 2 * f_step
    check_size("mock_templates", len(rows) * (width / f_step + 2),
               f"a fine bank of {len(rows)} rows x {width / f_step:.3g} templates")
    out_f, out_fd = [], []
    for m, fd in zip(rows, fdots, strict=True):
        # f(s_ref) along row m: coupling * fd + m * row_shift + i * f_step
        origin = bank["coupling"] * fd + m * bank["row_shift"]
        lo = f_box[0] + fd * s_ref
        hi = f_box[1] + fd * s_ref
        i = np.arange(np.ceil((lo - origin) / f_step), np.floor((hi - origin) / f_step) + 1)
        f_sref = origin + i * f_step
        out_f.append(f_sref - fd * s_ref)
        out_fd.append(np.full(i.size, fd))
    return np.concatenate(out_f), np.concatenate(out_fd)


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
        return {"frequency": self.bank.frequency[i], "fdot": self.bank.fdot[i],
                "two_f": self.two_f[i], "index": i}


def _coherent_banks(setup_lattice, t_seg_s, mu_coh):
    return lattice_rows(setup_lattice, coherent_metric(t_seg_s * u.s, 2), mu_coh)


def mock_search(data, coord, setup, f_box, fdot_box, *, noise="true", taps=DEFAULT_TAPS,
                keep_segments=False, barycentric=None):
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
    if not (f_lo <= f_hi and fd_lo <= fd_hi):
        raise InputError("the box must have f_min <= f_max and fdot_min <= fdot_max",
                         value=(f_box, fdot_box))
    bd = barycentric or resample_to_barycentre(data, coord, noise=noise, taps=taps)
    f_ref, bw = bd.f_ref_hz, bd.bandwidth_hz
    span_s = np.ptp(bd.mid_s) + bd.t_seg_s
    reach = max(abs(fd_lo), abs(fd_hi)) * span_s
    if f_lo - reach < f_ref - bw / 4 or f_hi + reach > f_ref + bw / 4:
        raise InputError(
            f"the searched box [{f_lo:.9g}, {f_hi:.9g}] Hz (with its spin-down drift of "
            f"{reach:.3g} Hz) must lie in the inner half [{f_ref - bw / 4:.9g}, "
            f"{f_ref + bw / 4:.9g}] Hz of the band", value=(f_lo, f_hi))
    n_seg, m, dt = bd.n_seg, bd.n_samples, bd.dt_s
    coh = _coherent_banks(setup.lattice, bd.t_seg_s, setup.mismatch_coherent)
    s_ref = float(np.mean(bd.mid_s))
    if n_seg == 1:
        fine = coh
    else:
        g_semi = semicoherent_metric(bd.t_seg_s * u.s, mid_times=bd.mid_s * u.s, n_dims=2)
        fine = lattice_rows(setup.lattice, g_semi, setup.mismatch_semicoherent)
    f_t, fd_t = _fine_bank(fine, (f_lo - f_ref, f_hi - f_ref), (fd_lo, fd_hi), s_ref)
    n_fine = f_t.size
    # the coherent template of every fine template in every segment
    df_k = f_t[None, :] + fd_t[None, :] * bd.mid_s[:, None]        # (n_seg, n)
    row, df_c, fd_c = _nearest_rows(coh, df_k, np.broadcast_to(fd_t, df_k.shape))
    # FFT length: every r-th bin of spacing B / L lies on a lattice row
    f_step = coh["f_step"]
    r = max(1, int(np.ceil(m * f_step / bw)))
    length = int(np.ceil(r * bw / f_step))
    d = bw / length
    two_f_k = np.empty((n_seg, n_fine))
    A, B, C = _abc(bd.w, bd.a, bd.b)
    tl = (np.arange(m) - (m - 1) / 2.0) * dt
    n_coh = 0
    for mrow in np.unique(row):
        fd_row = mrow * coh["fdot_step"]
        shift = coh["coupling"] * fd_row + mrow * coh["row_shift"]
        eps = shift - d * np.rint(shift / d)
        y = bd.wz * np.exp(-2j * np.pi * eps * tl)
        fa, fb = _coherent_stage(y, bd.a, bd.b, fd_row, dt, length)
        tf = _two_f(fa, fb, A[:, None], B[:, None], C[:, None])   # (n_seg, L)
        n_coh += tf.size
        sel = row == mrow
        kk, jj = np.nonzero(sel)
        bins = np.rint((df_c[sel] - eps) / d).astype(int) + length // 2
        two_f_k[kk, jj] = tf[kk, bins]
        df_c[sel] = eps + (bins - length // 2) * d              # the bin actually used
        fd_c[sel] = fd_row
    assumptions = {
        "statistic": "StackSlide sum of the JKS 1998 F-statistic (gr-qc/9804014) over "
                     "segments, chi^2 with 4 N_seg degrees of freedom in noise",
        "frame": "resampled to the solar-system barycentre at the known sky position "
                 "(astropy Roemer delay; Einstein and Shapiro delays left out)",
        "bank": f"{setup.lattice} lattice, coherent mismatch {setup.mismatch_coherent:g}, "
                f"semicoherent mismatch {setup.mismatch_semicoherent:g} (quadratic metric)",
        "noise": "Gaussian, stationary per segment, known level per detector and segment",
    }
    bank = TemplateBank((f_ref + f_t) * u.Hz, fd_t * FDOT_UNIT)
    return MockSearchResult(bank, two_f_k.sum(axis=0) << u.one,
                            two_f_k if keep_segments else None,
                            {"df_hz": df_c, "fdot": fd_c}, n_coh, length, assumptions)


# -------------------------------------------------------------- direct evaluations

def resampled_direct_fstat(bd, df_hz, fdot):
    """2F_k by explicit sums on the resampled series at given coherent templates.

    Parameters
    ----------
    bd : BarycentricData
    df_hz, fdot : ndarray (n_seg, n)
        Per segment, offset from f_ref at the segment's barycentric mid-time, and spin-down.

    Returns
    -------
    ndarray (n_seg, n)
        ``2F_k = 4 (B abs(Fa)^2 + A abs(Fb)^2 - 2 C Re(Fa conj(Fb))) / D`` with
        ``Fa = sum_j w z' a exp(-2 pi i (df t_j + fdot t_j^2 / 2))``, ``t_j`` from the
        mid-time (the F-statistic of Jaranowski, Krolak & Schutz 1998, gr-qc/9804014).
    """
    m = bd.n_samples
    tl = (np.arange(m) - (m - 1) / 2.0) * bd.dt_s
    A, B, C = _abc(bd.w, bd.a, bd.b)
    out = np.empty(np.shape(df_hz))
    for k in range(bd.n_seg):
        e = np.exp(-2j * np.pi * (df_hz[k][:, None] * tl + 0.5 * fdot[k][:, None] * tl**2))
        fa = (bd.wz[:, k] * bd.a[:, k]).sum(axis=0) @ e.T
        fb = (bd.wz[:, k] * bd.b[:, k]).sum(axis=0) @ e.T
        out[k] = _two_f(fa, fb, A[k], B[k], C[k])
    return out


def demodulated_fstat(data, coord, frequency, fdot, *, noise="true"):
    """Per-segment 2F_k by explicit sums of the exact Doppler phase (no resampling).

    Parameters
    ----------
    data : BandData
    coord : SkyCoord
    frequency : Quantity ['frequency'] (n,)
        Template frequencies at the data's t_ref (barycentric).
    fdot : Quantity ['frequency / time'] (n,)

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
    check_size("mock_samples", data.data.size * f.size,
               f"a direct F-statistic of {data.data.size} samples x {f.size} templates")
    psd = _psd_values(data, noise)
    w = _weights(data, psd)
    a, b = data.modulation(coord)
    A, B, C = _abc(w, a, b)
    wz = w * data.data
    out = np.empty((data.n_seg, f.size))
    for i in range(f.size):
        phase = data.template_phase(coord, f[i], fd[i], 0.0, doppler=True)
        e = np.exp(-1j * phase)
        fa = np.sum(wz * a * e, axis=(0, 2))
        fb = np.sum(wz * b * e, axis=(0, 2))
        out[:, i] = _two_f(fa, fb, A, B, C)
    return out
