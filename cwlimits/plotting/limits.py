"""Figures of upper limits: h0, ellipticity and r-mode amplitude per band; one posterior.

matplotlib is imported lazily through :mod:`cwlimits.plotting.figures` (the backend is
the caller's choice); every panel has labelled axes with units, log axes for amplitudes
and frequencies, and series that differ by colour (Okabe & Ito palette) and by line style
or marker.
"""

import numpy as np

from cwlimits.plotting.figures import (
    PALETTE,
    new_figure,
    plot_sensitivity,
    plot_strain_curves,
)

__all__ = ["plot_limits", "plot_astrophysical_limits", "plot_posterior", "plot_corner"]


def plot_limits(table, title=None):
    """h0 limits against frequency with the target's age-based limit band.

    Parameters
    ----------
    table : astropy.table.QTable
        From :func:`cwlimits.limits.upper.upper_limits`.
    """
    label = (r"frequentist $h_0$ limit" if table.meta.get("method") == "frequentist"
             else r"Bayesian $h_0$ limit")
    conf = table.meta.get("confidence")
    if conf is not None:
        label += f" ({100 * conf:g} %)"
    fig = plot_sensitivity(table, title=title, curve_label=label, h0_column="h0_limit")
    ax = fig.axes[0]
    if "h0_spindown" in table.colnames:
        colour, style, _ = PALETTE[4]
        ax.axhline(float(table["h0_spindown"][0].value), color=colour, ls=style, lw=1,
                   label="spin-down limit")
    if "h0_limit_emcee" in table.colnames:
        good = np.isfinite(np.asarray(table["h0_limit_emcee"].value))
        colour, _, marker = PALETTE[6]
        ax.plot(np.asarray(table["f_mid"].value)[good],
                np.asarray(table["h0_limit_emcee"].value)[good], ls="none", marker=marker,
                ms=4, color=colour, label="emcee limit")
    ax.legend(fontsize=6, loc="best")
    return fig


def _confidence_label(table, text):
    conf = table.meta.get("confidence")
    return text + (f" ({100 * conf:g} % confidence)" if conf is not None else "")


def plot_astrophysical_limits(table, title=None, eps_indirect=None, alpha_indirect=None):
    """Ellipticity and r-mode amplitude limits against frequency: two figures.

    Parameters
    ----------
    table : astropy.table.QTable
        From :func:`cwlimits.limits.upper.upper_limits` (its ``meta['confidence']``
        labels the curves).
    title : str, optional
    eps_indirect, alpha_indirect : Quantity, optional
        The indirect (e.g. age-based) limit on the ellipticity and on the r-mode amplitude
        in each band (same length as ``table``), drawn as a dashed curve: the search beats
        it where the limit lies below.

    Returns
    -------
    (Figure, Figure)
        eps(f) and alpha(f), log axes.
    """
    eps_curves = [(_confidence_label(table, "ellipticity upper limit"), table["eps_limit"])]
    if eps_indirect is not None:
        eps_curves.append(("age-based limit (nominal)", eps_indirect))
    alpha_curves = [(_confidence_label(table, "r-mode amplitude upper limit"),
                     table["alpha_limit"])]
    if alpha_indirect is not None:
        alpha_curves.append(("age-based r-mode limit (nominal)", alpha_indirect))
    fig_eps = plot_strain_curves(table["f_mid"], eps_curves, title=title,
                                 ylabel=r"ellipticity $\epsilon$ (dimensionless)")
    fig_alpha = plot_strain_curves(table["f_mid"], alpha_curves, title=title,
                                   ylabel=r"r-mode amplitude $\alpha$ (dimensionless)")
    return fig_eps, fig_alpha


def plot_posterior(h0, density, limit=None, title=None, emcee_samples=None):
    """One band's posterior density of h0, with its upper limit.

    Parameters
    ----------
    h0, density : Quantity
        From :func:`cwlimits.limits.upper.band_posterior`.
    limit : float, optional
        The credible upper limit, drawn as a vertical line.
    emcee_samples : ndarray, optional
        h0 samples, drawn as a normalised histogram.
    """
    fig, ax = new_figure()
    x = np.asarray(getattr(h0, "value", h0), float)
    y = np.asarray(getattr(density, "value", density), float)
    colour, style, _ = PALETTE[0]
    ax.plot(x, y, color=colour, ls=style, lw=1.2, label="posterior (grid)")
    if emcee_samples is not None:
        colour, _, _ = PALETTE[2]
        ax.hist(emcee_samples, bins=60, density=True, histtype="step", color=colour,
                hatch="//", lw=0.8, label="emcee samples")
    if limit is not None:
        colour, style, _ = PALETTE[1]
        ax.axvline(float(limit), color=colour, ls=style, lw=1, label="upper limit")
    ax.set_xlim(0, x[min(np.searchsorted(np.cumsum(y) / np.sum(y), 0.9995), len(x) - 1)])
    ax.xaxis.get_offset_text().set_fontsize(6)
    ax.yaxis.get_offset_text().set_fontsize(6)
    ax.set_xlabel(r"$h_0$ (dimensionless strain)")
    # Short enough not to be clipped at column width (the unit is 1 / h0, h0 dimensionless).
    ax.set_ylabel(r"posterior $p(h_0 \mid 2\mathcal{F}^*)$ [$1/h_0$]")
    ax.legend(fontsize=6, loc="best")
    if title:
        ax.set_title(title, fontsize=8)
    return fig


def plot_corner(samples, labels=(r"$h_0$", r"$\cos\iota$", r"$\psi$ [rad]"), title=None):
    """Corner-style plot of emcee samples: histograms on the diagonal, pairs below."""
    from cwlimits.plotting.figures import _pyplot

    plt = _pyplot()
    samples = np.asarray(samples, float)
    k = samples.shape[1]
    fig, axes = plt.subplots(k, k, figsize=(5.0, 5.0), dpi=150, layout="constrained")
    colour = PALETTE[0][0]
    for i in range(k):
        for j in range(k):
            ax = axes[i, j]
            ax.tick_params(labelsize=5)
            ax.xaxis.get_offset_text().set_fontsize(5)
            ax.yaxis.get_offset_text().set_fontsize(5)
            if j > i:
                ax.set_visible(False)
                continue
            if i == j:
                ax.hist(samples[:, i], bins=40, histtype="step", color=colour)
                ax.set_ylabel("samples", fontsize=6)
            else:
                ax.hist2d(samples[:, j], samples[:, i], bins=40, cmap="Greys")
                ax.set_ylabel(labels[i] + " (dimensionless)" if i < 2 else labels[i],
                              fontsize=6)
            ax.set_xlabel(labels[j] + " (dimensionless)" if j < 2 else labels[j],
                          fontsize=6)
    if title:
        fig.suptitle(title, fontsize=8)
    return fig
