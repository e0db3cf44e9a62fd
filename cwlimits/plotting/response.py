"""The figure of the amplitude modulation over a sidereal day (``cwlimits response --plot``).

Moved here from the command module: only :mod:`cwlimits.plotting` imports matplotlib.
"""

import io

import astropy.units as u
import numpy as np

from cwlimits.plotting.figures import PAGE_WIDTH_IN, PALETTE, _pyplot, figure_metadata, house_style

__all__ = ["plot_amplitude_modulation", "save_plot_bytes"]


def plot_amplitude_modulation(detectors, coord, start):
    """a(t) and b(t) of each detector over one sidereal day (JKS 1998, Eqs. 12-13).

    Parameters
    ----------
    detectors : sequence of Detector
    coord : astropy.coordinates.SkyCoord
        The source direction.
    start : astropy.time.Time
        Start of the day.

    Returns
    -------
    matplotlib.figure.Figure
    """
    from cwlimits.response import antenna as resp

    plt = _pyplot()
    hours = np.linspace(0.0, resp.SIDEREAL_DAY.to_value(u.h), 289)
    times = start + hours * u.h
    with house_style():
        fig, ax = plt.subplots(figsize=(PAGE_WIDTH_IN, 4.2), layout="constrained")
        # Okabe-Ito colours plus line styles and markers: readable in greyscale too.
        for i, det in enumerate(detectors):
            a, b = resp.amplitude_modulation(det, coord, times)
            colour, _, marker = PALETTE[i % (len(PALETTE) - 1)]
            ax.plot(hours, a.value, color=colour, linestyle="-", marker=marker, markevery=24,
                    label=f"{det.name} a(t)")
            ax.plot(hours, b.value, color=colour, linestyle="--", marker=marker,
                    markevery=(12, 24), fillstyle="none", label=f"{det.name} b(t)")
        ax.set_xlabel(f"time since {start.iso[:19]} UTC [h]")
        ax.set_ylabel("amplitude modulation a(t), b(t) [dimensionless]")
        ax.set_title("Amplitude modulation over one sidereal day (JKS 1998)")
        ax.set_xlim(hours[0], hours[-1])
        ax.grid(True, alpha=0.3)
        ax.legend(fontsize="small", ncol=2)
    return fig


def save_plot_bytes(fig, fmt):
    """The bytes of ``fig`` in format ``fmt`` (with cwlimits' mark); the figure is closed.

    For a command that writes its figure only after its table (so a failure leaves
    neither behind).
    """
    plt = _pyplot()
    buffer = io.BytesIO()
    try:
        with house_style():
            fig.savefig(buffer, format=fmt, metadata=figure_metadata(fmt))
    finally:
        plt.close(fig)
    return buffer.getvalue()
