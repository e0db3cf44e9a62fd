"""Bayesian upper limits on a known pulsar's amplitude from down-converted data.

The time-domain method of Dupuis & Woan 2005 (arXiv:gr-qc/0508096): the posterior of
(h0, cos iota, psi, phi0) for the data of :mod:`.data`, with

* the noise of each stretch marginalised (``noise='student-t'``: a Jeffreys prior on its
  sigma gives a Student-t likelihood, their eq. 6), or known (``'given'``: the file's
  ``sigma``; ``'estimated'``: sigma_j^2 = sum |B|^2 / (2 m_j) of the stretch, a plug-in
  estimate that ignores the signal's share);
* priors uniform or log-uniform in h0, and uniform or the catalogue's restricted
  orientation prior (:class:`.grid.OrientationPrior`), phi0 uniform.

Two paths that agree (tested):

* ``sampler='grid'``: a vectorised product grid (phi0 integrated in closed form for known
  noise, on a grid for the Student-t likelihood);
* ``sampler='emcee'``: an affine-invariant ensemble (Foreman-Mackey et al. 2013,
  arXiv:1202.3665) on the same likelihood and priors, the h0 prior cut at the grid's top.

The limit at ``confidence`` is the posterior quantile of h0 (for the m = 1 harmonic, of
C21).  Ratios a paper reports (h_UL / h_sd, the spin-down fraction (h_UL / h_sd)^2,
ellipticity, Q22, C22 = h0 / 2) are in :func:`limit_table`.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import TYPE_CHECKING

import astropy.units as u
import numpy as np
from astropy.table import QTable
from scipy import special

from cwlimits import _defaults
from cwlimits._units import fraction
from cwlimits.errors import InputError
from cwlimits.pulsars.data import DownConvertedData, stretch_sums
from cwlimits.pulsars.grid import (
    H0_PRIORS,
    OrientationPrior,
    _h0_weights,
    _wrapped_normal,
    check_grid,
    grid_posterior_known,
    h0_grid,
    h0_top,
    quantile_from_grid,
    zoom_window,
)
from cwlimits.pulsars.likelihood import orientation_coefficients, student_log_likelihood
from cwlimits.targets.conversions import ellipticity, mass_quadrupole
from cwlimits.targets.fiducial import DEFAULT_MOMENT_OF_INERTIA
from cwlimits.targets.indirect import spindown_limit

if TYPE_CHECKING:
    from numpy.typing import ArrayLike

    from cwlimits._random import RngLike
    from cwlimits.targets.catalogue import Target

__all__ = ["PulsarPosterior", "pulsar_posterior", "limit_table", "spindown_ratios",
           "NOISE_MODES", "SAMPLERS", "HARMONICS"]

NOISE_MODES = _defaults.PULSAR_NOISE_MODES
SAMPLERS = _defaults.PULSAR_SAMPLERS
#: '22': data at 2 f_rot, amplitude h0 (= 2 C22); '21': data at f_rot, amplitude C21.
HARMONICS = _defaults.PULSAR_HARMONICS
PARAMETERS = ("h0", "cosi", "psi", "phi0")


@dataclass
class PulsarPosterior:
    """A known pulsar's posterior: marginals on nodes (grid) or samples (emcee).

    Attributes
    ----------
    target : str
    harmonic : str
        ``'22'`` (amplitude h0) or ``'21'`` (amplitude C21).
    confidence : float
    marginals : dict
        Parameter -> (nodes, probability mass per node); psi in [0, pi/2) rad, phi0 in
        [0, 2 pi) rad.
    pairs : dict
        (parameter, parameter) -> (x nodes, y nodes, mass (len x, len y)), for the corner
        figure.
    samples : ndarray (n, 4) or None
        emcee samples of (h0, cosi, psi, phi0) after burn-in.
    sampler, noise : str
    assumptions : dict
    n_eff : float
        Effective number of independent samples (emcee), NaN for the grid.
    """

    target: str
    harmonic: str
    confidence: float
    marginals: dict
    pairs: dict
    samples: np.ndarray | None
    sampler: str
    noise: str
    assumptions: dict = field(default_factory=dict)
    n_eff: float = float("nan")

    @property
    def amplitude_name(self):
        """'h0' or 'C21': what the limit is on."""
        return "h0" if self.harmonic == "22" else "C21"

    def quantile(self, level):
        """The ``level`` quantile of the amplitude."""
        if self.samples is not None:
            return float(np.quantile(self.samples[:, 0], level))
        h, mass = self.marginals["h0"]
        return quantile_from_grid(h, mass, level)

    @property
    def upper_limit(self):
        """The amplitude's ``confidence`` quantile: the upper limit."""
        return self.quantile(self.confidence)

    def interval(self, parameter, level=0.9):
        """Central credible interval (lo, hi) of a parameter at ``level``."""
        if parameter not in PARAMETERS:
            raise InputError(f"parameter must be one of {', '.join(PARAMETERS)}",
                             value=parameter)
        lo_q, hi_q = (1 - level) / 2, (1 + level) / 2
        if self.samples is not None:
            x = self.samples[:, PARAMETERS.index(parameter)]
            return tuple(float(v) for v in np.quantile(x, [lo_q, hi_q]))
        nodes, mass = self.marginals[parameter]
        cdf = np.cumsum(mass) / np.sum(mass)
        return (float(np.interp(lo_q, cdf, nodes)), float(np.interp(hi_q, cdf, nodes)))


def _check(value, choices, name):
    if value not in choices:
        raise InputError(f"{name} must be one of {', '.join(choices)}", value=value)


def _sums_for(data, target, noise):
    sums = stretch_sums(data, target.coord)
    if noise == "given":
        if not np.all(np.isfinite(sums.sigma)):
            raise InputError(f"{data.source}: noise='given' needs a sigma for every sample "
                             "(column 'sigma'); use 'student-t' or 'estimated'")
    else:
        # plug-in sigma_j^2 = sum |B|^2 / (2 m_j): sets the scale of the grid (student-t)
        # or is the noise level itself ('estimated')
        sigma = np.sqrt(sums.s_bb / (2 * sums.m))
        if noise == "estimated" or not np.all(np.isfinite(sums.sigma)):
            sums.sigma = sigma
    return sums


def pulsar_posterior(data, target: Target, *, noise="student-t", h0_prior: str = "uniform",
                     h0_min=None, h0_max=None, orientation: str = "catalogue",
                     confidence: float = 0.95, sampler: str = "grid", harmonic="22", grid=None,
                     rng: RngLike | None = None, n_walkers: int = 32, n_steps: int = 3000,
                     burn: int = 1000) -> PulsarPosterior:
    """The posterior of a known pulsar's signal in down-converted data, and its limit.

    Parameters
    ----------
    data : DownConvertedData, BandData or str/Path
        Down-converted samples (:mod:`.data`), band data of :mod:`cwlimits.simulation.synthetic`
        (down-converted here with the target's timing solution and Doppler), or a file.
    target : Target
        A known pulsar: its position sets the antenna patterns; its ``cosi``/``psi``
        columns the restricted prior.
    noise : {'student-t', 'given', 'estimated'}
    h0_prior : {'uniform', 'log-uniform'}
        Log-uniform needs ``h0_min``.
    h0_max : float, optional
        Upper end of the h0 prior; default: where the likelihood has fallen below
        exp(-40) of its peak for every orientation (the grid's top).
    orientation : {'catalogue', 'uniform'}
    confidence : float
        Of the upper limit, in (0, 1).
    sampler : {'grid', 'emcee'}
    harmonic : {'22', '21'}
        The data's harmonic: 2 f_rot (amplitude h0) or f_rot (amplitude C21).
    grid : dict, optional
        Grid sizes (:data:`cwlimits.pulsars.grid.DEFAULT_GRID`).
    rng : None, int or Generator
        For emcee (seeded from it).
    n_walkers, n_steps, burn : int
        emcee ensemble size, steps per walker and steps dropped.

    Returns
    -------
    PulsarPosterior

    Raises
    ------
    InputError
        Bad choices; ``noise='given'`` without sigma; a target without a known spin.

    References
    ----------
    Dupuis & Woan 2005, arXiv:gr-qc/0508096; Foreman-Mackey et al. 2013, arXiv:1202.3665.
    """
    _check(noise, NOISE_MODES, "noise")
    _check(h0_prior, H0_PRIORS, "h0_prior")
    _check(orientation, ("catalogue", "uniform"), "orientation")
    _check(sampler, SAMPLERS, "sampler")
    _check(harmonic, HARMONICS, "harmonic")
    confidence = fraction(confidence, "confidence")
    if not target.has_spin:
        raise InputError(f"target '{target.name}' has no known spin (f_rot, fdot_rot)")
    data = _as_data(data, target, harmonic)
    prior = (OrientationPrior.from_target(target) if orientation == "catalogue"
             else OrientationPrior())
    sums = _sums_for(data, target, noise)
    grid = check_grid(grid)
    w = 1.0 / sums.sigma**2
    uw, vw = np.sum(w * sums.u), np.sum(w * sums.v)
    saa, sbb, sab = (float(np.sum(w * x)) for x in (sums.s_aa, sums.s_bb_pat, sums.s_ab))
    c, wc = prior.cosi_nodes(grid["n_cosi"])
    s, ws = prior.psi_nodes(grid["n_psi"])
    p, q = orientation_coefficients(c[:, None], s[None, :], harmonic)
    h_max = h0_top(p, q, uw, vw, saa, sbb, sab)
    if h0_max is not None:
        if not 0 < h0_max:
            raise InputError("h0_max must be positive", value=h0_max)
        h_max = min(h_max, float(h0_max))
    if h0_prior == "log-uniform" and (h0_min is None or not 0 < h0_min < h_max):
        raise InputError(f"a log-uniform h0 prior needs 0 < h0_min < {h_max:.3g} (the top "
                         "of the grid, where the likelihood has fallen off)", value=h0_min)
    # two passes: the second zooms each parameter onto where the first found the mass, so
    # that a loud signal's narrow peak is resolved (zoom_window; None keeps the full range)
    windows = {}
    for _ in range(2):
        if noise == "student-t":
            marg, pairs = _grid_student(sums, prior, grid, h_max, h0_prior, h0_min, harmonic,
                                        windows)
        else:
            marg, pairs = _grid_known(uw, vw, saa, sbb, sab, prior, grid, h_max, h0_prior,
                                      h0_min, harmonic, windows)
        if windows:
            break
        windows = {
            "h0": zoom_window(*marg["h0"], 0.0 if h0_prior == "uniform" else h0_min, h_max),
            "cosi": zoom_window(*marg["cosi"], -1.0, 1.0),
            "psi": zoom_window(*marg["psi"], 0.0, np.pi / 2, period=np.pi / 2),
            "phi0": zoom_window(*marg["phi0"], 0.0, 2 * np.pi, period=2 * np.pi)}
        windows = {k: w for k, w in windows.items() if w is not None}
        if not windows:
            break
    info = _assumptions(data, target, noise, h0_prior, h0_min, prior, sampler, harmonic,
                        h_max, grid, h0_max is not None and h_max == float(h0_max))
    post = PulsarPosterior(target.name, harmonic, float(confidence), marg, pairs, None,
                           "grid", noise, info)
    if sampler == "emcee":
        samples, n_eff = _run_emcee(sums, noise, prior, harmonic, h0_prior, h0_min, h_max,
                                    rng, n_walkers, n_steps, burn, post)
        post.samples, post.sampler, post.n_eff = samples, "emcee", n_eff
    return post


def _as_data(data, target, harmonic):
    from cwlimits.pulsars.data import from_band_data, read_down_converted
    from cwlimits.simulation.synthetic import BandData

    if isinstance(data, DownConvertedData):
        return data
    if isinstance(data, BandData):
        return from_band_data(data, target, harmonic=2.0 if harmonic == "22" else 1.0)
    return read_down_converted(data)


def _phi0_nodes(n, window):
    if window is None:
        return (np.arange(n) + 0.5) * 2 * np.pi / n, np.ones(n)
    x, w = special.roots_legendre(n)
    return window[0] + (window[1] - window[0]) * (x + 1) / 2, w


def _grid_known(uw, vw, saa, sbb, sab, prior, grid, h_max, h0_prior, h0_min, harmonic,
                windows):
    out = grid_posterior_known(uw, vw, saa, sbb, sab, prior, h0_prior=h0_prior,
                               h0_min=h0_min, h_max=h_max, grid=grid, harmonic=harmonic,
                               windows=windows)
    h, c, s, post = out["h0"], out["cosi"], out["psi"], out["post"]
    # phi0 given (h0, cosi, psi) is von Mises with kappa = h0 |X|, mean arg X (the phi0
    # integral of .likelihood); its marginal is the posterior-weighted mixture
    pp, qq = orientation_coefficients(c[:, None], s[None, :], harmonic)
    x = np.conj(pp) * uw + np.conj(qq) * vw
    phi, w_phi = _phi0_nodes(grid["n_phi0"], windows.get("phi0"))
    kappa = h[:, None, None] * np.abs(x)[None]
    mu = np.angle(x)[None]
    phi_mass = np.zeros(len(phi))
    for k, ph in enumerate(phi):
        dens = (np.exp(kappa * (np.cos(ph - mu) - 1)) / (2 * np.pi * special.i0e(kappa)))
        phi_mass[k] = np.sum(post * dens) * w_phi[k]
    phi = np.mod(phi, 2 * np.pi)
    order = np.argsort(phi)
    phi, phi_mass = phi[order], phi_mass[order]
    marg = {"h0": (h, post.sum(axis=(1, 2))), "cosi": (c, post.sum(axis=(0, 2))),
            "psi": (s, post.sum(axis=(0, 1))), "phi0": (phi, phi_mass / phi_mass.sum())}
    pairs = {("h0", "cosi"): (h, c, post.sum(axis=2)), ("h0", "psi"): (h, s, post.sum(axis=1)),
             ("cosi", "psi"): (c, s, post.sum(axis=0))}
    return marg, pairs


def _grid_student(sums, prior, grid, h_max, h0_prior, h0_min, harmonic, windows):
    c, wc = prior.cosi_nodes(grid["n_cosi"], windows.get("cosi"))
    s, ws = prior.psi_nodes(grid["n_psi"], windows.get("psi"))
    h, ph = h0_grid(h_max, grid["n_h0"], h0_prior, h0_min, windows.get("h0"))
    phi, w_phi = _phi0_nodes(grid["n_phi0"], windows.get("phi0"))
    p, q = orientation_coefficients(c[:, None], s[None, :], harmonic)
    logl = student_log_likelihood(h[:, None, None, None], phi[None, None, None, :],
                                  p[None, :, :, None], q[None, :, :, None], sums)
    logl -= logl.max()
    weight = ((_h0_weights(h) * ph)[:, None, None, None] * wc[None, :, None, None]
              * ws[None, None, :, None] * w_phi[None, None, None, :])
    post = np.exp(logl) * weight
    post /= post.sum()
    marg = {"h0": (h, post.sum(axis=(1, 2, 3))), "cosi": (c, post.sum(axis=(0, 2, 3))),
            "psi": (s, post.sum(axis=(0, 1, 3))), "phi0": (phi, post.sum(axis=(0, 1, 2)))}
    pairs = {("h0", "cosi"): (h, c, post.sum(axis=(2, 3))),
             ("h0", "psi"): (h, s, post.sum(axis=(1, 3))),
             ("h0", "phi0"): (h, phi, post.sum(axis=(1, 2))),
             ("cosi", "psi"): (c, s, post.sum(axis=(0, 3))),
             ("cosi", "phi0"): (c, phi, post.sum(axis=(0, 2))),
             ("psi", "phi0"): (s, phi, post.sum(axis=(0, 1)))}
    return marg, pairs


def _log_prior(theta, prior, h0_prior, h0_min, h_max):
    h0, cosi, psi = theta[:, 0], theta[:, 1], theta[:, 2]
    out = np.zeros(len(theta))
    low = 0.0 if h0_prior == "uniform" else h0_min
    # psi in [0, pi) and phi0 in [0, 2 pi): one period of the likelihood each
    bad = ((h0 < low) | (h0 > h_max) | (np.abs(cosi) > 1) | (psi < 0) | (psi >= np.pi)
           | (theta[:, 3] < 0) | (theta[:, 3] >= 2 * np.pi))
    if h0_prior == "log-uniform":
        out -= np.log(np.where(bad, 1.0, h0))
    if prior.cosi is not None:
        out += -0.5 * ((cosi - prior.cosi) / prior.cosi_err) ** 2
    if prior.psi_rad is not None:
        out += np.log(_wrapped_normal(np.mod(psi, np.pi / 2), prior.psi_rad,
                                      prior.psi_err_rad) + 1e-300)
    return np.where(bad, -np.inf, out)


def _run_emcee(sums, noise, prior, harmonic, h0_prior, h0_min, h_max, rng, n_walkers,
               n_steps, burn, post):
    import emcee

    n_walkers, n_steps, burn = int(n_walkers), int(n_steps), int(burn)
    if n_walkers < 8 or n_walkers % 2 or not 0 <= burn < n_steps or n_steps > 10**6:
        raise InputError("emcee needs an even n_walkers >= 8 and 0 <= burn < n_steps "
                         "<= 1e6", value=(n_walkers, n_steps, burn))
    rng = np.random.default_rng(rng)
    w = 1.0 / sums.sigma**2
    uw, vw = np.sum(w * sums.u), np.sum(w * sums.v)
    saa, sbb, sab = (np.sum(w * x) for x in (sums.s_aa, sums.s_bb_pat, sums.s_ab))

    def log_prob(theta):
        lp = _log_prior(theta, prior, h0_prior, h0_min, h_max)
        ok = np.isfinite(lp)
        out = np.full(len(theta), -np.inf)
        if not ok.any():
            return out
        h0, cosi, psi, phi0 = theta[ok].T
        p, q = orientation_coefficients(cosi, psi, harmonic)
        if noise == "student-t":
            ll = student_log_likelihood(h0, phi0, p, q, sums)
        else:
            # Gaussian, phi0 explicit: h0 Re(e^{-i phi0} X) - h0^2 Y / 2 (.likelihood)
            x = np.conj(p) * uw + np.conj(q) * vw
            y = np.abs(p) ** 2 * saa + np.abs(q) ** 2 * sbb + 2 * np.real(p * np.conj(q)) * sab
            ll = h0 * np.real(np.exp(-1j * phi0) * x) - h0**2 * y / 2
        out[ok] = lp[ok] + ll
        return out

    # start the walkers from draws of the grid posterior (burn-in removes the memory)
    start = np.column_stack([_draw(post.marginals[k], n_walkers, rng) for k in PARAMETERS])
    # differential-evolution moves mix well on the curved (h0, cos iota) posterior, as in
    # cwlimits.limits (a mixture with the stretch move, as the emcee documentation shows)
    moves = [(emcee.moves.DEMove(), 0.8), (emcee.moves.StretchMove(), 0.2)]
    sampler = emcee.EnsembleSampler(n_walkers, 4, log_prob, vectorize=True, moves=moves)
    # seed emcee's internal RandomState from our generator (no global state)
    sampler.random_state = np.random.RandomState(int(rng.integers(2**32 - 1))).get_state()
    sampler.run_mcmc(start, n_steps, progress=False)
    chain = sampler.get_chain(discard=burn)
    tau = emcee.autocorr.integrated_time(chain[:, :, 0], quiet=True)
    samples = chain.reshape(-1, 4).copy()
    samples[:, 2] = np.mod(samples[:, 2], np.pi / 2)
    samples[:, 3] = np.mod(samples[:, 3], 2 * np.pi)
    n_eff = float(chain.shape[0] * chain.shape[1] / max(float(np.max(tau)), 1.0))
    return samples, n_eff


def _draw(marginal, n, rng):
    nodes, mass = marginal
    return rng.choice(nodes, size=n, p=mass / mass.sum()) * (1 + 1e-3 * rng.standard_normal(n))


def _assumptions(data, target, noise, h0_prior, h0_min, prior, sampler, harmonic, h_max,
                 grid, top_given=False):
    noise_text = {
        "student-t": "Gaussian within each stretch, sigma unknown and marginalised with a "
                     "Jeffreys prior (Student-t, Dupuis & Woan 2005, eq. 6)",
        "given": "Gaussian with the sigma of the data file, stationary within a stretch",
        "estimated": "Gaussian, sigma of each stretch estimated from its samples",
    }[noise]
    amp = "h0" if harmonic == "22" else "C21"
    return {
        "target": target.name,
        "data": f"{data.source}: {len(data)} samples, {data.n_stretches} stretches, "
                f"detectors {','.join(data.detectors)}",
        "harmonic": ("l = m = 2 at 2 f_rot (h0 = 2 C22)" if harmonic == "22" else
                     "l = 2, m = 1 at f_rot (amplitude C21; Jones 2015, Pitkin et al. 2015)"),
        "noise": noise_text,
        "priors": f"{amp} {h0_prior}" + (f" from {h0_min:.3g}" if h0_min else " from 0")
                  + f" to {h_max:.3g} " + ("(h0_max)" if top_given else
                                           "(where the likelihood is below exp(-40) of "
                                           "its peak)") + "; phi0 uniform; "
                  + prior.describe(),
        "method": f"{sampler}: " + ("product grid " + ", ".join(f"{k}={v}" for k, v in
                                                                 grid.items())
                                    if sampler == "grid" else "emcee ensemble"),
        "phase": "the data are heterodyned with the exact timing solution and Doppler "
                 "(no timing noise, no glitch)",
    }


def spindown_ratios(h_ul: float | ArrayLike, target: Target,
                    moment_of_inertia: u.Quantity = DEFAULT_MOMENT_OF_INERTIA) -> dict:
    """h_UL against the spin-down limit, and the ellipticity and Q22 it allows.

    Returns
    -------
    dict
        ``h0_spindown``, ``ratio_spindown`` = h_UL / h_sd, ``spindown_fraction`` =
        (h_UL / h_sd)^2 (the fraction of the spin-down luminosity radiated, since L_gw is
        proportional to h0^2; Abbott et al. 2008, arXiv:0805.4758), ``eps_limit`` and
        ``eps_limit_min``/``_max`` over the distance range (f_gw = 2 f_rot), ``q22_limit``.
    """
    f_gw = (2 * target.f_rot).to(u.Hz)
    h_sd = float(spindown_limit(target.f_rot, target.fdot_rot, target.distance,
                                moment_of_inertia).value)
    eps = ellipticity(h_ul, f_gw, target.distance, moment_of_inertia)
    return {
        "h0_spindown": h_sd,
        "ratio_spindown": h_ul / h_sd,
        "spindown_fraction": (h_ul / h_sd) ** 2,
        "eps_limit": float(eps.value),
        "eps_limit_min": float(ellipticity(h_ul, f_gw, target.distance_min,
                                           moment_of_inertia).value),
        "eps_limit_max": float(ellipticity(h_ul, f_gw, target.distance_max,
                                           moment_of_inertia).value),
        "q22_limit": mass_quadrupole(eps, moment_of_inertia),
    }


def limit_table(posterior, target: Target, *,
                moment_of_inertia: u.Quantity = DEFAULT_MOMENT_OF_INERTIA):
    """The limit and the ratios a paper reports, with units and assumptions.

    Columns: ``target``, ``harmonic``, ``f_gw``, ``confidence``, ``amplitude`` (h0 or
    C21), ``upper_limit``; for the '22' harmonic ``c22_limit`` = h0/2 (Jones 2015),
    ``h0_spindown``, ``ratio_spindown`` = h_UL / h_sd, ``spindown_fraction`` =
    (h_UL / h_sd)^2 (the fraction of the spin-down luminosity the limit allows; Abbott et
    al. 2008, arXiv:0805.4758), ``eps_limit`` with ``eps_limit_min``/``_max`` over the
    distance range, ``q22_limit`` (Q22 = sqrt(15 / 8 pi) I eps; Owen 2005, arXiv:
    astro-ph/0503399), and 90 % central intervals of cos iota, psi, phi0.
    """
    h_ul = posterior.upper_limit
    k = 2.0 if posterior.harmonic == "22" else 1.0
    f_gw = (k * target.f_rot).to(u.Hz)
    t = QTable()
    t["target"] = [target.name]
    t["harmonic"] = [posterior.harmonic]
    t["f_gw"] = [f_gw.value] * u.Hz
    t["confidence"] = [posterior.confidence]
    t["amplitude"] = [posterior.amplitude_name]
    t["upper_limit"] = [h_ul]
    nan = float("nan")
    if posterior.harmonic == "22":
        ratios = spindown_ratios(h_ul, target, moment_of_inertia)
        t["c22_limit"] = [h_ul / 2]
        for key, value in ratios.items():
            t[key] = u.Quantity([value]) if isinstance(value, u.Quantity) else [value]
    else:
        t["c21_limit"] = [h_ul]
        for col in ("h0_spindown", "ratio_spindown", "spindown_fraction"):
            t[col] = [nan]
    for par, level in (("cosi", 0.9), ("psi", 0.9), ("phi0", 0.9)):
        lo, hi = posterior.interval(par, level)
        unit = u.one if par == "cosi" else u.rad
        t[f"{par}_lo90"] = [lo] * unit
        t[f"{par}_hi90"] = [hi] * unit
    info = dict(posterior.assumptions)
    info["limit"] = (f"{posterior.confidence:.0%} posterior quantile of "
                     f"{posterior.amplitude_name} ({posterior.sampler})")
    if posterior.harmonic == "22":
        info["spindown"] = (f"h_sd with I = {moment_of_inertia:g} and d = "
                            f"{target.distance:g}; all rotational energy loss in "
                            "gravitational waves")
        info["ellipticity"] = (f"eps for I = {moment_of_inertia:g}, d = {target.distance:g} "
                               f"(range {target.distance_min:g} to {target.distance_max:g})")
    t.meta["assumptions"] = info
    return t
