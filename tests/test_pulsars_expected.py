"""Known pulsars: emission models and the targeted / narrow-band sensitivity (issue 17)."""

import math

import astropy.units as u
import numpy as np
import pytest
from astropy.coordinates import SkyCoord
from scipy import special, stats

import cwlimits
from cwlimits.errors import InputError
from cwlimits.pulsars import DUAL_HARMONIC, RMODE, harmonics, targeted_sensitivity
from cwlimits.response.antenna import SIDEREAL_DAY
from cwlimits.targets.catalogue import Target

# Rule of thumb for the expected 95 % Bayesian upper limit of a targeted search with one
# detector, uniform h0 and orientation priors, averaged over the sky: h95 ~ 10.8
# sqrt(S_n / T) (Dupuis & Woan 2005 and the targeted searches after it; from memory).
# Tolerance 7 %: the recalled value's precision and our Monte-Carlo error (~1 %).
RULE_OF_THUMB_K = 10.8
RULE_OF_THUMB_TOL = 0.07

# Normalised covering thickness of the A2* (hexagonal) lattice, Theta / V_2 = 2 / (3 sqrt 3)
# (Conway & Sloane, SPLAG, Ch. 2, Table 2.1: Theta = 2 pi / (3 sqrt 3) = 1.2092).
A2STAR_NORMALISED_THICKNESS = 2 / (3 * math.sqrt(3))


def _pulsar(dec_deg=20.0, f_rot=30.0, fdot=-4e-11, **timing):
    return Target("P", SkyCoord(40 * u.deg, dec_deg * u.deg), 1.5 * u.kpc, 1.5 * u.kpc,
                  1.5 * u.kpc, np.nan * u.yr, np.nan * u.yr, np.nan * u.yr,
                  f_rot * u.Hz, fdot * u.Hz / u.s, **timing)


def _setup(days=30, detectors=("H1", "L1")):
    # a whole number of sidereal days: the closed-form antenna averages (fast)
    return cwlimits.SearchSetup(t_seg=days * SIDEREAL_DAY, n_seg=1,
                                band=(50 * u.Hz, 70 * u.Hz), detectors=detectors)


def test_emission_models_frequencies():
    # f_gw = 2 f_rot (mass quadrupole), C21 at f_rot and C22 at 2 f_rot (Jones 2010,
    # Pitkin et al. 2015), r-mode band from the Newtonian 4/3 f_rot (Papaloizou & Pringle
    # 1978; Andersson 1998) to 1.57 f_rot (Idrisy, Owen & Jones 2015; 1.57 from memory)
    t = _pulsar()
    (single,) = harmonics(t)
    assert single["f_gw"] == 60 * u.Hz and single["fdot_gw"] == -8e-11 * u.Hz / u.s
    c21, c22 = harmonics(t, DUAL_HARMONIC)
    assert (c21["label"], c21["f_gw"]) == ("C21", 30 * u.Hz)
    assert (c22["label"], c22["f_gw"]) == ("C22", 60 * u.Hz)
    (rmode,) = harmonics(t, RMODE)
    lo, hi = rmode["f_band"]
    assert lo.to_value(u.Hz) == pytest.approx(40.0) and lo <= rmode["f_gw"] < hi
    assert hi.to_value(u.Hz) == pytest.approx(1.57 * 30)
    with pytest.raises(InputError, match="no known spin"):
        harmonics(Target("Q", t.coord, t.distance, t.distance, t.distance, 1 * u.yr,
                         1 * u.yr, 1 * u.yr))


def test_expected_limit_matches_the_rule_of_thumb():
    # isotropic sky average by Gauss-Legendre nodes in sin(dec) (uniform on the sphere)
    x, w = special.roots_legendre(5)
    ks = [float(targeted_sensitivity(_pulsar(np.degrees(np.arcsin(xi))), _setup(60, ("H1",)),
                                     n_noise=200, rng=k)["factor_k"][0])
          for k, xi in enumerate(x)]
    k_mean = float(np.sum(w * np.array(ks)) / 2)
    assert k_mean == pytest.approx(RULE_OF_THUMB_K, rel=RULE_OF_THUMB_TOL)


def test_expected_limit_scales_as_sqrt_psd_over_time():
    # h95 proportional to sqrt(S_n / T) at fixed geometry (Dupuis & Woan 2005, sect. 3):
    # four times the span, half the limit; the same noise draws (same seed) make it exact
    # up to the grid
    t = _pulsar()
    h1 = targeted_sensitivity(t, _setup(20), n_noise=100, rng=5)["h95"][0]
    h4 = targeted_sensitivity(t, _setup(80), n_noise=100, rng=5)["h95"][0]
    assert h4 / h1 == pytest.approx(0.5, rel=2e-3)


def test_restricted_priors_tighten_a_face_on_limit():
    # a torus seen face on (cos iota near 1) is the strongest orientation (JKS 1998):
    # the restricted prior must give the smaller expected limit; an edge-on one the larger
    uniform = targeted_sensitivity(_pulsar(), _setup(), n_noise=200, rng=1)["h95"][0]
    face = targeted_sensitivity(_pulsar(cosi=0.95, cosi_err=0.03, psi=20 * u.deg,
                                        psi_err=5 * u.deg), _setup(), n_noise=200, rng=1)
    edge = targeted_sensitivity(_pulsar(cosi=0.0, cosi_err=0.03, psi=20 * u.deg,
                                        psi_err=5 * u.deg), _setup(), n_noise=200, rng=1)
    assert face["h95"][0] < 0.8 * uniform < 0.8 * edge["h95"][0]
    assert "N(0.95, 0.03)" in face.meta["assumptions"]["orientation_prior"]


def test_narrow_band_template_count_against_the_closed_form():
    # coherent metric of (f, fdot) over T, reference mid-span: sqrt(det g) = pi^2 T^3 /
    # (6 sqrt 15) (Prix 2007, arXiv:0707.0428; g_ff = pi^2 T^2/3, g_dd = pi^2 T^4/180);
    # N = theta mu^-1 sqrt(det g) Df Dfdot for an A2* lattice at mismatch mu
    t = _pulsar()
    setup = _setup(100)
    w = 1e-3
    table = targeted_sensitivity(t, setup, kind="narrow-band", fractional_width=w,
                                 n_noise=10)
    T = setup.total_span.to_value(u.s)
    df, dfd = 2 * w * 60.0, 2 * w * 8e-11
    closed = A2STAR_NORMALISED_THICKNESS / 0.3 * math.pi**2 * T**3 / (6 * math.sqrt(15))
    assert table["n_templates"][0] == pytest.approx(closed * df * dfd, rel=1e-6)
    # the trials factor in the threshold: chi2 with 4 dof (JKS 1998) via scipy.stats
    n = table["n_templates"][0]
    p = -math.expm1(math.log1p(-0.01) / n)
    assert table["threshold_2f"][0] == pytest.approx(stats.chi2.isf(p, 4), rel=1e-6)
    # cost: N templates x detectors x the coherent unit cost
    assert table["cost"][0].to_value(u.s) == pytest.approx(n * 2 * 7e-8, rel=1e-9)
    assert table["kind"][0] == "narrow-band"


def test_automatic_choice_says_why():
    small = _pulsar(f_rot_err=1e-13 * u.Hz, fdot_rot_err=1e-21 * u.Hz / u.s)
    large = _pulsar(f_rot_err=1e-7 * u.Hz, fdot_rot_err=1e-15 * u.Hz / u.s)
    a = targeted_sensitivity(small, _setup(), n_noise=20, rng=0)
    b = targeted_sensitivity(large, _setup(), n_noise=20, rng=0)
    assert a["kind"][0] == "targeted" and "inside one template" in a["reason"][0]
    assert b["kind"][0] == "narrow-band" and "more than one template" in b["reason"][0]
    # the mismatch quoted is g_ff (3 sigma 2 df)^2 + g_dd (3 sigma 2 dfdot)^2 (Prix 2007)
    T = _setup().total_span.to_value(u.s)
    mu = (math.pi**2 * T**2 / 3 * (3 * 2e-7) ** 2 + math.pi**2 * T**4 / 180 * (6e-15) ** 2)
    assert f"mismatch {mu:.3g}" in b["reason"][0]
    assert b["h95"][0] > a["h95"][0]  # the trials cost sensitivity
    r = targeted_sensitivity(small, _setup(), emission="rmode", n_noise=20)
    assert r["kind"][0] == "narrow-band" and "r-mode" in r["reason"][0]
    with pytest.raises(InputError, match="band"):
        targeted_sensitivity(small, _setup(), emission="rmode", kind="targeted")


def test_dual_harmonic_rows_and_spindown_ratio():
    t = _pulsar()
    table = targeted_sensitivity(t, _setup(), emission="dual", n_noise=50, rng=3)
    assert list(table["harmonic"]) == ["C21", "C22"]
    # C22 = h0 / 2 (Jones 2015): its spin-down value is half the h0 spin-down limit
    h_sd = cwlimits.spindown_limit(t.f_rot, t.fdot_rot, t.distance).value
    assert table["h0_spindown"][1] == pytest.approx(h_sd / 2)
    assert np.isnan(table["h0_spindown"][0])


def test_cli_targeted(tmp_path, capsys):
    from cwlimits.cli.app import main

    cat = tmp_path / "c.csv"
    cat.write_text("name,ra,dec,distance,age,f_rot,fdot_rot\nP,1,2,1.5,,30,-4e-11\n"
                   "A,1,2,1.5,900,,\n")
    out = tmp_path / "t.ecsv"
    assert main(["targeted", "--catalogue", str(cat), "--target", "P", "--span", "30day",
                 "--noise-draws", "50", "--out", str(out)]) == 0
    text = capsys.readouterr().out
    assert "targeted because no timing uncertainty" in text and "assumptions:" in text
    assert cwlimits.read_table(out).has("h95")
    bad = tmp_path / "bad.ecsv"
    assert main(["targeted", "--catalogue", str(cat), "--target", "A", "--span", "30day",
                 "--out", str(bad)]) == 2
    assert "no known spin" in capsys.readouterr().err and not bad.exists()
    assert main(["targeted", "--catalogue", str(cat), "--target", "P",
                 "--out", str(bad)]) == 2
    assert "--span" in capsys.readouterr().err and not bad.exists()


def test_summary_of_every_known_pulsar_and_the_figure(tmp_path, capsys):
    from cwlimits.cli.app import main
    from cwlimits.pulsars.data import add_noise, simulate_pulsar_signal, write_down_converted
    from cwlimits.pulsars.summary import known_pulsar_summary, sensitivity_curve

    cat = tmp_path / "c.csv"
    cat.write_text("name,ra,dec,distance [kpc],age [yr],f_rot [Hz],fdot_rot [Hz/s]\n"
                   "P,40,20,1.5,,30,-4e-11\nR,100,-30,0.8,,11,-2e-11\nQ,20,5,1,900,,\n")
    catalogue = cwlimits.load_targets(cat)
    p = catalogue.target("P")
    data = add_noise(simulate_pulsar_signal(p, "H1,L1", 1.3e9, 6, 4 * u.hour, h0=0.0,
                                            cosi=0.0, psi=0.0, phi0=0.0, psd=1e-46,
                                            rng=0), 1)
    setup = _setup(30)
    posteriors = {}
    table = known_pulsar_summary(catalogue, setup, data={"P": data}, n_noise=50, rng=0,
                                 posteriors=posteriors)
    assert list(table["name"]) == ["P", "R"]  # Q has no known spin
    # the posteriors handed back (the report's figure reuses them instead of computing
    # the best one again) are those of a separate call with the same defaults
    from cwlimits.pulsars.posterior import pulsar_posterior
    again = pulsar_posterior(data, p)
    assert list(posteriors) == ["P"]
    assert posteriors["P"].upper_limit == again.upper_limit == table["h95_measured"][0]
    for name, (nodes, mass) in again.marginals.items():
        np.testing.assert_array_equal(posteriors["P"].marginals[name][0], nodes)
        np.testing.assert_array_equal(posteriors["P"].marginals[name][1], mass)
    assert list(table["limit_source"]) == ["measured", "predicted"]
    # the ratios belong to the reported limit: (h_UL / h_sd)^2 (energy in h0^2)
    assert table["spindown_fraction"][0] == pytest.approx(
        (table["h95_measured"][0] / table["h0_spindown"][0]) ** 2)
    assert table["ratio_spindown"][1] == pytest.approx(
        table["h95_predicted"][1] / table["h0_spindown"][1])
    # the curve h95(f) = K / sqrt(sum_d T_d / S_d(f)) reproduces a targeted row at its
    # own f_gw (the same K and the same noise)
    k = float(table["factor_k"][0])
    curve = sensitivity_curve(setup, cwlimits.noise.DEFAULT_NOISE_MODEL, k, table["f_gw"][:1])
    assert curve[0].value == pytest.approx(table["h95_predicted"][0], rel=1e-9)
    path = write_down_converted(data, tmp_path / "p.csv")
    out, plot = tmp_path / "known.csv", tmp_path / "known.png"
    assert main(["targeted", "--catalogue", str(cat), "--all", "--span", "30day",
                 "--data", f"P={path}", "--noise-draws", "30", "--out", str(out),
                 "--plot", str(plot)]) == 0
    assert "known pulsars of" in capsys.readouterr().out
    assert out.exists() and plot.stat().st_size > 0
    bad = tmp_path / "bad.csv"
    assert main(["targeted", "--catalogue", str(cat), "--all", "--span", "30day",
                 "--data", f"Q={path}", "--out", str(bad)]) == 2
    assert "not known pulsars" in capsys.readouterr().err and not bad.exists()
