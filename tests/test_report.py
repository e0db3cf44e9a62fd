import html.parser
import json

import astropy.units as u
import numpy as np
from astropy.table import QTable

import cwlimits
from cwlimits.cli import main
from cwlimits.plots import plot_indirect_limits, plot_strain_curves
from cwlimits.report import Report


class _Links(html.parser.HTMLParser):
    """Collects href/src attributes and counts tags (a strict-enough parse check)."""

    def __init__(self):
        super().__init__()
        self.links, self.tags, self.scripts = [], [], 0

    def handle_starttag(self, tag, attrs):
        self.tags.append(tag)
        self.scripts += tag == "script"
        self.links += [v for k, v in attrs if k in ("href", "src")]


def _parse(path):
    parser = _Links()
    parser.feed(path.read_text(encoding="utf-8"))
    parser.close()
    return parser


def _labels_have_units(fig):
    for ax in fig.axes:
        for label in (ax.get_xlabel(), ax.get_ylabel()):
            assert label, "every axis is labelled"
    return True


def test_report_escapes_links_and_replaces_folder(tmp_path):
    out = tmp_path / "rep"
    out.mkdir()
    (out / "stale.txt").write_text("old")
    table = QTable({"name": ["<script>alert(1)</script>", "B"], "h0": [1e-25, 2e-25] * u.one})
    fig = plot_strain_curves([100, 200] * u.Hz, [("curve", [1e-25, 2e-25])])
    with Report("test <b>", out) as rep:
        rep.section("Words", "a <i>b</i> & c")
        rep.table("t", table, caption="cap", assumptions={"noise": "Gaussian"})
        rep.figure("f", fig, caption="fig")
        rep.write({"seed": 1})
    assert not (out / "stale.txt").exists()
    parsed = _parse(out / "index.html")
    assert parsed.scripts == 0 and "i" not in parsed.tags  # user text is escaped
    assert "&lt;script&gt;" in (out / "index.html").read_text()
    for link in parsed.links:
        assert (out / link).is_file(), link
    record = json.loads((out / "run_record.json").read_text())
    assert record["seed"] == 1 and "numpy" in record["packages"]
    assert not list(tmp_path.glob(".rep*"))


def test_failed_report_leaves_folder_untouched(tmp_path):
    out = tmp_path / "rep"
    out.mkdir()
    (out / "keep.txt").write_text("keep")
    try:
        with Report("x", out) as rep:
            rep.section("a", "b")
            raise RuntimeError("boom")
    except RuntimeError:
        pass
    assert (out / "keep.txt").read_text() == "keep"
    assert not list(tmp_path.glob(".rep*"))


def test_indirect_figure_axes(demo_catalogue_path):
    table = cwlimits.indirect_limits(cwlimits.load_targets(demo_catalogue_path))
    fig = plot_indirect_limits(table)
    ax = fig.axes[0]
    assert ax.get_xscale() == "log"
    assert "h_0" in ax.get_xlabel() and "dimensionless" in ax.get_xlabel()
    assert ax.get_legend() is not None or fig.legends
    assert sorted(t.get_text() for t in ax.get_yticklabels()) == sorted(table["name"])


def test_strain_curves_axes():
    fig = plot_strain_curves(np.array([50, 100, 400]) * u.Hz,
                             [("predicted", [3e-25, 2e-25, 4e-25]),
                              ("measured (points)", [3.5e-25, 2.1e-25, 5e-25])],
                             bands=[("age-based", 1e-25, 2e-25, 4e-25)])
    ax = fig.axes[0]
    assert _labels_have_units(fig)
    assert "[Hz]" in ax.get_xlabel()
    assert ax.get_xscale() == ax.get_yscale() == "log"
    assert len(ax.get_legend().get_texts()) == 3


def test_demo_report_complete_and_reproducible(tmp_path):
    out = tmp_path / "demo"
    assert main(["-q", "demo", "--out-dir", str(out)]) == 0
    names = sorted(p.name for p in out.iterdir())
    for required in ("index.html", "run_record.json", "indirect_limits.csv",
                     "indirect_limits.ecsv", "indirect_limits.png", "indirect_limits.svg"):
        assert required in names
    for link in _parse(out / "index.html").links:
        assert (out / link).is_file()
    first = {p.name: p.read_bytes() for p in out.iterdir() if p.suffix in (".csv", ".ecsv")}
    assert main(["-q", "demo", "--out-dir", str(out)]) == 0
    second = {p.name: p.read_bytes() for p in out.iterdir() if p.suffix in (".csv", ".ecsv")}
    assert first == second
