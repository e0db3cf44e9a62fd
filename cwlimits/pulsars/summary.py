"""All the known pulsars of a catalogue in one table: predicted and measured limits.

For each row with a known spin: the spin-down limit, the search kind and the predicted
95 % limit of :func:`.expected.targeted_sensitivity`, the measured limit of
:func:`.posterior.pulsar_posterior` where down-converted data are given, and the ratios a
paper reports for the limit (the measured one where there is one).  The expected
sensitivity curve of the span, h95(f) = K / sqrt(sum_d T_d / S_d(f)), uses the median
factor K of the table's targeted rows (K depends on the sky position only through the
antenna averages; Dupuis & Woan 2005).
"""

from __future__ import annotations

from typing import TYPE_CHECKING

import astropy.units as u
import numpy as np
from astropy.table import QTable

from cwlimits.errors import InputError
from cwlimits.noise import DEFAULT_NOISE_MODEL
from cwlimits.pulsars.expected import _noise_psd, targeted_sensitivity
from cwlimits.pulsars.narrowband import narrow_band_limit
from cwlimits.pulsars.posterior import pulsar_posterior, spindown_ratios
from cwlimits.sensitivity.model import DEFAULT_START
from cwlimits.targets.fiducial import DEFAULT_MOMENT_OF_INERTIA

if TYPE_CHECKING:
    from cwlimits._random import RngLike
    from cwlimits.searchspace.searchsetup import SearchSetup
    from cwlimits.targets.catalogue import TargetCatalogue

__all__ = ["known_pulsar_summary", "sensitivity_curve", "PREDICTED_METHODS",
           "MEASURED_METHODS"]

#: What the limit of a row is, by search kind (the table's ``limit_method``).
PREDICTED_METHODS = {
    "targeted": "predicted: median {conf:.0%} Bayesian limit on noise-only data (Dupuis & Woan "
                "2005)",
    "narrow-band": "predicted: h0 detected with {conf:.0%} probability above the box's "
                   "F-statistic threshold (Wette 2012)"}
MEASURED_METHODS = {
    "targeted": "measured: time-domain {conf:.0%} posterior quantile of h0 (Dupuis & Woan 2005)",
    "narrow-band": "measured: {conf:.0%} Bayesian limit from the loudest 2F of the box with its "
                   "trials factor (cwlimits.pulsars.narrowband)"}


def known_pulsar_summary(catalogue: TargetCatalogue, setup: SearchSetup, noise=DEFAULT_NOISE_MODEL,
                         *, data=None, confidence: float = 0.95, n_noise: int = 200,
                         rng: RngLike | None = None, start=DEFAULT_START,
                         moment_of_inertia: u.Quantity = DEFAULT_MOMENT_OF_INERTIA,
                         posterior_noise="student-t", predicted=None,
                         narrow_band_noise="estimated", posteriors: dict | None = None):
    """One row per known pulsar of ``catalogue`` (rows without a known spin are skipped).

    Parameters
    ----------
    catalogue : TargetCatalogue or sequence of Target
    setup : SearchSetup
        Detectors, span (one coherent segment), duty factor, coherent grid and cost.
    noise : str, NoiseSource or dict
    data : dict of str -> DownConvertedData, BandData or path, optional
        Down-converted data per pulsar name: adds the measured limit.
    confidence, n_noise, rng, start
        As in :func:`.expected.targeted_sensitivity`.
    posterior_noise : str
        Noise model of the measured limits (:func:`.posterior.pulsar_posterior`).
    narrow_band_noise : {'estimated', 'given'}
        Noise of the measured narrow-band limits (:func:`.narrowband.narrow_band_limit`).
    predicted : dict of str -> QTable, optional
        Tables of :func:`.expected.targeted_sensitivity` already computed for this setup
        and noise (e.g. by the ranking's plans), used instead of computing them again.
    posteriors : dict, optional
        If given, filled with the :class:`.posterior.PulsarPosterior` of each targeted
        pulsar with data (by name), for a caller that shows one (not computed twice).

    Returns
    -------
    astropy.table.QTable
        ``name``, ``f_rot``, ``f_gw``, ``kind``, ``h0_spindown``, ``h95_predicted``,
        ``factor_k``, ``h95_measured`` (NaN without data), ``limit_source``,
        ``limit_method`` (which kind of limit: predicted or measured, targeted posterior
        or narrow-band loudest-template limit), and for the
        reported limit ``ratio_spindown``, ``spindown_fraction``, ``eps_limit``,
        ``q22_limit``.  ``meta['assumptions']`` as in the functions it calls.
    """
    data = dict(data or {})
    rng = np.random.default_rng(rng)
    pulsars = [t for t in catalogue if t.has_spin]
    if not pulsars:
        raise InputError("the catalogue has no known pulsar (rows with f_rot and fdot_rot)")
    unknown = sorted(set(data) - {t.name for t in pulsars})
    if unknown:
        raise InputError(f"data given for names that are not known pulsars of the "
                         f"catalogue: {', '.join(unknown)}")
    rows, info = [], {}
    predicted = dict(predicted or {})
    for t in pulsars:
        pred = predicted.get(t.name)
        if pred is None:
            pred = targeted_sensitivity(t, setup, noise, confidence=confidence,
                                        n_noise=n_noise, rng=rng, start=start,
                                        moment_of_inertia=moment_of_inertia)
        info = dict(pred.meta["assumptions"])
        kind = str(pred["kind"][0])
        measured = np.nan
        method = PREDICTED_METHODS[kind]
        if t.name in data and kind == "targeted":
            post = pulsar_posterior(data[t.name], t, noise=posterior_noise,
                                    confidence=confidence)
            if posteriors is not None:
                posteriors[t.name] = post
            measured = post.upper_limit
            method = MEASURED_METHODS["targeted"]
            info["measured"] = f"{post.sampler} posterior, noise {post.noise}"
        elif t.name in data:
            nb = narrow_band_limit(data[t.name], t, noise=narrow_band_noise,
                                   confidence=confidence)
            measured = nb.upper_limit
            method = MEASURED_METHODS["narrow-band"]
            info[f"measured_{t.name}"] = nb.assumptions["method"] + "; " + \
                nb.assumptions["box"]
        limit = measured if np.isfinite(measured) else float(pred["h95"][0])
        ratios = spindown_ratios(limit, t, moment_of_inertia)
        rows.append({
            "name": t.name, "f_rot": t.f_rot.to_value(u.Hz),
            "f_gw": pred["f_gw"][0].to_value(u.Hz), "kind": kind,
            "h0_spindown": ratios["h0_spindown"], "h95_predicted": float(pred["h95"][0]),
            "factor_k": float(pred["factor_k"][0]), "h95_measured": measured,
            "limit_source": "measured" if np.isfinite(measured) else "predicted",
            "limit_method": method.format(conf=confidence),
            "ratio_spindown": ratios["ratio_spindown"],
            "spindown_fraction": ratios["spindown_fraction"],
            "eps_limit": ratios["eps_limit"],
            "q22_limit": ratios["q22_limit"].to_value(u.kg * u.m**2)})
    table = QTable(rows=[list(r.values()) for r in rows], names=list(rows[0]))
    table["f_rot"].unit = u.Hz
    table["f_gw"].unit = u.Hz
    table["q22_limit"].unit = u.kg * u.m**2
    info.pop("target", None)
    info["orientation_prior"] = ("per pulsar: the catalogue's cosi/psi priors where given, "
                                 "else uniform")
    info["spindown"] = (f"h_sd per pulsar with I = {moment_of_inertia:g} and its catalogue "
                        "distance; all rotational energy loss in gravitational waves")
    info["ratios"] = ("ratio_spindown, spindown_fraction, eps_limit, q22_limit are for the "
                      "measured limit where there is one, else the predicted one")
    table.meta["assumptions"] = info
    return table


def sensitivity_curve(setup: SearchSetup, noise, factor_k, f_gw):
    """h95(f) = K / sqrt(sum_d T_d / S_d(f)) of a targeted search over the setup's span.

    ``T_d`` is the span times the duty factor (module notes); ``f_gw`` a Quantity array.
    """
    f = np.atleast_1d(u.Quantity(f_gw, u.Hz).value)
    t_d = setup.total_span.to_value(u.s) * setup.duty_factor
    out = np.empty(len(f))
    for i, fi in enumerate(f):
        psd, _ = _noise_psd(noise, setup.detectors, float(fi))
        out[i] = factor_k / np.sqrt(np.sum(t_d / psd))
    return out << u.one
