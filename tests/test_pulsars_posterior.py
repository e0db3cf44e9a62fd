"""Known pulsars: simulated down-converted data and the Bayesian posterior (issue 17)."""

import math

import astropy.units as u
import numpy as np
import pytest
from astropy.coordinates import SkyCoord

import cwlimits
from cwlimits.cli.app import main
from cwlimits.noise import get_noise
from cwlimits.pulsars.data import (
    add_noise,
    read_down_converted,
    simulate_pulsar_signal,
    write_down_converted,
)
from cwlimits.pulsars.posterior import pulsar_posterior, spindown_ratios
from cwlimits.response.antenna import SIDEREAL_DAY
from cwlimits.targets.catalogue import Target

START = 1.3e9  # GPS s
COARSE = {"n_h0": 80, "n_cosi": 12, "n_psi": 12}


def _pulsar(**extra):
    return Target("P", SkyCoord(40 * u.deg, 20 * u.deg), 1.5 * u.kpc, 1.2 * u.kpc,
                  1.9 * u.kpc, np.nan * u.yr, np.nan * u.yr, np.nan * u.yr, 30 * u.Hz,
                  -4e-11 * u.Hz / u.s, **extra)


@pytest.fixture(scope="module")
def clean():
    # Doppler on; stretches of different noise (H1 quieter in the first half); gaps between
    # stretches and 20 % of the stretches dropped
    psd = np.array([[1e-46] * 6 + [4e-46] * 6, [2e-46] * 12])
    return simulate_pulsar_signal(_pulsar(), "H1,L1", START, 12, 4 * u.hour, h0=1e-24,
                                  cosi=0.5, psi=0.4, phi0=1.0, psd=psd, gap_fraction=0.2,
                                  rng=1)


def test_simulated_signal_is_the_heterodyned_model(clean):
    # Dupuis & Woan 2005 eq. 4: after heterodyning with the Doppler-corrected phase the
    # signal is h0 e^{i phi0} [(1 + cos^2 i)/4 F+ - i cos i / 2 Fx].  Averaging 600 s
    # blocks of the slowly varying patterns costs < (2 omega_E 600 s)^2 / 24 ~ 3e-4.
    t = _pulsar()
    model = clean.model_signal(t.coord, 1e-24, 0.5, 0.4, 1.0)
    assert np.max(np.abs(clean.value - model)) < 2e-3 * np.max(np.abs(model))
    assert set(clean.detectors) == {"H1", "L1"}
    sig = np.unique(np.round(clean.sigma / clean.sigma.min(), 6))
    assert len(sig) >= 3  # stretches of different noise (sigma ratios 1, sqrt 2, 2)
    # the Doppler modulation is on: down-converting without it loses the signal
    # (the Roemer delay changes by ~ 1e-4 x 12 h: many cycles at 60 Hz)
    lost = simulate_pulsar_signal(t, "H1,L1", START, 12, 4 * u.hour, h0=1e-24, cosi=0.5,
                                  psi=0.4, phi0=1.0, psd=1e-46, gap_fraction=0.2, rng=1,
                                  demodulate=False)
    overlap = abs(np.vdot(lost.value, model)) / (np.linalg.norm(model) ** 2)
    assert overlap < 0.3


def test_posterior_recovers_the_injection(clean):
    t = _pulsar()
    data = add_noise(clean.replace_values(clean.value * 0.6), 2)
    post = pulsar_posterior(data, t, noise="student-t")
    lo, hi = post.interval("h0", 0.98)
    assert 0.2e-24 < lo < 0.6e-24 < hi  # a detection: the interval excludes zero
    lo, hi = post.interval("cosi", 0.98)
    assert lo < 0.5 < hi
    lo, hi = post.interval("psi", 0.98)
    assert any(lo < 0.4 + k * np.pi / 2 < hi for k in (-1, 0, 1))


def test_upper_limit_coverage_over_300_trials(clean):
    # Bayesian coverage: with h0 and the orientation drawn from the prior the 95 % limit
    # lies above the true h0 in 95 % of the trials (common practice); 300 trials:
    # 3 sigma = 3 sqrt(0.95 x 0.05 / 300) = 0.038
    t = _pulsar()
    rng = np.random.default_rng(17)
    top = 6e-25
    levels = np.array([0.5, 0.9, 0.95])
    covered = np.zeros(3)
    n = 300
    for _ in range(n):
        h0, cosi = rng.uniform(0, top), rng.uniform(-1, 1)
        psi, phi0 = rng.uniform(0, np.pi), rng.uniform(0, 2 * np.pi)
        data = add_noise(clean.replace_values(clean.model_signal(t.coord, h0, cosi, psi,
                                                                 phi0)), rng)
        post = pulsar_posterior(data, t, noise="given", h0_max=top, grid=COARSE)
        covered += [post.quantile(q) >= h0 for q in levels]
        assert post.upper_limit == post.quantile(0.95)
    # every quantile, not only the 95 % one (the same binomial 3 sigma)
    assert np.all(np.abs(covered / n - levels) < 3 * np.sqrt(levels * (1 - levels) / n))


def test_grid_and_emcee_agree(clean):
    t = _pulsar()
    data = add_noise(clean.replace_values(clean.value * 0.1), 2)
    grid = pulsar_posterior(data, t, noise="given")
    mc = pulsar_posterior(data, t, noise="given", sampler="emcee", rng=3, n_steps=3000,
                          burn=1000)
    # Monte-Carlo error of a quantile: sqrt(q (1 - q) / n_eff) / p(h_q) (common practice)
    h, mass = grid.marginals["h0"]
    density = np.interp(grid.upper_limit, h, mass / np.gradient(h))
    sigma = math.sqrt(0.95 * 0.05 / mc.n_eff) / density
    assert abs(mc.upper_limit - grid.upper_limit) < 4 * sigma + 0.005 * grid.upper_limit
    assert mc.samples.shape[1] == 4 and np.all((mc.samples[:, 2] >= 0)
                                               & (mc.samples[:, 2] < np.pi / 2))


def test_grid_limit_is_converged(clean):
    # doubling every grid size moves the 95 % limit by < 0.5 % (numerical convergence of
    # the product rules; the zoom keeps a loud signal's peak resolved)
    t = _pulsar()
    for scale in (0.0, 1.0):
        data = add_noise(clean.replace_values(clean.value * scale), 7)
        base = pulsar_posterior(data, t, noise="given").upper_limit
        fine = pulsar_posterior(data, t, noise="given", grid={
            "n_h0": 240, "n_cosi": 32, "n_psi": 32, "n_phi0": 32}).upper_limit
        assert fine == pytest.approx(base, rel=5e-3)


def test_student_t_tends_to_known_noise_for_long_stretches(clean):
    # with m ~ 24 samples a stretch the Student-t likelihood is close to the Gaussian
    # one with the true sigma (Dupuis & Woan 2005, sect. 2); 5 % covers the noise of
    # estimating sigma from 24 complex samples (1 / sqrt(48) ~ 14 % per stretch, averaged
    # over 22 stretches)
    t = _pulsar()
    data = add_noise(clean.replace_values(clean.value * 0.0), 4)
    known = pulsar_posterior(data, t, noise="given").upper_limit
    student = pulsar_posterior(data, t, noise="student-t").upper_limit
    assert student == pytest.approx(known, rel=0.05)


def test_expected_limit_model_against_the_median_limit():
    # The expected-limit model of targeted_sensitivity (antenna averages of the setup)
    # against the median limit of simulated noise-only data with the same span, detectors
    # and noise (issue 17: within 5 %).  Errors: 600 data sets (median error ~1.4 %) and
    # 2000 model draws (~0.8 %): 5 % is more than 3 sigma of their difference.
    t = _pulsar()
    n_str, length = 24, SIDEREAL_DAY / 8  # three whole sidereal days, back to back
    psd = get_noise(cwlimits.noise.DEFAULT_NOISE_MODEL).psd(60 * u.Hz)
    layout = simulate_pulsar_signal(t, "H1,L1", START, n_str, length, h0=0.0, cosi=0.0,
                                    psi=0.0, phi0=0.0, psd=psd, max_gap=0.0, rng=0)
    rng = np.random.default_rng(8)
    limits = [pulsar_posterior(add_noise(layout, rng), t, noise="given",
                               grid=COARSE).upper_limit for _ in range(600)]
    span = layout.time_s.max() - layout.time_s.min() + 600
    setup = cwlimits.SearchSetup(t_seg=span * u.s, n_seg=1, band=(50 * u.Hz, 70 * u.Hz),
                                 detectors=("H1", "L1"))
    from astropy.time import Time

    start = Time(layout.time_s.min() - 300, format="gps")
    model = targeted_sensitivity_value(t, setup, start)
    assert np.median(limits) == pytest.approx(model, rel=0.05)


def targeted_sensitivity_value(target, setup, start):
    table = cwlimits.targeted_sensitivity(target, setup, start=start, n_noise=2000, rng=9,
                                          grid=COARSE)
    return float(table["h95"][0])


def test_restricted_prior_tightens_the_limit_on_data(clean):
    # face-on torus prior: the strongest orientation (JKS 1998), so a smaller limit
    data = add_noise(clean.replace_values(0 * clean.value), 5)
    face = _pulsar(cosi=0.95, cosi_err=0.03, psi=20 * u.deg, psi_err=5 * u.deg)
    uniform = pulsar_posterior(data, _pulsar(), noise="given").upper_limit
    restricted = pulsar_posterior(data, face, noise="given").upper_limit
    assert restricted < 0.85 * uniform


def test_spindown_ratios_with_published_values():
    # An outside check with a real object (tests may use published values): the Crab
    # pulsar, f_rot = 29.7 Hz, fdot = -3.7e-10 Hz/s, d = 2 kpc: h_sd = 1.4e-24, and the
    # 2008 limit 3.4e-25 is 0.24 h_sd, i.e. about 6 % of the spin-down luminosity
    # (Abbott et al. 2008, arXiv:0805.4758; all from memory).
    crab = Target("crab (published values)", SkyCoord(83.63 * u.deg, 22.01 * u.deg),
                  2 * u.kpc, 2 * u.kpc, 2 * u.kpc, 950 * u.yr, 950 * u.yr, 950 * u.yr,
                  29.7 * u.Hz, -3.7e-10 * u.Hz / u.s)
    r = spindown_ratios(3.4e-25, crab)
    assert r["h0_spindown"] == pytest.approx(1.4e-24, rel=0.05)
    assert r["ratio_spindown"] == pytest.approx(0.24, abs=0.015)
    assert r["spindown_fraction"] == pytest.approx(0.06, abs=0.008)
    # Q22 = sqrt(15 / (8 pi)) I eps (Owen 2005, astro-ph/0503399)
    assert r["q22_limit"].to_value(u.kg * u.m**2) == pytest.approx(
        math.sqrt(15 / (8 * math.pi)) * 1e38 * r["eps_limit"], rel=1e-9)
    assert r["eps_limit_min"] == pytest.approx(r["eps_limit"])  # no distance range


def test_file_round_trip(clean, tmp_path):
    data = add_noise(clean, 3)
    path = write_down_converted(data, tmp_path / "d.ecsv")
    again = read_down_converted(path)
    assert np.allclose(again.value, data.value, rtol=1e-15, atol=0)
    assert np.array_equal(again.stretch, data.stretch)
    csv = write_down_converted(data, tmp_path / "d.csv")
    assert np.allclose(read_down_converted(csv).time_s, data.time_s, rtol=0, atol=1e-6)


# ---- the command line --------------------------------------------------------------

CATALOGUE = ("name,ra,dec,distance [kpc],f_rot [Hz],fdot_rot [Hz/s],cosi,cosi_err\n"
             "P,40,20,1.5,30,-4e-11,,\n")


@pytest.fixture
def files(tmp_path, clean):
    cat = tmp_path / "cat.csv"
    cat.write_text(CATALOGUE)
    data = write_down_converted(add_noise(clean.replace_values(0.2 * clean.value), 6),
                                tmp_path / "data.csv")
    return cat, data


def test_cli_posterior_writes_table_and_figures(files, tmp_path, capsys):
    cat, data = files
    out, plot, corner = tmp_path / "lim.ecsv", tmp_path / "p.png", tmp_path / "c.png"
    assert main(["posterior", str(data), "--catalogue", str(cat), "--target", "P",
                 "--noise", "given", "--out", str(out), "--plot", str(plot), "--corner",
                 str(corner)]) == 0
    text = capsys.readouterr().out
    assert "95 % upper limit" in text and "assumptions:" in text
    table = cwlimits.read_table(out)
    for column in ("upper_limit", "ratio_spindown", "spindown_fraction", "eps_limit",
                   "q22_limit", "cosi_lo90"):
        assert table.has(column)
    assert table.units["q22_limit"] == u.kg * u.m**2
    assert "noise" in table.meta["assumptions"]
    assert plot.stat().st_size > 0 and corner.stat().st_size > 0


def _rewrite(path, edit):
    lines = path.read_text().splitlines()
    header = next(i for i, line in enumerate(lines) if not line.startswith("#"))
    edit(lines, header)
    path.write_text("\n".join(lines) + "\n")


def _swap_times(lines, h):
    a, b = lines[h + 3].split(","), lines[h + 4].split(",")
    a[1], b[1] = b[1], a[1]
    lines[h + 3], lines[h + 4] = ",".join(a), ",".join(b)


def _nan_sample(lines, h):
    cells = lines[h + 5].split(",")
    cells[2] = "nan"
    lines[h + 5] = ",".join(cells)


def _unknown_detector(lines, h):
    lines[h + 1] = "Q7" + lines[h + 1][2:]


def _one_sample_stretch(lines, h):
    cells = lines[h + 1].split(",")
    cells[-1] = "99"
    lines[h + 1] = ",".join(cells)


def _zero_stretch(lines, h):
    for i in range(h + 1, len(lines)):
        cells = lines[i].split(",")
        if cells[-1] == "0" and cells[0] == "H1":
            cells[2], cells[3] = "0.0", "0.0"
            lines[i] = ",".join(cells)


@pytest.mark.parametrize("edit, words", [
    (_swap_times, "increase strictly"),
    (_nan_sample, "finite"),
    (_unknown_detector, "unknown detector"),
    (_one_sample_stretch, "empty or one-sample stretch"),
    (_zero_stretch, "only zeros"),
])
def test_cli_bad_data_files(files, tmp_path, capsys, edit, words):
    # issue 17's bad-input list (non-monotonic times, NaN samples, an unknown detector, an
    # empty stretch) against the project's rule for bad input (DEVELOPERS.md, common
    # practice of command-line tools): a message naming file, row and column, exit 2,
    # nothing written; by both commands that read the format
    cat, data = files
    _rewrite(data, edit)
    out, plot = tmp_path / "lim.csv", tmp_path / "p.png"
    assert main(["posterior", str(data), "--catalogue", str(cat), "--target", "P",
                 "--out", str(out), "--plot", str(plot)]) == 2
    err = capsys.readouterr().err
    assert err.startswith("error:") and words in err and str(data) in err and "row" in err
    assert not out.exists() and not plot.exists()
    assert main(["targeted", "--catalogue", str(cat), "--all", "--span", "2day",
                 "--data", f"P={data}", "--noise-draws", "20", "--out", str(out),
                 "--plot", str(plot)]) == 2
    err = capsys.readouterr().err
    # 'targeted' checks the detectors against its setup's (H1, L1) first
    words = "detector not in the setup" if edit is _unknown_detector else words
    assert err.startswith("error:") and words in err and str(data) in err and "row" in err
    assert not out.exists() and not plot.exists()


def test_cli_detector_not_in_the_setup(files, tmp_path, capsys):
    cat, data = files
    setup = tmp_path / "s.toml"
    cwlimits.SearchSetup(t_seg=10 * u.day, n_seg=1, band=(50 * u.Hz, 70 * u.Hz),
                         detectors=("H1", "V1")).to_toml(setup)
    out = tmp_path / "lim.csv"
    assert main(["posterior", str(data), "--catalogue", str(cat), "--target", "P",
                 "--setup", str(setup), "--out", str(out)]) == 2
    err = capsys.readouterr().err
    assert "not in the setup" in err and "'L1'" in err and not out.exists()


@pytest.mark.parametrize("harmonic", ["22", "21"])
def test_heterodyned_form_against_the_time_domain_formula(harmonic):
    # Build h(t) from the published time-domain formulas and heterodyne it numerically:
    # l = m = 2: h = F+ h0 (1 + cos^2 i)/2 cos Phi + Fx h0 cos i sin Phi (JKS 1998, eqs.
    # 20-22); l = 2, m = 1: h = -C21 [F+ sin i cos i cos Phi + Fx sin i sin Phi] (Jones
    # 2015; Pitkin et al. 2015, eq. 2).  Averaging h e^{-i Phi} over whole cycles keeps the
    # positive-frequency part, which must equal amp e^{i phi0} (a P + b Q) of
    # cwlimits.pulsars.likelihood (up to the overall sign of the m = 1 term, a phase).
    from cwlimits.pulsars.likelihood import orientation_coefficients

    amp, cosi, psi, phi0 = 1.0, 0.3, 0.7, 0.4
    sini = math.sqrt(1 - cosi**2)
    a, b = 0.37, -0.21  # antenna functions, constant over the few cycles averaged
    fp = a * math.cos(2 * psi) + b * math.sin(2 * psi)
    fx = b * math.cos(2 * psi) - a * math.sin(2 * psi)
    phase = phi0 + 2 * np.pi * np.arange(4000) / 400  # ten whole cycles
    if harmonic == "22":
        h = fp * amp * (1 + cosi**2) / 2 * np.cos(phase) + fx * amp * cosi * np.sin(phase)
    else:
        h = -amp * (fp * sini * cosi * np.cos(phase) + fx * sini * np.sin(phase))
    numeric = np.mean(h * np.exp(-1j * (phase - phi0)))
    p, q = orientation_coefficients(cosi, psi, harmonic)
    model = amp * np.exp(1j * phi0) * (a * p + b * q)
    sign = 1 if harmonic == "22" else -1
    assert numeric == pytest.approx(sign * model, rel=1e-9, abs=1e-12)


def test_band_data_input_with_gaps():
    # cwlimits.simulation.synthetic band data (noise of two levels, random gaps inside the
    # segments),
    # a Doppler-modulated signal injected: pulsar_posterior down-converts it itself
    from cwlimits.pulsars.data import from_band_data
    from cwlimits.simulation.synthetic import CWSignal, inject, simulate_noise

    t = _pulsar()
    starts = START + np.arange(8) * 5 * 3600.0
    psd = np.array([[1e-46] * 4 + [3e-46] * 4, [2e-46] * 8]) / u.Hz
    band = simulate_noise("H1,L1", psd, 60 * u.Hz, 0.05 * u.Hz, 4 * u.hour, starts * u.s,
                          t_ref=START * u.s, duty=0.8, rng=4)
    signal = CWSignal(t.coord, 4e-25, 0.2, 0.3 * u.rad, 2.0 * u.rad, 60 * u.Hz,
                      2 * t.fdot_rot)
    band = inject(band, signal, doppler=True)
    direct = pulsar_posterior(band, t, noise="given")
    by_hand = pulsar_posterior(from_band_data(band, t), t, noise="given")
    assert direct.upper_limit == by_hand.upper_limit
    lo, hi = direct.interval("h0", 0.98)
    assert lo < 4e-25 < hi
    assert np.mean(band.mask) < 0.9  # the gaps are there


@pytest.mark.parametrize("grid, words", [
    ({"n_h0": 3}, "from 4 to 4000"),
    ({"n_psi": 2.5}, "from 4 to 4000"),
    ({"n_tilt": 10}, "unknown grid size"),
    ({"n_h0": 4000, "n_cosi": 4000, "n_psi": 4000}, "more than"),
])
def test_grid_sizes_are_bounded_before_allocating(clean, grid, words):
    from cwlimits.errors import InputError

    with pytest.raises(InputError, match=words):
        pulsar_posterior(clean, _pulsar(), noise="given", grid=grid)
