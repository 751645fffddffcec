"""Figures: rendered headless, and their content checked (axes, labels, artists, values)."""
from __future__ import annotations

import numpy as np
import pytest
from astropy.table import Table
from matplotlib.collections import PolyCollection
from matplotlib.patches import Rectangle
from matplotlib.text import Annotation
from scipy import stats

from retrieve.errors import UserError
from retrieve.observations import Dataset
from retrieve.plotting import (Envelope, plot_abundances, plot_band_diagram, plot_corner, plot_profile,
                               plot_spectrum, save_figure)
from retrieve.plotting import style
from retrieve.plotting.spectrum_plot import filter_half_max_um, flagged_bands


@pytest.fixture
def rng():
    return np.random.default_rng(20261202)


@pytest.fixture
def posterior(rng):
    n = 4000
    return Table({
        "t_iso": rng.normal(1700.0, 40.0, n),
        "log_g": rng.normal(4.2, 0.15, n),
        "radius_rjup": rng.normal(1.1, 0.05, n),
        "log_vmr_H2O": rng.normal(-3.4, 0.2, n),
        "log_vmr_CH4": rng.uniform(-12.0, -6.5, n),
    })


def _diag_axes(fig, k):
    axes = np.array(fig.axes).reshape(k, k)
    return [axes[i, i] for i in range(k)]


def test_corner_axes_labels_quantiles_truths(posterior):
    names = ["t_iso", "log_g", "radius_rjup"]
    truths = {"t_iso": 1712.0, "log_g": 4.25}
    fig = plot_corner(posterior, names=names, truths=truths)
    assert len(fig.axes) == 9  # K×K grid drawn by corner for K = 3
    bottom = np.array(fig.axes).reshape(3, 3)[2]
    assert "[K]" in bottom[0].get_xlabel()
    assert "R_\\mathrm{Jup}" in bottom[2].get_xlabel()
    for ax, name in zip(_diag_axes(fig, 3), names):
        vertical = [ln.get_xdata()[0] for ln in ax.get_lines() if len(set(np.ravel(ln.get_xdata()))) == 1]
        # quantile lines at the numpy 16/50/84 percentiles of the column (numpy.quantile as reference)
        expected = np.quantile(posterior[name], [0.16, 0.5, 0.84])
        for q in expected:
            assert np.min(np.abs(np.array(vertical) - q)) < 1e-9
        if name in truths:
            assert np.min(np.abs(np.array(vertical) - truths[name])) < 1e-9
    # no truth for radius: its diagonal carries only the three quantile lines
    rad_lines = [ln for ln in _diag_axes(fig, 3)[2].get_lines() if len(set(np.ravel(ln.get_xdata()))) == 1]
    assert len(rad_lines) == 3


def test_corner_subset_and_derived(posterior):
    g_cgs = 10 ** np.asarray(posterior["log_g"])
    derived = {"mass_mjup": g_cgs * np.asarray(posterior["radius_rjup"]) ** 2}
    fig = plot_corner(posterior, subset=["log_g", "mass_mjup"], derived=derived)
    assert len(fig.axes) == 4
    assert fig.parameter_names == ["log_g", "mass_mjup"]
    assert "M_\\mathrm{Jup}" in np.array(fig.axes).reshape(2, 2)[1, 1].get_xlabel()
    with pytest.raises(UserError, match="unknown parameter"):
        plot_corner(posterior, subset=["log_q"])


def test_corner_from_array_needs_matching_names(rng):
    data = rng.normal(size=(500, 2))
    assert len(plot_corner(data, names=["a", "b"]).axes) == 4
    with pytest.raises(UserError, match="3 names"):
        plot_corner(data, names=["a", "b", "c"])


def test_envelope_from_gaussian_draws_matches_normal_quantiles(rng):
    draws = rng.normal(5.0, 2.0, size=(200_000, 3))
    env = Envelope.from_draws(draws)
    # scipy.stats.norm: central 68.27 % is ±1σ, central 95.45 % is ±2σ
    lo1, hi1 = stats.norm.interval(0.682689, loc=5.0, scale=2.0)
    lo2, hi2 = stats.norm.interval(0.9545, loc=5.0, scale=2.0)
    np.testing.assert_allclose(env.lo1, lo1, atol=0.03)
    np.testing.assert_allclose(env.hi1, hi1, atol=0.03)
    np.testing.assert_allclose(env.lo2, lo2, atol=0.05)
    np.testing.assert_allclose(env.hi2, hi2, atol=0.05)


def test_filter_half_max_brackets_speclite_effective_wavelength():
    import speclite.filters
    for name in ("twomass-Ks", "wise2010-W1"):
        lo, hi = filter_half_max_um(name)
        # speclite's effective wavelength (Angstrom) lies inside the half-maximum span
        lam_eff = speclite.filters.load_filter(name).effective_wavelength.value * 1e-4
        assert lo < lam_eff < hi
    assert filter_half_max_um("no-such-filter") is None


def _datasets(rng):
    w = np.linspace(0.96, 1.78, 40)
    model = 3e-16 * (1 + 0.4 * np.sin(6 * w))
    sig = 0.05 * model
    ifs = Dataset("ifs", "spectrum", w, model + rng.normal(0, 1, w.size) * sig, sig, resolving_power=40.0)
    pw = np.array([2.16, 3.39])
    pmodel = np.array([1.5e-16, 0.6e-16])
    phot = Dataset("phot", "photometry", pw, pmodel * 1.03, 0.06 * pmodel, filters=["twomass-Ks", "wise2010-W1"])
    return [ifs, phot], {"ifs": model, "phot": pmodel}


def test_spectrum_figure_content(rng):
    datasets, best = _datasets(rng)
    draws = best["ifs"][None, :] * (1 + 0.03 * rng.normal(size=(300, 1)))
    envelopes = {"ifs": Envelope.from_draws(draws), "phot": Envelope.from_draws(best["phot"][None, :]
                                                                                 * (1 + 0.03 * rng.normal(size=(300, 1))))}
    bands = Table({"molecule": ["H2O", "CH4", "CO", "CH4"], "band": ["1.4um", "1.6um", "2.3um", "1.15um"],
                   "flag": ["detected", "detected", "not detected", "tentative"],
                   "window_lo_um": [1.33, 1.60, 2.29, 1.10], "window_hi_um": [1.50, 1.72, 2.40, 1.20]})
    fig = plot_spectrum(datasets, best, envelopes=envelopes, bands=bands)
    ax, axr = fig.axes
    assert "wavelength" in axr.get_xlabel() and "sigma" in axr.get_ylabel()
    assert "W m" in ax.get_ylabel()
    # two fill_between envelopes (1σ, 2σ) for the IFS spectrum
    assert sum(isinstance(c, PolyCollection) for c in ax.collections) >= 2
    # the two flagged bands are shaded and labelled; the absent CO band is not
    gids = sorted(p.get_gid() for p in ax.patches if p.get_gid())
    assert gids == ["band:CH4:1.15um:tentative", "band:CH4:1.6um", "band:H2O:1.4um"]
    texts = [t.get_text() for t in ax.texts]
    assert "H$_{2}$O" in texts and "CH$_{4}$" in texts and "CH$_{4}$?" in texts
    assert not any(t.startswith("CO") for t in texts)
    # patches span exactly the band windows of the table
    h2o = [p for p in ax.patches if p.get_gid() == "band:H2O:1.4um"][0]
    xs = h2o.get_path().vertices[:, 0] if not hasattr(h2o, "get_x") else [h2o.get_x(), h2o.get_x() + h2o.get_width()]
    assert np.isclose(min(xs), 1.33) and np.isclose(max(xs), 1.50)
    # residuals are (data − model)/σ, point by point (definition; common practice, no source)
    lines = [ln for ln in axr.get_lines() if len(ln.get_xdata()) == 40]
    expected = (datasets[0].flux - best["ifs"]) / datasets[0].uncertainty
    np.testing.assert_allclose(np.asarray(lines[0].get_ydata()), expected, rtol=1e-12)


def test_spectrum_photometry_has_filter_width_bars(rng):
    datasets, best = _datasets(rng)
    fig = plot_spectrum(datasets, best)
    ax = fig.axes[0]
    ks_lo, ks_hi = filter_half_max_um("twomass-Ks")
    # a horizontal error bar spans the Ks half-maximum width (speclite curve)
    spans = []
    for coll in ax.collections:
        for seg in getattr(coll, "get_segments", lambda: [])():
            seg = np.asarray(seg)
            if seg.shape == (2, 2) and seg[0, 1] == seg[1, 1]:
                spans.append((seg[:, 0].min(), seg[:, 0].max()))
    assert any(abs(lo - ks_lo) < 1e-9 and abs(hi - ks_hi) < 1e-9 for lo, hi in spans)
    with pytest.raises(UserError, match="no best-fit model"):
        plot_spectrum(datasets, {"ifs": best["ifs"]})


def test_flagged_bands_accepts_boolean_flags():
    bands = Table({"molecule": ["H2O", "CH4"], "band": ["a", "b"], "flag": [True, False],
                   "lo_um": [1.1, 1.6], "hi_um": [1.2, 1.7]})
    assert flagged_bands(bands) == [("H2O", "a", 1.1, 1.2)]


def test_profile_figure(rng):
    p = np.logspace(-4, 2, 60)
    base = 900 + 300 * np.log10(p / 1e-4)
    draws = base[None, :] + rng.normal(0, 30, size=(400, 1))
    w = np.linspace(0.95, 4.0, 120)
    peak = np.where(w < 1.9, 3.0, 0.3)
    contrib = np.exp(-0.5 * ((np.log10(p)[:, None] - np.log10(peak)[None, :]) / 0.4) ** 2)
    fig = plot_profile(p, draws, contribution=contrib, contribution_wavelength_um=w, truth_temperature_K=base)
    ax, axc = fig.axes
    assert ax.get_yscale() == "log"
    assert ax.get_ylim()[0] > ax.get_ylim()[1]  # pressure increases downwards
    assert sum(isinstance(c, PolyCollection) for c in ax.collections) == 2  # 1σ and 2σ envelopes
    median = [ln for ln in ax.get_lines() if ln.get_label() == "median"][0]
    np.testing.assert_allclose(median.get_xdata(), np.median(draws, axis=0))
    labels = {ln.get_label() for ln in axc.get_lines()}
    assert {"Y", "J", "H", "K", "L", "all"} <= labels
    # the K-band curve peaks near 0.3 bar where its Gaussian was centred
    k = [ln for ln in axc.get_lines() if ln.get_label() == "K"][0]
    assert abs(np.log10(p[np.argmax(k.get_xdata())]) - np.log10(0.3)) < 0.1
    assert np.isclose(np.max(k.get_xdata()), 1.0)


def test_abundance_panels_and_upper_limit(posterior):
    fig = plot_abundances(posterior, ["H2O", "CH4"], upper_limits={"CH4": True},
                          prior_ranges={"H2O": (-12, -1), "CH4": (-12, -1)}, truths={"H2O": -3.5})
    assert len(fig.axes) == 2
    ax_h2o, ax_ch4 = fig.axes
    arrows = [c for c in ax_ch4.get_children() if isinstance(c, Annotation) and c.arrow_patch is not None]
    assert len(arrows) == 1
    limit = np.quantile(posterior["log_vmr_CH4"], 0.95)  # numpy.quantile as reference
    assert np.isclose(fig.upper_limit_values["CH4"], limit)
    assert arrows[0].xy[0] < limit  # arrow points to lower abundances
    assert not [c for c in ax_h2o.get_children() if isinstance(c, Annotation)]
    assert "95%" in ax_ch4.get_title() and "VMR" in ax_h2o.get_xlabel()
    with pytest.raises(UserError, match="log_vmr_CO"):
        plot_abundances(posterior, ["CO"])


def test_band_diagram_points_and_errors():
    table = Table({"name": ["b", "c", "d"], "h2o_index": [0.55, 0.42, 0.61], "h2o_index_err": [0.02, 0.03, 0.02],
                   "ch4_index": [0.95, 0.60, 0.88], "ch4_index_err": [0.03, 0.02, 0.04]})
    fig = plot_band_diagram(table)
    ax = fig.axes[0]
    pts = [ln for ln in ax.get_lines() if ln.get_marker() == "o"][0]
    np.testing.assert_allclose(pts.get_xdata(), table["h2o_index"])
    assert [t.get_text() for t in ax.texts] == ["b", "c", "d"]
    assert "CH$_4$" in ax.get_ylabel()
    with pytest.raises(UserError, match="no column"):
        plot_band_diagram(table, x="k_index")


def test_save_png_and_pdf(tmp_path, posterior):
    fig = plot_band_diagram(Table({"name": ["x"], "h2o_index": [0.5], "ch4_index": [0.9]}))
    png = save_figure(fig, tmp_path / "f.png")
    pdf = save_figure(fig, tmp_path / "f", fmt="pdf")
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"  # PNG signature (PNG specification, section 5.2)
    assert pdf.read_bytes()[:5] == b"%PDF-"  # PDF header (ISO 32000-1, section 7.5.2)
    with pytest.raises(UserError, match="not supported"):
        save_figure(fig, tmp_path / "f.svg")


def test_parameter_labels_carry_units():
    assert style.parameter_label("t_knot_3") == "$T_{3}$ [K]"
    assert "VMR" in style.parameter_label("log_vmr_CH4") and "_{4}" in style.parameter_label("log_vmr_CH4")
    assert style.parameter_label("brand_new_name") == "brand_new_name"


def test_photometry_envelope_may_exclude_the_best_fit(rng):
    # the MAP model need not lie inside the predictive interval; the figure must still draw
    datasets, best = _datasets(rng)
    env = {"phot": Envelope(lo1=best["phot"] * 1.1, hi1=best["phot"] * 1.2, lo2=best["phot"] * 1.05,
                            hi2=best["phot"] * 1.3)}
    fig = plot_spectrum(datasets, best, envelopes=env)
    bars = [c for c in fig.axes[0].collections if c.get_linewidth()[0] == 7]
    assert len(bars) == 2
    seg = np.asarray(bars[1].get_segments()[0])
    factor, _ = style.flux_scale(np.concatenate([d.flux for d in datasets]))
    np.testing.assert_allclose(seg[:, 1] * factor, [best["phot"][0] * 1.1, best["phot"][0] * 1.2])


def test_derived_truths_mass_matches_astropy():
    import astropy.constants as const
    import astropy.units as u

    from retrieve.plotting.run_figures import derived_truths

    truths = {"log_g": 4.4, "radius_rjup": 1.05, "log_vmr_H2O": -3.3, "log_vmr_CH4": -3.5, "log_vmr_CO": -5.0}
    out = derived_truths(truths)
    # M = g R^2 / G with astropy constants (IAU 2015 nominal R_Jup, M_Jup)
    g = 10 ** 4.4 * u.cm / u.s ** 2
    mass = (g * (1.05 * u.R_jup) ** 2 / const.G).to(u.M_jup).value
    assert out["mass_mjup"] == pytest.approx(mass, rel=1e-9, abs=0)
    # C/O of H2O, CH4 and CO: (CO + CH4) / (H2O + CO) (atom counting, common practice, no source)
    co = (10 ** -5.0 + 10 ** -3.5) / (10 ** -3.3 + 10 ** -5.0)
    assert out["c_to_o"] == pytest.approx(co, rel=1e-9, abs=0)
    assert {k: out[k] for k in truths} == truths


def test_band_labels_do_not_overlap(rng):
    datasets, best = _datasets(rng)
    bands = Table({"molecule": ["H2O", "CH4", "K"], "band": ["a", "b", "c"], "flag": ["detected"] * 3,
                   "window_lo_um": [1.10, 1.12, 1.50], "window_hi_um": [1.20, 1.22, 1.55]})
    ax = plot_spectrum(datasets, best, bands=bands).axes[0]
    pos = {t.get_text(): t.get_position() for t in ax.texts}
    # the two bands 0.02 µm apart get different label rows; the distant one stays on the first row
    assert pos["H$_{2}$O"][1] != pos["CH$_{4}$"][1]
    assert pos["K"][1] == pos["H$_{2}$O"][1]


def test_constrained_abundance_panel_zooms_on_the_posterior(posterior):
    fig = plot_abundances(posterior, ["H2O", "CH4"], upper_limits={"CH4": True},
                          prior_ranges={"H2O": (-12, -1), "CH4": (-12, -1)})
    q16, q50, q84 = np.quantile(posterior["log_vmr_H2O"], [0.16, 0.5, 0.84])
    lo, hi = fig.axes[0].get_xlim()
    assert lo < q16 and hi > q84 and (hi - lo) < 11  # narrower than the prior, still holding the 68 % interval
    assert fig.axes[1].get_xlim()[0] <= -12  # an upper limit keeps the prior's lower edge in view
