"""Every figure of a report: axis labels with units, a legend where there are series.

Issue 8 asks that each figure's axes are labelled with units; this runs a small report
(fixed setup, simulated results) and inspects every matplotlib figure it saves.
"""

import contextlib
import io
import logging
import re

import astropy.units as u
import numpy as np
import pytest

from cwlimits.report.chain import run_report
from cwlimits.report.config import load_config
from cwlimits.report.html import Report
from cwlimits.searchspace.searchsetup import SearchSetup

# A label names its unit in brackets, says it is dimensionless, or is a category axis.
_UNIT = re.compile(r"\[[^\]]+\]|dimensionless|^target$")
_CHAIN_OUTPUT = {}


@pytest.fixture(scope="module")
def figures(tmp_path_factory, request):
    folder = tmp_path_factory.mktemp("figs")
    SearchSetup(t_seg=5 * u.day, n_seg=6, band=(100 * u.Hz, 160 * u.Hz),
                band_width=5 * u.Hz).to_toml(folder / "s.toml")
    import pathlib
    demo = pathlib.Path(__file__).resolve().parent.parent / "target_lists" / "demo.csv"
    (folder / "cat.csv").write_bytes(demo.read_bytes())
    (folder / "a.toml").write_text(
        'output = "rep"\n[catalogue]\npath = "cat.csv"\ntargets = ["Fict Quill", '
        '"Fict Pulsar Cinder"]\n[data]\nspan = "60 day"\n[search]\nsetup = "s.toml"\n'
        '[planning]\nmax_targets = 2\n')
    seen = []
    original = Report.figure

    def spy(self, name, fig, caption="", **options):
        # a colour bar is labelled along its long side only (its label is the data's)
        seen.append((name, [(ax.get_xlabel(), ax.get_ylabel(), ax.get_xscale(),
                             ax.get_yscale(), ax.get_legend() is not None or bool(fig.legends),
                             len(ax.lines) + len(ax.collections)) for ax in fig.axes
                            if ax.get_label() != "<colorbar>"]))
        return original(self, name, fig, caption, **options)

    mp = pytest.MonkeyPatch()
    mp.setattr(Report, "figure", spy)
    request.addfinalizer(mp.undo)
    # no echo given: the library logs its steps (cwlimits.report logger) and prints nothing
    records = []
    handler = logging.Handler(logging.INFO)
    handler.emit = records.append
    logger = logging.getLogger("cwlimits.report")
    level = logger.level
    logger.addHandler(handler)
    logger.setLevel(logging.INFO)
    stdout = io.StringIO()
    try:
        with contextlib.redirect_stdout(stdout):
            run_report(load_config(folder / "a.toml"), simulate=True)
    finally:
        logger.removeHandler(handler)
        logger.setLevel(level)
    _CHAIN_OUTPUT.update(stdout=stdout.getvalue(), log=[r.getMessage() for r in records])
    return seen


def test_the_chain_logs_its_steps_and_prints_nothing(figures):
    # issue 15 item 11: library code does not print; it logs (common practice for libraries)
    assert _CHAIN_OUTPUT["stdout"] == ""
    assert "indirect limits of 2 targets" in _CHAIN_OUTPUT["log"]
    assert any(m.startswith("upper limits of Fict Quill") for m in _CHAIN_OUTPUT["log"])


def test_every_axis_has_labels_with_units(figures):
    assert len(figures) >= 8
    for name, axes in figures:
        for xlabel, ylabel, *_ in axes:
            for label in (xlabel, ylabel):
                assert label, f"{name}: unlabelled axis"
                assert _UNIT.search(label), f"{name}: no unit in '{label}'"


def test_strain_and_frequency_axes_are_logarithmic_with_legends(figures):
    for name, axes in figures:
        for xlabel, ylabel, xscale, yscale, legend, n_series in axes:
            if "frequency" in xlabel and ("h_0" in ylabel or "strain" in ylabel):
                assert xscale == yscale == "log", name
            if n_series > 1:
                assert legend, f"{name}: several series but no legend"


def test_report_limits_are_finite(tmp_path_factory, figures):
    # issue 9: no NaN in an output table (the blank 'not applicable' cells aside)
    import cwlimits

    folder = next(p for p in tmp_path_factory.getbasetemp().glob("figs*"))
    for path in (folder / "rep").glob("limits_*.csv"):
        table = cwlimits.read_table(path)
        for column in ("h0_limit", "eps_limit", "alpha_limit"):
            values = table.quantity(column, u.one).value
            assert np.all(np.isfinite(values) & (values > 0)), (path.name, column)


# The SVG written after the PNG reuses the PNG's constrained layout instead of solving it
# again: its axes must sit where matplotlib's own layout of the SVG puts them.  Positions
# are figure fractions; text extents round to whole pixels at 150 dpi (1/510 of the
# column width), so 2e-3 is about one pixel.
LAYOUT_TOL = 2e-3


def _svg_axes_box(path):
    # the first path of the axes patch: "M x0 y0 L x1 y0 L x1 y1 L x0 y1 z" in points
    text = path.read_text()
    patch = re.search(r'<g id="patch_2">\s*<path d="M ([\d.]+) ([\d.]+) \s*L ([\d.]+) '
                      r'([\d.]+) \s*L ([\d.]+) ([\d.]+)', text)
    return np.array([float(v) for v in patch.groups()])


def test_svg_after_png_has_the_layout_matplotlib_gives_the_svg(tmp_path):
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    from cwlimits.plotting.figures import new_figure, save_figure, tidy_log_axes

    def make():
        fig, ax = new_figure()
        f = np.geomspace(20, 2000, 200)
        for k in range(3):
            ax.loglog(f, 1e-25 * (f / 100) ** (k - 1), label=f"curve {k}")
        ax.set(xlabel="frequency [Hz]", ylabel=r"$h_0$")
        ax.legend(fontsize=6)
        tidy_log_axes(ax)
        return fig

    ours = make()
    save_figure(ours, tmp_path / "ours")
    # the figure keeps its layout engine for later use
    assert ours.get_layout_engine().__class__.__name__ == "ConstrainedLayoutEngine"
    reference = make()
    # Reference library: matplotlib's constrained layout solved for the SVG itself.
    reference.savefig(tmp_path / "reference.svg", metadata={"Date": None})
    width_pt = 72 * ours.get_figwidth()
    np.testing.assert_allclose(_svg_axes_box(tmp_path / "ours.svg") / width_pt,
                               _svg_axes_box(tmp_path / "reference.svg") / width_pt,
                               rtol=0, atol=LAYOUT_TOL)
    assert (tmp_path / "ours.png").stat().st_size > 0
    plt.close("all")


def test_later_formats_without_the_dry_layout_draw_are_the_same_files(tmp_path):
    # The formats after the first are saved with no layout engine (matplotlib then skips
    # its dry draw before the save) instead of the "none" placeholder engine (which still
    # triggers it): the SVG and PDF must be byte for byte those of the placeholder way
    # (reference: matplotlib's own savefig with the placeholder engine).
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    from cwlimits.plotting.figures import (
        figure_metadata,
        house_style,
        new_figure,
        save_figure,
        tidy_log_axes,
    )

    def make():
        fig, ax = new_figure()
        f = np.geomspace(50, 450, 60)
        ax.loglog(f, 1e-25 * (f / 100) ** -1.5, label="curve")
        ax.set(xlabel="frequency [Hz]", ylabel=r"$h_0$")
        ax.legend(fontsize=6)
        tidy_log_axes(ax)
        return fig

    save_figure(make(), tmp_path / "ours", formats=("png", "svg", "pdf"))
    reference = make()
    with house_style():
        reference.savefig(tmp_path / "ref.png", metadata=figure_metadata("png"))
        reference.set_layout_engine("none")
        for fmt in ("svg", "pdf"):
            reference.savefig(tmp_path / f"ref.{fmt}", metadata=figure_metadata(fmt))
    def content(path):  # the PDF's creation time is the only part that may differ
        return re.sub(rb"/CreationDate \(D:[^)]*\)", b"", path.read_bytes())

    for fmt in ("svg", "pdf"):
        assert content(tmp_path / f"ours.{fmt}") == content(tmp_path / f"ref.{fmt}")
    plt.close("all")
