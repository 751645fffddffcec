"""The assembled forward model, on small opacity tables built here (no invented files are committed)."""
import dataclasses

import astropy.units as u
import numpy as np
import pytest
from astropy.modeling.physical_models import BlackBody

from retrieve.atmosphere import profiles as profiles_mod
from retrieve.constants import AMU_CGS, BAR_TO_DYN_CM2, PC_M, R_JUP_M, SIGMA_SB_SI
from retrieve.errors import ConfigError, ModelEvaluationError, OpacityTableError
from retrieve.forward_model import ForwardModel, ModelSpec
from retrieve.opacity.molecular import MolecularOpacity
from retrieve.opacity.opacity_set import OpacitySet
from retrieve.opacity.table import OpacityTable, write_table

PER_UM = u.W / (u.m ** 2 * u.um)
NO_CONTINUUM = {"cia": [], "hminus": False, "rayleigh": False}


def smooth_table(species, wavelength_um, seed, kind="cross_section", n_g=4,
                 temperature_K=(200.0, 700.0, 1500.0, 3000.0, 4500.0), pressure_bar=(1e-6, 1e-3, 1.0, 300.0)):
    """A random-but-smooth toy table: bands of log10 σ varying with λ, T and P."""
    rng = np.random.default_rng(seed)
    t = np.asarray(temperature_K)
    p = np.asarray(pressure_bar)
    wl = np.asarray(wavelength_um)
    phase = rng.uniform(0, 2 * np.pi, 3)
    shape = (np.sin(12 * wl + phase[0]) + 0.5 * np.sin(40 * wl + phase[1]))[None, None, :]
    logv = (-22.0 + 1.5 * shape + 0.3 * np.log10(t / 1000.0)[None, :, None]
            + 0.1 * np.log10(p)[:, None, None] * np.cos(5 * wl + phase[2])[None, None, :])
    extra = {}
    if kind == "ktable":
        g, w = np.polynomial.legendre.leggauss(n_g)
        g, w = 0.5 * (g + 1), 0.5 * w
        logv = logv[..., None] + np.linspace(-1.0, 1.0, n_g)  # ascending along g
        edges = np.concatenate([[wl[0] - 0.5 * (wl[1] - wl[0])], 0.5 * (wl[1:] + wl[:-1]),
                                [wl[-1] + 0.5 * (wl[-1] - wl[-2])]])
        extra = dict(g_points=g, g_weights=w, wavelength_edges_um=edges)
    return OpacityTable(kind, species, wl, t, logv, pressure_bar=p, **extra)


def grey_table(species, wavelength_um, log10_sigma, pressure_bar=(1e-9, 1e3)):
    t = np.array([10.0, 20000.0])
    p = np.asarray(pressure_bar)
    return OpacityTable("cross_section", species, wavelength_um, t,
                        np.full((p.size, 2, len(wavelength_um)), log10_sigma), pressure_bar=p)


def base_params(absorbers, **kw):
    params = {"log_g": 4.0, "radius_rjup": 1.2, "distance_pc": 20.0}
    params.update({f"log_vmr_{s}": -4.0 for s in absorbers})
    params.update(kw)
    return params


WL = np.geomspace(0.9, 2.5, 300)


@pytest.fixture(scope="module")
def toy_set():
    species = ["H2O", "CH4", "CO"]
    return OpacitySet.from_tables({s: smooth_table(s, WL, i) for i, s in enumerate(species)}), species


@pytest.mark.parametrize("kind", ["cross_section", "ktable"])
def test_isothermal_atmosphere_emits_a_blackbody(kind):
    species = ["H2O", "CH4"]
    opac = OpacitySet.from_tables({s: smooth_table(s, WL, i, kind=kind) for i, s in enumerate(species)})
    spec = ModelSpec.from_mapping({"absorbers": species, "profile": "isothermal", **NO_CONTINUUM})
    model = ForwardModel(spec, [], opac)
    out = model.evaluate(base_params(species, t_iso=1234.5))
    bb = BlackBody(temperature=1234.5 * u.K, scale=1.0 * PER_UM / u.sr)(WL * u.um) * np.pi * u.sr
    dilution = ((1.2 * u.R_jup) / (20.0 * u.pc)).to_value(u.one) ** 2
    # isothermal: I = B_λ(T) in every direction whatever the opacity, F = π B (R/d)^2
    # (common practice); reference: astropy.modeling.physical_models.BlackBody and astropy units
    np.testing.assert_allclose(out.flux_highres, bb.to_value(PER_UM) * dilution, rtol=1e-6)


def hopf_q(tau):
    """Hopf function q(τ) of the exact grey (Milne) problem.

    Mihalas, Stellar Atmospheres, 2nd ed. (1978), ch. 3, table of q(τ) (values from memory of
    that table; q(0) = 1/√3 exactly, q(∞) = 0.710446).  During development the interior values
    were compared with a collocation solution of the Milne equation q = E3/2 + Λ[q] (not part of
    the suite: it takes minutes); they agreed to 3e-4.
    """
    tab_tau = np.array([0.0, 0.01, 0.03, 0.05, 0.1, 0.2, 0.3, 0.4, 0.5, 0.6, 0.8, 1.0, 1.5, 2.0, 2.5, 3.0, 20.0])
    tab_q = np.array([0.577350, 0.588236, 0.601242, 0.610758, 0.627919, 0.649550, 0.663365, 0.673090,
                      0.680240, 0.685801, 0.693534, 0.698540, 0.705130, 0.707916, 0.709191, 0.709806,
                      0.710446])
    return np.interp(tau, tab_tau, tab_q)


class HopfProfile(profiles_mod.TPProfile):
    """T(τ) of the exact grey atmosphere, τ = κ P / g with a fixed grey κ (test-only plug-in)."""

    name = "hopf_test"
    parameter_names = ["t_eff", "log_g"]
    kappa = None   # cm^2 g^-1, set by the test

    def temperature(self, pressure_bar, params):
        tau = self.kappa * pressure_bar * BAR_TO_DYN_CM2 / 10 ** params["log_g"]
        return (0.75 * params["t_eff"] ** 4 * (tau + hopf_q(tau))) ** 0.25


def test_grey_hopf_atmosphere_emits_sigma_teff4(monkeypatch):
    # the table's surface value is the exact q(0) = 1/√3 (Hopf's grey solution; Mihalas 1978, ch. 3)
    assert hopf_q(0.0) == pytest.approx(1.0 / np.sqrt(3.0), abs=1e-6)
    wl = np.geomspace(0.25, 400.0, 2500)
    log_sigma = -22.0
    opac = OpacitySet.from_tables({"H2O": grey_table("H2O", wl, log_sigma)})
    kappa = 10 ** log_sigma / (18.01528 * AMU_CGS)          # pure H2O gas (log_vmr = 0)
    monkeypatch.setattr(HopfProfile, "kappa", kappa)
    monkeypatch.setitem(profiles_mod.PROFILES, "hopf_test", HopfProfile)
    g = 1e4
    p_top = 1e-6 * g / (kappa * BAR_TO_DYN_CM2)              # τ = 1e-6 ... 40
    p_bot = 40.0 * g / (kappa * BAR_TO_DYN_CM2)
    spec = ModelSpec.from_mapping({"absorbers": ["H2O"], "profile": "hopf_test", "layers": 250,
                                   "angles": 12, "pressure_range_bar": [p_top, p_bot], **NO_CONTINUUM})
    model = ForwardModel(spec, [], opac)
    # distance chosen so that (R/d)^2 = 1: the output is then the surface flux
    out = model.evaluate({"log_g": 4.0, "radius_rjup": 1.0, "distance_pc": R_JUP_M / PC_M,
                          "log_vmr_H2O": 0.0, "t_eff": 1000.0})
    total = np.trapezoid(out.flux_highres, wl)
    # grey atmosphere in radiative equilibrium with the exact Hopf T(τ) carries F = σ T_eff^4
    # (Mihalas 1978, ch. 3, the grey atmosphere); σ from astropy.constants via retrieve.constants
    assert total == pytest.approx(SIGMA_SB_SI * 1000.0 ** 4, rel=5e-3, abs=0.0)
    # tighter than asked: with 12 angles and 250 layers the scheme is good to ~3e-4 here; the
    # remaining error comes from interpolating the tabulated q(τ)
    assert total == pytest.approx(SIGMA_SB_SI * 1000.0 ** 4, rel=1e-3, abs=0.0)


def test_dilution_distance_and_parallax(toy_set):
    opac, species = toy_set
    spec = ModelSpec.from_mapping({"absorbers": species, "profile": "guillot", **NO_CONTINUUM})
    model = ForwardModel(spec, [], opac)
    p = base_params(species, t_int=900.0, t_irr=200.0, log_kappa_ir=-2.0, log_gamma=-0.5)
    a = model.evaluate(p)
    b = model.evaluate({**{k: v for k, v in p.items() if k != "distance_pc"}, "parallax_mas": 50.0})
    # parallax 50 mas = 20 pc (definition of the parsec)
    np.testing.assert_allclose(a.flux_highres, b.flux_highres, rtol=1e-13)
    c = model.evaluate({**p, "radius_rjup": 2.4})
    np.testing.assert_allclose(c.flux_highres, 4 * a.flux_highres, rtol=1e-13)   # F ∝ R^2 (definition)
    assert np.all(np.isfinite(a.flux_highres)) and np.all(a.flux_highres > 0)   # thermal emission is positive


def test_contribution_function_sums_to_one(toy_set):
    opac, species = toy_set
    spec = ModelSpec.from_mapping({"absorbers": species, "profile": "gradient",
                                   "gradient_pressures_bar": [1e-5, 0.1, 100.0], **NO_CONTINUUM})
    model = ForwardModel(spec, [], opac)
    p = base_params(species, t_deep=2500.0, dlnt_dlnp_0=0.05, dlnt_dlnp_1=0.15)
    plain = model.evaluate(p)
    with_cf = model.evaluate(p, contribution=True)
    np.testing.assert_allclose(with_cf.flux_highres, plain.flux_highres, rtol=1e-10)   # same solution, two forms
    assert with_cf.contribution.shape == (model.pressure_bar.size, WL.size)
    np.testing.assert_allclose(with_cf.contribution.sum(axis=0), 1.0, rtol=1e-10)


def test_molecular_interpolation_against_scipy(tmp_path):
    from scipy.interpolate import RegularGridInterpolator

    table = smooth_table("H2O", WL, 7)
    levels = np.logspace(-7, 3, 25)            # includes levels outside the table (clamped)
    mol = MolecularOpacity([table], levels, WL)
    temps = np.linspace(250.0, 4400.0, 25)
    sigma = mol.cross_sections(temps)[:, 0, :]
    logp = np.clip(np.log10(levels), np.log10(table.pressure_bar[0]), np.log10(table.pressure_bar[-1]))
    ref = RegularGridInterpolator((np.log10(table.pressure_bar), table.temperature_K),
                                  table.log10_value.astype(np.float64))
    expected = 10 ** ref(np.column_stack([logp, temps]))
    # bilinear in (log10 P, T) of log10 σ, as specified in retrieve/opacity/table.py;
    # reference: scipy.interpolate.RegularGridInterpolator; float32 hot path → 1e-5
    np.testing.assert_allclose(sigma, expected, rtol=1e-5)
    with pytest.raises(ModelEvaluationError) as err:
        mol.cross_sections(np.full(25, 5000.0))
    assert err.value.reason == "T above table range"
    with pytest.raises(ModelEvaluationError) as err:
        mol.cross_sections(np.full(25, 100.0))
    assert err.value.reason == "T below table range"


def test_tables_on_other_wavelength_grids_are_regridded():
    fine = np.geomspace(0.9, 2.5, 601)
    a = smooth_table("H2O", WL, 1)
    b = smooth_table("CH4", fine, 2)
    mol = MolecularOpacity([a, b], np.logspace(-3, 1, 5), WL)
    direct = MolecularOpacity([dataclasses.replace(b, log10_value=b.log10_value)], np.logspace(-3, 1, 5), fine)
    s_model = mol.cross_sections(np.full(5, 1000.0))[:, 1, :]
    s_fine = direct.cross_sections(np.full(5, 1000.0))[:, 0, :]
    # linear interpolation in λ of log10 σ (table.regrid_wavelength), checked with numpy.interp;
    # the regridded table is stored in float32 once more, hence 3e-5
    ref = 10 ** np.array([np.interp(WL, fine, np.log10(row)) for row in s_fine])
    np.testing.assert_allclose(s_model, ref, rtol=3e-5)


def test_bad_parameters_raise_model_evaluation_error(toy_set):
    opac, species = toy_set
    spec = ModelSpec.from_mapping({"absorbers": species, "profile": "isothermal", **NO_CONTINUUM})
    model = ForwardModel(spec, [], opac)
    cases = {
        "non-finite parameter": base_params(species, t_iso=float("nan")),
        "T above table range": base_params(species, t_iso=9000.0),
        "T below table range": base_params(species, t_iso=50.0),
        "VMRs sum above 1": base_params(species, t_iso=1000.0, log_vmr_H2O=0.0),
        "parameter out of range": base_params(species, t_iso=1000.0, radius_rjup=-1.0),
        "non-physical temperature": base_params(species, t_iso=-5.0),
    }
    for reason, params in cases.items():
        with pytest.raises(ModelEvaluationError) as err:
            model.evaluate(params)
        assert err.value.reason == reason
    with pytest.raises(ModelEvaluationError):
        model.evaluate(base_params(species, t_iso=1000.0, log_g=float("inf")))
    for extreme in ({"log_g": 400.0}, {"log_g": -400.0}, {"t_iso": 1e200}, {"radius_rjup": 1e300},
                    {"log_vmr_CO": 500.0}, {"distance_pc": 1e-320}):
        with pytest.raises(ModelEvaluationError):        # never a crash (OverflowError etc.)
            model.evaluate({**base_params(species, t_iso=1000.0), **extreme})
    guillot = ForwardModel(ModelSpec.from_mapping({"absorbers": species, "profile": "guillot", **NO_CONTINUUM}),
                           [], opac)
    for extreme in ({"t_int": 1e100}, {"log_kappa_ir": 400.0}, {"log_gamma": -400.0}):
        params = base_params(species, t_int=900.0, t_irr=100.0, log_kappa_ir=-2.0, log_gamma=0.0)
        with pytest.raises(ModelEvaluationError):
            guillot.evaluate({**params, **extreme})
    with pytest.raises(ConfigError, match="t_iso"):
        model.evaluate(base_params(species))


def test_model_spec_validation():
    with pytest.raises(ConfigError, match="did you mean 'absorbers'"):
        ModelSpec.from_mapping({"absorber": ["H2O"]}, "fit.toml [model]")
    with pytest.raises(ConfigError, match="missing required key 'absorbers'"):
        ModelSpec.from_mapping({}, "fit.toml [model]")
    with pytest.raises(ConfigError, match="does not apply"):
        ModelSpec.from_mapping({"absorbers": ["H2O"], "profile": "isothermal", "knot_pressures_bar": [1.0, 2.0]})
    with pytest.raises(ConfigError, match="layers"):
        ModelSpec.from_mapping({"absorbers": ["H2O"], "layers": "80"})
    spec = ModelSpec.from_mapping({"absorbers": ["H2O"], "profile": "knots", "knot_pressures_bar": [1e-3, 1.0, 10.0],
                                   "opacity_dir": "tables"}, base_dir="/data/run")
    # documented defaults (DEVELOPERS.md TOML layout; retrieve/atmosphere/pressure.py)
    assert spec.layers == 80 and spec.angles == 4 and spec.pressure_range_bar == (1e-5, 100.0)
    assert str(spec.opacity_dir) == "/data/run/tables"


def test_parameter_names_and_groups(toy_set):
    opac, species = toy_set
    spec = ModelSpec.from_mapping({"absorbers": species, "profile": "knots", "cloud": "grey",
                                   "knot_pressures_bar": [1e-3, 1.0, 10.0], **NO_CONTINUUM})
    model = ForwardModel(spec, [], opac)
    # names and order per DEVELOPERS.md "Forward-model parameters"
    assert model.parameter_names == ["log_g", "radius_rjup", "distance_pc", "t_knot_0", "t_knot_1", "t_knot_2",
                                     "log_vmr_H2O", "log_vmr_CH4", "log_vmr_CO", "log_p_cloud_top",
                                     "cloud_tau_slope"]
    assert ("distance_pc", "parallax_mas") in model.required_parameters()
    cov = model.coverage()
    # the toy tables' axes (smooth_table defaults above)
    assert cov["temperature_K"] == (200.0, 4500.0) and cov["pressure_bar"] == (1e-6, 300.0)


def test_grey_cloud_dims_the_spectrum(toy_set):
    opac, species = toy_set
    spec = ModelSpec.from_mapping({"absorbers": species, "profile": "guillot", "cloud": "grey", **NO_CONTINUUM})
    model = ForwardModel(spec, [], opac)
    p = base_params(species, t_int=1000.0, t_irr=0.0, log_kappa_ir=-1.5, log_gamma=0.0)
    deep = model.evaluate({**p, "log_p_cloud_top": 1.9, "cloud_tau_slope": 5.0}).flux_highres
    high = model.evaluate({**p, "log_p_cloud_top": -3.0, "cloud_tau_slope": 5.0}).flux_highres
    # an opaque deck high up emits at its own (cold, ~upper-atmosphere) temperature: less flux
    # everywhere (common practice, no source); upper bound: B of the coldest level
    assert np.all(high < deep)
    t_top = model.evaluate({**p, "log_p_cloud_top": -3.0, "cloud_tau_slope": 5.0}).temperature_K
    b_hot = BlackBody(temperature=t_top.max() * u.K, scale=1.0 * PER_UM / u.sr)(WL * u.um).to_value(PER_UM / u.sr)
    dil = (1.2 * R_JUP_M / (20.0 * PC_M)) ** 2
    assert np.all(high <= np.pi * b_hot * dil)


def test_opacity_set_search_order_and_errors(tmp_path, monkeypatch):
    first, second = tmp_path / "first", tmp_path / "second"
    first.mkdir(), second.mkdir()
    write_table(smooth_table("H2O", WL, 1), first / "H2O.xsec.h5")
    write_table(smooth_table("H2O", WL, 2), second / "H2O.xsec.h5")
    write_table(smooth_table("CH4", WL, 3), second / "CH4.xsec.h5")
    write_table(smooth_table("CO", WL, 4, kind="ktable"), second / "CO.ktable.h5")
    monkeypatch.setenv("RETRIEVE_OPACITY_DIR", str(second))
    bundled = tmp_path / "bundled"          # stands in for the project's opacity_tables/
    bundled.mkdir()
    write_table(smooth_table("NH3", WL, 5), bundled / "NH3.xsec.h5")
    monkeypatch.setattr("retrieve.opacity.opacity_set.project_opacity_dir", lambda: bundled)
    got = OpacitySet.load(["H2O", "CH4", "NH3"], [], opacity_dir=first)
    # DEVELOPERS.md search order: [model] opacity_dir, then $RETRIEVE_OPACITY_DIR, then opacity_tables/
    assert got.molecular["H2O"].path.parent == first and got.molecular["CH4"].path.parent == second
    assert got.molecular["NH3"].path.parent == bundled
    assert got.kind == "cross_section"
    with pytest.raises(OpacityTableError, match=r"no opacity table for K .*first.*second.*bundled"):
        OpacitySet.load(["K"], [], opacity_dir=first)
    with pytest.raises(OpacityTableError, match="mix kinds"):
        OpacitySet.load(["H2O", "CO"], [], opacity_dir=first)
    with pytest.raises(OpacityTableError, match="no CIA table for H2-H2"):
        OpacitySet.load(["H2O"], ["H2-H2"], opacity_dir=first)


def test_full_continuum_model_runs(toy_set):
    opac, species = toy_set
    spec = ModelSpec.from_mapping({"absorbers": species, "profile": "guillot", "cia": [],
                                   "hminus": True, "rayleigh": True})
    model = ForwardModel(spec, [], opac)
    p = base_params(species, t_int=1500.0, t_irr=0.0, log_kappa_ir=-2.0, log_gamma=0.0)
    with_cont = model.evaluate(p).flux_highres
    bare = ForwardModel(ModelSpec.from_mapping({"absorbers": species, "profile": "guillot", **NO_CONTINUUM}),
                        [], opac).evaluate(p).flux_highres
    # extra opacity in a T increasing inward atmosphere can only lower the emergent flux
    # (common practice, no source)
    assert np.all(with_cont <= bare * (1 + 1e-12)) and np.all(np.isfinite(with_cont))
    # ... and the continuum is actually applied: the flux drops somewhere (else the check above is void)
    assert np.min(with_cont / bare) < 1 - 1e-3


def test_tiny_vmr_and_cross_section_products_keep_precision():
    # σ ~ 1e-31 cm² and VMR 1e-14: σ·x ~ 1e-45 would be a denormal float32; the model must keep
    # the float64-reference value (common practice, no source: IEEE 754 float32 range)
    table = grey_table("CO", WL, -31.0)
    spec = ModelSpec.from_mapping({"absorbers": ["CO"], "profile": "isothermal", **NO_CONTINUUM})
    model = ForwardModel(spec, [], OpacitySet.from_tables({"CO": table}))
    params = base_params(["CO"], t_iso=1000.0, log_vmr_CO=-14.0)
    t = model.profile.temperature(model.pressure_bar, params)
    comp = model.chemistry.evaluate(params, t.size)
    kappa = model._kappa(t, comp)
    expected = 1e-31 * 1e-14 / (comp.mmw_amu * AMU_CGS)
    np.testing.assert_allclose(kappa, np.broadcast_to(expected[:, None], kappa.shape), rtol=1e-5)


def test_datasets_set_the_window_and_get_their_points(toy_set):
    from retrieve.instrument import required_wavelength_range
    from retrieve.observations.dataset import Dataset

    opac, species = toy_set
    edges = np.geomspace(1.1, 1.8, 31)
    spec_ds = Dataset(name="ifs", kind="spectrum", wavelength_um=np.sqrt(edges[1:] * edges[:-1]),
                      flux=np.ones(30), uncertainty=np.ones(30), resolving_power=50.0,
                      channel_edges_um=np.column_stack([edges[:-1], edges[1:]]))
    spec = ModelSpec.from_mapping({"absorbers": species, "profile": "isothermal", **NO_CONTINUUM})
    model = ForwardModel(spec, [spec_ds], opac)
    lo, hi = required_wavelength_range(spec_ds)
    wl = model.wavelength_um
    # the grid covers the window with one grid point of margin on each side, and no more
    assert wl[0] <= lo < wl[1] and wl[-2] < hi <= wl[-1]
    out = model.evaluate(base_params(species, t_iso=1500.0))
    bb = BlackBody(temperature=1500 * u.K, scale=1.0 * PER_UM / u.sr)
    dil = ((1.2 * u.R_jup) / (20.0 * u.pc)).to_value(u.one) ** 2
    ref = np.pi * bb(spec_ds.wavelength_um * u.um).to_value(PER_UM / u.sr) * dil
    # an isothermal model is a smooth blackbody; LSF + channel averages move it by < 1e-3
    # (astropy BlackBody; smoothing bound: common practice, no source)
    np.testing.assert_allclose(out.per_dataset["ifs"], ref, rtol=1e-3)
    wide = Dataset(name="wide", kind="spectrum", wavelength_um=np.array([0.5, 1.0, 2.0]), flux=np.ones(3),
                   uncertainty=np.ones(3))
    with pytest.raises(ConfigError, match="do not cover"):
        ForwardModel(spec, [wide], opac)


def test_bad_cloud_parameters_are_refused(toy_set):
    opac, species = toy_set
    spec = ModelSpec.from_mapping({"absorbers": species, "profile": "isothermal", "cloud": "grey", **NO_CONTINUUM})
    model = ForwardModel(spec, [], opac)
    with pytest.raises(ModelEvaluationError) as err:
        model.evaluate(base_params(species, t_iso=1000.0, log_p_cloud_top=-1.0, cloud_tau_slope=-2.0))
    assert err.value.reason == "parameter out of range"


def test_flat_k_distributions_equal_cross_sections():
    # a k-table whose k(g) is flat in every bin is a monochromatic cross section, and random
    # overlap of flat distributions is the plain VMR-weighted sum (Lacis & Oinas 1991, JGR 96, 9027)
    species = ["H2O", "CH4"]
    xs = {s: smooth_table(s, WL, i) for i, s in enumerate(species)}
    kt = {}
    for s, table in xs.items():
        k = smooth_table(s, WL, 0, kind="ktable", n_g=4)
        kt[s] = dataclasses.replace(k, log10_value=np.repeat(table.log10_value[..., None], 4, axis=-1))
    mapping = {"absorbers": species, "profile": "guillot", **NO_CONTINUUM}
    p = base_params(species, t_int=1000.0, t_irr=300.0, log_kappa_ir=-2.0, log_gamma=-0.3)
    a = ForwardModel(ModelSpec.from_mapping(mapping), [], OpacitySet.from_tables(xs)).evaluate(p, contribution=True)
    b = ForwardModel(ModelSpec.from_mapping(mapping), [], OpacitySet.from_tables(kt)).evaluate(p, contribution=True)
    np.testing.assert_allclose(b.flux_highres, a.flux_highres, rtol=1e-6)
    np.testing.assert_allclose(b.contribution, a.contribution, rtol=1e-5, atol=1e-12)


def test_any_parameters_give_a_spectrum_or_a_model_error(toy_set):
    # property: evaluate() returns finite fluxes or raises ModelEvaluationError, whatever the numbers
    # (the likelihood relies on it; common practice, no source)
    from hypothesis import HealthCheck, example, given, settings
    from hypothesis import strategies as st

    opac, species = toy_set
    model = ForwardModel(ModelSpec.from_mapping({"absorbers": species, "profile": "knots", "cloud": "grey",
                                                 "knot_pressures_bar": [1e-3, 0.1, 10.0], **NO_CONTINUUM}),
                         [], opac)
    num = st.one_of(st.floats(allow_nan=True, allow_infinity=True), st.floats(-10, 10), st.floats(100, 5000))
    # each parameter is either wild or a valid value, so that both outcomes are drawn
    valid = base_params(species, t_knot_0=900.0, t_knot_1=1200.0, t_knot_2=1800.0,
                        log_p_cloud_top=0.5, cloud_tau_slope=2.0)
    assert set(valid) == set(model.parameter_names)
    draw = {n: st.one_of(st.just(valid[n]), st.floats(valid[n] * 0.5, valid[n] * 1.5), num)
            if valid[n] > 0 else st.one_of(st.just(valid[n]), st.floats(valid[n] * 1.5, valid[n] * 0.5), num)
            for n in model.parameter_names}

    @settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.too_slow])
    @given(st.fixed_dictionaries(draw))
    @example(valid)
    def check(params):
        try:
            out = model.evaluate(params)
        except ModelEvaluationError:
            return
        evaluated.append(1)
        assert np.all(np.isfinite(out.flux_highres))

    evaluated = []
    check()
    # the finite-flux branch must have been reached, not only the error branch (before the valid
    # draws above, none of 150 examples ever got past the error branch)
    assert len(evaluated) >= 2   # the explicit valid example and at least one drawn one


def _tau_knots_model(opac, species, depths=(1e-3, 0.1, 10.0, 1e3), **extra):
    spec = ModelSpec.from_mapping({"absorbers": species, "profile": "tau-knots", "knot_optical_depths": list(depths),
                                   **NO_CONTINUUM, **extra})
    return ForwardModel(spec, [], opac)


def test_tau_knots_sit_at_their_grey_optical_depth():
    species = ["H2O", "CH4"]
    opac = OpacitySet.from_tables({"H2O": grey_table("H2O", WL, -21.0), "CH4": grey_table("CH4", WL, -22.0)})
    model = _tau_knots_model(opac, species)
    prof = model.profile
    assert model.parameter_names == ["log_g", "radius_rjup", "distance_pc", "t_knot_0", "t_knot_1", "t_knot_2",
                                     "t_knot_3", "log_vmr_H2O", "log_vmr_CH4"]
    # the Planck-weighted mean of a constant cross section is that constant
    ref = prof.reference_cross_sections()
    assert ref["H2O"] == pytest.approx(1e-21, rel=1e-6, abs=0.0) and ref["CH4"] == pytest.approx(1e-22, rel=1e-6, abs=0.0)
    params = base_params(species, log_g=4.4, log_vmr_H2O=-3.0, log_vmr_CH4=-4.0)
    # κ̄ = Σ x σ / (μ m_u); μ by hand from the masses (H2O 18.015, CH4 16.043, H2 2.016, He 4.003 amu,
    # values from memory) and He/H2 = 2 n_He / n_H with log ε(He) = 10.93 (Asplund et al. 2009, Table 1)
    x = np.array([1e-3, 1e-4])
    rest = 1.0 - x.sum()
    he_h2 = 2.0 * 10 ** (10.93 - 12.0)
    f_he = he_h2 / (1.0 + he_h2)
    mu = x @ [18.015, 16.043] + rest * ((1 - f_he) * 2.016 + f_he * 4.003)
    kappa = (x @ [1e-21, 1e-22]) / (mu * AMU_CGS)
    assert prof.grey_opacity(params) == pytest.approx(kappa, rel=2e-4, abs=0.0)
    # hydrostatic grey optical depth at each knot, τ = κ̄ P / g, is the knot's depth
    p_k = prof.knot_pressures_for(params)
    np.testing.assert_allclose(prof.grey_opacity(params) * p_k * BAR_TO_DYN_CM2 / 10 ** 4.4,
                               [1e-3, 0.1, 10.0, 1e3], rtol=1e-12)
    temps = {"t_knot_0": 600.0, "t_knot_1": 900.0, "t_knot_2": 1600.0, "t_knot_3": 2500.0}
    np.testing.assert_allclose(prof.temperature(p_k, {**params, **temps}), list(temps.values()), rtol=1e-12)
    # ten times the abundances: knots at a tenth of the pressure, times μ(10 x) / μ(x) (heavier gas)
    more = {**params, "log_vmr_H2O": -2.0, "log_vmr_CH4": -3.0}
    x10 = 10.0 * x
    mu10 = x10 @ [18.015, 16.043] + (1.0 - x10.sum()) * ((1 - f_he) * 2.016 + f_he * 4.003)
    ratio = prof.knot_pressures_for(params) / prof.knot_pressures_for(more)
    np.testing.assert_allclose(ratio, 10.0 * mu / mu10, rtol=2e-4)


def test_tau_knots_reference_cross_section_is_a_planck_mean(toy_set):
    opac, species = toy_set
    model = _tau_knots_model(opac, species)
    level = int(np.argmin(np.abs(np.log(model.pressure_bar))))            # the level nearest 1 bar
    sigma = np.array(model.molecular.cross_sections(np.full(model.pressure_bar.size, 1500.0))[level], dtype=float)
    # Planck weights from astropy.modeling.physical_models.BlackBody, trapezoid rule from numpy
    b = BlackBody(temperature=1500.0 * u.K)(model.wavelength_um * u.um).value
    expected = np.trapezoid(sigma * b * model.wavelength_um ** -2, model.wavelength_um, axis=1) / \
        np.trapezoid(b * model.wavelength_um ** -2, model.wavelength_um)
    got = np.array(list(model.profile.reference_cross_sections().values()))
    # B_ν·ν²/c = B_λ, so B_ν λ⁻² ∝ B_λ; both sides use the trapezoid rule on the same grid.  (An
    # unweighted mean differs by 5–13 %, a 2000 K weighting by 0.3–16 %.)
    np.testing.assert_allclose(got, expected, rtol=1e-9)


def test_tau_knots_make_the_gravity_abundance_degeneracy_exact():
    # grey absorbers and no continuum: the spectrum depends on T(τ) only, so scaling every abundance
    # (or g) leaves it unchanged with tau-knots — up to where the fixed pressure levels fall in τ —
    # but not with knots at fixed pressures (common practice, no source)
    species = ["H2O", "CH4"]
    opac = OpacitySet.from_tables({"H2O": grey_table("H2O", WL, -21.0), "CH4": grey_table("CH4", WL, -21.5)})
    temps = {"t_knot_0": 700.0, "t_knot_1": 1000.0, "t_knot_2": 1700.0, "t_knot_3": 2600.0}
    a = base_params(species, log_g=4.0, log_vmr_H2O=-4.0, log_vmr_CH4=-4.5, **temps)
    b = {**a, "log_vmr_H2O": -3.2, "log_vmr_CH4": -3.7}
    model = _tau_knots_model(opac, species, layers=200)
    fa, fb = model.evaluate(a).flux_highres, model.evaluate(b).flux_highres
    np.testing.assert_allclose(fb, fa, rtol=2e-3)
    pressure_knots = ForwardModel(ModelSpec.from_mapping(
        {"absorbers": species, "profile": "knots", "knot_pressures_bar": [1e-4, 1e-2, 1.0, 100.0], "layers": 200,
         **NO_CONTINUUM}), [], opac)
    ga, gb = pressure_knots.evaluate(a).flux_highres, pressure_knots.evaluate(b).flux_highres
    assert np.max(np.abs(gb / ga - 1.0)) > 0.05
