"""The report a reader sees (issue 18, items 1, 2, 9): summary first, contents, folded
tables, the figure of merit and the whole budget explained, one meaning of h0_age.

The shared ``demo_report`` fixture is one ``cwlimits demo`` run through
``cwlimits.cli.main``; the API checks call the functions the chain calls.
"""

import html.parser
import re

import astropy.constants as const
import astropy.units as u
import numpy as np
import pytest
from astropy.table import QTable

from cwlimits.report.chain import MERIT_TEXT, budget_account, summary_table
from cwlimits.report.html import Report
from cwlimits.searchspace.searchsetup import SearchSetup
from cwlimits.sensitivity.model import AGE_COMPARISON, strain_sensitivity
from cwlimits.targets.catalogue import load_targets


class _Outline(html.parser.HTMLParser):
    """Order of the ids and headings of a page, and which tables sit inside <details>."""

    def __init__(self):
        super().__init__()
        self.ids, self.depth, self.tables = [], 0, []
        self.links_in_details = []

    def handle_starttag(self, tag, attrs):
        attrs = dict(attrs)
        if "id" in attrs:
            self.ids.append(attrs["id"])
        if tag == "details":
            self.depth += 1
        if tag == "table":
            self.tables.append(self.depth > 0)
        if tag == "a" and self.depth > 0:
            self.links_in_details.append(attrs.get("href"))

    def handle_endtag(self, tag):
        if tag == "details":
            self.depth -= 1


def _outline(path):
    parser = _Outline()
    parser.feed(path.read_text(encoding="utf-8"))
    return parser


def _wette_age_limit(distance, age, inertia=1e38 * u.kg * u.m**2):
    # h_age = (1/d) sqrt(5 G I / (8 c^3 age)): Wette et al. 2008, arXiv:0802.3332, eq. (6)
    # (equation number from memory), with astropy's G and c
    return (np.sqrt(5 * const.G * inertia / (8 * const.c**3 * age)) / distance).to(u.one)


# --- item 1: summary, contents, folded tables ---------------------------------------------

def test_summary_comes_first_then_contents(demo_report):
    ids = _outline(demo_report / "index.html").ids
    assert ids[0] == "summary" and ids[1] == "contents"
    text = (demo_report / "index.html").read_text()
    # every section heading is listed in the contents, as an anchor of the page
    for anchor in re.findall(r"<h2 id='([^']+)'", text):
        assert f"href='#{anchor}'" in text, anchor


def test_summary_rows_agree_with_the_tables_of_the_report(demo_report):
    summary = QTable.read(demo_report / "summary.ecsv")
    indirect = QTable.read(demo_report / "indirect_limits.ecsv")
    assert sorted(summary["name"]) == sorted(indirect["name"])  # every target has a row
    planned = [str(n) for n, c in zip(summary["name"], summary["cost"].value, strict=True)
               if np.isfinite(c)]
    assert len(planned) == 2  # planning.max_targets of the demo configuration
    for row in summary:
        k = list(indirect["name"]).index(row["name"])
        a, b = row["h0_age"], indirect["h0_age"][k]
        if np.ma.is_masked(b):  # a known pulsar without an age has no age-based limit
            assert np.ma.is_masked(a) or not np.isfinite(a.value)
        else:
            assert a == b
    ranking = QTable.read(demo_report / "ranking.ecsv")
    for name in planned:
        row = summary[list(summary["name"]).index(name)]
        slug = "".join(c if c.isalnum() else "_" for c in name).strip("_").lower()
        limits = QTable.read(demo_report / f"limits_{slug}.ecsv")
        sens = QTable.read(demo_report / f"sensitivity_{slug}.ecsv")
        assert row["h0_measured_best"] == np.nanmin(limits["h0_limit"])
        assert row["h0_predicted_best"] == np.nanmin(sens["h0"])
        # where it beats the limit: the width of the bands below the nominal h0_age
        below = limits["h0_limit"] < limits["h0_age"]
        width = np.sum((limits["f_hi"] - limits["f_lo"])[below])
        assert float(row["beats_age_width"].to_value(u.Hz)) == pytest.approx(
            float(width.to_value(u.Hz)))
        # a plan costs no more than the budget the split gave it
        alloc = ranking["budget_allocated"][list(ranking["name"]).index(name)]
        assert row["cost"] <= alloc


def test_long_tables_are_folded_with_their_links_outside(demo_report):
    outline = _outline(demo_report / "index.html")
    text = (demo_report / "index.html").read_text()
    assert not outline.tables[0]  # the summary is open
    assert sum(outline.tables) >= 5  # the per-band tables are folded
    assert not outline.links_in_details  # download links stay visible
    for name in ("limits_fict_ember", "sensitivity_fict_quill"):
        assert f"<a href='{name}.csv'>" in text


def test_report_table_folds_by_size(tmp_path):
    with Report("t", tmp_path / "rep") as rep:
        rep.table("short", QTable({"a": np.arange(3.0)}), caption="short")
        rep.table("long", QTable({"a": np.arange(40.0)}), caption="long")
        out = rep.write({})
    text = (out / "index.html").read_text()
    assert text.count("<details") == 1
    assert text.index("<details") > text.index("<h3>long</h3>")


# --- item 2: the figure of merit and the whole budget -------------------------------------

def test_merit_text_matches_the_ranking_numbers(demo_report):
    # the text says: integral over f of max(0, ln(h_age/h0)) df in Hz, pessimistic case
    assert "ln(h_age / h0(f))" in MERIT_TEXT and "in Hz" in MERIT_TEXT
    text = (demo_report / "index.html").read_text()
    assert "ln(h_age / h0(f))" in text
    ranking = QTable.read(demo_report / "ranking.ecsv")
    assert ranking["merit"].unit == u.Hz
    for name in ("Fict Ember", "Fict Quill"):
        k = list(ranking["name"]).index(name)
        slug = name.lower().replace(" ", "_")
        sens = QTable.read(demo_report / f"sensitivity_{slug}.ecsv")
        h_age = ranking["h_age_pessimistic"][k].value
        df = (sens["f_hi"] - sens["f_lo"]).to_value(u.Hz)
        integral = np.sum(df * np.maximum(0.0, np.log(h_age / np.asarray(sens["h0"].value))))
        # the exact merit of the refined plan is this integral (plan's band = whole band)
        assert float(ranking["merit_allocated_exact"][k].to_value(u.Hz)) == pytest.approx(
            float(integral), rel=1e-9)


def test_whole_budget_is_accounted_for(demo_report):
    text = (demo_report / "index.html").read_text()
    ranking = QTable.read(demo_report / "ranking.ecsv")
    funded = [str(n) for n, b in zip(ranking["name"], ranking["budget_allocated"].value,
                                     strict=True) if b > 0]
    assert len(funded) > 2  # the demo funds more targets than it plans
    for name in funded:
        assert name in text[text.index("Budget:"):text.index("Budget:") + 2000]
    numbers = re.search(r"Budget: ([\d.e+]+) core-hours in total; ([\d.e+]+) allocated to "
                        r"the targets planned.*?; ([\d.e+]+) allocated by the split to .*?; "
                        r"([\d.e+]+) not allocated", text)
    total, planned, left, none = (float(v) for v in numbers.groups())
    assert planned + left + none == pytest.approx(total, rel=1e-3)
    assert total == pytest.approx(3e5)  # planning.budget of the demo configuration


def test_budget_account_through_the_api():
    class _Ranking:  # the two fields budget_account reads
        table = QTable({"name": ["a", "b", "c"], "budget_allocated": [2.0, 1.0, 0.0] * u.h})
        budgets = np.array([0.0, 1.0, 2.0, 4.0]) * u.h

    class _Plan:
        cost = 1.5 * u.h

    account = budget_account(_Ranking(), {"a": {"plan": _Plan()}})
    assert account["planned"] == 2 * u.h and account["spent"] == 1.5 * u.h
    assert account["funded_not_planned_names"] == ["b"]
    assert account["unallocated"] == 1 * u.h


def test_no_python_repr_in_any_assumption_line(demo_report):
    # a repr looks like "<ClassName ...>" or "<... object at 0x...>" (common practice)
    repr_like = re.compile(r"<[A-Z][A-Za-z]+[ >]|object at 0x")
    for path in list(demo_report.glob("*.csv")) + [demo_report / "index.html"]:
        text = path.read_text()
        if path.suffix == ".html":
            text = re.sub(r"<[^>]+>", " ", text)  # the page's own tags
        assert not repr_like.search(text), (path.name, repr_like.search(text))


# --- item 9: one meaning of h0_age ----------------------------------------------------------

def test_sensitivity_h0_age_is_the_nominal_limit(demo_catalogue_path):
    target = load_targets(demo_catalogue_path).target("Fict Quill")
    setup = SearchSetup(t_seg=10 * u.day, n_seg=4, band=(100 * u.Hz, 110 * u.Hz),
                        band_width=5 * u.Hz)
    table = strain_sensitivity(setup, "second-gen-fit", target=target)
    nominal = _wette_age_limit(target.distance, target.age)
    pessimistic = _wette_age_limit(target.distance_max, target.age_max)
    optimistic = _wette_age_limit(target.distance_min, target.age_min)
    assert np.allclose(table["h0_age"], nominal, rtol=1e-12)
    assert np.allclose(table["h0_age_pessimistic"], pessimistic, rtol=1e-12)
    assert np.allclose(table["h0_age_optimistic"], optimistic, rtol=1e-12)
    assert np.allclose(table["age_ratio"], nominal / table["h0"], rtol=1e-12)
    assert np.array_equal(table["beats_age"], table["h0"] < nominal)
    assert table.meta["assumptions"]["age_comparison"] == AGE_COMPARISON
    assert "use the nominal h0_age" in AGE_COMPARISON


def test_report_tables_use_the_same_h0_age_as_the_commands(demo_report, demo_catalogue_path):
    catalogue = load_targets(demo_catalogue_path)
    for slug, name in (("fict_ember", "Fict Ember"), ("fict_quill", "Fict Quill")):
        target = catalogue.target(name)
        nominal = _wette_age_limit(target.distance, target.age)
        for kind in ("sensitivity", "limits"):
            table = QTable.read(demo_report / f"{kind}_{slug}.ecsv")
            assert np.allclose(table["h0_age"], nominal, rtol=1e-12), (kind, name)
            assert table.meta["assumptions"]["age_comparison"] == AGE_COMPARISON


def test_cli_sensitivity_states_which_h0_age(tmp_path, demo_catalogue_path):
    from cwlimits.cli.app import main

    out = tmp_path / "s.ecsv"
    assert main(["-q", "sensitivity", "--catalogue", str(demo_catalogue_path), "--target",
                 "Fict Quill", "--t-seg", "10day", "--n-seg", "4", "--f-min", "100Hz",
                 "--f-max", "110Hz", "--band-width", "5Hz", "--out", str(out)]) == 0
    table = QTable.read(out)
    assert table.meta["assumptions"]["age_comparison"] == AGE_COMPARISON


def test_summary_table_through_the_api(demo_catalogue_path):
    from cwlimits.targets.indirect import indirect_limits

    catalogue = load_targets(demo_catalogue_path)
    indirect = indirect_limits(catalogue, rng=1)
    summary = summary_table(indirect, None, {}, {}, {}, max_targets=1)
    assert list(summary["name"]) == list(catalogue.names)
    assert all("not searched" in p for p in summary["plan"])
    assert np.all(np.isnan(summary["cost"].value))
