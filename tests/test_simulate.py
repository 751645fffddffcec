"""Simulated observations: noiseless model, noise statistics, covariance, files, CLI."""
import astropy.units as u
import numpy as np
import pytest
from astropy.modeling.physical_models import BlackBody

from retrieve.errors import ConfigError, InputFileError
from retrieve.opacity.table import OpacityTable, write_table
from retrieve.simulate import correlated_covariance, simulate

PER_UM = u.W / (u.m ** 2 * u.um)
WL = np.geomspace(0.9, 2.6, 500)


def _toy_table(species, seed):
    rng = np.random.default_rng(seed)
    t = np.array([300.0, 1000.0, 2000.0, 4000.0])
    p = np.array([1e-6, 1e-2, 1.0, 300.0])
    logv = -22.0 + np.sin(15 * WL + rng.uniform(0, 6))[None, None, :] + 0.2 * np.log10(t)[None, :, None] \
        + 0.05 * np.log10(p)[:, None, None]
    return OpacityTable("cross_section", species, WL, t, np.broadcast_to(logv, (4, 4, WL.size)), pressure_bar=p)


@pytest.fixture(scope="module")
def opacity_dir(tmp_path_factory):
    folder = tmp_path_factory.mktemp("opacity")
    for i, s in enumerate(["H2O", "CH4"]):
        write_table(_toy_table(s, i), folder / f"{s}.xsec.h5")
    return folder


def _config(opacity_dir, profile="guillot", **simulate_keys):
    params = {"log_g": 4.2, "radius_rjup": 1.1, "distance_pc": 30.0, "log_vmr_H2O": -3.5, "log_vmr_CH4": -4.0}
    if profile == "isothermal":
        params["t_iso"] = 1400.0
    else:
        params.update(t_int=1100.0, t_irr=0.0, log_kappa_ir=-2.0, log_gamma=0.0)
    sim = {"wavelength_range_um": [1.0, 2.2], "channels": 40, "resolving_power": 60.0, "snr": 20.0, "seed": 4}
    sim.update(simulate_keys)
    return {"object": {"name": "toy"},
            "model": {"absorbers": ["H2O", "CH4"], "profile": profile, "cia": [], "hminus": False,
                      "rayleigh": False, "opacity_dir": str(opacity_dir)},
            "parameters": params, "simulate": sim}


def test_noiseless_isothermal_spectrum_and_photometry(opacity_dir):
    cfg = _config(opacity_dir, profile="isothermal", noise=False, filters=["twomass-Ks", "twomass-J"])
    res = simulate(cfg)
    spec, phot = res.datasets
    dil = ((1.1 * u.R_jup) / (30 * u.pc)).to_value(u.one) ** 2
    bb = BlackBody(temperature=1400 * u.K, scale=1.0 * PER_UM / u.sr)
    ref = np.pi * bb(spec.wavelength_um * u.um).to_value(PER_UM / u.sr) * dil
    # isothermal → π B_λ (R/d)^2 (astropy BlackBody); channel averaging of this smooth curve
    # over a 2 % wide channel shifts it by < 1e-3 (common practice, no source)
    np.testing.assert_allclose(spec.flux, ref, rtol=1e-3)
    assert phot.filters == ["twomass-J", "twomass-Ks"]   # sorted by effective wavelength
    import speclite.filters

    for name, value in zip(phot.filters, phot.flux):
        resp = speclite.filters.load_filter(name)
        lam = resp.wavelength / 1e4                       # Å -> µm
        f = np.pi * bb(lam * u.um).to_value(PER_UM / u.sr) * dil
        # photon-weighted mean flux density ∫ f λ R dλ / ∫ λ R dλ over speclite's response curve
        expected = np.trapezoid(f * lam * resp.response, lam) / np.trapezoid(lam * resp.response, lam)
        assert value == pytest.approx(expected, rel=2e-3, abs=0.0)


def test_white_noise_statistics_and_seed(opacity_dir):
    cfg = _config(opacity_dir, channels=1500, snr=10.0)
    a = simulate(cfg)
    b = simulate(cfg)
    c = simulate(cfg, seed=99)
    d = a.datasets[0]
    np.testing.assert_array_equal(d.flux, b.datasets[0].flux)                  # same seed, same draw
    assert not np.array_equal(d.flux, c.datasets[0].flux)
    model = a.model_flux["sim"]
    np.testing.assert_allclose(d.uncertainty, np.median(model) / 10.0, rtol=1e-12, atol=0)  # documented σ definition
    z = (d.flux - model) / d.uncertainty
    # standard normal: mean within 4/√n, variance within 4·√(2/n) (sampling distributions of
    # the mean and variance of n normal draws; common practice, no source)
    n = z.size
    assert abs(z.mean()) < 4 / np.sqrt(n)
    assert abs(z.var() - 1.0) < 4 * np.sqrt(2.0 / n)


def test_correlated_noise_follows_its_covariance(opacity_dir):
    cfg = _config(opacity_dir, channels=400, correlated_fraction=0.6, correlation_length_um=0.05)
    res = simulate(cfg)
    d = res.datasets[0]
    from retrieve.inference.noise import NoiseModel

    ref = NoiseModel(d.wavelength_um, d.uncertainty ** 2, correlated=True).covariance_matrix(
        gp_amp=0.6, gp_length_um=0.05)
    # the likelihood's kernel (Greco & Brandt 2016, ApJ 833, 134), independent implementation
    np.testing.assert_allclose(d.covariance, ref, rtol=1e-12)
    np.testing.assert_allclose(correlated_covariance(d.wavelength_um, d.uncertainty, 0.6, 0.05), ref, rtol=1e-12)
    r = d.flux - res.model_flux["sim"]
    white = np.linalg.solve(np.linalg.cholesky(d.covariance), r)
    n = white.size
    assert abs(white.var() - 1.0) < 4 * np.sqrt(2.0 / n)     # whitened residuals are unit normal (as above)
    # neighbouring channels are correlated: lag-1 correlation ≈ A exp(-½(Δλ/ℓ)²) ≈ 0.6 here
    z = r / d.uncertainty
    lag1 = np.corrcoef(z[:-1], z[1:])[0, 1]
    assert lag1 > 0.3


def test_cli_writes_dataset_with_truths(opacity_dir, tmp_path):
    from retrieve.cli.main import main
    from retrieve.observations.readers import read_dataset

    cfg_path = tmp_path / "sim.toml"
    cfg_path.write_text(f"""
[object]
name = "toy"
[model]
absorbers = ["H2O", "CH4"]
profile = "guillot"
cia = []
hminus = false
rayleigh = false
opacity_dir = "{opacity_dir}"
[parameters]
log_g = 4.2
radius_rjup = 1.1
parallax_mas = 33.3
log_vmr_H2O = -3.5
log_vmr_CH4 = {{ prior = "uniform", low = -8.0, high = -2.0 }}
t_int = 1100.0
t_irr = 0.0
log_kappa_ir = -2.0
log_gamma = 0.0
[simulate]
wavelength_range_um = [1.0, 2.2]
channels = 30
resolving_power = 50.0
snr = 15.0
correlated_fraction = 0.5
correlation_length_um = 0.04
truths = {{ log_vmr_CH4 = -4.5 }}
""")
    out = tmp_path / "spec.ecsv"
    assert main(["simulate", str(cfg_path), "--out", str(out), "--seed", "3"]) == 0
    d = read_dataset(out)
    assert d.n_points == 30 and d.covariance is not None
    assert d.meta["truths"]["log_vmr_CH4"] == -4.5 and d.meta["truths"]["parallax_mas"] == 33.3
    assert d.meta["simulation"]["seed"] == 3
    assert main(["simulate", str(cfg_path), "--out", str(out)]) == 2          # exists: user error
    assert main(["simulate", str(cfg_path), "--out", str(out), "--overwrite", "--seed", "4"]) == 0
    assert not np.array_equal(read_dataset(out).flux, d.flux)


def test_config_errors(opacity_dir):
    cfg = _config(opacity_dir)
    cfg["simulate"]["chanels"] = 3
    with pytest.raises(ConfigError, match="did you mean 'channels'"):
        simulate(cfg)
    cfg = _config(opacity_dir)
    del cfg["parameters"]["t_int"]
    with pytest.raises(ConfigError, match="t_int"):
        simulate(cfg)
    cfg = _config(opacity_dir, correlated_fraction=0.5)
    with pytest.raises(ConfigError, match="correlation_length_um"):
        simulate(cfg)
    cfg = _config(opacity_dir, filters=["twomass-H"])
    del cfg["simulate"]["snr"], cfg["simulate"]["wavelength_range_um"], cfg["simulate"]["channels"]
    with pytest.raises(ConfigError, match="snr_photometry"):
        simulate(cfg)
    cfg["simulate"]["snr_photometry"] = 8.0       # photometry alone is a valid simulation
    res = simulate(cfg)
    assert [d.kind for d in res.datasets] == ["photometry"]
    # documented σ: the median model flux over the S/N
    np.testing.assert_allclose(res.datasets[0].uncertainty, np.median(res.model_flux["sim_phot"]) / 8.0,
                               rtol=1e-12, atol=0)


def test_template_dataset_and_its_errors(opacity_dir, tmp_path):
    from retrieve.simulate import write_simulation

    first = simulate(_config(opacity_dir, channels=25))
    template = tmp_path / "template.ecsv"
    write_simulation(first, template)
    cfg = _config(opacity_dir)
    cfg["simulate"] = {"template": "template.ecsv", "seed": 1}        # no snr: the template's errors
    res = simulate(cfg, base_dir=tmp_path)
    d = res.datasets[0]
    np.testing.assert_allclose(d.wavelength_um, first.datasets[0].wavelength_um, rtol=1e-12)
    np.testing.assert_allclose(d.uncertainty, first.datasets[0].uncertainty, rtol=1e-12)
    np.testing.assert_allclose(res.model_flux["sim"], first.model_flux["sim"], rtol=1e-10)   # same grid, same model
    with pytest.raises(InputFileError, match="exists"):
        write_simulation(first, template)


def test_simulated_spectrum_feeds_the_fit_posterior(opacity_dir, tmp_path):
    # end to end: simulate -> write -> read -> log-posterior of the fit engine; the truth must be
    # far more probable than a clearly wrong water abundance (χ² grows by ≫ 1; common practice)
    from retrieve.inference.config import parse_config
    from retrieve.inference.run import build_posterior
    from retrieve.observations import ObjectData
    from retrieve.observations.readers import read_dataset
    from retrieve.simulate import write_simulation

    sim = _config(opacity_dir, channels=40, snr=30.0, correlated_fraction=0.3, correlation_length_um=0.03)
    write_simulation(simulate(sim), tmp_path / "sim.ecsv")
    data = ObjectData("toy", [read_dataset(tmp_path / "sim.ecsv")])
    fit_cfg = {k: v for k, v in sim.items() if k != "simulate"}
    fit_cfg["parameters"] = {**sim["parameters"], "log_vmr_H2O": {"prior": "uniform", "low": -8.0, "high": -1.0}}
    fit_cfg["datasets"] = [{"name": "sim", "file": str(tmp_path / "sim.ecsv")}]
    config = parse_config(fit_cfg, where="fit.toml", base_dir=tmp_path)
    post, model = build_posterior(config, data)
    assert post.param_names == ["log_vmr_H2O"]
    at_truth, wrong = post([-3.5]), post([-1.5])
    assert np.isfinite(at_truth) and at_truth > wrong + 10.0
