"""A sky map of a target catalogue: an all-sky projection coloured by a value per target.

The positions are converted with :mod:`astropy.coordinates` (ICRS to Galactic, or kept
equatorial) and drawn on matplotlib's Mollweide projection, longitude increasing to the
left as on the sky (common practice for all-sky maps).
"""

import numpy as np

from cwlimits.plotting.figures import COLUMN_WIDTH_IN, _pyplot, house_style

__all__ = ["plot_sky_map", "sky_positions"]

_FRAMES = {"galactic": ("l", "b", "Galactic longitude $l$ [deg]",
                        "Galactic latitude $b$ [deg]"),
           "icrs": ("ra", "dec", "right ascension [deg]", "declination [deg]")}


def sky_positions(coord, frame="galactic"):
    """Longitude and latitude of ``coord`` in ``frame``, in radians, for a Mollweide axis.

    The longitude is wrapped to (-180, 180] deg and negated, so that it increases to the
    left of the map.

    Parameters
    ----------
    coord : astropy.coordinates.SkyCoord
    frame : {'galactic', 'icrs'}

    Returns
    -------
    x, y : ndarray
        Radians, as matplotlib's ``mollweide`` projection takes them.
    """
    import astropy.units as u
    from astropy.coordinates import Angle

    if frame not in _FRAMES:
        raise ValueError(f"frame must be one of {', '.join(_FRAMES)}, not {frame!r}")
    sph = coord.transform_to(frame).spherical
    lon = Angle(sph.lon).wrap_at(180 * u.deg).to_value(u.rad)
    return -np.atleast_1d(lon), np.atleast_1d(sph.lat.to_value(u.rad))


def plot_sky_map(coord, values, names=None, *, frame="galactic",
                 label=r"nominal age-based limit on $h_0$ (dimensionless)", log=True,
                 width=COLUMN_WIDTH_IN * 2):
    """All-sky map of the targets, coloured by ``values`` (e.g. indirect limit or merit).

    Parameters
    ----------
    coord : astropy.coordinates.SkyCoord
        The targets' positions (e.g. ``TargetCatalogue.coord``).
    values : array_like or Quantity
        One value per target; NaN values are drawn as open grey markers.
    names : sequence of str, optional
        Labels written beside the markers.
    frame : {'galactic', 'icrs'}
    label : str
        The colour bar's label (with its unit).
    log : bool
        Logarithmic colour scale.
    width : float
        Figure width in inches (default a journal page's width less a little).

    Returns
    -------
    matplotlib.figure.Figure
    """
    from matplotlib import colors, ticker

    plt = _pyplot()
    x, y = sky_positions(coord, frame)
    v = np.asarray(getattr(values, "value", values), float)
    if v.shape != x.shape:
        raise ValueError(f"values has {v.size} entries for {x.size} positions")
    good = np.isfinite(v) & ((v > 0) if log else True)
    with house_style():
        fig = plt.figure(figsize=(width, width * 0.6), dpi=150, layout="constrained")
        ax = fig.add_subplot(projection="mollweide")
        norm = None
        if good.any():
            lo, hi = float(v[good].min()), float(v[good].max())
            if hi <= lo:
                lo, hi = lo / 2, hi * 2
            norm = colors.LogNorm(lo, hi) if log else colors.Normalize(lo, hi)
        points = ax.scatter(x[good], y[good], c=v[good], norm=norm, cmap="viridis", s=30,
                            edgecolors="k", linewidths=0.5, zorder=3)
        if (~good).any():
            ax.scatter(x[~good], y[~good], facecolors="none", edgecolors="0.5", s=30,
                       zorder=3, label="no value")
            ax.legend(fontsize=6, loc="lower right")
        for k, name in enumerate(names or ()):
            ax.annotate(str(name), (x[k], y[k]), xytext=(4, 3), textcoords="offset points",
                        fontsize=5.5)
        # Tick labels in degrees, longitude increasing to the left.
        ticks = np.radians(np.arange(-150, 181, 60))
        ax.set_xticks(ticks, [f"{(-t) % 360:.0f}" for t in np.degrees(ticks)], fontsize=6)
        ax.tick_params(axis="y", labelsize=6)
        ax.grid(True, lw=0.4, color="0.7")
        _, _, xlabel, ylabel = _FRAMES[frame]
        ax.set_xlabel(xlabel, fontsize=7)
        ax.set_ylabel(ylabel, fontsize=7)
        if good.any():
            bar = fig.colorbar(points, ax=ax, orientation="horizontal", shrink=0.6,
                               pad=0.02)
            bar.set_label(label, fontsize=7)
            bar.ax.tick_params(labelsize=6)
            if log:  # labels at the decades and 2, 5 times them only: no overlap
                bar.ax.xaxis.set_major_locator(ticker.LogLocator(subs=(1.0, 2.0, 5.0)))
                bar.ax.xaxis.set_minor_formatter(ticker.NullFormatter())
    return fig
