"""Line physics of the opacity builder: strengths, Voigt, DIT cross sections, partition functions."""
import contextlib
import io
import shutil

import numpy as np
import pytest
from scipy.special import voigt_profile

from retrieve.constants import ATM_TO_BAR, C2_CM_K
from retrieve.opacity_build.dit import fine_cross_sections
from retrieve.opacity_build.grid import BuildGrid
from retrieve.opacity_build.hitran import read_hitran
from retrieve.opacity_build.linelist import LineList
from retrieve.opacity_build.partition import (TabulatedPartition, get_partition_function, partition_sum,
                                              read_partition_file)
from retrieve.opacity_build.profiles import SQRT_2LN2, doppler_hwhm, voigt


def _hapi():
    hapi = pytest.importorskip("hapi")
    return hapi


def _quiet(func, *args, **kwargs):
    with contextlib.redirect_stdout(io.StringIO()):
        return func(*args, **kwargs)


@pytest.mark.parametrize("ad,gl", [(0.01, 0.001), (0.01, 0.05), (0.002, 0.3), (0.05, 1e-5)])
def test_voigt_matches_scipy(ad, gl):
    x = np.linspace(-2.0, 2.0, 4001)
    ref = voigt_profile(x, ad / SQRT_2LN2, gl)
    # source: scipy.special.voigt_profile
    np.testing.assert_allclose(voigt(x, ad, gl), ref, rtol=1e-10, atol=1e-12 * ref.max())


def test_voigt_limits_match_gaussian_and_lorentzian():
    x = np.linspace(-1, 1, 201)
    # source: scipy.special.voigt_profile (gamma=0 is the Gaussian, sigma=0 the Lorentzian)
    np.testing.assert_allclose(voigt(x, 0.1, 0.0), voigt_profile(x, 0.1 / SQRT_2LN2, 0.0), rtol=1e-12)
    np.testing.assert_allclose(voigt(x, 0.0, 0.1), voigt_profile(x, 0.0, 0.1), rtol=1e-12)


def test_doppler_width_matches_hapi():
    hapi = _hapi()
    trans = {"Diluent": {}, "T": 1500.0, "p": 1.0, "molec_id": 5, "local_iso_id": 1, "nu": 2143.0}
    ref = hapi.calculate_parameter_GammaD(None, trans)
    # source: hapi.calculate_parameter_GammaD (Doppler HWHM; Kochanov et al. 2016)
    assert doppler_hwhm(2143.0, 1500.0, hapi.molecularMass(5, 1)) == pytest.approx(ref, rel=1e-5, abs=0.0)


@pytest.mark.parametrize("t,p_bar,nu0", [(1000.0, 1.0, 4500.0034), (2000.0, 0.01, 2150.00013), (300.0, 10.0, 6000.0)])
def test_dit_single_line_matches_voigt(t, p_bar, nu0):
    ll = LineList("CO", [nu0], [100.0], 27.99, lambda T: 0.36 * np.asarray(T), strength_ref=[1e-20],
                  gamma_h2=[0.06], n_h2=[0.7], gamma_he=[0.04], n_he=[0.5])
    ad = doppler_hwhm(nu0, t, 27.99)
    gl = ll.lorentz_hwhm(t, p_bar)[0]
    step = min(ad, gl + ad) / 12.0
    grid = BuildGrid(wavelength_range_um=(1e4 / (nu0 + 5), 1e4 / (nu0 - 5)), fine_resolution=step)
    nu, sigma = fine_cross_sections(ll, grid, t, p_bar)
    ref = ll.strength(t)[0] * voigt_profile(nu - nu0, ad / SQRT_2LN2, gl)
    core = ref > 1e-3 * ref.max()
    # source: scipy.special.voigt_profile; 1 % where the profile is resolved
    np.testing.assert_allclose(sigma[core], ref[core], rtol=0.01)


def test_sum_rule_integral_equals_total_strength():
    rng = np.random.default_rng(42)
    n = 3000
    nu = rng.uniform(4100.0, 4900.0, n)
    e_low = rng.exponential(1500.0, n)
    s_ref = 10 ** rng.normal(-21, 1, n) * np.exp(-C2_CM_K * e_low / 296.0)
    q = TabulatedPartition([100.0, 5000.0], [40.0, 8000.0])
    ll = LineList("X", nu, e_low, 18.0, q, strength_ref=s_ref, gamma_h2=rng.uniform(0.03, 0.1, n),
                  n_h2=rng.uniform(0.3, 0.8, n))
    grid = BuildGrid(wavelength_range_um=(1e4 / 5000.0, 1e4 / 4000.0), fine_resolution=0.01)
    for t, p in [(500.0, 1e-4), (1500.0, 1.0), (2500.0, 3.0)]:
        nu_f, sigma = fine_cross_sections(ll, grid, t, p)
        total = ll.strength(t).sum()
        # source: definition of the line strength, S = ∫ σ dν (common practice, no source);
        # here the widths are ≤ 0.15 cm⁻¹, so the wings beyond 25 cm⁻¹ hold < 0.5 %
        assert np.trapezoid(sigma, nu_f) / total == pytest.approx(1.0, rel=0.005, abs=0.0)
    # at 30 bar (γ up to ~1.5 cm⁻¹) the truncated wings matter: the area is then that of the
    # truncated Lorentz wings, (2/π) arctan(c/γ) per line (integral of the Lorentzian; common practice)
    nu_f, sigma = fine_cross_sections(ll, grid, 2500.0, 30.0)
    s, g = ll.strength(2500.0), ll.lorentz_hwhm(2500.0, 30.0)
    expected = np.sum(s * (2 / np.pi) * np.arctan(25.0 / g))
    assert expected / s.sum() < 0.99  # a case where truncation is visible
    assert np.trapezoid(sigma, nu_f) / expected == pytest.approx(1.0, rel=0.002, abs=0.0)


def test_hitran_strength_matches_hapi_temperature_dependence(reference_dir):
    hapi = _hapi()
    q = lambda T: hapi.partitionSum(5, 1, T)  # noqa: E731
    ll = next(read_hitran(reference_dir / "hitran" / "co_hitran2020_sample.par", partition=q))
    for t in (200.0, 1000.0, 3000.0):
        ref = np.array([hapi.EnvironmentDependency_Intensity(s, t, 296.0, q(t), q(296.0), e, v)
                        for s, e, v in zip(ll.strength_ref, ll.e_lower_cm, ll.wavenumber_cm)])
        # hapi's c2 = 1.4388028 cm K (older constants) vs CODATA 2018 here: allow exactly the
        # Boltzmann-factor difference that this causes, line by line
        tol = 1e-6 + 1.5 * abs(1.4388028496642257 - C2_CM_K) * (ll.e_lower_cm + ll.wavenumber_cm) * abs(1 / t - 1 / 296.0)
        # source: hapi.EnvironmentDependency_Intensity (HITRAN S(T) convention)
        assert np.all(np.abs(ll.strength(t) / ref - 1) <= tol)


def test_einstein_a_form_reproduces_hitran_strengths(reference_dir):
    hapi = _hapi()
    path = reference_dir / "hitran" / "co_hitran2020_sample.par"
    lines = [ln for ln in path.read_text().splitlines() if ln[2] == "1"]
    nu = np.array([float(ln[3:15]) for ln in lines])
    s_ref = np.array([float(ln[15:25]) for ln in lines])
    a = np.array([float(ln[25:35]) for ln in lines])
    e_low = np.array([float(ln[45:55]) for ln in lines])
    g_up = np.array([float(ln[146:153]) for ln in lines])
    ll = LineList("CO", nu, e_low, 27.99, lambda T: hapi.partitionSum(5, 1, T), einstein_a=a, g_upper=g_up,
                  isotopologue_abundance=hapi.abundance(5, 1), abundance_weighted=False)
    strong = s_ref > 1e-26
    # source: Šimečková et al. 2006, JQSRT 98, 130, eq. 20 - HITRAN derives S from A this way;
    # A and S are each given to 4 significant digits
    np.testing.assert_allclose(ll.strength(296.0)[strong], s_ref[strong], rtol=2e-3)


@pytest.mark.parametrize("t,p_atm,step,rng", [
    (296.0, 1.0, 0.002, (2100.0, 2200.0)),
    (1000.0, 0.1, 0.0005, (2140.0, 2180.0)),
    (2000.0, 0.01, 0.00025, (2145.0, 2160.0)),
])
def test_cross_sections_match_hapi(reference_dir, tmp_path, t, p_atm, step, rng):
    hapi = _hapi()
    db = tmp_path / "db"
    shutil.copytree(reference_dir / "hitran" / "hapi_local_db", db)
    for f in db.iterdir():
        f.chmod(0o644)
    _quiet(hapi.db_begin, str(db))
    q = lambda T: hapi.partitionSum(5, 1, T)  # noqa: E731
    ll = next(read_hitran(db / "CO_M5_I1.data", partition=q, use_air_broadening=True,
                          mass_amu=hapi.molecularMass(5, 1)))
    nu_h, xs_h = _quiet(hapi.absorptionCoefficient_Voigt, SourceTables="CO_M5_I1", Components=[(5, 1)],
                        Environment={"T": t, "p": p_atm}, WavenumberRange=rng, WavenumberStep=step,
                        WavenumberWing=25.0, WavenumberWingHW=0.0, Diluent={"air": 1.0}, HITRAN_units=True,
                        LineShift=False, partitionFunction=lambda M, I, T: hapi.partitionSum(M, I, T))
    grid = BuildGrid(wavelength_range_um=(1e4 / rng[1], 1e4 / rng[0]), fine_resolution=step,
                     broadeners={"H2": 1.0})  # H2 fields hold gamma_air/n_air: air broadening as in hapi
    nu, sigma = fine_cross_sections(ll, grid, t, p_atm * ATM_TO_BAR)
    _, ia, ib = np.intersect1d(np.round(nu / step).astype(int), np.round(nu_h / step).astype(int),
                               return_indices=True)
    mine, ref = sigma[ia], xs_h[ib]
    resolved = ref > 1e-3 * ref.max()
    # source: hapi.absorptionCoefficient_Voigt (Kochanov et al. 2016, JQSRT 177, 15): 1 % on the fine grid
    np.testing.assert_allclose(mine[resolved], ref[resolved], rtol=0.01)
    # source: same; band integral within 0.1 %
    assert np.sum(mine) / np.sum(ref) == pytest.approx(1.0, rel=1e-3, abs=0.0)


def test_partition_sum_rigid_rotor_high_temperature_limit():
    b = 1.9225  # CO rotational constant B0, cm⁻¹ (Huber & Herzberg 1979, value from memory)
    j = np.arange(400)
    for t in (300.0, 1000.0):
        q = partition_sum(b * j * (j + 1), 2 * j + 1, t)
        x = C2_CM_K * b / t
        # source: rigid-rotor expansion Q = 1/x + 1/3 + x/15 (McDowell 1988, J. Chem. Phys. 88, 356, eq. 5)
        assert q == pytest.approx(1 / x + 1 / 3 + x / 15, rel=1e-6, abs=0.0)


def test_partition_file_is_read_and_log_interpolated(tmp_path):
    hapi = _hapi()
    temps = np.arange(100.0, 3001.0, 10.0)
    path = tmp_path / "12C-16O__test.pf"
    np.savetxt(path, np.column_stack([temps, [hapi.partitionSum(5, 1, T) for T in temps]]), fmt="%8.1f %14.6f")
    q = read_partition_file(path)
    for t in (296.0, 1234.5, 2999.0):
        # source: hapi.partitionSum (TIPS 2021, Gamache et al. 2021) - log interpolation of a 10 K table
        assert q(t) == pytest.approx(hapi.partitionSum(5, 1, t), rel=2e-4, abs=0.0)
    with pytest.raises(Exception, match="tabulated for"):
        q(5000.0)


def test_registered_co_partition_function_matches_tips():
    hapi = _hapi()
    q = get_partition_function("CO")   # registered: a failure here is a failure, not a skip
    for t in (100.0, 296.0, 1000.0, 3000.0):
        # source: hapi.partitionSum(5, 1, T) (TIPS 2021); the builtin Q is level-structure based
        assert float(q(t)) == pytest.approx(hapi.partitionSum(5, 1, t), rel=0.01, abs=0.0)


def test_dit_many_lines_across_segments_match_direct_sum():
    rng = np.random.default_rng(7)
    n = 150
    nu = rng.uniform(4010.0, 4190.0, n)
    ll = LineList("X", nu, rng.uniform(0, 3000, n), 18.0, lambda T: 0.1 * np.asarray(T) ** 1.5,
                  strength_ref=10 ** rng.uniform(-22, -20, n), gamma_h2=rng.uniform(0.02, 0.12, n),
                  n_h2=rng.uniform(0.3, 0.8, n), gamma_he=rng.uniform(0.01, 0.06, n), n_he=0.5)
    t, p = 1200.0, 0.3
    # small segments and cut-off: lines sit across many segment boundaries
    grid = BuildGrid(wavelength_range_um=(1e4 / 4200.0, 1e4 / 4000.0), fine_resolution=0.002,
                     wing_cutoff_cm=5.0, segment_points=4096)
    nu_f, sigma = fine_cross_sections(ll, grid, t, p)
    s, ad, gl = ll.strength(t), doppler_hwhm(nu, t, 18.0), ll.lorentz_hwhm(t, p)
    ref = np.zeros_like(nu_f)
    for k in range(n):
        near = np.abs(nu_f - nu[k]) <= 5.0
        ref[near] += s[k] * voigt_profile(nu_f[near] - nu[k], ad[k] / SQRT_2LN2, gl[k])
    # source: scipy.special.voigt_profile summed line by line (same 5 cm⁻¹ truncation);
    # 1 % wherever σ exceeds 1e-3 of its maximum
    big = ref > 1e-3 * ref.max()
    np.testing.assert_allclose(sigma[big], ref[big], rtol=0.01)
    # streamed in unsorted chunks: the same result (common practice, no source: linearity of the sum;
    # streamed planes are stored as float32, hence 1e-6)
    order = rng.permutation(n)
    chunks = [ll.select(order[i:i + 40]) for i in range(0, n, 40)]
    _, sigma_chunked = fine_cross_sections(lambda: iter(chunks), grid, t, p)
    np.testing.assert_allclose(sigma_chunked, sigma, rtol=1e-6, atol=1e-9 * sigma.max())
    _, sigma_list = fine_cross_sections(chunks, grid, t, p)  # in-memory chunks, segment by segment
    np.testing.assert_allclose(sigma_list, sigma, rtol=1e-9, atol=1e-12 * sigma.max())
