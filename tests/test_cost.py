import math
from collections import namedtuple

import astropy.units as u
import numpy as np
import pytest
from references_cost import (
    coherent_sqrt_det_3,
    normalised_thickness_anstar,
    normalised_thickness_zn,
    refinement_fddot,
    refinement_fdot,
)

from cwlimits.cli.app import main
from cwlimits.errors import InputError
from cwlimits.plotting.cost import plot_cost_scan
from cwlimits.searchspace.cost import computing_cost, count_templates, scan_cost
from cwlimits.searchspace.parameter_space import AgeBasedSpace, BoxSpace
from cwlimits.searchspace.searchsetup import SearchSetup
from cwlimits.tables import read_table

DAY = 86400.0
YR = 365.25 * DAY


def _volume3(f_a, f_b, tau_s, n_min=2.0, n_max=7.0):
    # closed form derived from the Wette et al. 2008 (arXiv:0802.3332) bounds
    return ((n_max - n_min) * (f_b ** 3 - f_a ** 3) / (9 * tau_s ** 3)
            * ((n_min - 1) ** -3 - (n_max - 1) ** -3))


def _volume2(f_a, f_b, tau_s, n_min=2.0, n_max=7.0):
    return (f_b ** 2 - f_a ** 2) / (2 * tau_s) * (1 / (n_min - 1) - 1 / (n_max - 1))


def _setup(**kw):
    args = {"t_seg": 20 * u.day, "n_seg": 1, "band": (400 * u.Hz, 500 * u.Hz),
            "band_width": 100 * u.Hz}
    args.update(kw)
    return SearchSetup(**args)


def test_coherent_count_is_theta_mu_sqrtdet_volume():
    # reference: N = theta mu^(-n/2) sqrt(det g) V (Prix 2007, arXiv:0707.0428) with
    # theta(A_3*) from Conway & Sloane and sqrt(det g) = pi^3 T^6/(360 sqrt 105)
    s = _setup(mismatch_coherent=0.2)
    row = count_templates(s, 250 * u.yr)[0]
    want = (normalised_thickness_anstar(3) * 0.2 ** -1.5 * coherent_sqrt_det_3(20 * DAY)
            * _volume3(400.0, 500.0, 250 * YR))
    assert row["dims_coh"] == 3
    assert row["n_coh"] == pytest.approx(want, rel=1e-10)
    assert row["volume_3"].to_value(u.Hz ** 3 / u.s ** 3) == pytest.approx(
        _volume3(400.0, 500.0, 250 * YR), rel=1e-12)
    zn = count_templates(s.replace(lattice="cubic"), 250 * u.yr)[0]
    assert zn["n_coh"] / row["n_coh"] == pytest.approx(
        normalised_thickness_zn(3) / normalised_thickness_anstar(3), rel=1e-12)


@pytest.mark.parametrize("kind", ["covering", "cubic"])
def test_density_formula_counts_actual_lattice_templates(kind):
    # reference: the definition of the count - the number of templates of an actual bank
    # (cwlimits.searchspace.lattices.nearest_template) inside a box in (f, fdot) - against
    # theta mu^(-1) sqrt(det g_2) area.  The box spans ~120 templates per side; templates
    # are found by dense random sampling (fixed seed); tolerance 1.5 % for the box edges
    # (measured 0.3 %)
    from cwlimits.searchspace.lattices import nearest_template
    from cwlimits.searchspace.metric import coherent_metric

    g = coherent_metric(1 * u.day, 2)
    mu = 0.3
    widths = 120 * np.sqrt(mu / np.diag(g))
    lo = np.array([100.0, -1e-9])
    rng = np.random.default_rng(99)
    pts = lo + rng.random((400000, 2)) * widths
    templates, _ = nearest_template(pts, g, mu, kind, origin=lo)
    found = np.unique(np.round((templates - lo) / widths, 9), axis=0)
    inside = np.all((found >= 0) & (found < 1), axis=1).sum()
    s = _setup(t_seg=1 * u.day, lattice=kind, mismatch_coherent=mu)
    box = BoxSpace((lo[0] * u.Hz, (lo[0] + widths[0]) * u.Hz),
                   (lo[1] * u.Hz / u.s, (lo[1] + widths[1]) * u.Hz / u.s))
    row = count_templates(s, box, bands=(lo[0] * u.Hz, (lo[0] + widths[0]) * u.Hz))[0]
    assert row["dims_coh"] == 2
    assert inside == pytest.approx(row["n_coh"], rel=0.015)


def test_count_scaling_t6_f3_tau3():
    # reference: count proportional to T^6 (f_max^3 - f_min^3) / tau^3 (Wette et al. 2008,
    # Sect. III, with the closed-form volume)
    base = count_templates(_setup(), 250 * u.yr)["n_coh"][0]
    longer = count_templates(_setup(t_seg=40 * u.day), 250 * u.yr)["n_coh"][0]
    younger = count_templates(_setup(), 125 * u.yr)["n_coh"][0]
    band = count_templates(_setup(band=(400 * u.Hz, 600 * u.Hz), band_width=200 * u.Hz),
                           250 * u.yr)["n_coh"][0]
    assert longer / base == pytest.approx(2.0 ** 6, rel=1e-10)
    assert younger / base == pytest.approx(2.0 ** 3, rel=1e-10)
    assert band / base == pytest.approx((600 ** 3 - 400 ** 3) / (500 ** 3 - 400 ** 3),
                                        rel=1e-10)


def test_semicoherent_over_coherent_is_refinement_product():
    # reference: Pletsch 2010, arXiv:1005.0395: density ratio gamma_1 gamma_2 for N
    # contiguous segments (same mismatch in both stages)
    s = _setup(n_seg=8, mismatch_coherent=0.3, mismatch_semicoherent=0.3)
    row = count_templates(s, 250 * u.yr)[0]
    assert row["dims_semi"] == 3 and row["dims_coh"] == 3
    assert row["n_semi"] / row["n_coh"] == pytest.approx(
        refinement_fdot(8) * refinement_fddot(8), rel=1e-9)


def test_thin_direction_uses_lower_dimensional_count():
    # reference: the nested-projection rule (Wette et al. 2008, Sect. III): fddot thinner
    # than one template -> the (f, fdot) count with sqrt(det g_2) = pi^2 T^3/(6 sqrt 15)
    s = _setup(t_seg=2 * u.day, band=(100 * u.Hz, 101 * u.Hz), band_width=1 * u.Hz)
    row = count_templates(s, 250 * u.yr)[0]
    sd2 = math.pi ** 2 * (2 * DAY) ** 3 / (6 * math.sqrt(15))
    want2 = normalised_thickness_anstar(2) / 0.3 * sd2 * _volume2(100.0, 101.0, 250 * YR)
    want3 = (normalised_thickness_anstar(3) * 0.3 ** -1.5 * coherent_sqrt_det_3(2 * DAY)
             * _volume3(100.0, 101.0, 250 * YR))
    assert want3 < want2                      # the 3-d formula would undercount
    assert row["dims_coh"] == 2 and row["n_coh"] == pytest.approx(want2, rel=1e-10)
    # an old star, a short segment: only f counts.  Templates 2 sqrt(mu / g_ff) apart
    # (the covering condition in 1-d) with g_ff = pi^2 T^2 / 3 give
    # N = df sqrt(g_ff) / (2 sqrt(mu)) (definition of the mismatch; common practice)
    row = count_templates(s.replace(t_seg=0.1 * u.day), 1e8 * u.yr)[0]
    assert row["dims_coh"] == 1
    spacing = 2 * math.sqrt(0.3 / (math.pi ** 2 * (0.1 * DAY) ** 2 / 3))
    assert row["n_coh"] == pytest.approx(1.0 / spacing, rel=1e-10)


def test_never_a_fraction_of_a_template():
    # the rule (documented): a band with any parameter space holds at least one template,
    # a band outside a box space none
    box = BoxSpace.around_spin(100 * u.Hz, -1e-10 * u.Hz / u.s, f_tol=1e-12, fdot_tol=0)
    s = _setup(t_seg=0.01 * u.day, band=(99 * u.Hz, 101 * u.Hz), band_width=1 * u.Hz)
    table = count_templates(s, box, bands=(np.array([99.0, 99.5, 200.0]) * u.Hz,
                                          np.array([101.0, 99.6, 201.0]) * u.Hz))
    np.testing.assert_array_equal(table["n_coh"], [1.0, 0.0, 0.0])
    np.testing.assert_array_equal(table["n_semi"], [1.0, 0.0, 0.0])


def test_cost_formula_and_units():
    # reference: C = N_seg N_coh c_coh N_det + N_seg N_semi c_semi (Prix & Shaltev 2012,
    # arXiv:1201.4321); 1 h = 3600 s (astropy units)
    s = _setup(n_seg=5, detectors=["H1", "L1", "V1"], cost_coherent=2e-7 * u.s,
               cost_semicoherent=3e-9 * u.s, band_width=10 * u.Hz)
    est = computing_cost(s, 250 * u.yr)
    t = est.table
    want = (5 * t["n_coh"] * 2e-7 * 3 + 5 * t["n_semi"] * 3e-9) / 3600.0
    np.testing.assert_allclose(t["cost"].to_value(u.h), want, rtol=1e-12)
    assert t["cost"].unit == u.h and len(t) == 10
    assert est.total.to_value(u.h) == pytest.approx(want.sum(), rel=1e-12)
    assert (est.total_coherent + est.total_semicoherent).value == pytest.approx(
        est.total.value, rel=1e-12)
    assert "cost_model" in est.assumptions and "parameter_space" in est.assumptions


def test_bands_scalar_array_broadcast_and_many_bands():
    s = _setup(t_seg=5 * u.day, n_seg=10)
    one = count_templates(s, 250 * u.yr, bands=(400 * u.Hz, 401 * u.Hz))
    assert len(one) == 1
    grid = count_templates(s, 250 * u.yr, bands=(np.array([[100.0], [200.0]]) * u.Hz,
                                                 np.array([300.0, 400.0, 500.0]) * u.Hz))
    assert len(grid) == 6
    # thousands of bands in one call; where every band is 3-d, counts add up over bands
    # (the count is linear in the volume integral)
    edges = np.linspace(400, 500, 5001) * u.Hz
    many = count_templates(s, 250 * u.yr, bands=(edges[:-1], edges[1:]))
    assert len(many) == 5000 and np.all(many["dims_semi"] == 3)
    whole = count_templates(s, 250 * u.yr, bands=(400 * u.Hz, 500 * u.Hz))
    assert many["n_semi"].sum() == pytest.approx(whole["n_semi"][0], rel=1e-9)


def test_targets_as_input(demo_catalogue_path):
    # a cwlimits Target (the fictional demo catalogue) and any object with .age
    from cwlimits.targets.catalogue import load_targets

    target = load_targets(demo_catalogue_path).target("Fict Ember")
    s = _setup()
    a = count_templates(s, target)["n_coh"][0]
    b = count_templates(s, AgeBasedSpace(target.age))["n_coh"][0]
    assert a == b
    Star = namedtuple("Star", "name age")
    assert count_templates(s, Star("x", target.age))["n_coh"][0] == a
    with pytest.raises(InputError, match="age"):
        count_templates(s, Star("x", None))


def test_scan_cost(tmp_path):
    s = _setup(n_seg=4, band_width=50 * u.Hz)
    scan = scan_cost(s, 250 * u.yr, "t_seg", [5, 10, 20] * u.day)
    assert np.all(np.diff(scan["cost"].value) > 0) and np.all(scan["n_seg"] == 4)
    direct = computing_cost(s.replace(t_seg=10 * u.day), 250 * u.yr).total
    assert scan["cost"][1].value == pytest.approx(direct.to_value(u.h), rel=1e-12)
    spanned = scan_cost(s.replace(span=100 * u.day), 250 * u.yr, "t_seg", [5, 10] * u.day)
    assert list(spanned["n_seg"]) == [20, 10]
    segs = scan_cost(s, 250 * u.yr, "n_seg", np.array([1, 2, 4]))
    assert list(segs["n_seg"]) == [1, 2, 4]
    path = plot_cost_scan(scan, "t_seg", tmp_path / "scan.png")
    assert path.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    with pytest.raises(InputError, match="scan only"):
        scan_cost(s, 250 * u.yr, "mismatch", [0.1])
    with pytest.raises(InputError, match="mid_times"):
        scan_cost(s.replace(mid_times=[10, 30, 50, 70] * u.day), 250 * u.yr, "n_seg", [2])


# --- command line -------------------------------------------------------------------------

CLI = ["cost", "--age", "250yr", "--t-seg", "10day", "--n-seg", "4", "--f-min", "100Hz",
       "--f-max", "110Hz"]


def test_cli_table_and_csv(tmp_path, capsys):
    out = tmp_path / "cost.csv"
    assert main(CLI + ["--out", str(out)]) == 0
    text = capsys.readouterr().out
    assert "total cost" in text and "core-hours" in text and "assumptions:" in text
    table = read_table(out)
    assert len(table) == 10
    cost = table.quantity("cost", u.h)
    assert np.all(cost.value > 0)
    assert any(k.startswith("assumption.") for k in table.meta)
    assert table.units["f_lo"] == u.Hz


def test_cli_setup_file_overrides_and_catalogue(tmp_path, capsys, demo_catalogue_path):
    setup = _setup(n_seg=3, band=(100 * u.Hz, 104 * u.Hz), band_width=1 * u.Hz)
    path = setup.to_toml(tmp_path / "s.toml")
    out = tmp_path / "c.ecsv"
    rc = main(["cost", "--setup", str(path), "--catalogue", str(demo_catalogue_path),
               "--target", "Fict Ember", "--band-width", "2Hz", "--out", str(out)])
    assert rc == 0
    table = read_table(out)
    assert len(table) == 2                      # --band-width overrides the file's 1 Hz
    assert "Fict Ember" in capsys.readouterr().out


def test_cli_scan_and_plot(tmp_path, capsys):
    plot, out = tmp_path / "scan.png", tmp_path / "scan.csv"
    rc = main(CLI + ["--scan", "segments", "--scan-range", "2", "16", "--scan-steps", "4",
                     "--plot", str(plot), "--out", str(out)])
    assert rc == 0
    assert plot.read_bytes()[:4] == b"\x89PNG"
    assert len(read_table(out)) == 4
    assert main(CLI + ["--scan", "t-seg", "-q"]) == 0


@pytest.mark.parametrize("extra, match", [
    (["--braking-index-min", "1"], "braking-index-min"),
    (["--braking-index-min", "5", "--braking-index-max", "3"], "braking-index-max"),
    (["--mismatch-coherent", "1.5"], "mismatch-coherent"),
    (["--mismatch-semicoherent", "0"], "mismatch-semicoherent"),
    (["--n-seg", "0"], "n-seg"),
    (["--span", "20day"], "span"),
    (["--age=-5yr"], "age"),
    (["--plot", "x.png"], "--plot needs --scan"),
    (["--catalogue", "x.csv"], "either --age"),
])
def test_cli_bad_input_exits_2_without_output(tmp_path, capsys, extra, match):
    out = tmp_path / "never.csv"
    args = CLI + ["--out", str(out)] + extra
    assert main(args) == 2
    err = capsys.readouterr().err
    assert err.startswith("error:") and match in err
    assert not out.exists()


@pytest.mark.parametrize("line, match", [
    ("colour = \"red\"", "unknown key 'data.colour'"),
    ("t_seg = \"10 Hz\"", "key 'data.t_seg'"),
])
def test_cli_bad_setup_file_exits_2(tmp_path, capsys, line, match):
    setup = tmp_path / "bad.toml"
    setup.write_text("[data]\nn_seg = 3\n" + line + "\n"
                     + ("t_seg = \"1 day\"\n" if "t_seg" not in line else "")
                     + "[band]\nf_min = \"10 Hz\"\nf_max = \"20 Hz\"\n")
    out = tmp_path / "never.csv"
    assert main(["cost", "--setup", str(setup), "--age", "250yr", "--out", str(out)]) == 2
    err = capsys.readouterr().err
    assert match in err and str(setup) in err
    assert not out.exists()


def test_cli_needs_setup_values(capsys):
    assert main(["cost", "--age", "250yr", "--t-seg", "1day"]) == 2
    assert "--n-seg" in capsys.readouterr().err


def test_gapped_segments_use_the_semicoherent_metric_of_their_mid_times():
    # reference: Pletsch 2010 (segments with gaps): the semi-coherent count is
    # theta mu^(-3/2) sqrt(det g_semi) V_3 with the metric of the given mid-times
    from cwlimits.searchspace.metric import semicoherent_sqrt_det

    s = _setup(t_seg=10 * u.day, n_seg=4, span=100 * u.day)
    row = count_templates(s, 250 * u.yr)[0]
    sd = semicoherent_sqrt_det(s.t_seg, mid_times=s.segment_mid_times).to_value(u.s ** 6)
    want = (normalised_thickness_anstar(3) * 0.3 ** -1.5 * sd
            * _volume3(400.0, 500.0, 250 * YR))
    assert row["dims_semi"] == 3 and row["n_semi"] == pytest.approx(want, rel=1e-9)
    contiguous = count_templates(s.replace(span=None), 250 * u.yr)[0]
    assert row["n_semi"] > contiguous["n_semi"]          # a longer span resolves finer


def test_computing_cost_scalar_and_broadcast_bands():
    s = _setup(n_seg=3)
    one = computing_cost(s, 250 * u.yr, bands=(450 * u.Hz, 451 * u.Hz))
    assert len(one.table) == 1 and one.total.unit == u.h
    grid = computing_cost(s, 250 * u.yr, bands=(np.array([[400.0], [420.0]]) * u.Hz,
                                                np.array([440.0, 460.0]) * u.Hz))
    assert len(grid.table) == 4
    assert grid.total.value == pytest.approx(grid.table["cost"].value.sum())
    with pytest.raises(InputError, match="broadcast"):
        computing_cost(s, 250 * u.yr, bands=([1.0, 2.0] * u.Hz, [3.0, 4.0, 5.0] * u.Hz))
    with pytest.raises(InputError, match="f_lo < f_hi"):
        computing_cost(s, 250 * u.yr, bands=(5 * u.Hz, 4 * u.Hz))


def test_cli_spin_box(tmp_path, capsys, demo_catalogue_path):
    # the fictional demo target with a known spin; the band defaults to the box around
    # f_gw = 2 f_rot (common practice for a mass quadrupole)
    out = tmp_path / "box.csv"
    rc = main(["cost", "--catalogue", str(demo_catalogue_path), "--target",
               "Fict Pulsar Cinder", "--spin-box", "1e-3", "0.05", "--t-seg", "1day",
               "--n-seg", "30", "--band-width", "0.01Hz", "--out", str(out)])
    assert rc == 0
    table = read_table(out)
    f_lo = table.quantity("f_lo", u.Hz)
    f_hi = table.quantity("f_hi", u.Hz)
    f0 = 2 * 23.7                                   # 2 f_rot of the demo row
    assert f_lo[0].value == pytest.approx(f0 * (1 - 1e-3))
    assert f_hi[-1].value == pytest.approx(f0 * (1 + 1e-3))
    assert "box around the spin" in capsys.readouterr().out
    assert main(CLI + ["--spin-box", "1e-3", "0.1"]) == 2
    assert "--spin-box needs" in capsys.readouterr().err


def test_lattice_counts_over_candidates_equal_count_templates_setup_by_setup():
    # The vectorised rule planning uses is the cost stage's own: candidates along one axis
    # give, row by row, count_templates of each setup (Prix 2007, arXiv:0707.0428, eq. 68)
    from cwlimits.searchspace.cost import lattice_counts, sqrt_block_determinants
    from cwlimits.searchspace.lattices import get_lattice
    from cwlimits.searchspace.metric import coherent_metric_scaled
    from cwlimits.searchspace.searchsetup import SearchSetup

    space = AgeBasedSpace(3000 * u.yr)
    lo, hi = np.array([100.0, 300.0]) * u.Hz, np.array([101.0, 302.0]) * u.Hz
    volumes = np.stack([space.volume(lo, hi, k).value for k in (1, 2, 3)])
    theta = [get_lattice("covering", k).normalised_thickness for k in (1, 2, 3)]
    t_segs = np.array([0.5, 2.0, 8.0]) * u.day
    mus = np.array([0.1, 0.3, 0.5])
    sd = np.array([sqrt_block_determinants(coherent_metric_scaled(0.0, 3), t.to_value(u.s), 3)
                   for t in t_segs])
    counts, dims = lattice_counts(sd, theta, mus, volumes)
    assert counts.shape == dims.shape == (3, 2)
    for i, (t, mu) in enumerate(zip(t_segs, mus, strict=True)):
        s = SearchSetup(t_seg=t, n_seg=4, mismatch_coherent=mu, lattice="covering",
                        band=(100 * u.Hz, 110 * u.Hz))
        ref = count_templates(s, space, bands=(lo, hi))
        assert counts[i] == pytest.approx(np.asarray(ref["n_coh"]), rel=1e-12)
        assert dims[i].tolist() == list(ref["dims_coh"])
