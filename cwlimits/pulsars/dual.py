"""The joint posterior of the dual-harmonic model: C21 and C22 from both harmonics' data.

A star whose spin is not aligned with its principal axes emits at f_rot (l = 2, m = 1,
amplitude C21) and at 2 f_rot (l = m = 2, amplitude C22) with the same orientation
(cos iota, psi) and independent phases (Jones 2010, arXiv:1003.0148; Pitkin et al. 2015,
arXiv:1508.00416, eqs. 2-3 and their two phase parameters).  The data are two
down-converted sets: heterodyned at f_rot and at 2 f_rot (:mod:`.data`).

With Gaussian noise of known sigma (given, or estimated per stretch) each phase is
integrated in closed form (the von Mises integral of :mod:`.likelihood`), so

    ln L = ln I0(C21 abs(X21)) - C21^2 Y21 / 2 + ln I0(h0 abs(X22)) - h0^2 Y22 / 2,

h0 = 2 C22 (Jones 2015, arXiv:1501.05832), X and Y of each harmonic as in :mod:`.likelihood`
with its orientation coefficients.  For fixed (cos iota, psi) the likelihood is a product
of a C21 part and a C22 part: the joint grid posterior of (C21, C22, cos iota, psi) is built
from the two three-dimensional grids of :func:`.grid.grid_posterior_known` on shared
orientation nodes, each amplitude's marginal weighted by the other harmonic's evidence per
orientation.  Priors: C21 and C22 uniform from 0 to where the likelihood has fallen off,
the orientation uniform or the catalogue's restricted prior, the phases uniform.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import TYPE_CHECKING

import astropy.units as u
import numpy as np
from astropy.table import QTable

from cwlimits._units import fraction
from cwlimits.errors import InputError
from cwlimits.pulsars.grid import (
    OrientationPrior,
    check_grid,
    grid_posterior_known,
    h0_top,
    quantile_from_grid,
    zoom_window,
)
from cwlimits.pulsars.likelihood import orientation_coefficients
from cwlimits.targets.fiducial import DEFAULT_MOMENT_OF_INERTIA

if TYPE_CHECKING:
    from cwlimits.targets.catalogue import Target

__all__ = ["DualHarmonicPosterior", "dual_harmonic_posterior", "dual_limit_table",
           "DUAL_GRID"]

#: Grid sizes of the joint fit.  The orientation is not zoomed (both harmonics share it),
#: so it takes finer nodes than the single-harmonic default: from 16 x 16 to 64 x 32 the
#: 90 % interval of cos iota of a detected signal shrank from 0.29 to 0.12 wide, and from
#: 64 x 32 to 96 x 48 (and twice the amplitude points) the C21 and C22 limits moved by
#: < 3 % (tests/test_pulsars_dual.py checks it).
DUAL_GRID = {"n_h0": 120, "n_cosi": 64, "n_psi": 32, "n_phi0": 4}


@dataclass
class DualHarmonicPosterior:
    """The joint posterior of C21, C22, cos iota and psi on grid nodes.

    Attributes
    ----------
    target : str
    confidence : float
    marginals : dict
        ``'C21'``, ``'C22'``, ``'cosi'``, ``'psi'`` -> (nodes, probability mass per node).
    assumptions : dict
    """

    target: str
    confidence: float
    marginals: dict
    assumptions: dict = field(default_factory=dict)

    def quantile(self, parameter, level):
        """The ``level`` quantile of ``'C21'`` or ``'C22'``."""
        nodes, mass = self.marginals[parameter]
        return quantile_from_grid(nodes, mass, level)

    @property
    def c21_limit(self):
        """The ``confidence`` quantile of C21."""
        return self.quantile("C21", self.confidence)

    @property
    def c22_limit(self):
        """The ``confidence`` quantile of C22."""
        return self.quantile("C22", self.confidence)

    def interval(self, parameter, level=0.9):
        """Central credible interval (lo, hi) of a parameter at ``level``."""
        if parameter not in self.marginals:
            raise InputError(f"parameter must be one of {', '.join(self.marginals)}",
                             value=parameter)
        nodes, mass = self.marginals[parameter]
        cdf = np.cumsum(mass) / np.sum(mass)
        return (float(np.interp((1 - level) / 2, cdf, nodes)),
                float(np.interp((1 + level) / 2, cdf, nodes)))


def _weighted(data, target, noise):
    from cwlimits.pulsars.posterior import _sums_for

    if noise not in ("given", "estimated"):
        raise InputError("the joint dual-harmonic fit needs noise 'given' or 'estimated' "
                         "(the phases are integrated in closed form for known noise)",
                         value=noise)
    sums = _sums_for(data, target, noise)
    w = 1.0 / sums.sigma**2
    return (np.sum(w * sums.u), np.sum(w * sums.v),
            *(float(np.sum(w * x)) for x in (sums.s_aa, sums.s_bb_pat, sums.s_ab)))


def dual_harmonic_posterior(data_21, data_22, target: Target, *, noise="estimated",
                            orientation: str = "catalogue", confidence: float = 0.95,
                            grid=None) -> DualHarmonicPosterior:
    """Joint posterior of C21 and C22 from data at f_rot and at 2 f_rot (module notes).

    Parameters
    ----------
    data_21, data_22 : DownConvertedData, BandData or str/Path
        Down-converted at f_rot and at 2 f_rot.
    target : Target
        A known pulsar (position; ``cosi``/``psi`` columns for the restricted prior).
    noise : {'estimated', 'given'}
    orientation : {'catalogue', 'uniform'}
    confidence : float
    grid : dict, optional
        Grid sizes (``n_h0`` is used for each amplitude).

    Returns
    -------
    DualHarmonicPosterior

    References
    ----------
    Jones 2010, arXiv:1003.0148; Pitkin et al. 2015, arXiv:1508.00416; Dupuis & Woan 2005,
    arXiv:gr-qc/0508096.
    """
    from cwlimits.pulsars.posterior import _as_data

    confidence = fraction(confidence, "confidence")
    if orientation not in ("catalogue", "uniform"):
        raise InputError("orientation must be 'catalogue' or 'uniform'", value=orientation)
    if not target.has_spin:
        raise InputError(f"target '{target.name}' has no known spin (f_rot, fdot_rot)")
    grid = check_grid(dict(DUAL_GRID, **(grid or {})))
    prior = (OrientationPrior.from_target(target) if orientation == "catalogue"
             else OrientationPrior())
    c, _ = prior.cosi_nodes(grid["n_cosi"])
    s, _ = prior.psi_nodes(grid["n_psi"])
    sums, tops = {}, {}
    for harmonic, data in (("21", data_21), ("22", data_22)):
        sums[harmonic] = _weighted(_as_data(data, target, harmonic), target, noise)
        p, q = orientation_coefficients(c[:, None], s[None, :], harmonic)
        tops[harmonic] = h0_top(p, q, *sums[harmonic])
    # two passes: the second puts the amplitude points where the first found the mass
    # (the top of the grid is set by the weakest orientation, far above a detection)
    windows = {"21": None, "22": None}
    for _ in range(2):
        marg, c, s = _joint(sums, tops, windows, prior, grid)
        zoom = {"21": zoom_window(*marg["C21"], 0.0, tops["21"]),
                "22": zoom_window(marg["C22"][0] * 2, marg["C22"][1], 0.0, tops["22"])}
        if windows != {"21": None, "22": None} or zoom == windows:
            break
        windows = zoom
    info = {
        "target": target.name,
        "model": "dual harmonic: C21 at f_rot, C22 at 2 f_rot (h0 = 2 C22), shared cos "
                 "iota and psi, independent phases (Jones 2010; Pitkin et al. 2015)",
        "noise": ("Gaussian, sigma of the data files" if noise == "given" else
                  "Gaussian, sigma of each stretch estimated from its samples"),
        "priors": "C21, C22 uniform from 0 to where the likelihood has fallen off; phases "
                  "uniform; " + prior.describe(),
        "method": "product grid " + ", ".join(f"{k}={v}" for k, v in grid.items()
                                              if k != "n_phi0")
                  + " (phases integrated in closed form)",
    }
    return DualHarmonicPosterior(target.name, float(confidence), marg, info)


def _joint(sums, tops, windows, prior, grid):
    """Marginals of the joint grid (module notes) for amplitude windows per harmonic."""
    parts = {}
    for harmonic in ("21", "22"):
        win = {} if windows[harmonic] is None else {"h0": windows[harmonic]}
        parts[harmonic] = grid_posterior_known(*sums[harmonic], prior, h_max=tops[harmonic],
                                               grid=grid, harmonic=harmonic, windows=win)
    p21, p22 = parts["21"], parts["22"]
    c, s = p21["cosi"], p21["psi"]
    w_orient = p21["cosi_w"][:, None] * p21["psi_w"][None, :]
    # per orientation: each harmonic's evidence (its grid summed over the amplitude,
    # divided by the prior weight the grid already holds)
    z21 = p21["post"].sum(axis=0) / w_orient
    z22 = p22["post"].sum(axis=0) / w_orient
    m21 = np.sum(p21["post"] * z22[None], axis=(1, 2))
    m22 = np.sum(p22["post"] * z21[None], axis=(1, 2))
    orient = z21 * z22 * w_orient
    orient /= orient.sum()
    marg = {"C21": (p21["h0"], m21 / m21.sum()),
            # the 2 f_rot grid is in h0 = 2 C22 (Jones 2015)
            "C22": (p22["h0"] / 2, m22 / m22.sum()),
            "cosi": (c, orient.sum(axis=1)), "psi": (s, orient.sum(axis=0))}
    return marg, c, s


def dual_limit_table(posterior, target: Target, *,
                     moment_of_inertia: u.Quantity = DEFAULT_MOMENT_OF_INERTIA):
    """The C21 and C22 limits and the ratios of the C22 limit to the spin-down limit.

    Columns: ``target``, ``confidence``, ``c21_limit``, ``c22_limit``, the spin-down
    ratios of h0 = 2 C22 (:func:`.posterior.spindown_ratios`: ``h0_spindown``,
    ``ratio_spindown``, ``spindown_fraction``, ``eps_limit``..., ``q22_limit``) and 90 %
    intervals of cos iota and psi.
    """
    from cwlimits.pulsars.posterior import spindown_ratios

    t = QTable()
    t["target"] = [target.name]
    t["confidence"] = [posterior.confidence]
    t["c21_limit"] = [posterior.c21_limit]
    t["c22_limit"] = [posterior.c22_limit]
    for key, value in spindown_ratios(2 * posterior.c22_limit, target,
                                      moment_of_inertia).items():
        t[key] = u.Quantity([value]) if isinstance(value, u.Quantity) else [value]
    for par in ("cosi", "psi"):
        lo, hi = posterior.interval(par)
        unit = u.one if par == "cosi" else u.rad
        t[f"{par}_lo90"] = [lo] * unit
        t[f"{par}_hi90"] = [hi] * unit
    info = dict(posterior.assumptions)
    info["limit"] = (f"{posterior.confidence:.0%} posterior quantiles of C21 and C22; the "
                     "spin-down ratios are of h0 = 2 C22")
    info["spindown"] = (f"h_sd with I = {moment_of_inertia:g} and d = {target.distance:g}; "
                        "all rotational energy loss in gravitational waves")
    t.meta["assumptions"] = info
    return t
