"""Every figure of a report: axis labels with units, a legend where there are series.

Issue 8 asks that each figure's axes are labelled with units; this runs a small report
(fixed setup, simulated results) and inspects every matplotlib figure it saves.
"""

import re

import astropy.units as u
import numpy as np
import pytest

from cwlimits.analysis import run_report
from cwlimits.config import load_config
from cwlimits.report import Report
from cwlimits.setup import SearchSetup

# A label names its unit in brackets, says it is dimensionless, or is a category axis.
_UNIT = re.compile(r"\[[^\]]+\]|dimensionless|^target$")


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

    def spy(self, name, fig, caption=""):
        seen.append((name, [(ax.get_xlabel(), ax.get_ylabel(), ax.get_xscale(),
                             ax.get_yscale(), ax.get_legend() is not None or bool(fig.legends),
                             len(ax.lines) + len(ax.collections)) for ax in fig.axes]))
        return original(self, name, fig, caption)

    mp = pytest.MonkeyPatch()
    mp.setattr(Report, "figure", spy)
    request.addfinalizer(mp.undo)
    run_report(load_config(folder / "a.toml"), echo=lambda text: None, simulate=True)
    return seen


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
