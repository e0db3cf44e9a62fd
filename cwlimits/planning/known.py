"""Planning the search for a known pulsar: targeted or narrow-band, at a budget and span.

A star whose spin is known from electromagnetic timing is searched fully coherently over
the whole span at the frequency its spin fixes (f_gw = 2 f_rot for the l = m = 2 mass
quadrupole), not by an age-based semi-coherent search over a wide band.  The plan takes
the sensitivity, template count and cost from :func:`cwlimits.pulsars.targeted_sensitivity`:

* **targeted** when the timing box (``n_sigma`` times the catalogue uncertainties, scaled
  to the harmonic) lies inside one template of the coherent grid (its metric mismatch
  <= the grid's maximum); one template per detector;
* **narrow-band** otherwise: a coherent F-statistic search over the box, N_templates from
  the coherent metric (Prix 2007, arXiv:0707.0428), the trials factor in the threshold;
  the cost is N_templates x N_det x the coherent unit cost.

The figure a paper (and the ranking) compares is h95 / h_sd, the predicted limit over the
spin-down limit (h_sd of Jaranowski, Krolak & Schutz 1998, gr-qc/9804014, eq. 3.5 with
all the rotational energy loss in gravitational waves); below 1 the search can say
something about the star.  The plan's setup is one segment as long as the span, with a
band that contains f_gw (the narrow-band box, or one reporting band centred on f_gw).
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING

import astropy.units as u
from astropy.table import QTable

from cwlimits.errors import ComputationError, InputError
from cwlimits.noise import DEFAULT_NOISE_MODEL
from cwlimits.searchspace.searchsetup import DEFAULT_UNIT_COSTS, SearchSetup
from cwlimits.sensitivity.model import DEFAULT_START

if TYPE_CHECKING:
    from cwlimits._random import RngLike
    from cwlimits.noise import NoiseSource
    from cwlimits.targets.catalogue import Target

__all__ = ["KnownPulsarPlan", "plan_known_pulsar", "is_known_pulsar", "case_distance"]


def is_known_pulsar(target: Target) -> bool:
    """Whether a target has a known spin (``f_rot`` and ``fdot_rot``)."""
    return bool(getattr(target, "has_spin", False))


def case_distance(target: Target, case: str) -> u.Quantity:
    """Distance of a distance case (nominal, optimistic = d_min, pessimistic = d_max)."""
    if case == "optimistic":
        return target.distance_min
    if case == "pessimistic":
        return target.distance_max
    return target.distance


@dataclass(frozen=True, eq=False)
class KnownPulsarPlan:
    """The plan of a targeted or narrow-band search for one known pulsar.

    Attributes
    ----------
    target : str
    kind : str
        ``'targeted'`` or ``'narrow-band'``.
    reason : str
        Why this kind (the timing box against one template, or the request).
    setup : SearchSetup
        One coherent segment as long as the span; its band contains ``f_gw``.
    f_gw, fdot_gw : Quantity
        Gravitational-wave frequency and derivative of the l = m = 2 harmonic.
    case : str
        Distance case of the spin-down limit.
    budget, span, cost : Quantity ['time']
        Budget and cost in core-hours; the span is the coherent length.
    n_templates : float
    h95 : Quantity ['dimensionless']
        Predicted limit (targeted: median 95 % Bayesian limit on noise-only data;
        narrow-band: h0 detected with 95 % probability over the box).
    h0_spindown : Quantity ['dimensionless']
        Spin-down limit at the case's distance.
    ratio_spindown : float
        h95 / h0_spindown.
    table : QTable
        The :func:`cwlimits.pulsars.targeted_sensitivity` table.
    assumptions : dict
    """

    target: str
    kind: str
    reason: str
    setup: SearchSetup
    f_gw: u.Quantity
    fdot_gw: u.Quantity
    case: str
    budget: u.Quantity
    span: u.Quantity
    cost: u.Quantity
    n_templates: float
    h95: u.Quantity
    h0_spindown: u.Quantity
    ratio_spindown: float
    table: QTable
    assumptions: dict = field(default_factory=dict)
    objective: str = "known-pulsar"
    bound: str = "none"

    @property
    def band(self) -> tuple[u.Quantity, u.Quantity]:
        """(f_min, f_max) of the plan's setup."""
        return self.setup.f_min, self.setup.f_max

    def write(self, path: str | Path) -> Path:
        """Write the plan's setup file (the TOML format of :mod:`~cwlimits.searchspace`)."""
        return self.setup.to_toml(path)


def _coherent_setup(span, detectors, lattice, mismatch, cost_coherent, cost_semicoherent,
                    duty_factor, f_gw_hz, band_width):
    width = u.Quantity(band_width).to_value(u.Hz)
    band = (max(f_gw_hz - width / 2, f_gw_hz * 0.5) * u.Hz, (f_gw_hz + width / 2) * u.Hz)
    return SearchSetup(t_seg=u.Quantity(span).to(u.day), n_seg=1, band=band,
                       detectors=tuple(detectors), lattice=lattice,
                       band_width=width * u.Hz, mismatch_coherent=float(mismatch),
                       cost_coherent=u.Quantity(cost_coherent),
                       cost_semicoherent=u.Quantity(cost_semicoherent),
                       duty_factor=duty_factor)


def plan_known_pulsar(target: Target, noise: str | NoiseSource | Mapping = DEFAULT_NOISE_MODEL,
                      budget: u.Quantity | str = "1e5 h", span: u.Quantity | str = "1 yr", *,
                      kind: str = "auto", case: str = "nominal",
                      detectors: Sequence[str] = ("H1", "L1"), band_width: u.Quantity = 1 * u.Hz,
                      lattice: str = "covering", mismatch: float = 0.3,
                      cost_coherent: u.Quantity = DEFAULT_UNIT_COSTS["coherent"],
                      cost_semicoherent: u.Quantity = DEFAULT_UNIT_COSTS["semicoherent"],
                      duty_factor: float = 1.0, confidence: float = 0.95,
                      false_alarm: float = 0.01, start: str = DEFAULT_START,
                      n_sigma: float | None = None, fractional_width: float | None = None,
                      n_noise: int = 200, rng: RngLike = 0,
                      moment_of_inertia: u.Quantity | None = None) -> KnownPulsarPlan:
    """Plan a targeted or narrow-band search for a known pulsar.

    Parameters
    ----------
    target : Target
        A catalogue row with a known spin (``f_rot``, ``fdot_rot``; timing uncertainties
        and orientation priors where given).
    noise : str, NoiseSource or dict
    budget : Quantity ['time'] or str
        Computing budget (core-hours or CPU-years); a narrow-band search over a box that
        costs more raises :class:`~cwlimits.errors.ComputationError`.
    span : Quantity ['time'] or str
        Data span, searched as one coherent segment.
    kind : {'auto', 'targeted', 'narrow-band'}
        ``'auto'``: targeted when the timing box lies inside one template, else narrow-band.
    case : {'nominal', 'optimistic', 'pessimistic'}
        Distance of the spin-down limit (d, d_min, d_max).
    detectors, band_width, lattice, cost_coherent, cost_semicoherent, duty_factor
        Fixed parts of the setup.
    mismatch : float
        Maximum mismatch of the coherent grid (decides targeted or narrow-band).
    confidence, false_alarm, start, n_sigma, fractional_width, n_noise, rng
        As in :func:`cwlimits.pulsars.targeted_sensitivity`.
    moment_of_inertia : Quantity, optional
        Of the spin-down limit (default 1e38 kg m^2).

    Returns
    -------
    KnownPulsarPlan
    """
    from cwlimits.planning.optimise import CASES, as_budget
    from cwlimits.pulsars.expected import DEFAULT_N_SIGMA, targeted_sensitivity
    from cwlimits.targets.fiducial import DEFAULT_MOMENT_OF_INERTIA
    from cwlimits.targets.indirect import spindown_limit

    if not is_known_pulsar(target):
        raise InputError(f"target '{getattr(target, 'name', target)}' has no known spin "
                         "(f_rot, fdot_rot): plan an age-based search instead")
    if case not in CASES:
        raise InputError(f"case must be one of {', '.join(CASES)}", value=case)
    budget = as_budget(budget)
    span_q = u.Quantity(span)
    if not (span_q.unit.physical_type == "time" and span_q.value > 0):
        raise InputError("span must be a positive time", value=str(span))
    inertia = DEFAULT_MOMENT_OF_INERTIA if moment_of_inertia is None else moment_of_inertia
    f_gw_hz = 2 * target.f_rot.to_value(u.Hz)
    setup = _coherent_setup(span_q, detectors, lattice, mismatch, cost_coherent,
                            cost_semicoherent, duty_factor, f_gw_hz, band_width)
    table = targeted_sensitivity(target, setup, noise, kind=kind, confidence=confidence,
                                 start=start, false_alarm=false_alarm,
                                 n_sigma=DEFAULT_N_SIGMA if n_sigma is None else n_sigma,
                                 fractional_width=fractional_width, n_noise=n_noise, rng=rng,
                                 moment_of_inertia=inertia)
    row = table[0]
    chosen, cost = str(row["kind"]), row["cost"].to(u.h)
    if chosen == "narrow-band":
        # the plan's band is the box (widened to one reporting band if narrower)
        from cwlimits.pulsars.emission import get_emission, harmonics
        from cwlimits.pulsars.expected import search_box

        item = harmonics(target, get_emission("single"))[0]
        box, _ = search_box(target, item, DEFAULT_N_SIGMA if n_sigma is None else n_sigma,
                      fractional_width, get_emission("single"))
        lo, hi = min(box[0], setup.f_min.to_value(u.Hz)), max(box[1],
                                                               setup.f_max.to_value(u.Hz))
        setup = setup.replace(band=(lo * u.Hz, hi * u.Hz))
    if cost > budget:
        raise ComputationError(f"the {chosen} search for '{target.name}' costs "
                               f"{cost:.4g} ({row['n_templates']:.3g} templates), more than "
                               f"the budget {budget:.4g}", value=str(budget))
    distance = case_distance(target, case)
    h_sd = spindown_limit(target.f_rot, target.fdot_rot, distance, inertia).to(u.one)
    h95 = float(row["h95"]) << u.one
    assumptions = dict(table.meta["assumptions"])
    assumptions.update({
        "plan": f"known pulsar: {chosen} search because {row['reason']}; one coherent "
                f"segment of {span_q:.6g}; budget {budget:.6g}, cost {cost:.4g}",
        "case": f"{case}: distance {distance:.4g}; spin-down limit h_sd = "
                f"{h_sd.value:.4g} (I = {inertia:g}, all rotational energy loss in "
                "gravitational waves)",
        "meaning": "a planned expected sensitivity under the stated assumptions, not a "
                   "measured limit",
    })
    return KnownPulsarPlan(target=target.name, kind=chosen, reason=str(row["reason"]),
                           setup=setup, f_gw=row["f_gw"].to(u.Hz),
                           fdot_gw=row["fdot_gw"].to(u.Hz / u.s), case=case, budget=budget,
                           span=span_q, cost=cost, n_templates=float(row["n_templates"]),
                           h95=h95, h0_spindown=h_sd,
                           ratio_spindown=float(h95.value / h_sd.value), table=table,
                           assumptions=assumptions)


def rank_known(targets, noise, span, *, case, detectors, band_width, lattice, mismatch,
               cost_coherent,
               cost_semicoherent, duty_factor, confidence, false_alarm, start,
               n_noise=100):
    """Plans of the known pulsars of a ranking (unlimited budget), catalogue order."""
    plans = {}
    for t in targets:
        plans[t.name] = plan_known_pulsar(
            t, noise, 1e300 * u.h, span, case=case,
            detectors=detectors, band_width=band_width, lattice=lattice, mismatch=mismatch,
            cost_coherent=cost_coherent, cost_semicoherent=cost_semicoherent,
            duty_factor=duty_factor, confidence=confidence, false_alarm=false_alarm,
            start=start, n_noise=n_noise, rng=0)
    return plans


def fund_known(plans, order, total_h):
    """Fund known-pulsar plans best ratio first while their costs fit ``total_h``.

    Returns (funded names, the core-hours they use).
    """
    used, funded = 0.0, []
    for name in order:
        c = float(plans[name].cost.to_value(u.h))
        if used + c <= total_h:
            funded.append(name)
            used += c
    return funded, used
