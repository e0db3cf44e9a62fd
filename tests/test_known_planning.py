"""Known pulsars in planning, ranking, sensitivity and the report (all targets FICTIONAL)."""

import math
import pathlib
import re

import astropy.constants as const
import astropy.units as u
import numpy as np
import pytest

import cwlimits
from cwlimits.cli.app import main
from cwlimits.planning.optimise import plan_search, rank_targets

ROOT = pathlib.Path(__file__).resolve().parent.parent
DEMO = ROOT / "target_lists" / "demo.csv"

# A small fictional catalogue: one unknown-spin target and two known pulsars, one with a
# timing solution precise enough for a targeted search and one whose timing uncertainty
# spans many templates.
SMALL = """name,ra,dec,distance [kpc],distance_min [kpc],distance_max [kpc],age [yr],\
age_min [yr],age_max [yr],f_rot [Hz],fdot_rot [Hz/s],f_rot_err [Hz],fdot_rot_err [Hz/s],notes
Fict Shoal,04h12m37s,+31d47m10s,0.4,0.3,0.55,900,600,1500,,,,,fictional unknown-spin
Fict Pulsar Knoll,17h06m21s,-12d51m44s,2.1,1.7,2.6,,,,14.2,-1.9e-10,,,fictional known
Fict Pulsar Sway,19h21m55s,+14d08m12s,3.0,2.4,3.8,,,,31.4,-3.8e-11,2e-7,3e-14,fictional
"""


@pytest.fixture(scope="module")
def small(tmp_path_factory):
    path = tmp_path_factory.mktemp("known") / "small.csv"
    path.write_text(SMALL)
    return path


def _h_sd(f_rot, fdot_rot, d, inertia=1e38 * u.kg * u.m**2):
    # Spin-down limit h_sd = (1/d) sqrt(5 G I |fdot_rot| / (2 c^3 f_rot)) (Jaranowski,
    # Krolak & Schutz 1998, gr-qc/9804014, eq. 3.5 with all the rotational energy loss
    # in gravitational waves; the form of the known-pulsar searches).
    value = np.sqrt(5 * const.G * inertia * abs(fdot_rot) / (2 * const.c**3 * f_rot)) / d
    return float(value.to_value(u.one))


def test_plan_of_a_precisely_timed_pulsar_is_targeted_at_twice_f_rot(small):
    t = cwlimits.load_targets(small).target("Fict Pulsar Knoll")
    plan = plan_search(t, "second-gen-fit", "1e4 h", "180 day")
    assert plan.kind == "targeted" and "timing" in plan.reason
    assert plan.setup.n_seg == 1 and math.isclose(plan.setup.t_seg.to_value(u.day), 180)
    # f_gw = 2 f_rot for the l = m = 2 mass quadrupole (JKS 1998, Sec. II)
    assert math.isclose(plan.f_gw.to_value(u.Hz), 28.4)
    assert plan.setup.f_min.to_value(u.Hz) <= 28.4 <= plan.setup.f_max.to_value(u.Hz)
    assert plan.n_templates == 1
    h_sd = _h_sd(14.2 * u.Hz, 1.9e-10 * u.Hz / u.s, 2.1 * u.kpc)
    assert math.isclose(plan.h0_spindown.value, h_sd, rel_tol=1e-6)
    # the numerical form h_sd = 8.06e-19 sqrt(I_38 |fdot|/f) / d_kpc (from memory)
    assert math.isclose(h_sd, 8.06e-19 * math.sqrt(1.9e-10 / 14.2) / 2.1, rel_tol=0.01)
    assert math.isclose(plan.ratio_spindown, plan.h95.value / h_sd)
    # a young energetic star: a half-year coherent search beats its spin-down limit
    assert plan.ratio_spindown < 1
    assert "not a measured limit" in plan.assumptions["meaning"]


def test_plan_with_a_wide_timing_box_is_narrow_band_and_its_mismatch_is_the_metrics(small):
    t = cwlimits.load_targets(small).target("Fict Pulsar Sway")
    plan = plan_search(t, "second-gen-fit", "1e4 h", "180 day")
    assert plan.kind == "narrow-band"
    f_gw, df, dfd = 62.8, 3 * 2 * 2e-7, 3 * 2 * 3e-14   # 3 sigma times the harmonic 2
    assert plan.setup.f_min.to_value(u.Hz) <= f_gw - df
    assert plan.setup.f_max.to_value(u.Hz) >= f_gw + df
    # Box-corner mismatch of the coherent phase metric about mid-span: g_ff = pi^2 T^2/3,
    # g_fdot,fdot = pi^2 T^4 / 180, g_f,fdot = 0 (phase 2 pi (f t + fdot t^2 / 2) over
    # t in [-T/2, T/2]; Prix 2007, arXiv:0707.0428, eq. 70 ff.; computed here by hand).
    T = (180 * u.day).to_value(u.s)
    expected = math.pi**2 * T**2 * df**2 / 3 + math.pi**2 * T**4 * dfd**2 / 180
    quoted = float(re.search(r"mismatch ([0-9.e+]+) >", plan.reason).group(1))
    assert math.isclose(quoted, expected, rel_tol=0.01)
    assert plan.n_templates > 1
    # its cost is N_templates x N_det x the coherent unit cost
    unit = plan.setup.cost_coherent.to_value(u.h)
    assert math.isclose(plan.cost.to_value(u.h), plan.n_templates * 2 * unit, rel_tol=1e-9)


def test_known_pulsar_plan_can_be_forced_and_age_based_needs_an_age(small):
    cat = cwlimits.load_targets(small)
    plan = plan_search(cat.target("Fict Pulsar Sway"), "second-gen-fit", "1e4 h",
                       "180 day", kind="targeted")
    assert plan.kind == "targeted" and plan.reason == "requested"
    with pytest.raises(cwlimits.InputError, match="age"):
        plan_search(cat.target("Fict Pulsar Knoll"), "second-gen-fit", "1e4 h", "180 day",
                    known_pulsar="off", exact=False)


def test_rank_puts_known_pulsars_beside_unknown_spin_targets(small):
    cat = cwlimits.load_targets(small)
    r = rank_targets(cat, "second-gen-fit", "1e5 h", "180 day", budget_steps=2,
                     band=(100 * u.Hz, 200 * u.Hz), band_width=10 * u.Hz, noise_draws=40)
    table = r.table
    assert sorted(table["name"]) == sorted(cat.names)
    kinds = dict(zip(table["name"], table["search"], strict=True))
    assert kinds == {"Fict Shoal": "semi-coherent", "Fict Pulsar Knoll": "targeted",
                     "Fict Pulsar Sway": "narrow-band"}
    ratio = np.asarray(table["ratio_indirect"].value)
    # ranked by predicted / indirect limit, best first
    assert np.all(np.diff(ratio) >= 0)
    for row in table:
        assert math.isclose(row["ratio_indirect"].value,
                            row["h95"].value / row["h_indirect"].value, rel_tol=1e-9)
    knoll = table[list(table["name"]).index("Fict Pulsar Knoll")]
    assert knoll["indirect"] == "spin-down"
    assert math.isclose(knoll["h_indirect"].value,
                        _h_sd(14.2 * u.Hz, 1.9e-10 * u.Hz / u.s, 2.6 * u.kpc), rel_tol=1e-6)
    # the known pulsars' costs come out of the total before the split
    sway = table[list(table["name"]).index("Fict Pulsar Sway")]
    assert sway["cost"].value > 0 and sway["bound"] == "funded"
    assert np.sum(table["budget_allocated"].value) <= 1e5 * (1 + 1e-9)
    assert "known_pulsars" in r.assumptions


def test_rank_and_plan_commands_on_a_known_pulsar(small, tmp_path, capsys):
    plan = tmp_path / "sway.toml"
    assert main(["plan", "--catalogue", str(small), "--target", "Fict Pulsar Sway",
                 "--budget", "1e4 h", "--span", "180day", "--out", str(plan)]) == 0
    text = capsys.readouterr().out
    assert "narrow-band search" in text and "why:" in text and "h95/h_sd" in text
    setup = cwlimits.load_setup(plan)
    assert setup.n_seg == 1 and setup.f_min.value <= 62.8 <= setup.f_max.value
    out = tmp_path / "rank.csv"
    assert main(["-q", "rank", str(small), "--budget", "1e5 h", "--span", "180day",
                 "--steps", "2", "--band", "100Hz", "200Hz", "--band-width", "10Hz",
                 "--out", str(out)]) == 0
    table = cwlimits.read_table(out)
    assert set(table.text("search")) == {"semi-coherent", "targeted", "narrow-band"}


def test_sensitivity_of_a_known_pulsar_is_the_coherent_search_at_its_frequency(
        small, tmp_path, capsys):
    out = tmp_path / "s.ecsv"
    assert main(["sensitivity", "--catalogue", str(small), "--target", "Fict Pulsar Knoll",
                 "--t-seg", "10day", "--n-seg", "18", "--f-min", "50Hz", "--f-max",
                 "450Hz", "--out", str(out)]) == 0
    text = capsys.readouterr().out
    assert "one coherent segment" in text and "targeted" in text
    table = cwlimits.read_table(out)
    assert np.allclose(table.quantity("f_gw", u.Hz).value, 28.4)
    # --age-based keeps the semi-coherent search of the setup over its band
    out2 = tmp_path / "s2.ecsv"
    assert main(["-q", "sensitivity", "--catalogue", str(DEMO), "--target",
                 "Fict Pulsar Cinder", "--t-seg", "10day", "--n-seg", "18", "--f-min",
                 "50Hz", "--f-max", "60Hz", "--age-based", "--out", str(out2)]) == 0
    assert len(cwlimits.read_table(out2)) == 10


def test_demo_catalogue_has_the_four_kinds_of_known_pulsar():
    cat = cwlimits.load_targets(DEMO)
    known = [t for t in cat if t.has_spin]
    assert len(known) >= 5
    for t in known:
        assert "Fict" in t.name and "fictional" in t.notes
    veil = cat.target("Fict Pulsar Veil")
    assert veil.cosi_err is not None and veil.psi_err is not None
    drift = cat.target("Fict Pulsar Drift")
    assert drift.f_rot_err is not None


def test_demo_report_has_the_known_pulsar_section(demo_report):
    html = (demo_report / "index.html").read_text()
    assert "Known pulsars" in html
    assert (demo_report / "known_pulsars.png").is_file()
    assert list(demo_report.glob("pulsar_posterior_*.png"))
    table = cwlimits.read_table(demo_report / "known_pulsars.ecsv")
    names = list(table.text("name"))
    ratios = table.quantity("ratio_spindown", u.one).value
    ratio = dict(zip(names, ratios, strict=True))
    assert ratio["Fict Pulsar Brand"] < 1 < ratio["Fict Pulsar Whirl"]
    kinds = dict(zip(names, table.text("kind"), strict=True))
    assert kinds["Fict Pulsar Drift"] == "narrow-band"
    # every known pulsar has a measured limit from the simulated data, and the table says
    # which kind: the narrow-band one from the loudest template of its box
    methods = dict(zip(names, table.text("limit_method"), strict=True))
    assert set(table.text("limit_source")) == {"measured"}
    assert "loudest 2F" in methods["Fict Pulsar Drift"]
    assert "time-domain" in methods["Fict Pulsar Brand"]
    # spin-down fraction = (h95 / h_sd)^2 (the fraction of the spin-down luminosity)
    assert np.allclose(table.quantity("spindown_fraction", u.one).value, ratios ** 2)
    assert any("I = 1e+38" in v for v in table.meta["assumptions"].values())


def test_limits_of_a_known_pulsar_compare_the_band_of_its_frequency_with_h_sd(tmp_path,
                                                                               capsys):
    from cwlimits.searchspace.searchsetup import SearchSetup

    setup = tmp_path / "s.toml"
    SearchSetup(t_seg=10 * u.day, n_seg=8, band=(28.05 * u.Hz, 29.05 * u.Hz),
                band_width=0.1 * u.Hz).to_toml(setup)
    rng = np.random.default_rng(4)
    results = tmp_path / "res.csv"
    lines = ["f_lo [Hz],band_width [Hz],loudest_2F"]
    lines += [f"{28.05 + 0.1 * i:.2f},0.1,{rng.chisquare(32) + 5:.4f}" for i in range(10)]
    results.write_text("\n".join(lines) + "\n")
    out = tmp_path / "ul.ecsv"
    args = ["limits", str(results), "--setup", str(setup), "--catalogue", str(DEMO),
            "--seed", "1", "--out", str(out)]
    assert main([*args, "--target", "Fict Pulsar Brand"]) == 0
    text = capsys.readouterr().out
    line = next(x for x in text.splitlines() if x.startswith("known pulsar"))
    assert "f_gw = 2 f_rot = 28.4 Hz in band 28.35-28.45 Hz" in line
    table = cwlimits.read_table(out)
    i = int(np.flatnonzero(np.isclose(table.quantity("f_lo", u.Hz).value, 28.35))[0])
    h_sd = _h_sd(14.2 * u.Hz, 1.9e-10 * u.Hz / u.s, 2.1 * u.kpc)
    h = table.quantity("h0_limit", u.one).value[i]
    assert f"h0/h_sd = {h / h_sd:.3g}" in line
    # a pulsar whose f_gw lies outside the searched bands is said to be so
    assert main([*args[:-2], "--target", "Fict Pulsar Whirl"]) == 0
    assert "outside the searched bands" in capsys.readouterr().out
