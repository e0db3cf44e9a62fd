"""Figures for papers and reports (the only module besides the report that uses matplotlib).

Every figure is sized for a journal column (3.4 in wide; :func:`save_journal_figure` also
redraws it at the 7 in of a page), has labelled axes with units, log axes where the field
uses them, and a legend.  Colours come from the Okabe & Ito (2008)
colour-blind-safe palette, and every series also differs by marker or line style, so the
figures stay readable in greyscale.  Functions return the :class:`matplotlib.figure.Figure`;
saving is the caller's business (see :func:`save_figure`).

No function here chooses a matplotlib backend or changes the global ``rcParams``: the
house style is applied inside :func:`house_style`, a context manager around figure
creation and saving, and only the command line picks the backend.
"""

import contextlib
from pathlib import Path

import numpy as np

from cwlimits import _defaults
from cwlimits._files import FIGURE_MARK, atomic_write

__all__ = ["COLUMN_WIDTH_IN", "PAGE_WIDTH_IN", "PALETTE", "PLOT_SUFFIXES", "HOUSE_STYLE",
           "house_style", "figure_metadata", "new_figure", "save_figure",
           "save_journal_figure", "close_figure",
           "save_plot", "tidy_log_axes",
           "plot_indirect_limits",
           "plot_strain_curves", "plot_sensitivity"]

#: File types a ``--plot FILE`` may have (matplotlib picks the format from the suffix).
PLOT_SUFFIXES = _defaults.PLOT_SUFFIXES

#: Width of one journal column, inches (common practice: 3.3-3.5 in).
COLUMN_WIDTH_IN = 3.4
#: Width of a full journal page (two columns), inches (common practice: about 7 in).
PAGE_WIDTH_IN = 7.0
#: The house style, applied only inside :func:`house_style` (never to the global rcParams).
#: A fixed SVG hash salt makes the SVG element ids, and so the files, the same every run.
#: PDF text keeps matplotlib's default Type 3 fonts: embedding TrueType (``pdf.fonttype``
#: 42) costs about 0.5 s a figure, which the demo cannot afford.
HOUSE_STYLE = {"svg.hashsalt": "cwlimits", "font.size": 7.0,
               "axes.labelsize": 8.0, "axes.titlesize": 8.0, "xtick.labelsize": 7.0,
               "ytick.labelsize": 7.0, "legend.fontsize": 6.0}
#: Okabe & Ito (2008) colour-blind-safe colours, with line styles and markers that keep the
#: series apart in greyscale.
PALETTE = (("#0072B2", "-", "o"), ("#D55E00", "--", "s"), ("#009E73", "-.", "^"),
           ("#CC79A7", ":", "D"), ("#E69F00", (0, (5, 1, 1, 1)), "v"),
           ("#56B4E9", (0, (3, 1, 1, 1, 1, 1)), "P"), ("#000000", "-", "x"))


@contextlib.contextmanager
def house_style():
    """Apply :data:`HOUSE_STYLE` to the figures made and saved inside the block.

    The global ``rcParams`` are restored on leaving (``matplotlib.rc_context``).
    """
    import matplotlib

    with matplotlib.rc_context(HOUSE_STYLE):
        yield


def _pyplot():
    """``matplotlib.pyplot`` (imported lazily; the backend is the caller's choice)."""
    import matplotlib.pyplot as plt

    return plt


def _width_in(width):
    if width == "column":
        return COLUMN_WIDTH_IN
    if width == "page":
        return PAGE_WIDTH_IN
    return float(width)


def new_figure(height_ratio=0.75, width=COLUMN_WIDTH_IN):
    """A figure and its axes with the house style.

    Parameters
    ----------
    height_ratio : float
        Height over width.
    width : float or {'column', 'page'}
        Width in inches, or a journal column (:data:`COLUMN_WIDTH_IN`) or page
        (:data:`PAGE_WIDTH_IN`).
    """
    plt = _pyplot()
    width = _width_in(width)
    with house_style():
        fig, ax = plt.subplots(figsize=(width, width * height_ratio), dpi=150,
                               layout="constrained")
    ax.tick_params(labelsize=7)
    ax.xaxis.label.set_size(8)
    ax.yaxis.label.set_size(8)
    return fig, ax


#: Fewest labelled ticks a log axis gets (common practice: at least three or four labels
#: so a reader can interpolate).
MIN_LOG_LABELS = 4
#: Mantissas of the labelled ticks, tried from sparse to dense until an axis has
#: :data:`MIN_LOG_LABELS` labels inside its limits.
_LOG_SUBS = ((1.0,), (1.0, 2.0, 5.0), (1.0, 2.0, 3.0, 4.0, 5.0),
             tuple(float(k) for k in range(1, 10)))


def _plain_number(value, _pos=None):
    """A tick label as a plain number ('50', '200', '0.5')."""
    return f"{value:g}"


def tidy_log_axes(ax):
    """Readable log-axis ticks at column width.

    Each log axis gets major ticks at the sparsest set of mantissas (1; 1, 2, 5;
    1, 2, 3, 5; ...) that puts at least :data:`MIN_LOG_LABELS` labels inside its limits
    (a 50-450 Hz axis is labelled at 50, 100, 200, 300 and 400 Hz), no minor labels, and
    plain numbers where the values are between 0.01 and 1e5 (frequencies, segment
    lengths) instead of powers of ten.
    """
    from matplotlib import ticker

    for axis, lim in ((ax.xaxis, ax.get_xlim()), (ax.yaxis, ax.get_ylim())):
        if axis.get_scale() != "log" or min(lim) <= 0:
            continue
        lo, hi = min(lim), max(lim)
        for subs in _LOG_SUBS:
            ticks = [m * 10.0**e for e in range(int(np.floor(np.log10(lo))),
                                                int(np.ceil(np.log10(hi))) + 1)
                     for m in subs]
            if sum(lo * (1 - 1e-9) <= t <= hi * (1 + 1e-9) for t in ticks) >= MIN_LOG_LABELS:
                break
        axis.set_major_locator(ticker.LogLocator(subs=subs, numticks=60))
        if lo >= 1e-2 and hi <= 1e5:
            axis.set_major_formatter(ticker.FuncFormatter(_plain_number))
        else:
            axis.set_major_formatter(ticker.LogFormatterSciNotation(labelOnlyBase=False))
        axis.set_minor_formatter(ticker.NullFormatter())
    ax.tick_params(which="both", labelsize=6)


def figure_metadata(fmt):
    """The savefig metadata of a figure in format ``fmt``: cwlimits' mark, no date in SVG.

    The mark lets a later run replace the figure (:func:`cwlimits._files.written_by_cwlimits`).
    """
    if fmt == "png":
        return {"Software": FIGURE_MARK}
    if fmt == "svg":
        return {"Date": None, "Creator": FIGURE_MARK}
    return {"Creator": FIGURE_MARK}


def save_figure(fig, path, formats=("png", "svg")):
    """Save ``fig`` as ``path`` with each extension of ``formats``; return the paths.

    Each file goes through :func:`cwlimits._files.atomic_write` (a temporary file beside
    its destination, renamed when complete, with the umask's mode), so a reader never sees
    half a figure and a failure leaves nothing behind.

    The layout (constrained layout, most of the cost of a save) is solved once, by the
    first save; the later formats reuse its positions instead of solving it again, and
    the figure gets its layout engine back afterwards.  Without a layout engine
    matplotlib also skips the dry draw it makes before each save to place a layout, so a
    later format costs one draw, not two.
    """
    path = Path(path)
    written = []
    engine = fig.get_layout_engine()
    try:
        with house_style():
            _save_all(fig, path, formats, engine, written)
    finally:
        if engine is not None and fig.get_layout_engine() is not engine:
            fig.set_layout_engine(engine)
    return written


def _save_all(fig, path, formats, engine, written):
    for k, fmt in enumerate(formats):
        if k == 1 and engine is not None:
            # keep the positions the first save found; None rather than "none" (a
            # placeholder engine), so that savefig makes no dry draw for a layout
            fig.set_layout_engine(None)
            if fig.get_layout_engine() is not None:  # rcParams chose an engine for None
                fig.set_layout_engine("none")
        target = path.with_suffix(f".{fmt}")
        metadata = figure_metadata(fmt)
        atomic_write(target, lambda handle, fmt=fmt, metadata=metadata: fig.savefig(
            handle, format=fmt, metadata=metadata), binary=True)
        written.append(target)


def save_journal_figure(fig, path):
    """Save ``fig`` at its own (column) width and redrawn at a journal page's width.

    Files: ``path.png``, ``path.svg`` and ``path.pdf`` (vector) at the figure's width,
    then ``<stem>_page.pdf`` at :data:`PAGE_WIDTH_IN` with the
    same height ratio and font sizes (the layout is solved again for the new size).  The
    figure keeps the page size afterwards.

    Returns
    -------
    list of Path
    """
    path = Path(path)
    written = save_figure(fig, path, formats=("png", "svg", "pdf"))
    width, height = fig.get_size_inches()
    fig.set_size_inches(PAGE_WIDTH_IN, height * PAGE_WIDTH_IN / width)
    written += save_figure(fig, path.with_name(f"{path.name}_page"), formats=("pdf",))
    return written


def close_figure(fig):
    """Release ``fig`` from pyplot's list of open figures (if it is there)."""
    _pyplot().close(fig)


def save_plot(fig, path):
    """Save ``fig`` to ``path`` in the format of its suffix (atomically) and close it."""
    import matplotlib.pyplot as plt

    path = Path(path)
    try:
        save_figure(fig, path, formats=(path.suffix.lower().lstrip("."),))
    finally:
        plt.close(fig)
    return path


def plot_indirect_limits(table, title=None):
    """Indirect limits per target: age-based (nominal with its range) and spin-down.

    Parameters
    ----------
    table : astropy.table.QTable
        As returned by :func:`cwlimits.indirect_limits`.
    """
    fig, ax = new_figure(height_ratio=0.9)
    n = len(table)
    y = np.arange(n)[::-1]
    colour, _, marker = PALETTE[0]
    nominal = np.asarray(table["h0_age"].value)
    low = nominal - np.asarray(table["h0_age_pessimistic"].value)
    high = np.asarray(table["h0_age_optimistic"].value) - nominal
    ax.errorbar(nominal, y, xerr=[low, high], fmt=marker, color=colour, ms=4, capsize=2,
                lw=1, label="age-based (range: distance, age)")
    spin = np.isfinite(np.asarray(table["h0_spindown"].value))
    if spin.any():
        colour, _, marker = PALETTE[1]
        sd = np.asarray(table["h0_spindown"].value)
        lo = sd - np.asarray(table["h0_spindown_pessimistic"].value)
        hi = np.asarray(table["h0_spindown_optimistic"].value) - sd
        ax.errorbar(sd[spin], y[spin] - 0.25, xerr=[lo[spin], hi[spin]], fmt=marker,
                    color=colour, ms=4, capsize=2, lw=1, label="spin-down (range: distance)")
    ax.set_yticks(y, [str(name) for name in table["name"]], fontsize=7)
    ax.set_xscale("log")
    ax.set_xlabel(r"indirect limit on $h_0$ (dimensionless strain)")
    ax.set_ylabel("target")
    fig.legend(fontsize=6, loc="outside lower center", ncols=2)
    if title:
        ax.set_title(title, fontsize=8)
    tidy_log_axes(ax)
    return fig


def plot_strain_curves(f, curves, bands=(), title=None, ylabel=r"$h_0$ (dimensionless strain)"):
    """Curves against frequency on log axes, with optional shaded horizontal bands.

    Parameters
    ----------
    f : Quantity ['frequency']
    curves : sequence of (label, Quantity array)
        Each drawn as a line (or markers when ``label`` ends with ' (points)').
    bands : sequence of (label, low, nominal, high)
        Horizontal ranges (e.g. an age-based limit and its range), drawn shaded with a
        line at the nominal value.
    """
    fig, ax = new_figure()
    fx = np.asarray(f.to_value("Hz"))
    for k, (label, low, nominal, high) in enumerate(bands):
        colour, style, _ = PALETTE[(k + 3) % len(PALETTE)]
        ax.axhspan(float(low), float(high), color=colour, alpha=0.15, lw=0)
        ax.axhline(float(nominal), color=colour, ls=style, lw=1, label=label)
    for k, (label, values) in enumerate(curves):
        colour, style, marker = PALETTE[k % len(PALETTE)]
        values = np.asarray(getattr(values, "value", values), dtype=float)
        if label.endswith(" (points)"):
            ax.plot(fx, values, ls="none", marker=marker, ms=2, color=colour,
                    label=label[: -len(" (points)")])
        else:
            ax.plot(fx, values, ls=style, lw=1.2, color=colour, label=label)
    ax.set_xscale("log")
    ax.set_yscale("log")
    ax.set_xlabel("gravitational-wave frequency [Hz]")
    ax.set_ylabel(ylabel)
    ax.legend(fontsize=6, loc="best")
    if title:
        ax.set_title(title, fontsize=8)
    tidy_log_axes(ax)
    return fig


def plot_sensitivity(table, title=None, curve_label=r"expected $h_0$ sensitivity",
                     h0_column="h0"):
    """h0(f) against the target's age-based limit band, marking where the search beats it.

    Parameters
    ----------
    table : astropy.table.QTable
        From :func:`cwlimits.strain_sensitivity` or :func:`cwlimits.upper_limits`, with
        ``f_mid``, ``h0_column`` and (optionally) the ``h0_age*`` columns.
    """
    f = table["f_mid"]
    bands = []
    if "h0_age" in table.colnames:
        bands.append(("age-based limit (range)", table["h0_age_pessimistic"][0].value,
                      table["h0_age"][0].value, table["h0_age_optimistic"][0].value))
    fig = plot_strain_curves(f, [(curve_label, table[h0_column])], bands=bands, title=title)
    if "beats_age" in table.colnames and np.any(table["beats_age"]):
        ax = fig.axes[0]
        beats = np.asarray(table["beats_age"], bool)
        colour, _, _ = PALETTE[2]
        low = ax.get_ylim()[0]
        ax.fill_between(np.asarray(f.to_value("Hz")), low,
                        np.asarray(table[h0_column].value), where=beats, color=colour,
                        alpha=0.25, hatch="///", lw=0, label="beats the age-based limit")
        ax.set_ylim(bottom=low)
        ax.legend(fontsize=6, loc="best")
        tidy_log_axes(ax)
    return fig
