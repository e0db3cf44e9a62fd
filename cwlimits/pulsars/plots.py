"""Figures of a known pulsar's posterior: the amplitude marginal and a corner figure.

Matplotlib is imported lazily; the figures are :class:`matplotlib.figure.Figure` objects
that choose no backend (save them with :func:`cwlimits.plots.save_plot`).
"""

import numpy as np

from ..plots import COLUMN_WIDTH_IN, PALETTE, new_figure

__all__ = ["plot_pulsar_posterior", "plot_pulsar_corner"]

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
    ax.set_ylabel("posterior density")
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
