"""The measured upper limit of a narrow-band search for a known pulsar.

When the timing solution leaves the spin uncertain by more than one template over the span,
the down-converted data are searched over the small box of (f, fdot) offsets around the
heterodyne (:func:`cwlimits.pulsars.expected.search_box`), and the limit has to pay for
the templates searched.  The limit reported here is the **Bayesian limit from the loudest
template, with its trials factor**:

1. *Templates.*  A cubic grid in the frequency offset at the middle of the data, delta f,
   and delta fdot, with steps from the diagonal coherent phase metric g_ff = pi^2 T^2 / 3,
   g_dd = pi^2 T^4 / 180 (Prix 2007, arXiv:0707.0428; reference time mid-span), so that
   the largest mismatch to the nearest template is ``mismatch``.  Each template
   re-heterodynes the samples by exp(-2 pi i [delta f tau + delta fdot tau^2 / 2]),
   tau = t - t_mid.
2. *Statistic.*  For Gaussian noise of known sigma per stretch the F-statistic of the
   down-converted data is 2F = w^H M^-1 w, w = (U, V) the 1/sigma^2-weighted sums of
   :mod:`.likelihood` and M = [[S_aa, S_ab], [S_ab, S_bb]] (the likelihood maximised over
   the four amplitude parameters; Jaranowski, Krolak & Schutz 1998, gr-qc/9804014,
   eqs. 31-35, in the down-converted form).  Under noise 2F is chi^2 with 4 degrees of
   freedom; a signal in its own template makes it non-central with lambda = h0^2 Y (1 -
   mu) s^2, Y = |P|^2 S_aa + |Q|^2 S_bb + 2 Re(P Q*) S_ab of the orientation, mu the
   template mismatch and s = sinc(pi nu dt) the loss of a sample that averages a residual
   frequency nu over its length dt.
3. *Likelihood of the loudest value.*  With N templates, the signal in one of them and
   the other N - 1 pure noise (taken as independent: correlated neighbours make the true
   trials factor smaller, so the limit is conservative), the density of the largest 2F at
   x is d/dx [F_lambda(x) G(x)^(N-1)] = G(x)^(N-2) [G(x) f_lambda(x) + (N - 1) g(x)
   F_lambda(x)], with G, g the chi^2_4 distribution and density and F_lambda, f_lambda
   the non-central ones (the order statistic of the maximum; common practice, the
   loudest-event idea of Brady, Creighton & Wiseman 2004, gr-qc/0405044, from memory).
   The factor G^(N-2) does not depend on h0.  For N = 1 this is the single-2F Bayesian
   limit of :mod:`cwlimits.limits.upper` (tested).
4. *Posterior.*  Averaged over the orientation prior, the mismatch in a cell and the
   residual frequency in the box, times a uniform prior in h0; the limit is its
   ``confidence`` quantile.

Assumptions: Gaussian noise, stationary within a stretch, sigma given or estimated per
stretch; the signal's (f, fdot) uniform over the box; phase coherent over the data.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import TYPE_CHECKING

import astropy.units as u
import numpy as np
from scipy import special, stats

from cwlimits._units import fraction
from cwlimits.errors import InputError
from cwlimits.pulsars.emission import get_emission, harmonics
from cwlimits.pulsars.grid import OrientationPrior, _h0_weights, quantile_from_grid
from cwlimits.pulsars.likelihood import orientation_coefficients
from cwlimits.statistics.detection import QuadratureRule, combine_rules

if TYPE_CHECKING:
    from cwlimits.targets.catalogue import Target

__all__ = ["NarrowBandLimit", "narrow_band_limit", "MAX_BOX_TEMPLATES", "loudest_likelihood"]

#: Most templates of one box (the sums of 27 000 templates of 2300 samples take ~0.3 s).
MAX_BOX_TEMPLATES = 2_000_000
_CHUNK = 2000
#: Largest residual frequency times sample length accepted: sinc(pi 0.3) = 0.86, the
#: samples still hold most of a signal anywhere in the box.
_MAX_NU_DT = 0.3
_MISMATCH_SEED = 20041127


@dataclass
class NarrowBandLimit:
    """The narrow-band limit of :func:`narrow_band_limit`.

    Attributes
    ----------
    target : str
    upper_limit : float
        The ``confidence`` quantile of h0.
    confidence : float
    loudest_2f : float
        Largest 2F over the box.
    loudest_offset : (float, float)
        (delta f [Hz], delta fdot [Hz/s]) of the loudest template, at the data's middle.
    n_templates : int
    h0, mass : ndarray
        The h0 grid and the posterior mass per point.
    assumptions : dict
    """

    target: str
    upper_limit: float
    confidence: float
    loudest_2f: float
    loudest_offset: tuple
    n_templates: int
    h0: np.ndarray
    mass: np.ndarray
    assumptions: dict = field(default_factory=dict)

    def quantile(self, level):
        """The ``level`` quantile of h0."""
        return quantile_from_grid(self.h0, self.mass, level)


def loudest_likelihood(x, lam, n_templates):
    """Density of the loudest 2F at ``x`` without the h0-free factor G(x)^(N-2).

    G(x) f_lambda(x) + (N - 1) g(x) F_lambda(x) (module notes, step 3), with the chi^2_4
    and non-central chi^2_4 laws of scipy.stats; ``lam`` broadcasts.
    """
    lam = np.asarray(lam, float)
    g_cdf, g_pdf = stats.chi2.cdf(x, 4), stats.chi2.pdf(x, 4)
    f_pdf, f_cdf = _ncx2_4(x, lam)
    return g_cdf * f_pdf + (n_templates - 1) * g_pdf * f_cdf


def _ncx2_4(x, lam):
    """Density and distribution of the non-central chi^2 with 4 degrees of freedom.

    pdf = (1/2) exp(-(x + lam)/2) sqrt(x / lam) I_1(sqrt(lam x)) (the Bessel form of the
    non-central chi^2 density, Johnson, Kotz & Balakrishnan 1995, ch. 29, from memory;
    tested against scipy.stats.ncx2), with the exponentially scaled Bessel function;
    the distribution from scipy.special.chndtr.  Both are ufuncs, far faster than the
    scipy.stats wrappers on large grids.
    """
    lam = np.maximum(np.asarray(lam, float), 1e-300)
    z = np.sqrt(lam * x)
    small = lam < 1e-8
    pdf = np.where(small, stats.chi2.pdf(x, 4),
                   0.5 * np.sqrt(x / lam) * special.ive(1, z) * np.exp(z - (x + lam) / 2))
    return pdf, special.chndtr(x, 4, lam)


def _sample_sigma(data, noise):
    """Per-sample sigma: the file's (``'given'``) or sum |B|^2 / (2 m) per stretch."""
    if noise == "given":
        if not data.has_sigma:
            raise InputError(f"{data.source}: noise='given' needs a sigma for every sample")
        return data.sigma
    if noise != "estimated":
        raise InputError("the narrow-band limit needs noise 'given' or 'estimated' (the "
                         "F-statistic takes sigma as known)", value=noise)
    j = data.stretch
    power = np.bincount(j, weights=np.abs(data.value) ** 2)
    m = np.bincount(j)
    return np.sqrt(power / (2 * m))[j]


def _sample_length(data):
    """The samples' spacing dt: the median step within each detector (s)."""
    steps = [np.diff(data.time_s[data.detector == d]) for d in data.detectors]
    steps = np.concatenate([s for s in steps if len(s)])
    return float(np.median(steps))


def narrow_band_limit(data, target: Target, *, n_sigma: float | None = None,
                      fractional_width: float | None = None, box=None, noise="estimated",
                      confidence: float = 0.95, mismatch: float = 0.2,
                      orientation: str = "catalogue", n_orientation: int = 12,
                      n_h0: int = 400) -> NarrowBandLimit:
    """Bayesian upper limit of a narrow-band search from the loudest template (module notes).

    Parameters
    ----------
    data : DownConvertedData, BandData or str/Path
        Down-converted at the catalogue's spin (the centre of the box).
    target : Target
        A known pulsar; its timing uncertainties set the box (``n_sigma``).
    n_sigma : float, optional
        Half-width of the timing box in standard deviations (default
        :data:`cwlimits.pulsars.expected.DEFAULT_N_SIGMA`).
    fractional_width : float, optional
        Box half-width as a fraction of f_gw and abs(fdot_gw) instead.
    box : (float, float, float, float), optional
        (f_lo, f_hi, fdot_lo, fdot_hi) of f_gw in Hz and Hz/s, instead of either.
    noise : {'estimated', 'given'}
    confidence : float
    mismatch : float
        Largest mismatch of the template grid, in (0, 1).
    orientation : {'catalogue', 'uniform'}
    n_orientation : int
        Gauss-Legendre nodes per orientation parameter.
    n_h0 : int
        Points of the h0 grid.

    Returns
    -------
    NarrowBandLimit

    Raises
    ------
    InputError
        A box with more than :data:`MAX_BOX_TEMPLATES` templates, samples too long for the
        box (residual frequency x sample length > 0.3), bad choices.

    References
    ----------
    Prix 2007, arXiv:0707.0428 (metric); Jaranowski, Krolak & Schutz 1998, gr-qc/9804014
    (F-statistic); Dupuis & Woan 2005, arXiv:gr-qc/0508096 (the down-converted data).
    """
    from cwlimits.pulsars.expected import DEFAULT_N_SIGMA, search_box
    from cwlimits.pulsars.posterior import _as_data

    confidence = fraction(confidence, "confidence")
    mismatch = fraction(mismatch, "mismatch")
    if orientation not in ("catalogue", "uniform"):
        raise InputError("orientation must be 'catalogue' or 'uniform'", value=orientation)
    if not target.has_spin:
        raise InputError(f"target '{target.name}' has no known spin (f_rot, fdot_rot)")
    data = _as_data(data, target, "22")
    model = get_emission("single")
    item = harmonics(target, model)[0]
    if box is None:
        box, origin = search_box(target, item, DEFAULT_N_SIGMA if n_sigma is None
                                 else n_sigma, fractional_width, model)
    else:
        box, origin = tuple(float(b) for b in box), "given by the caller"
    f0, fd0 = item["f_gw"].to_value(u.Hz), item["fdot_gw"].to_value(u.Hz / u.s)
    df_lo, df_hi, dd_lo, dd_hi = box[0] - f0, box[1] - f0, box[2] - fd0, box[3] - fd0
    if not (df_lo <= 0 <= df_hi and dd_lo <= 0 <= dd_hi):
        raise InputError("the box must contain the heterodyne frequency and spin-down",
                         value=box)
    t = data.time_s
    t_mid = 0.5 * (t.min() + t.max())
    span = float(t.max() - t.min())
    dt = _sample_length(data)
    # a box offset at the spin epoch moves the frequency at mid-data by fdot x (t_mid - t_e)
    lever = 0.0
    if target.spin_epoch is not None:
        from cwlimits._time import gps_seconds

        lever = t_mid - float(gps_seconds(target.spin_epoch))
    # cubic grid: corner mismatch sum_i g_ii (step_i / 2)^2 = mismatch, shared equally
    g_ff, g_dd = np.pi**2 * span**2 / 3, np.pi**2 * span**4 / 180
    step_f = 2 * np.sqrt(mismatch / 2 / g_ff)
    step_d = 2 * np.sqrt(mismatch / 2 / g_dd)
    fd_nodes = _nodes(dd_lo, dd_hi, step_d)
    f_lo_mid = df_lo + min(dd_lo * lever, dd_hi * lever)
    f_hi_mid = df_hi + max(dd_lo * lever, dd_hi * lever)
    f_nodes = _nodes(f_lo_mid, f_hi_mid, step_f)
    n_templates = len(f_nodes) * len(fd_nodes)
    if n_templates > MAX_BOX_TEMPLATES:
        raise InputError(f"the narrow-band box has {n_templates} templates over "
                         f"{span / 86400:.4g} days, more than {MAX_BOX_TEMPLATES}: use a "
                         "smaller box (n_sigma, fractional_width) or a larger mismatch",
                         value=box)
    nu_max = max(abs(f_lo_mid), abs(f_hi_mid)) + max(abs(dd_lo), abs(dd_hi)) * span / 2
    if nu_max * dt > _MAX_NU_DT:
        raise InputError(f"{data.source}: samples of {dt:.4g} s average away a signal at the "
                         f"edge of the box ({nu_max:.3g} Hz from the heterodyne; need "
                         f"offset x sample length <= {_MAX_NU_DT}): down-convert with "
                         "shorter samples")
    sigma = _sample_sigma(data, noise)
    a, b = data.modulation(target.coord)
    w = 1.0 / sigma**2
    m = np.array([[np.sum(w * a * a), np.sum(w * a * b)],
                  [np.sum(w * a * b), np.sum(w * b * b)]])
    m_inv = np.linalg.inv(m)
    tau = t - t_mid
    wa, wb = w * a * data.value, w * b * data.value
    # the phase factor separates: exp(-2 pi i df tau) exp(-pi i dfdot tau^2), so all the
    # templates' sums are one matrix product (frequency rows x spin-down columns)
    e_f = np.exp(-2j * np.pi * f_nodes[:, None] * tau[None])
    best, best_at = -np.inf, (0.0, 0.0)
    per = max(1, _CHUNK * 100 // max(len(tau), 1))
    for start in range(0, len(fd_nodes), per):
        fd = fd_nodes[start:start + per]
        chirp = np.exp(-1j * np.pi * tau[:, None] ** 2 * fd[None])
        uu, vv = e_f @ (wa[:, None] * chirp), e_f @ (wb[:, None] * chirp)
        two_f = np.real(np.conj(uu) * (m_inv[0, 0] * uu + m_inv[0, 1] * vv)
                        + np.conj(vv) * (m_inv[1, 0] * uu + m_inv[1, 1] * vv))
        i, k = np.unravel_index(int(np.argmax(two_f)), two_f.shape)
        if two_f[i, k] > best:
            best, best_at = float(two_f[i, k]), (float(f_nodes[i]), float(fd[k]))
    prior = (OrientationPrior.from_target(target) if orientation == "catalogue"
             else OrientationPrior())
    rule, scale = _signal_rule(prior, m, n_orientation, step_f, step_d, g_ff, g_dd,
                               (f_lo_mid, f_hi_mid), dt)
    h, mass = _posterior(best, n_templates, rule.nodes * scale, rule.weights, n_h0,
                         confidence)
    limit = quantile_from_grid(h, mass, confidence)
    info = {
        "target": target.name,
        "method": (f"narrow-band: Bayesian {confidence:.0%} limit from the loudest of "
                   f"{n_templates} templates (2F = {best:.4g}), its trials factor in the "
                   "likelihood of the largest value; uniform prior in h0 (module notes of "
                   "cwlimits.pulsars.narrowband)"),
        "box": (f"f_gw {box[0]:.9g} to {box[1]:.9g} Hz, fdot_gw {box[2]:.4g} to "
                f"{box[3]:.4g} Hz/s ({origin}); cubic grid at mismatch {mismatch:g}"),
        "noise": ("Gaussian, sigma of the data file" if noise == "given" else
                  "Gaussian, sigma of each stretch estimated from its samples"),
        "orientation_prior": prior.describe(),
        "trials": "templates taken as independent (conservative: neighbours correlate)",
    }
    return NarrowBandLimit(target.name, float(limit), float(confidence), best, best_at,
                           int(n_templates), h, mass, info)


def _nodes(lo, hi, step):
    """Templates every ``step`` covering [lo, hi], centred on the interval."""
    n = max(1, int(np.ceil((hi - lo) / step - 1e-9)))
    return 0.5 * (lo + hi) + step * (np.arange(n) - (n - 1) / 2)


def _signal_rule(prior, m, n, step_f, step_d, g_ff, g_dd, f_range, dt):
    """The signal factor Y(cos iota, psi) (1 - mu) sinc^2(pi nu dt): a rule on [0, 1], a scale."""
    c_nodes, c_w = prior.cosi_nodes(n)
    s_nodes, s_w = prior.psi_nodes(n)
    p, q = orientation_coefficients(c_nodes[:, None], s_nodes[None, :], "22")
    y = (np.abs(p) ** 2 * m[0, 0] + np.abs(q) ** 2 * m[1, 1]
         + 2 * np.real(p * np.conj(q)) * m[0, 1])
    scale = float(y.max())
    r2 = QuadratureRule(np.ravel(y / scale), np.ravel(c_w[:, None] * s_w[None, :]),
                        name="orientation")
    rng = np.random.default_rng(_MISMATCH_SEED)
    off_f = rng.uniform(-0.5, 0.5, 512) * step_f
    off_d = rng.uniform(-0.5, 0.5, 512) * step_d
    mu = g_ff * off_f**2 + g_dd * off_d**2
    nu = rng.uniform(*f_range, 512)
    keep = (1 - np.minimum(mu, 1.0)) * np.sinc(nu * dt) ** 2  # np.sinc(x) = sin(pi x)/(pi x)
    rule = combine_rules(r2, QuadratureRule.from_samples(1 - keep, name="mismatch"))
    return rule, scale


def _posterior(x, n_templates, c, w, n_h0, confidence):
    """h0 grid and posterior masses for the loudest value ``x`` (uniform h0 prior).

    The grid's top starts where the weighted-mean signal factor gives a non-centrality
    far above ``x``; it doubles until the last 5 % of the grid holds < 1e-6 of the mass,
    then shrinks to three times the 0.9999 quantile so that the bulk is well resolved.
    """
    c_mean = float(np.sum(w * c))
    top = (np.sqrt(max(x, 4.0)) + 10.0) / np.sqrt(c_mean)

    def on(top):
        h = np.linspace(0.0, top, n_h0)
        like = np.sum(w[None] * loudest_likelihood(x, h[:, None] ** 2 * c[None],
                                                   n_templates), axis=1)
        mass = like * _h0_weights(h)
        return h, mass

    for _ in range(12):
        h, mass = on(top)
        if mass.sum() > 0 and mass[-max(1, n_h0 // 20):].sum() < 1e-6 * mass.sum():
            break
        top *= 2
    else:
        raise InputError("the narrow-band posterior did not fall off over the h0 grid")
    tight = 3 * quantile_from_grid(h, mass, 0.9999)
    if tight < top:
        h, mass = on(tight)
    return h, mass / mass.sum()
