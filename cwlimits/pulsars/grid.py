"""Priors and the vectorised grid integration of a known pulsar's posterior.

The posterior of (h0, cos iota, psi[, phi0]) is tabulated on a product grid: h0 on an even
grid (uniform prior) or an even grid in ln h0 (log-uniform prior), cos iota and psi on
Gauss-Legendre nodes over the prior's support, phi0 on a midpoint rule over [0, 2 pi).
With known noise phi0 is integrated analytically (see :mod:`.likelihood`), so the grid is
three-dimensional.  psi is taken modulo pi/2: once phi0 is integrated over [0, 2 pi) the
likelihood is invariant under psi -> psi + pi/2, phi0 -> phi0 + pi (common practice;
Jaranowski, Krolak & Schutz 1998, Sect. II).

The restricted orientation prior of a catalogue row is a Gaussian in cos iota (truncated
to [-1, 1]) and a Gaussian in psi wrapped onto [0, pi/2) (the half-widths come from
imaging of a wind-nebula torus or jet; the Gaussian shape is our choice, stated in every
output).
"""

from dataclasses import dataclass

import numpy as np
from scipy import special, stats

from cwlimits.errors import InputError
from cwlimits.pulsars.likelihood import known_noise_log_likelihood, orientation_coefficients

__all__ = ["OrientationPrior", "H0_PRIORS", "h0_grid", "grid_posterior_known", "zoom_window",
           "quantile_from_grid", "DEFAULT_GRID", "MAX_GRID_POINTS", "check_grid"]

H0_PRIORS = ("uniform", "log-uniform")

#: Grid sizes: h0 points, cos iota nodes, psi nodes, phi0 nodes.  The 95 % quantile of h0
#: moved by 0.1 % when the h0, cos iota and psi sizes were doubled (noise-only and
#: injected cases; tests/test_pulsars_posterior.py checks < 0.5 %).
DEFAULT_GRID = {"n_h0": 120, "n_cosi": 16, "n_psi": 16, "n_phi0": 16}

#: The h0 grid ends where the likelihood of every orientation has dropped by
#: exp(-_H_TAIL**2 / 2) from its peak (the Gaussian width in h0 is 1/sqrt(Y)).
_H_TAIL = 9.0
_PSI_PERIOD = np.pi / 2


@dataclass(frozen=True)
class OrientationPrior:
    """Prior on cos iota and psi: uniform, or Gaussian around catalogue values.

    Parameters
    ----------
    cosi, cosi_err : float or None
        Centre and width of a Gaussian in cos iota, truncated to [-1, 1]; None: uniform.
    psi_rad, psi_err_rad : float or None
        Centre and width (rad) of a Gaussian in psi wrapped onto [0, pi/2); None: uniform.
    """

    cosi: float | None = None
    cosi_err: float | None = None
    psi_rad: float | None = None
    psi_err_rad: float | None = None

    def __post_init__(self):
        if (self.cosi is None) != (self.cosi_err is None):
            raise InputError("a cos(iota) prior needs both cosi and cosi_err")
        if (self.psi_rad is None) != (self.psi_err_rad is None):
            raise InputError("a psi prior needs both psi and psi_err")
        if self.cosi is not None and not (abs(self.cosi) <= 1 and self.cosi_err > 0):
            raise InputError("cosi must lie in [-1, 1] and cosi_err be > 0",
                             value=(self.cosi, self.cosi_err))
        if self.psi_rad is not None and not self.psi_err_rad > 0:
            raise InputError("psi_err must be > 0", value=self.psi_err_rad)

    @classmethod
    def from_target(cls, target):
        """The catalogue's restricted prior of ``target`` (uniform where not given)."""
        psi = None if target.psi is None else float(target.psi.to_value("rad"))
        psi_err = None if target.psi_err is None else float(target.psi_err.to_value("rad"))
        if psi is not None and psi_err is None:
            raise InputError(f"target '{target.name}': psi is given without psi_err")
        if target.cosi is not None and target.cosi_err is None:
            raise InputError(f"target '{target.name}': cosi is given without cosi_err")
        return cls(target.cosi, target.cosi_err, psi, psi_err)

    @property
    def restricted(self):
        """Whether any part of the prior is narrower than uniform."""
        return self.cosi is not None or self.psi_rad is not None

    def describe(self):
        """One line for the assumptions of an output."""
        c = ("cos iota uniform in [-1, 1]" if self.cosi is None else
             f"cos iota ~ N({self.cosi:g}, {self.cosi_err:g}) truncated to [-1, 1]")
        p = ("psi uniform in [0, pi/2) (equivalent to [0, pi) once phi0 is integrated)"
             if self.psi_rad is None else
             f"psi ~ N({np.degrees(self.psi_rad):g} deg, {np.degrees(self.psi_err_rad):g} "
             "deg) wrapped onto [0, 90) deg")
        return f"{c}; {p}"

    def cosi_nodes(self, n, window=None):
        """Nodes and weights (summing to 1) of the cos iota prior (within ``window``)."""
        if self.cosi is None:
            lo, hi = -1.0, 1.0
        else:
            lo = max(-1.0, self.cosi - 6 * self.cosi_err)
            hi = min(1.0, self.cosi + 6 * self.cosi_err)
        if window is not None:
            lo, hi = max(lo, window[0]), min(hi, window[1])
        x, w = special.roots_legendre(n)
        nodes = lo + (hi - lo) * (x + 1) / 2
        w = w * (hi - lo) / 2
        if self.cosi is not None:
            w = w * stats.norm.pdf(nodes, self.cosi, self.cosi_err)
        return nodes, w / w.sum()

    def psi_nodes(self, n, window=None):
        """Nodes (rad, in [0, pi/2) or a window) and weights.

        A ``window`` (lo, hi) narrower than the period puts Gauss-Legendre nodes on it
        (the likelihood and the prior are periodic, so it may cross 0).
        """
        if window is not None and window[1] - window[0] < _PSI_PERIOD:
            x, w = special.roots_legendre(n)
            nodes = window[0] + (window[1] - window[0]) * (x + 1) / 2
            if self.psi_rad is not None:
                w = w * _wrapped_normal(nodes, self.psi_rad, self.psi_err_rad)
            return nodes, w / w.sum()
        if self.psi_rad is None or 6 * self.psi_err_rad >= _PSI_PERIOD / 2:
            nodes = (np.arange(n) + 0.5) * _PSI_PERIOD / n
            w = np.ones(n)
            if self.psi_rad is not None:
                w = _wrapped_normal(nodes, self.psi_rad, self.psi_err_rad)
            return nodes, w / w.sum()
        x, w = special.roots_legendre(n)
        half = 6 * self.psi_err_rad
        nodes = self.psi_rad + half * x
        w = w * _wrapped_normal(nodes, self.psi_rad, self.psi_err_rad)
        return nodes, w / w.sum()


def _wrapped_normal(x, centre, width):
    """Density of a normal in psi wrapped with period pi/2 (a sum over images)."""
    k = np.arange(-6, 7)[:, None]
    return stats.norm.pdf(np.asarray(x)[None] + k * _PSI_PERIOD, centre, width).sum(axis=0)


def h0_grid(h_max, n, prior="uniform", h_min=None, window=None):
    """The h0 points and the prior density on them (unnormalised).

    Uniform prior: even points on [0, h_max].  Log-uniform: even in ln h0 on
    [h_min, h_max] with density 1/h0.  A ``window`` (lo, hi) restricts the points to
    where the posterior has its mass (the zoom of :func:`zoom_window`).
    """
    if prior == "uniform":
        lo, hi = (0.0, h_max) if window is None else window
        h = np.linspace(lo, hi, n)
        return h, np.ones(n)
    if prior == "log-uniform":
        if h_min is None or not 0 < h_min < h_max:
            raise InputError("a log-uniform h0 prior needs 0 < h0_min below the grid's top "
                             f"({h_max:.3g})", value=h_min)
        lo, hi = (h_min, h_max) if window is None else (max(h_min, window[0]), window[1])
        h = np.geomspace(lo, hi, n)
        return h, 1.0 / h
    raise InputError(f"h0 prior must be one of {', '.join(H0_PRIORS)}", value=prior)


def h0_top(p, q, u, v, s_aa, s_bb, s_ab):
    """The top of the h0 grid: max over orientations of |X|/Y + _H_TAIL / sqrt(Y)."""
    x = np.conj(p) * u + np.conj(q) * v
    y = np.abs(p) ** 2 * s_aa + np.abs(q) ** 2 * s_bb + 2 * np.real(p * np.conj(q)) * s_ab
    y = np.maximum(y, 1e-30 * np.max(y))
    return float(np.max(np.abs(x) / y + _H_TAIL / np.sqrt(y), axis=None))


def zoom_window(nodes, mass, lower, upper, period=None, floor=1e-9):
    """The interval where a marginal has its mass (None if that is most of the range).

    The nodes with mass above ``floor`` x the largest, widened by two node spacings and
    clipped to [lower, upper].

    For a periodic parameter (``period``) the window is centred on the heaviest node and
    may cross the ends.
    """
    nodes, mass = np.asarray(nodes, float), np.asarray(mass, float)
    keep = mass > floor * mass.max()
    spacing = (upper - lower) / len(nodes)
    if period is not None:
        centre = nodes[np.argmax(mass)]
        dist = np.angle(np.exp(2j * np.pi * (nodes - centre) / period)) * period / (2 * np.pi)
        half = np.max(np.abs(dist[keep])) + 2 * spacing
        if 2 * half > 0.6 * period:
            return None
        return (centre - half, centre + half)
    lo = max(lower, nodes[keep].min() - 2 * spacing)
    hi = min(upper, nodes[keep].max() + 2 * spacing)
    if hi - lo > 0.6 * (upper - lower):
        return None
    return (lo, hi)


#: Largest grid (points of the 4-D product) accepted: about 0.3 GB of complex working arrays.
MAX_GRID_POINTS = 20_000_000


def check_grid(grid):
    """The grid sizes with the defaults filled in, each checked (4 to 4000, bounded product).

    Raises
    ------
    InputError
        For an unknown key, a size that is not an integer in [4, 4000], or a product of
        the sizes above :data:`MAX_GRID_POINTS`.
    """
    grid = dict(grid or {})
    unknown = sorted(set(grid) - set(DEFAULT_GRID))
    if unknown:
        raise InputError(f"unknown grid size(s) {', '.join(unknown)}; the sizes are "
                         f"{', '.join(DEFAULT_GRID)}")
    out = dict(DEFAULT_GRID, **grid)
    for key, value in out.items():
        if isinstance(value, bool) or not isinstance(value, (int, np.integer)) or not (
                4 <= value <= 4000):
            raise InputError(f"grid size {key} must be an integer from 4 to 4000",
                             value=value)
    if np.prod([int(v) for v in out.values()], dtype=float) > MAX_GRID_POINTS:
        raise InputError(f"the grid has more than {MAX_GRID_POINTS} points; use fewer",
                         value=out)
    return {k: int(v) for k, v in out.items()}


def grid_posterior_known(u, v, s_aa, s_bb, s_ab, prior, *, h0_prior="uniform", h0_min=None,
                         h_max=None, grid=None, harmonic="22", windows=None):
    """Posterior on the (h0, cosi, psi) grid for weighted sums, phi0 integrated.

    ``u``, ``v`` may carry a leading batch axis (noise draws): the result then has it too.

    Returns
    -------
    dict with ``h0`` (n_h0,) or (batch, n_h0), ``cosi``, ``psi`` nodes, ``post``
    (batch..., n_h0, n_cosi, n_psi) normalised to sum 1 including the node weights, and
    ``cosi_w``, ``psi_w``.
    """
    grid = check_grid(grid)
    windows = windows or {}
    c, wc = prior.cosi_nodes(grid["n_cosi"], windows.get("cosi"))
    s, ws = prior.psi_nodes(grid["n_psi"], windows.get("psi"))
    p, q = orientation_coefficients(c[:, None], s[None, :], harmonic)
    u, v = np.asarray(u), np.asarray(v)
    batch = u.shape
    if h_max is None:
        tops = [h0_top(p, q, uu, vv, s_aa, s_bb, s_ab) for uu, vv in
                zip(u.ravel(), v.ravel(), strict=True)]
        h_max = np.reshape(tops, batch)
    h_max = np.asarray(h_max, float)
    out_h = np.empty(batch + (grid["n_h0"],))
    out_post = np.empty(batch + (grid["n_h0"], len(c), len(s)))
    for idx in np.ndindex(batch):
        h, ph = h0_grid(float(h_max[idx] if h_max.ndim else h_max), grid["n_h0"], h0_prior,
                        h0_min, windows.get("h0"))
        logl = known_noise_log_likelihood(h[:, None, None], p[None], q[None], u[idx],
                                          v[idx], s_aa, s_bb, s_ab)
        logl -= logl.max()
        weights = _h0_weights(h) * ph
        post = np.exp(logl) * weights[:, None, None] * wc[None, :, None] * ws[None, None, :]
        out_post[idx] = post / post.sum()
        out_h[idx] = h
    return {"h0": out_h, "cosi": c, "psi": s, "post": out_post, "cosi_w": wc, "psi_w": ws}


def _h0_weights(h):
    """Trapezoid weights of the h0 points (so ``sum(w f)`` integrates f dh0)."""
    w = np.zeros_like(h)
    d = np.diff(h)
    w[:-1] += d / 2
    w[1:] += d / 2
    return w


def quantile_from_grid(h, mass, level):
    """The ``level`` quantile of h0 from grid masses (piecewise-linear CDF)."""
    cdf = np.cumsum(mass)
    cdf = cdf / cdf[-1]
    # the mass of point i is spread over its trapezoid cell: place the CDF at cell edges
    edges = np.concatenate([[h[0]], (h[1:] + h[:-1]) / 2, [h[-1]]])
    return float(np.interp(level, np.concatenate([[0.0], cdf]), edges))
