"""Figures of a known pulsar's posterior: the amplitude marginal and a corner figure.

Matplotlib is imported lazily; the figures are :class:`matplotlib.figure.Figure` objects
that choose no backend (save them with :func:`cwlimits.plotting.figures.save_plot`).
"""

import numpy as np

from cwlimits.plotting.figures import COLUMN_WIDTH_IN, PALETTE, new_figure, tidy_log_axes

__all__ = ["plot_pulsar_posterior", "plot_pulsar_corner", "plot_known_pulsars"]

_LABELS = {"h0": r"$h_0$", "cosi": r"$\cos\iota$", "psi": r"$\psi$ (rad)",
           "phi0": r"$\phi_0$ (rad)"}


def _density(nodes, mass):
    """Mass per node -> density, using the node spacing."""
    width = np.gradient(nodes) if len(nodes) > 1 else np.ones(1)
    return mass / np.sum(mass) / np.maximum(width, 1e-300)


def plot_pulsar_posterior(posterior, h0_spindown=None, title=None):
    """The amplitude's posterior density with the upper limit (and the spin-down limit)."""
    fig, ax = new_figure()
    colour, style, _ = PALETTE[0]
    name = posterior.amplitude_name
    if posterior.samples is not None:
        ax.hist(posterior.samples[:, 0], bins=60, density=True, histtype="step",
                color=colour, label=f"{name} posterior (emcee)")
    else:
        h, mass = posterior.marginals["h0"]
        ax.plot(h, _density(h, mass), color=colour, ls=style, label=f"{name} posterior")
    ul = posterior.upper_limit
    colour, style, _ = PALETTE[1]
    ax.axvline(ul, color=colour, ls=style, lw=1,
               label=f"{100 * posterior.confidence:g} % limit {ul:.3g}")
    if h0_spindown is not None and np.isfinite(h0_spindown) and h0_spindown < 3 * ul:
        colour, style, _ = PALETTE[4]
        ax.axvline(h0_spindown, color=colour, ls=style, lw=1, label="spin-down limit")
    ax.set_xlabel(f"{_LABELS.get(name, name)} (dimensionless)" if name == "h0"
                  else f"{name} (dimensionless)")
    ax.set_ylabel(f"posterior density [per unit {name}]")
    ax.set_xlim(left=0)
    ax.legend(fontsize=6, loc="best")
    if title:
        ax.set_title(title, fontsize=8)
    return fig


def plot_pulsar_corner(posterior, title=None):
    """Corner figure: 1-D marginals on the diagonal, 2-D marginals below it."""
    from matplotlib.figure import Figure

    params = ["h0", "cosi", "psi", "phi0"]
    n = len(params)
    fig = Figure(figsize=(2 * COLUMN_WIDTH_IN, 2 * COLUMN_WIDTH_IN), dpi=120,
                 layout="constrained")
    axes = fig.subplots(n, n, squeeze=False)
    samples = posterior.samples
    for i, pi in enumerate(params):
        for j, pj in enumerate(params):
            ax = axes[i, j]
            ax.tick_params(labelsize=5)
            if j > i:
                ax.set_axis_off()
                continue
            if i == j:
                if samples is not None:
                    ax.hist(samples[:, i], bins=40, density=True, histtype="step",
                            color=PALETTE[0][0])
                else:
                    nodes, mass = posterior.marginals[pi]
                    ax.plot(nodes, _density(nodes, mass), color=PALETTE[0][0])
                ax.set_yticks([])
            else:
                if samples is not None:
                    ax.hist2d(samples[:, j], samples[:, i], bins=30, cmap="Blues")
                else:
                    pair = posterior.pairs.get((pj, pi))
                    if pair is None:
                        ax.text(0.5, 0.5, "phi0 integrated\nanalytically", fontsize=5,
                                ha="center", va="center", transform=ax.transAxes)
                    else:
                        x, y, mass = pair
                        ax.pcolormesh(x, y, mass.T, cmap="Blues", shading="auto")
            if i == n - 1:
                ax.set_xlabel(_LABELS[pj], fontsize=7)
            if j == 0 and i > 0:
                ax.set_ylabel(_LABELS[pi], fontsize=7)
    if title:
        fig.suptitle(title, fontsize=8)
    return fig


def plot_known_pulsars(table, curve_f=None, curve_h=None, title=None):
    """The standard figure: limits against f_gw, each pulsar's spin-down limit marked.

    Parameters
    ----------
    table : QTable
        From :func:`cwlimits.pulsars.summary.known_pulsar_summary`.
    curve_f, curve_h : Quantity arrays, optional
        The expected sensitivity curve of the span (``sensitivity_curve``).
    """
    fig, ax = new_figure(height_ratio=0.95)
    f = np.asarray(table["f_gw"].value)
    if curve_f is not None:
        colour, style, _ = PALETTE[2]
        ax.plot(np.asarray(curve_f.value), np.asarray(curve_h.value), color=colour,
                ls=style, lw=1, label="expected 95 % limit of the span")
    colour, _, marker = PALETTE[4]
    ax.plot(f, table["h0_spindown"], ls="none", marker="v", color=colour, ms=5,
            label="spin-down limit")
    colour, _, marker = PALETTE[0]
    ax.plot(f, table["h95_predicted"], ls="none", marker="o", mfc="none", color=colour,
            ms=4, label="predicted 95 % limit")
    measured = np.isfinite(np.asarray(table["h95_measured"], float))
    if measured.any():
        colour, _, marker = PALETTE[1]
        ax.plot(f[measured], np.asarray(table["h95_measured"])[measured], ls="none",
                marker="*", color=colour, ms=6, label="measured 95 % limit")
    for fi, lo, hi in zip(f, table["h95_predicted"], table["h0_spindown"], strict=True):
        ax.plot([fi, fi], [lo, hi], color="0.7", lw=0.5)
    ax.set_xscale("log")
    ax.set_yscale("log")
    ax.set_xlabel(r"gravitational-wave frequency $f_{\rm gw}$ [Hz]")
    ax.set_ylabel(r"strain amplitude $h_0$ (dimensionless)")
    tidy_log_axes(ax)
    # below the axes: the markers sit anywhere in the panel
    fig.legend(fontsize=6, loc="outside lower center", ncols=2, frameon=False)
    if title:
        ax.set_title(title, fontsize=8)
    return fig
