"""Plot of amplitude spectral densities (the only noise module that uses matplotlib)."""

import numpy as np

from cwlimits._units import as_frequency_hz
from cwlimits.errors import InputError

__all__ = ["plot_asd"]

_SUFFIXES = (".png", ".svg", ".pdf")
# distinct line styles and markers as well as colours, so curves survive greyscale
_STYLES = [("-", None), ("--", "o"), (":", "s"), ("-.", "^"), ((0, (5, 1)), "d")]


def plot_asd(sources, path, f_min=None, f_max=None, *, n_points=1000, title=None):
    """Draw the ASD of one or more noise sources against frequency on log axes.

    Parameters
    ----------
    sources : NoiseSource or sequence of NoiseSource
        The curves.
    path : str or Path
        Output file, ``.png``, ``.svg`` or ``.pdf``.
    f_min, f_max : Quantity ['frequency'], optional
        Plotted range; by default the widest range where any source is defined (capped to
        four decades below ``f_max``).  Each curve is drawn only inside its own range.
    n_points : int
        Points per curve, log-spaced.
    title : str, optional
        Plot title.

    Returns
    -------
    Path
        The file written.

    Raises
    ------
    InputError
        Unknown file type, or an empty frequency range.
    """
    from pathlib import Path

    from cwlimits.plotting.figures import save_plot

    path = Path(path)
    if path.suffix.lower() not in _SUFFIXES:
        raise InputError(f"plot file must end in {', '.join(_SUFFIXES)}", file=str(path))
    if not isinstance(sources, (list, tuple)):
        sources = [sources]
    hi = float(as_frequency_hz(f_max)) if f_max is not None else max(
        s._f_max_hz for s in sources)
    lo = float(as_frequency_hz(f_min)) if f_min is not None else max(
        min(s._f_min_hz for s in sources), hi * 1e-4)
    if not 0 < lo < hi:
        raise InputError("plot range needs 0 < f_min < f_max", value=f"{lo:g}-{hi:g} Hz")

    from cwlimits.plotting.figures import _pyplot, house_style

    plt = _pyplot()
    with house_style():
        fig, ax = plt.subplots(figsize=(7, 4.5))
    for k, source in enumerate(sources):
        a = max(lo, source._f_min_hz)
        b = min(hi, source._f_max_hz)
        if not a < b:
            continue
        f = np.geomspace(a, b, n_points)
        style, marker = _STYLES[k % len(_STYLES)]
        ax.loglog(f, np.sqrt(source._psd_checked(f, True)), linestyle=style, marker=marker,
                  markevery=max(n_points // 12, 1), markersize=4, label=source.name)
    ax.set_xlabel("frequency f [Hz]")
    ax.set_ylabel(r"amplitude spectral density $\sqrt{S_n}$ [Hz$^{-1/2}$]")
    ax.set_xlim(lo, hi)
    ax.grid(True, which="both", alpha=0.3)
    ax.legend()
    if title:
        ax.set_title(title)
    fig.tight_layout()
    return save_plot(fig, path)
