"""The known-pulsar section of a report: table, limits-against-frequency figure, posterior.

For every catalogue row with a known spin (``f_rot``, ``fdot_rot``) the section gives the
numbers a paper reports (:func:`cwlimits.pulsars.known_pulsar_summary`): f_rot, f_gw,
the spin-down limit, the predicted 95 % limit of a targeted (or narrow-band) search over
the analysis span, the measured 95 % limit where down-converted data are given (or
simulated, for the demo), h95/h_sd, the spin-down fraction (h95/h_sd)^2, and the
ellipticity and Q22 limits; the standard figure of the field (limits against f_gw, each
pulsar's spin-down limit marked, the expected sensitivity curve of the span); and the
posterior of h0 of one pulsar.

The simulated data of the demo are noise only (no signal): down-converted samples, one
per ``sample`` (default one day), in stretches of ``stretch`` with gaps that leave the
configured duty factor; the noise level per sample is sigma = sqrt(S_n / (4 dt)) per part
for samples that average the band over dt (the normalisation of
:func:`cwlimits.pulsars.data.from_band_data`).
"""

import warnings

import astropy.units as u
import numpy as np
from erfa import ErfaWarning

from cwlimits.pulsars.data import DownConvertedData, add_noise
from cwlimits.searchspace.searchsetup import SearchSetup

__all__ = ["known_pulsar_setup", "simulate_noise_only", "known_pulsar_section"]

#: Sample length of the simulated data of a narrow-band pulsar (a residual frequency nu
#: loses sinc(pi nu dt) of its amplitude in a sample of length dt).
NARROW_BAND_SAMPLE = 6 * u.hour

#: Noise-only draws of each predicted limit in a report (Monte-Carlo error ~2 %).
REPORT_NOISE_DRAWS = 100


def known_pulsar_setup(span, detectors, duty_factor, f_gw_max):
    """One coherent segment as long as ``span`` (the setup of a targeted search)."""
    f_hi = float(u.Quantity(f_gw_max, u.Hz).value) + 1.0
    return SearchSetup(t_seg=u.Quantity(span).to(u.day), n_seg=1, band=(1 * u.Hz, f_hi * u.Hz),
                       detectors=tuple(detectors), duty_factor=float(duty_factor),
                       band_width=f_hi * u.Hz - 1 * u.Hz)


def simulate_noise_only(target, setup, noise, start_gps, rng, *, sample=1 * u.day,
                        stretch=None):
    """Noise-only down-converted data of ``target`` over the setup's span (module notes).

    Parameters
    ----------
    target : Target
    setup : SearchSetup
        Detectors, span and duty factor.
    noise : NoiseSource or dict of detector -> NoiseSource
        The PSD at f_gw = 2 f_rot per detector.
    start_gps : float
    rng : int or Generator
    sample : Quantity ['time']
        Spacing of the samples.
    stretch : Quantity ['time'], optional
        Length of each stretch of data (default: 24 samples).
    """
    rng = np.random.default_rng(rng)
    dt = float(u.Quantity(sample).to_value(u.s))
    length = 24 * dt if stretch is None else float(u.Quantity(stretch).to_value(u.s))
    span = float(setup.total_span.to_value(u.s))
    period = length / max(float(setup.duty_factor), 1e-3)
    n_stretch = max(1, int(span // period))
    per = max(2, int(round(length / dt)))
    f_gw = 2 * target.f_rot
    det, time, sigma, label = [], [], [], []
    for d_i, site in enumerate(setup.detectors):
        source = noise[site] if isinstance(noise, dict) else noise
        s = float(np.sqrt(source.psd(f_gw).to_value(1 / u.Hz) / (4 * dt)))
        for j in range(n_stretch):
            t = start_gps + j * period + dt * np.arange(per)
            det += [site] * per
            time.append(t)
            sigma.append(np.full(per, s))
            label.append(np.full(per, d_i * n_stretch + j))
    data = DownConvertedData(np.array(det), np.concatenate(time),
                             np.zeros(len(det), complex), np.concatenate(sigma),
                             np.concatenate(label),
                             "SIMULATED noise-only down-converted data (fictional)")
    return add_noise(data, rng)


def known_pulsar_section(rep, catalogue, noise, *, span, detectors, duty_factor, start,
                         confidence, seed, simulate, data=None, echo=print,
                         predicted=None):
    """Add the known-pulsar section to ``rep`` (a :class:`~cwlimits.report.html.Report`).

    ``data`` maps pulsar names to their down-converted data (the configuration key
    ``pulsars.data``; with ``simulate`` the others get simulated noise-only data);
    ``predicted`` maps names to expected-limit tables already computed for the same span,
    detectors and noise (the ranking's), which are reused.  Returns the summary table, or
    None when the catalogue has no known pulsar.
    """
    from astropy.time import Time

    from cwlimits.plotting.pulsars import plot_known_pulsars, plot_pulsar_posterior
    from cwlimits.pulsars.posterior import pulsar_posterior
    from cwlimits.pulsars.summary import known_pulsar_summary, sensitivity_curve
    from cwlimits.runtime.executor import named_seed

    pulsars = [t for t in catalogue if t.has_spin]
    if not pulsars:
        return None
    f_max = max(2 * t.f_rot for t in pulsars)
    setup = known_pulsar_setup(span, detectors, duty_factor, f_max)
    data = dict(data or {})
    given = {name: getattr(d, "source", str(d)) for name, d in data.items()}
    if simulate:
        with warnings.catch_warnings():
            # a start after the last leap-second table is fine here (ERFA "dubious year")
            warnings.simplefilter("ignore", ErfaWarning)
            start_gps = float(Time(start).gps)
        # a pulsar whose timing leaves a box (narrow-band) gets shorter samples, so that
        # a signal anywhere in the box survives the averaging of a sample
        for t in pulsars:
            narrow = t.f_rot_err is not None or t.fdot_rot_err is not None
            data.setdefault(t.name, simulate_noise_only(
                t, setup, noise, start_gps, named_seed(seed, f"pulsar-data:{t.name}"),
                sample=NARROW_BAND_SAMPLE if narrow else 1 * u.day))
    posteriors = {}  # the summary's own posteriors: the figure reuses the best one
    table = known_pulsar_summary(catalogue, setup, noise, data=data, confidence=confidence,
                                 n_noise=REPORT_NOISE_DRAWS, posteriors=posteriors,
                                 rng=named_seed(seed, "known-pulsars"), start=start,
                                 predicted=predicted)
    echo(f"known pulsars: {len(table)} (predicted" + (" and measured" if data else "")
         + " limits)")
    info = dict(table.meta["assumptions"])
    if simulate:
        info["data"] = ("SIMULATED noise-only down-converted data (no signal), one sample "
                        "per day (every 6 hours for a pulsar with timing uncertainties) in "
                        "stretches of 24 samples with gaps for the duty factor; the "
                        "measured limits are those of these simulated data"
                        + (" (except " + ", ".join(given) + ")" if given else ""))
    if given:
        info["data_files"] = "; ".join(f"{name}: measured limit from {source}"
                                       for name, source in given.items())
    rep.section(
        "Known pulsars",
        "Stars whose spin is known from electromagnetic timing are searched fully "
        "coherently over the whole span at f_gw = 2 f_rot: with one template (targeted) "
        "when the timing uncertainty lies inside one template of the coherent grid, over a "
        "small box (narrow-band) otherwise.  The predicted limit is the median 95 % "
        "Bayesian upper limit on noise-only data with the orientation prior integrated "
        "(Dupuis & Woan 2005), or the narrow-band sensitivity; the measured limit is the "
        "95 % posterior quantile of h0 from the down-converted data (targeted), or, for a "
        "narrow-band search, the Bayesian 95 % limit from the loudest F-statistic of the "
        "box with its trials factor in the likelihood (column limit_method says which "
        "kind each limit is).  The spin-down limit "
        "h_sd assumes all the rotational energy loss goes into gravitational waves, "
        "I = 1e38 kg m^2 and the catalogue distance (Jaranowski, Krolak & Schutz 1998); "
        "h95/h_sd < 1 means the search constrains the star.  Columns: f_rot, f_gw [Hz]; "
        "h0_spindown, h95_predicted, h95_measured, ratio_spindown = h95/h_sd, "
        "spindown_fraction = (h95/h_sd)^2, eps_limit (dimensionless); q22_limit "
        "[kg m^2].", caution=bool(simulate))
    rep.table("known_pulsars", table, caption="Known pulsars: spin-down limits, predicted "
              "and measured 95 % limits and the ratios a paper reports", assumptions=info)
    f = np.asarray(table["f_gw"].value)
    lo = max(0.7 * f.min(), noise.f_min.to_value(u.Hz) if hasattr(noise, "f_min") else 0)
    hi = 1.4 * f.max()
    if hasattr(noise, "f_max"):
        hi = min(hi, noise.f_max.to_value(u.Hz))
    grid = np.geomspace(lo, max(hi, 1.01 * lo), 60) * u.Hz
    targeted = np.asarray(table["kind"]) == "targeted"
    k = float(np.median(np.asarray(table["factor_k"])[targeted if targeted.any()
                                                      else slice(None)]))
    curve = sensitivity_curve(setup, noise, k, grid)
    rep.figure("known_pulsars", plot_known_pulsars(table, grid, curve,
                                                   title="known pulsars"),
               caption="Upper limits on h0 against f_gw: each pulsar's spin-down limit "
                       "(triangle), predicted (circle) and measured (star) 95 % limits, and "
                       f"the expected 95 % limit of a targeted search over "
                       f"{u.Quantity(span).to(u.day):.4g} (line; K = {k:.3g} times "
                       "sqrt(S_n / T_data), the median of the targeted rows)")
    if any(kind == "targeted" and name in data
           for name, kind in zip(table["name"], table["kind"], strict=True)):
        ratio = np.asarray(table["ratio_spindown"], float)
        # the posterior figure is of a targeted pulsar (the time-domain posterior)
        kinds = dict(zip(table["name"], table["kind"], strict=True))
        names = [n for n in np.asarray(table["name"]) if n in data
                 and kinds[n] == "targeted"]
        best = min(names, key=lambda n: ratio[list(table["name"]).index(n)])
        post = posteriors.get(best)
        if post is None:
            post = pulsar_posterior(data[best], catalogue.target(best), confidence=confidence)
        row = table[list(table["name"]).index(best)]
        rep.figure("pulsar_posterior_" + "".join(c if c.isalnum() else "_"
                                                 for c in best.lower()),
                   plot_pulsar_posterior(post, h0_spindown=float(row["h0_spindown"]),
                                         title=best),
                   caption=f"Posterior of h0 for {best} (cos iota, psi, phi0 "
                           f"marginalised; {post.noise} noise) with its "
                           f"{confidence:.0%} upper limit and spin-down limit"
                           + (" from SIMULATED data" if simulate else ""))
    return table
