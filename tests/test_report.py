import dataclasses
import html.parser
import json
import pathlib

import astropy.units as u
import numpy as np
from astropy.table import QTable

import cwlimits
from cwlimits.cli.app import main
from cwlimits.plotting.figures import plot_indirect_limits, plot_strain_curves
from cwlimits.report.html import Report


class _Links(html.parser.HTMLParser):
    """Collects href/src attributes and counts tags (a strict-enough parse check)."""

    def __init__(self):
        super().__init__()
        self.links, self.tags, self.scripts, self.ids = [], [], 0, set()

    def handle_starttag(self, tag, attrs):
        self.tags.append(tag)
        self.scripts += tag == "script"
        self.links += [v for k, v in attrs if k in ("href", "src")]
        self.ids |= {v for k, v in attrs if k == "id"}


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


def test_report_escapes_links_and_replaces_its_own_folder(tmp_path):
    out = tmp_path / "rep"
    with Report("first", out) as rep:
        rep.section("Old", "an earlier report")
        rep.table("old_table", QTable({"a": [1.0]}), caption="old")
        rep.write({"seed": 0})
    assert (out / "old_table.csv").is_file()
    table = QTable({"name": ["<script>alert(1)</script>", "B"], "h0": [1e-25, 2e-25] * u.one})
    fig = plot_strain_curves([100, 200] * u.Hz, [("curve", [1e-25, 2e-25])])
    with Report("test <b>", out) as rep:
        rep.section("Words", "a <i>b</i> & c")
        rep.table("t", table, caption="cap", assumptions={"noise": "Gaussian"})
        rep.figure("f", fig, caption="fig")
        rep.write({"seed": 1})
    # the earlier report of cwlimits is replaced as a whole, its files gone
    assert not (out / "old_table.csv").exists()
    parsed = _parse(out / "index.html")
    assert parsed.scripts == 0 and "i" not in parsed.tags  # user text is escaped
    assert "&lt;script&gt;" in (out / "index.html").read_text()
    for link in parsed.links:
        if link.startswith("#"):  # the table of contents: an anchor of this page
            assert link[1:] in parsed.ids, link
        else:
            assert (out / link).is_file(), link
    record = json.loads((out / "run_record.json").read_text())
    assert record["seed"] == 1 and "numpy" in record["packages"]
    assert not list(tmp_path.glob(".rep*"))


def test_failed_report_leaves_folder_untouched(tmp_path):
    out = tmp_path / "rep"
    out.mkdir()
    (out / "keep.txt").write_text("keep")
    try:
        with Report("x", out, overwrite=True) as rep:
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


def test_demo_report_complete_and_reproducible(demo_report, tmp_path, capsys):
    out = demo_report
    names = sorted(p.name for p in out.iterdir())
    # issue 8: every table as CSV and ECSV, every figure as PNG and SVG, the run record
    for required in ("index.html", "run_record.json", "indirect_limits.csv",
                     "indirect_limits.ecsv", "indirect_limits.png", "indirect_limits.svg",
                     "ranking.csv", "ranking.ecsv", "merit_vs_budget.png", "planned_strain.svg"):
        assert required in names, required
    for stem in {p.stem for p in out.glob("*.csv")}:
        assert (out / f"{stem}.ecsv").is_file()
    for stem in {p.stem for p in out.glob("*.png")}:
        assert (out / f"{stem}.svg").is_file()
    assert any(n.startswith("limits_") and n.endswith(".csv") for n in names)
    assert any(n.startswith("posterior_") and n.endswith(".png") for n in names)
    assert any(n.startswith("plan_") and n.endswith(".toml") for n in names)
    parsed = _parse(out / "index.html")
    for link in parsed.links:
        assert link[1:] in parsed.ids if link.startswith("#") else (out / link).is_file()
    text = (out / "index.html").read_text()
    assert "SIMULATED" in text and "not a detection claim" in text
    record = json.loads((out / "run_record.json").read_text())
    assert record["seed"] == 2026 and len(record["inputs"]["catalogue"]["sha256"]) == 64
    # a second run with the same seed writes identical tables
    again = tmp_path / "again"
    assert main(["demo", "--out-dir", str(again)]) == 0
    assert "FICTIONAL" in capsys.readouterr().out
    for table in list(out.glob("*.csv")) + list(out.glob("*.ecsv")):
        assert (again / table.name).read_bytes() == table.read_bytes(), table.name


def test_plan_files_of_the_report_reproduce_its_numbers(demo_report):
    # issue 8: the report's numbers equal those of the individual commands
    import astropy.units as u

    from cwlimits.searchspace.searchsetup import load_setup
    from cwlimits.sensitivity.model import strain_sensitivity

    plan = sorted(demo_report.glob("plan_*.toml"))[0]
    slug = plan.stem[len("plan_"):]
    table = cwlimits.read_table(demo_report / f"sensitivity_{slug}.csv")
    catalogue = cwlimits.load_targets(pathlib.Path(__file__).resolve().parent.parent
                                      / "target_lists" / "demo.csv")
    name = next(n for n in catalogue.names
                if "".join(c if c.isalnum() else "_" for c in n).strip("_").lower() == slug)
    # the demo plans for the pessimistic case: farthest distance, oldest age
    target = catalogue.target(name)
    target = dataclasses.replace(target, distance=target.distance_max, age=target.age_max)
    again = strain_sensitivity(load_setup(plan), "second-gen-fit", target=target,
                               start="2030-01-01T00:00:00")
    assert np.allclose(table.quantity("h0", u.one), again["h0"], rtol=1e-9)
