"""Reading, validating, converting and writing observation files."""
from __future__ import annotations


import astropy.constants as const
import astropy.units as u
import numpy as np
import pytest
from astropy.io import fits
from astropy.table import Table
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from retrieve.errors import InputFileError
from retrieve.observations import (Dataset, filter_effective_wavelength, load_filter, read_dataset, read_object,
                                   write_dataset)
from retrieve.observations import writers
from retrieve.observations.units import parse_unit

FLAM = u.W / u.m ** 2 / u.um
WL_UM = np.array([1.00, 1.05, 1.10, 1.20, 1.35])
FLUX_MJY = np.array([0.40, 0.55, 0.61, 0.58, 0.47])
ERR_MJY = np.array([0.02, 0.03, 0.03, 0.04, 0.05])


def _astropy_flam(values, unit, wl_um):
    """Reference conversion straight from astropy (source: astropy.units spectral_density)."""
    return (np.asarray(values) * u.Unit(unit)).to_value(FLAM, equivalencies=u.spectral_density(wl_um * u.um))


def _csv(tmp_path, text, name="spec.csv"):
    path = tmp_path / name
    path.write_text(text)
    return path


def _good_csv(wl_unit="um", flux_unit="mJy", scale=1.0):
    rows = "\n".join(f"{float(w * scale)!r},{float(f)!r},{float(e)!r}" for w, f, e in zip(WL_UM, FLUX_MJY, ERR_MJY))
    return f"# resolving_power: 35\nwavelength [{wl_unit}],flux [{flux_unit}],uncertainty [{flux_unit}]\n{rows}\n"


# --------------------------------------------------------------------------- reading each format

def test_csv_units_header_reads_metadata_and_converts_mjy(tmp_path):
    ds = read_dataset(_csv(tmp_path, _good_csv()))
    assert ds.kind == "spectrum" and ds.name == "spec" and ds.resolving_power == 35.0
    np.testing.assert_array_equal(ds.wavelength_um, WL_UM)
    # source: astropy.units (spectral_density equivalency)
    np.testing.assert_allclose(ds.flux, _astropy_flam(FLUX_MJY, "mJy", WL_UM), rtol=1e-15)
    # independent check: F_lambda = F_nu c / lambda^2, 1 mJy = 1e-29 W m-2 Hz-1 (definition of the jansky);
    # the 1e-6 turns W m-2 m-1 into W m-2 um-1
    expected = FLUX_MJY * 1e-29 * const.c.value / (WL_UM * 1e-6) ** 2 * 1e-6
    np.testing.assert_allclose(ds.flux, expected, rtol=1e-13)
    np.testing.assert_allclose(ds.uncertainty, _astropy_flam(ERR_MJY, "mJy", WL_UM), rtol=1e-15)


@pytest.mark.parametrize("wl_unit, scale", [("um", 1.0), ("µm", 1.0), ("micron", 1.0), ("nm", 1e3),
                                            ("Angstrom", 1e4), ("Å", 1e4), ("A", 1e4), ("m", 1e-6),
                                            ("cm", 1e-4)])
def test_wavelength_units(tmp_path, wl_unit, scale):
    ds = read_dataset(_csv(tmp_path, _good_csv(wl_unit=wl_unit, scale=scale)))
    # source: astropy.units (length conversions); the file holds WL_UM expressed in wl_unit
    np.testing.assert_allclose(ds.wavelength_um, WL_UM, rtol=1e-14)


@pytest.mark.parametrize("flux_unit", ["W m-2 um-1", "erg s-1 cm-2 A-1", "erg s-1 cm-2 um-1", "W m-2 nm-1",
                                       "Jy", "mJy", "uJy"])
def test_flux_units_match_astropy(tmp_path, flux_unit):
    ds = read_dataset(_csv(tmp_path, _good_csv(flux_unit=flux_unit)))
    astropy_unit = flux_unit.replace(" A-1", " Angstrom-1")  # astropy's own spelling of the angstrom
    # source: astropy.units (spectral_density equivalency, evaluated at each channel)
    np.testing.assert_allclose(ds.flux, _astropy_flam(FLUX_MJY, astropy_unit, WL_UM), rtol=1e-15)
    np.testing.assert_allclose(ds.uncertainty, _astropy_flam(ERR_MJY, astropy_unit, WL_UM), rtol=1e-15)


def test_flambda_cgs_factor():
    # 1 erg s-1 cm-2 A-1 = 1e-7 W / (1e-4 m2 * 1e-4 um) = 10 W m-2 um-1 (common practice, no source)
    assert parse_unit("erg s-1 cm-2 A-1").to(FLAM) == pytest.approx(10.0, rel=1e-15, abs=0.0)


def test_ecsv_with_units_and_meta(tmp_path):
    table = Table()
    table["lambda"] = WL_UM * 1e3 * u.nm
    table["FLUX"] = FLUX_MJY * u.mJy
    table["Sigma"] = ERR_MJY * u.mJy
    table["wavelength_low"] = (WL_UM - 0.01) * u.um
    table["wavelength_high"] = (WL_UM + 0.01) * u.um
    table["resolving_power"] = np.linspace(30, 40, WL_UM.size)
    table.meta.update({"dataset_name": "ifs", "truth": {"t_iso": 1300.0}})
    path = tmp_path / "spec.ecsv"
    table.write(path, format="ascii.ecsv")
    ds = read_dataset(path)
    assert ds.name == "ifs" and ds.meta == {"truth": {"t_iso": 1300.0}}
    np.testing.assert_allclose(ds.wavelength_um, WL_UM, rtol=1e-14)  # source: astropy.units
    np.testing.assert_allclose(ds.flux, _astropy_flam(FLUX_MJY, "mJy", WL_UM), rtol=1e-14)
    np.testing.assert_allclose(ds.channel_edges_um, np.column_stack([WL_UM - 0.01, WL_UM + 0.01]))
    np.testing.assert_allclose(ds.resolving_power, np.linspace(30, 40, WL_UM.size))


def _fits_spectrum(path, cov=None, cov_unit="mJy2", header=None):
    cols = [fits.Column(name="WAVE", format="D", unit="Angstrom", array=WL_UM * 1e4),
            fits.Column(name="FLUX", format="D", unit="erg s-1 cm-2 A-1", array=FLUX_MJY * 1e-16),
            fits.Column(name="ERR", format="D", unit="erg s-1 cm-2 A-1", array=ERR_MJY * 1e-16)]
    table = fits.BinTableHDU.from_columns(cols)
    for key, value in (header or {}).items():
        table.header[key] = value
    hdus = [fits.PrimaryHDU(), table]
    if cov is not None:
        image = fits.ImageHDU(cov, name="COVARIANCE")
        if cov_unit:
            image.header["BUNIT"] = cov_unit
        hdus.append(image)
    fits.HDUList(hdus).writeto(path)
    return path


def test_fits_table_with_covariance_extension(tmp_path):
    cov_file = np.diag(ERR_MJY ** 2) * 1e-32
    cov_file[0, 1] = cov_file[1, 0] = 0.3 * ERR_MJY[0] * ERR_MJY[1] * 1e-32
    path = _fits_spectrum(tmp_path / "spec.fits", cov=cov_file, cov_unit="erg2 s-2 cm-4 Angstrom-2",
                          header={"DATANAME": "sphere", "RESPOWER": 30.0, "OBSERVER": "x"})
    ds = read_dataset(path)
    assert ds.name == "sphere" and ds.resolving_power == 30.0 and ds.meta["OBSERVER"] == "x"
    np.testing.assert_allclose(ds.wavelength_um, WL_UM, rtol=1e-14)  # source: astropy.units
    # 1 erg s-1 cm-2 A-1 = 10 W m-2 um-1 (common practice, no source)
    np.testing.assert_allclose(ds.flux, FLUX_MJY * 1e-15, rtol=1e-13)
    np.testing.assert_allclose(ds.covariance, cov_file * 100.0, rtol=1e-13)
    np.testing.assert_allclose(ds.uncertainty, np.sqrt(np.diag(cov_file)) * 10.0, rtol=1e-13)


def test_photometry_filter_column(tmp_path):
    path = _csv(tmp_path, "filter,flux [mJy],err [mJy]\ntwomass-J,1.2,0.1\nTWOMASS-KS,2.0,0.1\nwise2010-W1,1.1,0.2\n",
                name="phot.csv")
    ds = read_dataset(path)
    assert ds.kind == "photometry" and ds.filters == ["twomass-J", "twomass-Ks", "wise2010-W1"]
    import speclite.filters
    wl = np.array([speclite.filters.load_filter(f).effective_wavelength.to_value(u.um) for f in ds.filters])
    np.testing.assert_allclose(ds.wavelength_um, wl, rtol=1e-15)  # source: speclite effective_wavelength
    np.testing.assert_allclose(ds.flux, _astropy_flam([1.2, 2.0, 1.1], "mJy", wl), rtol=1e-15)  # source: astropy


def test_load_filter_matches_speclite_and_caches():
    import speclite.filters
    wl, resp = load_filter("twomass-H")
    ref = speclite.filters.load_filter("twomass-H")
    np.testing.assert_allclose(wl, ref.wavelength * 1e-4, rtol=1e-15)  # source: speclite (Angstrom -> um)
    np.testing.assert_array_equal(resp, ref.response)  # source: speclite
    assert load_filter("twomass-H")[0] is wl  # cached: same array object
    # 2MASS Ks effective wavelength about 2.16 um (value from memory; Cohen et al. 2003 give 2.159 um)
    assert filter_effective_wavelength("twomass-Ks") == pytest.approx(2.16, abs=0.01)
    with pytest.raises(InputFileError, match=r"unknown filter 'twomass-K' \(did you mean 'twomass-Ks'\?\)"):
        load_filter("twomass-K")


# --------------------------------------------------------------------------- covariance files

def _cov_mjy2():
    corr = 0.5 ** np.abs(np.subtract.outer(np.arange(5), np.arange(5)))  # exponential correlation: positive-definite
    return corr * np.outer(ERR_MJY, ERR_MJY)


@pytest.mark.parametrize("fmt", ["npy", "ecsv", "csv", "csv_unit_comment", "fits"])
def test_covariance_files(tmp_path, fmt):
    spec = _csv(tmp_path, _good_csv(flux_unit="Jy"))  # flux in Jy so that .npy is in Jy2
    cov_jy2 = _cov_mjy2()
    if fmt == "npy":
        path = tmp_path / "cov.npy"
        np.save(path, cov_jy2)
    elif fmt == "ecsv":
        path = tmp_path / "cov.ecsv"
        Table([cov_jy2[:, j] * u.Jy ** 2 for j in range(5)], names=[f"c{j}" for j in range(5)]).write(path)
    elif fmt.startswith("csv"):
        path = tmp_path / "cov.csv"
        body = "\n".join(",".join(repr(float(v)) for v in row) for row in cov_jy2)
        head = ",".join(f"c{j} [Jy2]" for j in range(5)) if fmt == "csv" else "# unit: Jy2"
        path.write_text(f"{head}\n{body}\n")
    else:
        path = tmp_path / "cov.fits"
        hdu = fits.PrimaryHDU(cov_jy2)
        hdu.header["BUNIT"] = "Jy2"
        hdu.writeto(path)
    ds = read_dataset(spec, covariance=path)
    factor = _astropy_flam(np.ones(5), "Jy", WL_UM)  # source: astropy.units spectral_density
    np.testing.assert_allclose(ds.covariance, cov_jy2 * np.outer(factor, factor), rtol=1e-13)
    # the covariance diagonal supersedes the uncertainty column (documented behaviour)
    np.testing.assert_allclose(ds.uncertainty, np.sqrt(np.diag(cov_jy2)) * factor, rtol=1e-13)
    np.testing.assert_allclose(ds.variance(), np.diag(ds.covariance))


# --------------------------------------------------------------------------- bad inputs: one line, file/column/row

HEAD = "wavelength [um],flux [mJy],uncertainty [mJy]\n"
BAD_CSV = [
    ("nan value", HEAD + "1.0,0.4,0.02\n1.1,nan,0.02\n", ["column 'flux', row 2", "finite", "nan"]),
    ("inf value", HEAD + "1.0,0.4,0.02\n1.1,0.4,inf\n", ["column 'uncertainty', row 2", "finite"]),
    ("negative uncertainty", HEAD + "1.0,0.4,0.02\n1.1,0.4,0.02\n1.2,0.4,-0.3\n",
     ["column 'uncertainty', row 3", "must be > 0 (got -0.3)"]),
    ("zero uncertainty", HEAD + "1.0,0.4,0\n", ["column 'uncertainty', row 1", "> 0 (got 0)"]),
    ("unsorted", HEAD + "1.0,0.4,0.02\n1.2,0.4,0.02\n1.1,0.4,0.02\n",
     ["column 'wavelength', row 3", "ascend"]),
    ("duplicate", HEAD + "1.0,0.4,0.02\n1.1,0.4,0.02\n1.1,0.4,0.02\n",
     ["column 'wavelength', row 3", "duplicate wavelength"]),
    ("unknown unit", "wavelength [um],flux [mJyy],uncertainty [mJy]\n1.0,0.4,0.02\n",
     ["column 'flux'", "unknown unit 'mJyy'"]),
    ("wrong kind of unit", "wavelength [K],flux [mJy],uncertainty [mJy]\n1.0,0.4,0.02\n",
     ["column 'wavelength'", "not a wavelength"]),
    ("missing unit", "wavelength [um],flux,uncertainty [mJy]\n1.0,0.4,0.02\n", ["column 'flux' has no unit"]),
    ("missing column", "wave [um],flux [mJy]\n1.0,0.4\n",
     ["missing column 'uncertainty'", "found columns: 'wave', 'flux'"]),
    ("no rows", HEAD, ["no data rows"]),
    ("only comments", "# nothing here\n", ["no header or data lines"]),
    ("empty", "", ["file is empty"]),
    ("not a number", HEAD + "1.0,abc,0.02\n", ["column 'flux', row 1", "'abc' is not a number"]),
    ("ragged row", HEAD + "1.0,0.4\n", ["row 1", "expected 3 values"]),
    ("unknown filter", "filter,flux [mJy],err [mJy]\ntwomass-J,1,0.1\ntwomass-Kss,1,0.1\n",
     ["column 'filter', row 2", "unknown filter 'twomass-Kss'", "did you mean 'twomass-Ks'"]),
]


@pytest.mark.parametrize("content, expected", [(c, e) for _, c, e in BAD_CSV], ids=[b[0] for b in BAD_CSV])
def test_bad_csv_one_line_message(tmp_path, content, expected):
    path = _csv(tmp_path, content, name="bad.csv")
    with pytest.raises(InputFileError) as info:
        read_dataset(path)
    message = str(info.value)
    assert "\n" not in message
    assert message.startswith(f"{path}: ")
    for part in expected:
        assert part in message


def test_binary_and_undecodable_files(tmp_path):
    for name, data, expected in [("bin.csv", b"\x00\x01\x02\x03", "binary"),
                                 ("latin.csv", "wavelength [µm]\n".encode("latin-1"), "not UTF-8"),
                                 ("bin.ecsv", b"\x89PNG\r\n\x1a\n\x00\x00", "binary")]:
        path = tmp_path / name
        path.write_bytes(data)
        with pytest.raises(InputFileError, match=expected) as info:
            read_dataset(path)
        assert str(info.value).startswith(str(path)) and "\n" not in str(info.value)


def test_bad_fits_and_ecsv(tmp_path):
    path = tmp_path / "fake.fits"
    path.write_bytes(b"SIMPLE  =  this is not really fits" + b" " * 100)
    with pytest.raises(InputFileError, match="fake.fits"):
        read_dataset(path)
    table = Table({"wavelength": WL_UM * u.um, "flux": FLUX_MJY, "uncertainty": ERR_MJY * u.mJy})
    table["flux"][2] = np.nan
    table.write(tmp_path / "nounit.ecsv")
    with pytest.raises(InputFileError, match=r"nounit.ecsv: column 'flux' has no unit"):
        read_dataset(tmp_path / "nounit.ecsv")
    table["flux"].unit = u.mJy
    table.write(tmp_path / "nan.ecsv")
    with pytest.raises(InputFileError, match=r"nan.ecsv: column 'flux', row 3: value must be finite"):
        read_dataset(tmp_path / "nan.ecsv")


def _write_cov(tmp_path, matrix, name="cov.npy"):
    path = tmp_path / name
    np.save(path, matrix)
    return path


@pytest.mark.parametrize("case, expected", [
    ("not square", "must be a square matrix, got shape (5, 4)"),
    ("wrong size", "covariance is 4x4 but"),
    ("nan", "row 2, column 3: value must be finite"),
    ("asymmetric", "not symmetric: row 1, column 2"),
    ("zero variance", "row 4, column 4: variance must be > 0"),
    ("not positive-definite", "not positive-definite"),
])
def test_bad_covariance(tmp_path, case, expected):
    spec = _csv(tmp_path, _good_csv())
    good = _cov_mjy2()
    matrix = {"not square": good[:, :4], "wrong size": good[:4, :4]}.get(case, good.copy())
    if case == "nan":
        matrix[1, 2] = np.nan
    elif case == "asymmetric":
        matrix[0, 1] *= 1.001
    elif case == "zero variance":
        matrix[3, 3] = 0.0
    elif case == "not positive-definite":
        matrix[0, 1] = matrix[1, 0] = 1.5 * ERR_MJY[0] * ERR_MJY[1]  # |correlation| > 1
    path = _write_cov(tmp_path, matrix)
    with pytest.raises(InputFileError) as info:
        read_dataset(spec, covariance=path)
    assert str(info.value).startswith(f"{path}: ") and expected in str(info.value)
    assert "\n" not in str(info.value)


def test_covariance_symmetry_tolerance(tmp_path):
    spec = _csv(tmp_path, _good_csv())
    matrix = _cov_mjy2()
    matrix[0, 1] *= 1 + 1e-10  # far below the documented relative tolerance 1e-8
    ds = read_dataset(spec, covariance=_write_cov(tmp_path, matrix))
    np.testing.assert_array_equal(ds.covariance, ds.covariance.T)


def test_covariance_unit_problems(tmp_path):
    spec = _csv(tmp_path, _good_csv())
    path = tmp_path / "cov.csv"
    path.write_text("\n".join(",".join(repr(float(v)) for v in row) for row in _cov_mjy2()) + "\n")
    with pytest.raises(InputFileError, match=r"cov.csv: covariance has no unit"):
        read_dataset(spec, covariance=path)
    path.write_text("# unit: mJy\n" + path.read_text())
    with pytest.raises(InputFileError, match=r"cov.csv: covariance unit 'mJy' is not a flux density squared"):
        read_dataset(spec, covariance=path)


# --------------------------------------------------------------------------- objects

def test_read_object_unique_names(tmp_path):
    (tmp_path / "a").mkdir()
    (tmp_path / "b").mkdir()
    one = _csv(tmp_path / "a", _good_csv(), name="spec.csv")
    two = _csv(tmp_path / "b", _good_csv(), name="spec.csv")
    phot = _csv(tmp_path, "filter,flux [mJy],err [mJy]\ntwomass-Ks,1.0,0.1\n", name="phot.csv")
    obj = read_object([one, {"file": two, "resolving_power": 50.0}, phot], name="hr8799e")
    assert [d.name for d in obj.datasets] == ["spec", "spec_2", "phot"]
    assert obj["spec_2"].resolving_power == 50.0 and obj["phot"].kind == "photometry"
    with pytest.raises(InputFileError, match="dataset names must be unique"):
        read_object([{"file": one, "name": "x"}, {"file": two, "name": "x"}], name="o")


# --------------------------------------------------------------------------- writing

def _dataset(n=5, covariance=True):
    rng = np.random.default_rng(3)
    wl = np.sort(rng.uniform(1.0, 1.8, n))
    sigma = rng.uniform(1e-17, 3e-17, n)
    cov = np.diag(sigma ** 2) if covariance else None
    return Dataset(name="ifs", kind="spectrum", wavelength_um=wl, flux=rng.normal(1e-15, 1e-16, n),
                   uncertainty=sigma, covariance=cov, resolving_power=40.0,
                   channel_edges_um=np.column_stack([wl - 1e-3, wl + 1e-3]), meta={"seed": 3})


def test_write_read_round_trip_with_truths(tmp_path):
    ds = _dataset()
    path = write_dataset(ds, tmp_path / "out.ecsv", meta={"truth": {"t_iso": np.float64(1250.0), "log_g": 4.5}})
    back = read_dataset(path)
    for field in ("wavelength_um", "flux", "uncertainty", "covariance", "channel_edges_um"):
        np.testing.assert_array_equal(getattr(back, field), getattr(ds, field))
    assert back.name == "ifs" and back.resolving_power == 40.0 and back.kind == "spectrum"
    assert back.meta == {"seed": 3, "truth": {"t_iso": 1250.0, "log_g": 4.5}}
    with pytest.raises(InputFileError, match="out.ecsv: file exists"):
        write_dataset(ds, path)
    write_dataset(ds, path, overwrite=True)


def test_photometry_round_trip(tmp_path):
    ds = read_dataset(_csv(tmp_path, "filter,flux [Jy],err [Jy]\nwise2010-W2,1e-3,1e-4\ntwomass-J,2e-3,1e-4\n"))
    back = read_dataset(write_dataset(ds, tmp_path / "phot.ecsv"))
    assert back.filters == ds.filters and back.kind == "photometry"
    np.testing.assert_array_equal(back.flux, ds.flux)


def test_failed_write_leaves_nothing_behind(tmp_path, monkeypatch):
    target = tmp_path / "out.ecsv"
    target.write_text("previous content\n")

    def broken_fsync(fd):
        raise OSError("disk full")

    monkeypatch.setattr(writers.os, "fsync", broken_fsync)
    with pytest.raises(OSError, match="disk full"):
        write_dataset(_dataset(), target, overwrite=True)
    assert target.read_text() == "previous content\n"  # old file untouched
    assert sorted(p.name for p in tmp_path.iterdir()) == ["out.ecsv"]  # no temp file left
    with pytest.raises(OSError):
        write_dataset(_dataset(), tmp_path / "new.ecsv")
    assert not (tmp_path / "new.ecsv").exists()


finite_floats = st.floats(min_value=-1e3, max_value=1e3, allow_nan=False, allow_infinity=False)


@settings(max_examples=25, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(n=st.integers(1, 12), seed=st.integers(0, 2 ** 32 - 1), scale=st.sampled_from([1e-18, 1e-15, 1.0, 1e10]))
def test_round_trip_property(tmp_path, n, seed, scale):
    """write_dataset then read_dataset preserves every value bit for bit (ECSV writes repr-exact floats)."""
    rng = np.random.default_rng(seed)
    wl = np.cumsum(rng.uniform(1e-3, 0.2, n)) + 0.5
    a = rng.normal(size=(n, n))
    cov = (a @ a.T + n * np.eye(n)) * scale ** 2
    ds = Dataset(name="d", kind="spectrum", wavelength_um=wl, flux=rng.normal(0, scale, n),
                 uncertainty=np.sqrt(np.diag(cov)), covariance=cov if n % 2 else None,
                 resolving_power=rng.uniform(20, 100, n))
    path = tmp_path / f"rt_{seed}_{n}.ecsv"
    write_dataset(ds, path, overwrite=True)
    back = read_dataset(path)
    np.testing.assert_array_equal(back.wavelength_um, ds.wavelength_um)
    np.testing.assert_array_equal(back.flux, ds.flux)
    np.testing.assert_array_equal(back.variance(), ds.variance())
    np.testing.assert_array_equal(back.resolving_power, ds.resolving_power)
    if ds.covariance is not None:
        np.testing.assert_array_equal(back.covariance, 0.5 * (ds.covariance + ds.covariance.T))


def test_ecsv_unknown_unit_and_missing_value(tmp_path):
    header = ("# %ECSV 1.0\n# ---\n# datatype:\n# - {name: wavelength, unit: um, datatype: float64}\n"
              "# - {name: flux, unit: FLUXUNIT, datatype: float64}\n# - {name: err, unit: mJy, datatype: float64}\n"
              "# schema: astropy-2.0\nwavelength flux err\n1.0 0.4 0.02\n1.1 \"\" 0.02\n")
    path = tmp_path / "u.ecsv"
    path.write_text(header.replace("FLUXUNIT", "mJyy"))
    with pytest.raises(InputFileError, match=r"u.ecsv: column 'flux': unknown unit 'mJyy'"):
        read_dataset(path)
    path.write_text(header.replace("FLUXUNIT", "mJy"))
    with pytest.raises(InputFileError, match=r"u.ecsv: column 'flux', row 2: value is missing"):
        read_dataset(path)


def test_kind_and_option_errors(tmp_path):
    spec = _csv(tmp_path, _good_csv())
    with pytest.raises(InputFileError, match=r"spec.csv: kind 'phot' is not one of spectrum, photometry"):
        read_dataset(spec, kind="phot")
    with pytest.raises(InputFileError, match=r"spec.csv: missing column 'filter'.*found columns: 'wavelength'"):
        read_dataset(spec, kind="photometry")
    with pytest.raises(InputFileError, match=r"spec.csv: resolving_power argument"):
        read_dataset(spec, resolving_power=[30.0, 40.0])
    with pytest.raises(InputFileError, match=r"nope.csv: no such file"):
        read_dataset(tmp_path / "nope.csv")
    path = _fits_spectrum(tmp_path / "nobunit.fits", cov=np.diag(ERR_MJY ** 2), cov_unit=None)
    with pytest.raises(InputFileError, match=r"nobunit.fits\[COVARIANCE\]: covariance has no unit"):
        read_dataset(path)


def test_fits_photometry_detected_by_content(tmp_path):
    cols = [fits.Column(name="Filter", format="12A", array=np.array(["twomass-J", "wise2010-W1"])),
            fits.Column(name="flux", format="D", unit="Jy", array=np.array([1e-3, 2e-3])),
            fits.Column(name="sigma", format="D", unit="Jy", array=np.array([1e-4, 2e-4]))]
    path = tmp_path / "phot.dat"  # unknown suffix: the FITS signature decides
    fits.BinTableHDU.from_columns(cols).writeto(path)
    ds = read_dataset(path)
    assert ds.kind == "photometry" and ds.filters == ["twomass-J", "wise2010-W1"]
    wl = np.array([filter_effective_wavelength(f) for f in ds.filters])
    np.testing.assert_allclose(ds.flux, _astropy_flam([1e-3, 2e-3], "Jy", wl), rtol=1e-15)  # source: astropy.units
