"""Instrument operators: bin edges, Gaussian LSF, channel averages, filter photometry."""
import astropy.units as u
import numpy as np
import pytest
import scipy.integrate
import speclite.filters
from astropy.modeling.models import BlackBody
from hypothesis import given, settings
from hypothesis import strategies as st

from retrieve.errors import ConfigError, InputFileError, UserError
from retrieve.instrument import (channel_edges, dataset_operator, gaussian_lsf_operator, model_bin_edges,
                                 photometry_operator, required_wavelength_range, spectrum_operator)
from retrieve.observations import Dataset
from retrieve.observations.filters import load_filter

TWOMASS = ["twomass-J", "twomass-H", "twomass-Ks"]


def _spectrum(centres, resolving_power=None, edges=None, name="ifs"):
    n = len(centres)
    return Dataset(name=name, kind="spectrum", wavelength_um=np.asarray(centres, float), flux=np.ones(n),
                   uncertainty=np.ones(n), resolving_power=resolving_power, channel_edges_um=edges)


def _photometry(filters):
    n = len(filters)
    return Dataset(name="phot", kind="photometry", wavelength_um=np.linspace(1.2, 2.2, n), flux=np.ones(n),
                   uncertainty=np.ones(n), filters=list(filters))


def _blackbody_flambda(wavelength_um, temperature=1400.0):
    """π B_λ in W m⁻² µm⁻¹ from astropy's BlackBody."""
    bb = BlackBody(temperature=temperature * u.K, scale=1.0 * u.W / (u.m ** 2 * u.um * u.sr))
    return np.pi * bb(wavelength_um * u.um).to_value(u.W / (u.m ** 2 * u.um * u.sr))


def test_model_bin_edges_geometric_midpoints():
    edges = model_bin_edges(np.array([1.0, 4.0, 16.0]))
    # √(1·4) = 2, √(4·16) = 8; outer edges λ0²/e1 = 0.5 and λ2²/e2 = 32 (definition in grid.py)
    np.testing.assert_allclose(edges, [0.5, 2.0, 8.0, 32.0])
    wl = np.geomspace(1.0, 2.0, 11)
    edges = model_bin_edges(wl)
    np.testing.assert_allclose(np.sqrt(edges[1:] * edges[:-1]), wl, rtol=1e-12)  # geometric centres (constant R grid)


def test_channel_average_of_linear_function_is_centre_value():
    wl = np.geomspace(0.9, 2.0, 700)
    centres = np.linspace(1.0, 1.8, 23) + 0.0013      # channel edges fall between model points
    for resolving_power in (None, 40.0):
        op = spectrum_operator(_spectrum(centres, resolving_power), wl)
        # mean of a linear function over [a, b] is its value at (a+b)/2; a symmetric LSF preserves it
        # (common practice, no source)
        np.testing.assert_allclose(op @ (3.0 - 1.2 * wl), 3.0 - 1.2 * centres, rtol=1e-12)
        np.testing.assert_allclose(np.asarray(op.sum(axis=1)).ravel(), 1.0, atol=1e-14)  # flat maps to flat


def test_channel_average_against_scipy_quad():
    wl = np.geomspace(0.9, 2.0, 60)                   # coarse: curvature matters
    flux = _blackbody_flambda(wl)
    edges = np.array([[1.02, 1.11], [1.5, 1.513], [1.7, 1.9]])
    op = spectrum_operator(_spectrum(edges.mean(axis=1), edges=edges), wl)
    knots = np.concatenate([[model_bin_edges(wl)[0]], wl, [model_bin_edges(wl)[-1]]])
    values = np.concatenate([[flux[0]], flux, [flux[-1]]])
    for row, (a, b) in enumerate(edges):
        exact = scipy.integrate.quad(lambda x: np.interp(x, knots, values), a, b, points=wl[(wl > a) & (wl < b)],
                                     limit=200)[0] / (b - a)
        # piecewise-linear model integrated exactly (scipy.integrate.quad as reference)
        assert (op @ flux)[row] == pytest.approx(exact, rel=1e-9, abs=0.0)


def _fwhm(wl, profile):
    """Full width at half maximum of a single-peaked profile, by linear interpolation."""
    half = 0.5 * profile.max()
    above = np.nonzero(profile >= half)[0]
    i, j = above[0], above[-1]
    left = np.interp(half, profile[i - 1: i + 1], wl[i - 1: i + 1])
    right = np.interp(half, profile[j: j + 2][::-1], wl[j: j + 2][::-1])
    return right - left


def test_lsf_conserves_flux_and_gives_expected_fwhm():
    wl = np.geomspace(1.9, 2.1, 2000)                 # R_model ≈ 20000
    resolving_power, line_r, centre = 100.0, 2000.0, 2.0
    sigma_line = centre / line_r / 2.354820045
    line = np.exp(-0.5 * ((wl - centre) / sigma_line) ** 2)
    out = gaussian_lsf_operator(wl, resolving_power) @ line
    # flux conservation: integral of the line unchanged (common practice, no source)
    assert np.trapezoid(out, wl) == pytest.approx(np.trapezoid(line, wl), rel=1e-3, abs=0.0)
    # Gaussians add in quadrature: FWHM² = (λ/R)² + FWHM_line² (common practice, no source)
    expected = centre * np.hypot(1 / resolving_power, 1 / line_r)
    assert _fwhm(wl, out) == pytest.approx(expected, rel=5e-3, abs=0.0)


def test_per_channel_resolving_power():
    wl = np.geomspace(0.9, 2.0, 2500)
    centres = np.linspace(1.0, 1.8, 30)
    constant = spectrum_operator(_spectrum(centres, np.full(30, 60.0)), wl)
    scalar = spectrum_operator(_spectrum(centres, 60.0), wl)
    np.testing.assert_allclose(constant.toarray(), scalar.toarray(), atol=1e-14)  # same LSF either way
    r_channels = np.linspace(30.0, 90.0, 30)
    lsf = gaussian_lsf_operator(wl, r_channels, centres)
    for centre in (1.1, 1.7):
        line = np.exp(-0.5 * ((wl - centre) / 3e-4) ** 2)    # FWHM 7e-4 µm, negligible beside λ/R
        # FWHM = λ / R(λ), R interpolated between channels (definition of the LSF; common practice, no source)
        expected = centre / np.interp(centre, centres, r_channels)
        assert _fwhm(wl, lsf @ line) == pytest.approx(expected, rel=0.01, abs=0.0)


def test_required_range_and_coverage_error():
    centres = np.linspace(1.0, 1.8, 30)
    dataset = _spectrum(centres, 50.0)
    lo, hi = required_wavelength_range(dataset)
    edges = channel_edges(dataset)
    sigma_lo, sigma_hi = edges[0, 0] / 50 / 2.3548, edges[-1, 1] / 50 / 2.3548
    assert lo <= edges[0, 0] - 4 * sigma_lo and hi >= edges[-1, 1] + 4 * sigma_hi   # ≥ 4σ margin (task contract)
    with pytest.raises(ConfigError, match=r"dataset 'ifs' needs model wavelengths .* model grid covers"):
        spectrum_operator(dataset, np.geomspace(1.0, 1.8, 200))
    assert issubclass(ConfigError, UserError)
    phot = _photometry(TWOMASS)
    lo, hi = required_wavelength_range(phot)
    ks_wl, ks_resp = load_filter("twomass-Ks")
    assert hi >= ks_wl[ks_resp > 0].max()            # speclite's tabulated Ks curve ends inside the range
    with pytest.raises(ConfigError, match="dataset 'phot'"):
        photometry_operator(phot, np.geomspace(1.0, 2.0, 300))


def test_bad_datasets_raise_user_errors():
    wl = np.geomspace(0.9, 2.6, 500)
    with pytest.raises(InputFileError, match="unknown filter"):
        dataset_operator(_photometry(["twomass-Q"]), wl)
    odd = _spectrum([1.2, 1.3])
    odd.kind = "image"
    with pytest.raises(InputFileError, match="unknown dataset kind"):
        dataset_operator(odd, wl)
    with pytest.raises(InputFileError, match="single-channel"):
        dataset_operator(_spectrum([1.2]), wl)


def test_photometry_matches_speclite():
    wl = np.geomspace(0.95, 2.6, 6000)
    flux = _blackbody_flambda(wl)
    op = dataset_operator(_photometry(TWOMASS), wl)
    ours = op @ flux
    wl_aa = wl * 1e4
    for value, name in zip(ours, TWOMASS):
        response = speclite.filters.load_filter(name)
        # speclite: photon-weighted ∫ F T λ dλ / ∫ T λ dλ via FilterResponse.convolve_with_array
        numerator = response.convolve_with_array(wl_aa, flux, photon_weighted=True, interpolate=True)
        denominator = response.convolve_with_array(wl_aa, np.ones_like(flux), photon_weighted=True, interpolate=True)
        assert value == pytest.approx(numerator / denominator, rel=1e-3, abs=0.0)
        # speclite get_ab_maggies: maggies = <F>/<F_AB>, F_AB = 3631 Jy c/λ² (source: speclite)
        f_ab = (3631 * u.Jy).to_value(u.W / u.m ** 2 / u.um, equivalencies=u.spectral_density(wl * u.um))
        maggies = response.get_ab_maggies(flux * u.W / u.m ** 2 / u.um, wl * u.um)
        ours_ab = (op @ f_ab)[TWOMASS.index(name)]
        assert value / ours_ab == pytest.approx(float(maggies), rel=1e-3, abs=0.0)


def test_photometry_exact_for_piecewise_linear_model():
    wl = np.geomspace(1.0, 2.6, 80)                   # coarse model grid, few points per filter
    flux = _blackbody_flambda(wl, 900.0)
    op = photometry_operator(_photometry(["twomass-H"]), wl)
    f_wl, f_resp = load_filter("twomass-H")
    edges = model_bin_edges(wl)
    knots = np.concatenate([[edges[0]], wl, [edges[-1]]])
    values = np.concatenate([[flux[0]], flux, [flux[-1]]])
    breaks = np.union1d(f_wl, wl[(wl > f_wl[0]) & (wl < f_wl[-1])])

    def weight(x):
        return np.interp(x, f_wl, f_resp) * x

    num = scipy.integrate.quad(lambda x: weight(x) * np.interp(x, knots, values), f_wl[0], f_wl[-1],
                               points=breaks[1:-1], limit=500)[0]
    den = scipy.integrate.quad(weight, f_wl[0], f_wl[-1], points=breaks[1:-1], limit=500)[0]
    # Bessell & Murphy (2012) eq. A11 integrated with scipy.integrate.quad as reference
    assert (op @ flux)[0] == pytest.approx(num / den, rel=1e-8, abs=0.0)
    assert op.sum() == pytest.approx(1.0, abs=1e-14)  # flat spectrum maps onto itself


def test_lsf_rows_subset_equals_full_operator():
    wl = np.geomspace(0.9, 2.0, 800)
    full = gaussian_lsf_operator(wl, 45.0).toarray()
    rows = np.array([3, 100, 101, 400, 799])
    part = gaussian_lsf_operator(wl, 45.0, output_index=rows).toarray()
    np.testing.assert_allclose(part[rows], full[rows], rtol=1e-13, atol=0)   # same construction, fewer rows
    assert not np.any(np.delete(part, rows, axis=0))


_GRID = np.geomspace(0.7, 2.4, 400)


@settings(max_examples=25, deadline=None)
@given(lower=st.floats(1.0, 1.7), width=st.floats(1e-4, 0.3), slope=st.floats(-5, 5),
       resolving_power=st.one_of(st.none(), st.floats(20.0, 300.0)))
def test_any_channel_reproduces_linear_spectra(lower, width, slope, resolving_power):
    edges = np.array([[lower, lower + width], [1.75, 1.8]])
    op = spectrum_operator(_spectrum(edges.mean(axis=1), resolving_power, edges), _GRID)
    # channel mean of a linear function = value at the channel centre (common practice, no source)
    np.testing.assert_allclose(op @ (1.0 + slope * _GRID), 1.0 + slope * edges.mean(axis=1), rtol=1e-10, atol=1e-10)
