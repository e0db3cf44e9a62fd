"""Figures of search planning: merit against budget, planned h0(f), cost against depth.

Like :mod:`cwlimits.plotting.figures` (whose figure, palette and saving helpers these reuse):
column-width figures, labelled axes with units, log axes, a legend, Okabe & Ito colours
with a marker and a line style per series.  matplotlib is imported lazily, with Agg.
"""

import astropy.units as u
import numpy as np

from cwlimits.errors import InputError

__all__ = ["plot_merit_vs_budget", "plot_planned_strain", "plot_cost_depth"]


def _style(k):
    """Colour, line style and marker of series k; past the palette, shift the styles."""
    from cwlimits.plotting.figures import PALETTE

    colour, _, _ = PALETTE[k % len(PALETTE)]
    turn = k // len(PALETTE)
    _, style, _ = PALETTE[(k + turn) % len(PALETTE)]
    _, _, marker = PALETTE[(k + 2 * turn) % len(PALETTE)]
    return colour, style, marker


def plot_merit_vs_budget(ranking, title=None):
    """Figure of merit of each target against its budget (the allocation grid).

    Parameters
    ----------
    ranking : Ranking
        From :func:`cwlimits.planning.optimise.rank_targets`.

    Returns
    -------
    matplotlib.figure.Figure
    """
    from cwlimits.plotting.figures import new_figure

    fig, ax = new_figure(height_ratio=0.85)
    b = ranking.budgets.to_value(u.h)[1:]
    for k, name in enumerate(ranking.names):
        colour, style, marker = _style(k)
        ax.plot(b, ranking.merits[k, 1:], color=colour, ls=style, marker=marker, ms=3,
                lw=1, label=name)
    ax.set_xscale("log")
    ax.set_xlabel("computing budget [core-hours]")
    ax.tick_params(which="both", labelsize=6)
    measure = ranking.assumptions.get("figure_of_merit", "figure of merit")
    ax.set_ylabel("figure of merit [Hz]" + (" (beat-age width)" if "width" in
                                            measure.split(":")[0] else ""))
    ax.grid(True, which="both", alpha=0.3)
    # below the axes: with many targets a legend inside hides the curves (none when every
    # target is a known pulsar: they have no merit curve)
    if ranking.names:
        fig.legend(fontsize=5, loc="outside lower center", ncols=3)
    else:
        ax.text(0.5, 0.5, "no unknown-spin target: known pulsars have no merit curve",
                transform=ax.transAxes, ha="center", va="center", fontsize=6)
    if title:
        ax.set_title(title, fontsize=8)
    return fig


def plot_planned_strain(plans, title=None):
    """Predicted h0(f) of planned searches against each target's age-based limit band.

    Parameters
    ----------
    plans : sequence of SearchPlan
        Plans evaluated exactly (``plan.table`` set).

    Returns
    -------
    matplotlib.figure.Figure
    """
    from cwlimits.plotting.figures import new_figure

    plans = [p for p in plans if p.table is not None]
    if not plans:
        raise InputError("no evaluated plans to plot (plans need exact=True)")
    fig, ax = new_figure(height_ratio=1.1)
    for k, plan in enumerate(plans):
        colour, style, marker = _style(k)
        table = plan.table
        f = table["f_mid"].to_value(u.Hz)
        ax.plot(f, table["h0"].to_value(u.one), color=colour, ls=style, lw=1.2,
                label=plan.target)
        lo = float(table["h0_age_pessimistic"][0].value)
        hi = float(table["h0_age_optimistic"][0].value)
        ax.fill_between(f, lo, hi, color=colour, alpha=0.12, lw=0)
        ax.plot(f[[0, -1]], [plan.h_age.value] * 2, color=colour, ls=":", lw=0.8,
                marker=marker, ms=3)
    ax.plot([], [], color="0.3", ls="-", lw=1.2, label=r"lines: planned $h_0$")
    ax.plot([], [], color="0.3", ls=":", marker="o", ms=3,
            label=r"dotted, markers: $h_{age}$ of the case; shading: its range")
    ax.set_xscale("log")
    ax.set_yscale("log")
    ax.set_xlabel("gravitational-wave frequency [Hz]")
    ax.set_ylabel(r"$h_0$ (dimensionless strain)")
    ax.tick_params(which="both", labelsize=6)
    ax.legend(fontsize=4.5, loc="upper center", ncol=2, bbox_to_anchor=(0.5, -0.18),
              frameon=False)
    if title:
        ax.set_title(title, fontsize=8)
    return fig


def plot_cost_depth(plans, title=None):
    """Cost against depth of depth-objective plans of one target at several budgets.

    Parameters
    ----------
    plans : sequence of SearchPlan
        Plans with ``objective='depth'`` (their exact cost and geometric-mean depth are
        drawn); the marker shows what bounds each optimum.

    Returns
    -------
    matplotlib.figure.Figure
    """
    from cwlimits.plotting.figures import new_figure

    plans = [p for p in plans if p.objective == "depth"]
    if not plans:
        raise InputError("the cost-depth trade-off needs plans with objective 'depth'")
    fig, ax = new_figure()
    cost = np.array([p.cost.to_value(u.h) for p in plans])
    depth = np.array([(p.merit if p.merit is not None else p.merit_planned).value
                      for p in plans])
    order = np.argsort(cost)
    colour, style, _ = _style(0)
    ax.plot(cost[order], depth[order], color=colour, ls=style, lw=1, label=plans[0].target)
    for k, bound in enumerate(sorted({p.bound for p in plans})):
        sel = np.array([p.bound == bound for p in plans])
        c, _, marker = _style(k + 1)
        ax.plot(cost[sel], depth[sel], ls="none", marker=marker, ms=4, color=c,
                label=f"optimum bounded by {bound}")
    ax.set_xscale("log")
    ax.set_yscale("log")
    ax.set_xlabel("computing cost [core-hours]")
    ax.set_ylabel(r"geometric-mean sensitivity depth [Hz$^{-1/2}$]")
    ax.tick_params(which="both", labelsize=6)
    ax.grid(True, which="both", alpha=0.3)
    ax.legend(fontsize=6, loc="best")
    if title:
        ax.set_title(title, fontsize=8)
    return fig
