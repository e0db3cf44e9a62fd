"""Figures a journal takes (issue 18, items 3 and 5): PDF at column and page widths,
readable log ticks, no clipped labels, the indirect limit and the confidence on the
ellipticity and r-mode figures, the sky map, and no global matplotlib state."""

import re
from pathlib import Path

import astropy.units as u
import matplotlib
import numpy as np
import pytest
from astropy.coordinates import SkyCoord
from astropy.table import QTable

from cwlimits.plotting.figures import (
    COLUMN_WIDTH_IN,
    PAGE_WIDTH_IN,
    new_figure,
    plot_strain_curves,
    save_journal_figure,
    tidy_log_axes,
)
from cwlimits.plotting.limits import plot_astrophysical_limits, plot_posterior
from cwlimits.plotting.sky import plot_sky_map, sky_positions

ROOT = Path(__file__).resolve().parent.parent
#: PostScript points per inch, the unit of a PDF MediaBox (PDF 1.7, ISO 32000-1, 8.3.2.3).
POINTS_PER_INCH = 72.0


@pytest.fixture(autouse=True)
def _close_figures():
    """Close the figures each test draws (pyplot keeps them open otherwise)."""
    yield
    import matplotlib.pyplot as plt

    plt.close("all")


def _media_box_width_in(path):
    box = re.search(rb"/MediaBox \[\s*0 0 ([\d.]+) ([\d.]+)\s*\]", path.read_bytes())
    return float(box.group(1)) / POINTS_PER_INCH


def _labels(axis):
    return [t.get_text() for t in axis.get_ticklabels() if t.get_visible() and t.get_text()]


def _visible_tick_labels(ax, axis):
    ax.figure.canvas.draw()
    lo, hi = sorted(getattr(ax, f"get_{axis}lim")())
    ticks = getattr(ax, f"get_{axis}ticks")()
    labels = getattr(ax, f"get_{axis}ticklabels")()
    return [lab.get_text() for t, lab in zip(ticks, labels, strict=True)
            if lo <= t <= hi and lab.get_text()]


def test_pdf_at_column_and_page_width(tmp_path):
    fig = plot_strain_curves(np.linspace(50, 450, 20) * u.Hz,
                             [("curve", np.geomspace(1e-25, 1e-24, 20))])
    written = save_journal_figure(fig, tmp_path / "fig")
    names = sorted(p.name for p in written)
    assert names == ["fig.pdf", "fig.png", "fig.svg", "fig_page.pdf"]
    for name in ("fig.pdf", "fig_page.pdf"):
        assert (tmp_path / name).read_bytes()[:5] == b"%PDF-"  # ISO 32000-1, 7.5.2
    # journal widths: a column about 3.4 in and a page about 7 in (common practice)
    assert _media_box_width_in(tmp_path / "fig.pdf") == pytest.approx(COLUMN_WIDTH_IN, 1e-3)
    assert _media_box_width_in(tmp_path / "fig_page.pdf") == pytest.approx(PAGE_WIDTH_IN,
                                                                            1e-3)
    # vector: the curve is a path, not an embedded image
    assert b"/Subtype /Image" not in (tmp_path / "fig.pdf").read_bytes()


def test_log_frequency_axis_50_to_450_hz_is_labelled_readably():
    fig, ax = new_figure()
    ax.plot([50, 450], [1e-25, 1e-24])
    ax.set_xscale("log")
    ax.set_yscale("log")
    ax.set_xlim(50, 450)
    tidy_log_axes(ax)
    labels = _visible_tick_labels(ax, "x")
    assert len(labels) >= 4, labels  # not only 100 and 200
    assert {"50", "100", "200", "300", "400"} <= set(labels), labels  # plain numbers in Hz
    # strain ticks stay in powers of ten
    assert all("10^" in t or "times" in t for t in _visible_tick_labels(ax, "y"))


def test_posterior_y_label_is_not_clipped():
    h0 = np.linspace(0, 1e-24, 400)
    density = np.exp(-0.5 * (h0 / 3e-25) ** 2)
    fig = plot_posterior(h0, density / np.trapezoid(density, h0), limit=6e-25, title="band")
    fig.canvas.draw()
    renderer = fig.canvas.get_renderer()
    frame = fig.bbox
    for ax in fig.axes:
        for text in (ax.yaxis.label, ax.xaxis.label, ax.title):
            box = text.get_window_extent(renderer)
            assert box.x0 >= frame.x0 - 0.5 and box.x1 <= frame.x1 + 0.5, text.get_text()
            assert box.y0 >= frame.y0 - 0.5 and box.y1 <= frame.y1 + 0.5, text.get_text()


def test_ellipticity_and_rmode_figures_show_the_indirect_limit_and_confidence():
    f = np.linspace(50, 450, 9) * u.Hz
    table = QTable({"f_mid": f, "eps_limit": np.geomspace(1e-6, 1e-7, 9) * u.one,
                    "alpha_limit": np.geomspace(1e-3, 1e-5, 9) * u.one})
    table.meta["confidence"] = 0.95
    eps_age = np.full(9, 3e-7) * u.one
    alpha_age = np.full(9, 2e-4) * u.one
    fig_eps, fig_alpha = plot_astrophysical_limits(table, eps_indirect=eps_age,
                                                   alpha_indirect=alpha_age)
    for fig, age in ((fig_eps, eps_age), (fig_alpha, alpha_age)):
        ax = fig.axes[0]
        texts = [t.get_text() for t in ax.get_legend().get_texts()]
        assert any("95 % confidence" in t for t in texts), texts
        assert any("age-based" in t for t in texts), texts
        drawn = [line for line in ax.lines if "age-based" in line.get_label()]
        assert np.allclose(drawn[0].get_ydata(), age.value)


def test_no_global_matplotlib_state_changed(tmp_path):
    before = dict(matplotlib.rcParams)
    backend = matplotlib.get_backend()
    fig = plot_strain_curves([100, 200] * u.Hz, [("c", [1e-25, 2e-25])])
    save_journal_figure(fig, tmp_path / "f")
    assert dict(matplotlib.rcParams) == before
    assert matplotlib.get_backend() == backend


def test_only_plotting_uses_matplotlib_and_none_picks_a_backend():
    # Issue 15 item 10 / STYLE.md: plotting functions never choose a backend
    for path in (ROOT / "cwlimits").rglob("*.py"):
        text = path.read_text()
        assert "matplotlib.use(" not in text, path
        assert "rcParams[" not in text, path
        if "plotting" not in path.parts:
            assert not re.search(r"^\s*(import|from) matplotlib", text, re.M), path


# --- the sky map (item 3) -----------------------------------------------------------------

def test_sky_positions_of_the_galactic_pole_and_centre():
    # The north Galactic pole at ICRS (192.859508, +27.128336) deg and the Galactic centre
    # direction at (266.404996, -28.936172) deg (Reid & Brunthaler 2004 / the IAU 1958
    # definition as carried by astropy's Galactic frame; values from memory, checked to
    # 1e-4 rad, far above their rounding)
    coord = SkyCoord([192.859508, 266.404996] * u.deg, [27.128336, -28.936172] * u.deg,
                     frame="icrs")
    x, y = sky_positions(coord, "galactic")
    assert y[0] == pytest.approx(np.pi / 2, abs=1e-4)
    assert x[1] == pytest.approx(0.0, abs=1e-3) and y[1] == pytest.approx(0.0, abs=1e-3)
    # equatorial: right ascension increases to the left (x = -ra, wrapped)
    x, y = sky_positions(SkyCoord([90.0] * u.deg, [30.0] * u.deg), "icrs")
    assert x[0] == pytest.approx(-np.pi / 2) and y[0] == pytest.approx(np.pi / 6)
    with pytest.raises(ValueError, match="frame"):
        sky_positions(coord, "ecliptic")


def test_sky_map_colours_each_target_by_its_value(demo_catalogue_path):
    from cwlimits.targets.catalogue import load_targets

    catalogue = load_targets(demo_catalogue_path)
    values = np.geomspace(1e-25, 1e-23, len(catalogue.names))
    fig = plot_sky_map(catalogue.coord, values, catalogue.names)
    ax = next(a for a in fig.axes if a.name == "mollweide")
    points = ax.collections[0]
    assert np.allclose(points.get_array(), values)
    assert len(points.get_offsets()) == len(catalogue.names)
    bar = next(a for a in fig.axes if a.get_label() == "<colorbar>")
    assert "h_0" in bar.get_xlabel() and "dimensionless" in bar.get_xlabel()
    assert ax.get_xlabel() and ax.get_ylabel()


def test_demo_report_has_sky_map_and_pdf_figures(demo_report):
    assert (demo_report / "sky_map.png").is_file() and (demo_report / "sky_map.pdf").is_file()
    for png in demo_report.glob("*.png"):
        if png.stem.endswith("_page"):
            continue
        assert (demo_report / f"{png.stem}.pdf").read_bytes()[:5] == b"%PDF-", png.name
    pages = list(demo_report.glob("*_page.pdf"))
    assert pages and all(_media_box_width_in(p) == pytest.approx(PAGE_WIDTH_IN, 1e-3)
                         for p in pages)


def test_cli_indirect_draws_the_sky_map(tmp_path, demo_catalogue_path):
    from cwlimits.cli.app import main

    out = tmp_path / "sky.pdf"
    assert main(["-q", "indirect", str(demo_catalogue_path), "--sky-map", str(out),
                 "--frame", "icrs"]) == 0
    assert out.read_bytes()[:5] == b"%PDF-"  # ISO 32000-1, 7.5.2
    # a bad suffix is refused before any work: exit 2, nothing written
    bad = tmp_path / "sky.txt"
    assert main(["-q", "indirect", str(demo_catalogue_path), "--sky-map", str(bad)]) == 2
    assert not bad.exists()
