"""The figure of a computing-cost scan (``cwlimits cost --scan ... --plot``).

Moved here from :mod:`cwlimits.searchspace.cost`: only :mod:`cwlimits.plotting` imports
matplotlib.
"""

from pathlib import Path

import astropy.units as u
import numpy as np

from cwlimits.errors import InputError
from cwlimits.plotting.figures import PLOT_SUFFIXES, _pyplot, house_style, save_plot
from cwlimits.searchspace.cost import SCAN_QUANTITIES

__all__ = ["plot_cost_scan"]


def plot_cost_scan(scan, quantity, path, *, title=None):
    """Plot the total cost of a :func:`scan_cost` table against the scanned quantity.

    Log axes; the coherent and semi-coherent parts and the total are drawn with different
    line styles and markers (readable in greyscale).

    Parameters
    ----------
    scan : astropy.table.QTable
        The output of :func:`scan_cost`.
    quantity : {'t_seg', 'n_seg'}
        The scanned column.
    path : str or Path
        ``.png``, ``.pdf`` or ``.svg``; written atomically.
    title : str, optional
        Plot title.

    Returns
    -------
    Path
    """
    path = Path(path)
    if path.suffix.lower() not in PLOT_SUFFIXES:
        raise InputError(f"plot file must end in {', '.join(PLOT_SUFFIXES)}", file=str(path))
    if quantity not in SCAN_QUANTITIES:
        raise InputError(f"can plot only {' or '.join(SCAN_QUANTITIES)}", value=quantity)
    from matplotlib import ticker

    plt = _pyplot()
    x = np.asarray(scan[quantity].to_value(u.day) if quantity == "t_seg" else scan[quantity],
                   float)
    with house_style():
        fig, ax = plt.subplots(figsize=(6.5, 4.5))
    for column, label, style, marker in (("cost", "total", "-", "o"),
                                         ("cost_coh", "coherent stage", "--", "s"),
                                         ("cost_semi", "semi-coherent stage", ":", "^")):
        y = scan[column].to_value(u.h)
        ok = y > 0
        ax.loglog(x[ok], y[ok], linestyle=style, marker=marker, color="k" if column ==
                  "cost" else None, label=label)
    ax.set_xlabel("coherent segment length T_seg [day]" if quantity == "t_seg"
                  else "number of segments N_seg")
    ax.set_ylabel("computing cost [core-hours]")
    # label the scanned values themselves (plain numbers; a scan rarely spans two decades)
    if len(x) <= 12:
        ax.set_xticks(x, [f"{v:.3g}" for v in x])
        ax.xaxis.set_minor_formatter(ticker.NullFormatter())
    ax.grid(True, which="both", alpha=0.3)
    ax.legend()
    if title:
        ax.set_title(title)
    fig.tight_layout()
    return save_plot(fig, path)
