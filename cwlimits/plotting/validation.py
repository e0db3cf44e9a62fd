"""Figures of the mock-search validation: efficiency and mismatch against the model.

The efficiency against h0 with the model curves, and the loudest-template mismatch against
the model's distribution.

Like :mod:`cwlimits.plotting.figures` (whose figure, palette and saving helpers these reuse):
labelled axes with units, a legend, Okabe & Ito colours with a marker and a line style per
series.  matplotlib is imported lazily.
"""

import numpy as np

__all__ = ["plot_mock_efficiency", "plot_mismatch_histogram"]


def plot_mock_efficiency(result, title=None):
    """Measured detection efficiency of a mock-search campaign against h0, with the models.

    Parameters
    ----------
    result : cwlimits.simulation.mockcampaign.MockCampaignResult
    title : str, optional

    Returns
    -------
    matplotlib.figure.Figure
        Log h0 axis; measured points with Clopper-Pearson error bars, the model's P_det(h0)
        (lattice mismatch draws, corrected by default) and the model with the measured
        mismatches, the detection probability and the h0 values at it.
    """
    from cwlimits.plotting.figures import PALETTE, new_figure, tidy_log_axes

    t, s = result.table, result.summary
    h0 = np.asarray(t["h0"].value)
    eff = np.asarray(t["efficiency"].value)
    lo, hi = np.asarray(t["ci_low"].value), np.asarray(t["ci_high"].value)
    fig, ax = new_figure()
    (c0, s0, m0), (c1, s1, _), (c2, s2, _), (c3, s3, _) = PALETTE[:4]
    kind = s.get("mismatch_model_kind", "quadratic")
    ax.plot(result.model_h0, result.model_curve, color=c1, ls=s1, lw=1.2,
            label="model (corrected lattice mismatch)" if kind == "distribution"
            else "model (metric mismatch)")
    ax.plot(result.model_h0, result.corrected_curve, color=c2, ls=s2, lw=1.2,
            label="model (measured mismatch)")
    ax.errorbar(h0, eff, yerr=[np.clip(eff - lo, 0, None), np.clip(hi - eff, 0, None)],
                ls="none", marker=m0, ms=3.5, color=c0, capsize=2, lw=0.9,
                label="mock search (binomial interval)")
    ax.axhline(s["confidence"], color=c3, ls=s3, lw=0.8)
    ax.axvline(s["h0_predicted"], color=c1, ls=s1, lw=0.6)
    if np.isfinite(s["h0_measured"]):
        ax.axvline(s["h0_measured"], color=c0, ls=s0, lw=0.6)
    ax.set_xscale("log")
    ax.set_ylim(-0.02, 1.02)
    ax.set_xlabel(r"injected $h_0$ (dimensionless strain)")
    ax.set_ylabel("detection efficiency (fraction)")
    ax.set_title(title or s["setup"], fontsize=8)
    tidy_log_axes(ax)
    ax.legend(fontsize=6, loc="lower right")
    return fig


def plot_mismatch_histogram(result, title=None):
    """Histogram of the measured loudest-template mismatch against the model's draws.

    Parameters
    ----------
    result : cwlimits.simulation.mockcampaign.MockCampaignResult
    title : str, optional

    Returns
    -------
    matplotlib.figure.Figure
        Normalised histograms (probability density, 1/mismatch) of the measured
        mismatches of noise-free injections and of the model's lattice draws.
    """
    from cwlimits.plotting.figures import PALETTE, new_figure

    fig, ax = new_figure()
    (c0, _, _), (c1, _, _) = PALETTE[:2]
    top = max(float(np.max(result.mismatch_model)), float(np.max(result.mismatch_measured)))
    bins = np.linspace(0.0, max(top, 1e-3), 25)
    ax.hist(result.mismatch_model, bins=bins, density=True, histtype="step", color=c1,
            lw=1.2, label="model (lattice draws, added)")
    ax.hist(result.mismatch_measured, bins=bins, density=True, histtype="stepfilled",
            alpha=0.5, color=c0, label="mock search (loudest template)")
    ax.set_xlabel(r"mismatch $1 - \rho^2_\mathrm{loudest} / \rho^2_0$ (dimensionless)")
    ax.set_ylabel("probability density (1 / mismatch)")
    ax.set_title(title or result.summary["setup"], fontsize=8)
    ax.legend(fontsize=6)
    return fig
