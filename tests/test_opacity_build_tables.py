"""Table building, provenance, reduction to bins, k-mixing and the `retrieve opacity` CLI."""
import hashlib

import h5py
import numpy as np
import pytest

from retrieve.cli.main import main
from retrieve.errors import OpacityTableError
from retrieve.opacity.correlated_k import mix_random_overlap
from retrieve.opacity.table import read_table, write_table
from retrieve.opacity_build.build import build_tables
from retrieve.opacity_build.dit import fine_cross_sections
from retrieve.opacity_build.grid import BuildGrid
from retrieve.opacity_build.hitran import read_hitran
from retrieve.opacity_build.linelist import concatenate
from retrieve.opacity_build.partition import TabulatedPartition
from retrieve.opacity_build.provenance import make_provenance
from retrieve.opacity_build.reduce import bin_index_ranges, bin_mean, k_coefficients

DATE = "2026-01-01T00:00:00+00:00"


def _co_lines(reference_dir):
    hapi = pytest.importorskip("hapi")
    temps = np.arange(100.0, 3001.0, 25.0)
    q = TabulatedPartition(temps, [hapi.partitionSum(5, 1, t) for t in temps], source="TIPS via hapi")
    path = reference_dir / "hitran" / "co_hitran2020_sample_h2he_broadening.par"
    return path, concatenate(read_hitran(path, partition=q))


def _small_grid(**kw):
    base = dict(wavelength_range_um=(2.28, 2.42), resolving_power=400, temperatures_K=(500.0, 1500.0),
                pressures_bar=(1e-3, 1.0), fine_resolution=0.01, n_g=8)
    base.update(kw)
    return BuildGrid(**base)


def test_grid_bins_have_constant_resolving_power():
    grid = BuildGrid()
    e = grid.output_edges()
    centres = grid.output_wavelengths()
    # common practice, no source: λ/Δλ = R for every bin (edges ratio 1 + 1/R)
    np.testing.assert_allclose(e[:-1] / np.diff(e), 1000.0, rtol=1e-9)
    assert e[0] == pytest.approx(0.8, rel=1e-6, abs=0.0) and e[-1] >= 5.0 and np.all((centres > e[:-1]) & (centres < e[1:]))
    g, w = grid.g_quadrature()
    # source: numpy.polynomial.legendre.leggauss mapped to [0, 1]: ∫ g^3 dg = 1/4 exactly
    assert np.sum(w * g ** 3) == pytest.approx(0.25, rel=1e-12, abs=0.0) and grid.n_g == 16


def test_build_tables_roundtrip_provenance_and_reproducible_bytes(reference_dir, tmp_path):
    path, lines = _co_lines(reference_dir)
    grid = _small_grid()
    prov = make_provenance([path], grid.as_dict(), date=DATE)
    tables = build_tables(lines, grid, "CO", ("cross_section", "ktable"), prov, progress=False)
    files = []
    for run in range(2):
        for kind, table in tables.items():
            files.append(write_table(table, tmp_path / f"run{run}_{kind}.h5"))
        if run == 0:
            tables = build_tables(lines, grid, "CO", ("cross_section", "ktable"), prov, progress=False,
                                  n_workers=2)
    # common practice, no source: same inputs, same date -> bit-identical files (also with 2 workers)
    assert files[0].read_bytes() == files[2].read_bytes()
    assert files[1].read_bytes() == files[3].read_bytes()
    back = read_table(files[1])
    assert back.kind == "ktable" and back.log10_value.shape == (2, 2, grid.output_wavelengths().size, 8)
    rec = back.provenance
    assert rec["inputs"][0]["sha256"] == hashlib.sha256(path.read_bytes()).hexdigest()
    assert rec["date"] == DATE and rec["parameters"]["wing_cutoff_cm"] == 25.0 and rec["version"]


def test_ktable_reproduces_line_by_line_transmission(reference_dir):
    _, lines = _co_lines(reference_dir)
    grid = _small_grid(n_g=16, wavelength_range_um=(2.29, 2.36))
    for t, p in [(800.0, 1e-2), (1500.0, 3.0)]:
        nu, sigma = fine_cross_sections(lines, grid, t, p)
        ranges = bin_index_ranges(nu, grid.output_edges())
        g, w = grid.g_quadrature()
        k = k_coefficients(sigma, ranges, g)
        mean = bin_mean(sigma, ranges)
        partial = 0
        for column in (1e19, 1e21, 1e23):  # molecules cm⁻²
            lbl = np.array([np.exp(-sigma[a:b] * column).mean() for a, b in ranges])
            partial += np.count_nonzero((lbl > 0.1) & (lbl < 0.9))
            ck = np.exp(-k * column) @ w
            # source: Lacis & Oinas 1991 (JGR 96, 9027) - the k-distribution reproduces the bin-mean
            # transmission; 16 Gauss-Legendre points: within 0.01 absolute
            np.testing.assert_allclose(ck, lbl, atol=0.01)
        # an absolute 0.01 is void for bins fully transparent or opaque: some must be in between
        assert partial >= 3
        # k(g) ascends and stays within the bin's fine-grid extremes (common practice, no source)
        assert np.all(np.diff(k, axis=1) >= 0)
        assert np.all(k[:, 0] >= [sigma[a:b].min() for a, b in ranges])
        assert np.all(k[:, -1] <= [sigma[a:b].max() for a, b in ranges])
        assert np.all(mean >= k[:, 0])


def _kdist(sigma, g_points):
    ranges = np.array([[0, sigma.size]])
    return k_coefficients(sigma, ranges, g_points)[0]


def test_random_overlap_mixing_matches_product_of_transmissions():
    rng = np.random.default_rng(3)
    x, w = np.polynomial.legendre.leggauss(16)
    g, w = 0.5 * (x + 1), 0.5 * w
    n_fine = 4000
    # two uncorrelated "spectra" in one bin: sums of Lorentzian lines at random positions
    grid = np.linspace(0, 10, n_fine)

    def spectrum():
        c, s = rng.uniform(0, 10, 40), 10 ** rng.uniform(-21, -19, 40)
        return (s[:, None] * 0.05 / np.pi / ((grid - c[:, None]) ** 2 + 0.05 ** 2)).sum(0)

    s1, s2 = spectrum(), spectrum()
    vmr = np.array([[1e-3], [3e-4]])
    k = np.stack([_kdist(s1, g), _kdist(s2, g)])[:, None, None, :]
    mixed = mix_random_overlap(k, vmr, w)[0, 0]
    assert np.all(np.diff(mixed) >= 0)
    between = []
    for column in (1e20, 1e22, 1e23, 1e24):
        t1 = np.exp(-s1 * vmr[0, 0] * column).mean()
        t2 = np.exp(-s2 * vmr[1, 0] * column).mean()
        between.append(0.1 < t1 * t2 < 0.9)
        # source: Lacis & Oinas 1991, sec. 4 - for uncorrelated spectra the mean transmission of the
        # mixture is the product of the gases' mean transmissions
        assert np.exp(-mixed * column) @ w == pytest.approx(t1 * t2, abs=0.01)
    assert any(between)   # abs=0.01 is void at transmissions near 0 or 1: at least one column in between
    # grey mean conserved exactly by resort-rebin (Amundsen et al. 2017, A&A 598, A97, sec. 2.2)
    assert mixed @ w == pytest.approx((vmr[0, 0] * k[0, 0, 0] + vmr[1, 0] * k[1, 0, 0]) @ w, rel=1e-10, abs=0.0)


def test_random_overlap_limits():
    rng = np.random.default_rng(5)
    x, w = np.polynomial.legendre.leggauss(8)
    w = 0.5 * w
    k = np.sort(10 ** rng.normal(-22, 1, (3, 4, 6, 8)), axis=-1)
    vmr = 10 ** rng.uniform(-5, -3, (3, 4))
    one = mix_random_overlap(k[:1], vmr[:1], w)
    # common practice, no source: one gas -> its own VMR-weighted k
    np.testing.assert_allclose(one, k[0] * vmr[0][:, None, None], rtol=1e-12)
    vmr0 = vmr.copy()
    vmr0[1:] = 0.0
    # absent gases change nothing (rebinning a distribution onto its own g-bins is exact)
    np.testing.assert_allclose(mix_random_overlap(k, vmr0, w), one, rtol=1e-10)
    with pytest.raises(ValueError):
        mix_random_overlap(k[0], vmr, w)


def _run(argv, capsys):
    code = main(argv)
    out = capsys.readouterr()
    return code, out.out, out.err


def test_cli_build_info_list_and_corruption(reference_dir, tmp_path, capsys, monkeypatch):
    pytest.importorskip("hapi")
    src = reference_dir / "hitran" / "co_hitran2020_sample_h2he_broadening.par"
    temps = np.arange(100.0, 3001.0, 25.0)
    import hapi
    pf = tmp_path / "co.pf"
    np.savetxt(pf, np.column_stack([temps, [hapi.partitionSum(5, 1, t) for t in temps]]))
    out = tmp_path / "tables"
    code, text, _ = _run(["opacity", "build", "--hitran", str(src), "--out", str(out), "--kind", "both",
                          "--wavelength-range", "2.3", "2.4", "--resolving-power", "300", "--temperatures",
                          "400,1200", "--pressures", "1e-2:1:2", "--partition", str(pf), "--no-progress",
                          "--workers", "1", "--date", DATE], capsys)
    assert code == 0 and (out / "CO.xsec.h5").is_file() and (out / "CO.ktable.h5").is_file()
    streamed = tmp_path / "streamed"
    code, _, _ = _run(["opacity", "build", "--hitran", str(src), "--out", str(streamed), "--stream",
                       "--wavelength-range", "2.3", "2.4", "--resolving-power", "300", "--temperatures",
                       "400,1200", "--pressures", "1e-2:1:2", "--partition", str(pf), "--no-progress",
                       "--workers", "2", "--date", DATE], capsys)
    # common practice, no source: re-reading the file per (T, P) gives the same table
    np.testing.assert_allclose(read_table(streamed / "CO.xsec.h5").log10_value,
                               read_table(out / "CO.xsec.h5").log10_value, atol=1e-5)
    code, text, _ = _run(["opacity", "info", str(out / "CO.ktable.h5")], capsys)
    assert code == 0 and "checksum:    OK" in text and "ktable" in text and "co.pf" in text
    monkeypatch.setenv("RETRIEVE_OPACITY_DIR", str(out))
    code, text, _ = _run(["opacity", "list"], capsys)
    assert code == 0 and "CO.xsec.h5" in text and "CO.ktable.h5" in text
    with h5py.File(out / "CO.xsec.h5", "r+") as f:
        f["log10_value"][0, 0, 0] += 1.0
    code, text, _ = _run(["opacity", "info", str(out / "CO.xsec.h5")], capsys)
    assert code == 1 and "FAILED" in text
    with pytest.raises(OpacityTableError, match="checksum mismatch"):
        read_table(out / "CO.xsec.h5")


def test_cli_user_errors_exit_2(tmp_path, capsys):
    code, _, err = _run(["opacity", "build", "--hitran", str(tmp_path / "none.par"), "--temperatures", "a,b"],
                        capsys)
    assert code == 2 and "--temperatures" in err and err.count("\n") == 1
    code, _, err = _run(["opacity", "build", "--hitran", str(tmp_path / "none.par"), "--partition",
                         str(tmp_path / "none.pf"), "--no-progress"], capsys)
    assert code == 2 and "none.par: input file not found" in err
    (tmp_path / "lines.par").write_text("x" * 160 + "\n")
    code, _, err = _run(["opacity", "build", "--hitran", str(tmp_path / "lines.par"), "--partition",
                         str(tmp_path / "none.pf"), "--no-progress"], capsys)
    assert code == 2 and "none.pf: input file not found" in err


def test_random_overlap_negligible_gas_shortcut(monkeypatch):
    from retrieve.opacity import correlated_k

    rng = np.random.default_rng(8)
    x, w = np.polynomial.legendre.leggauss(16)
    w = 0.5 * w
    k1 = np.sort(10 ** rng.uniform(-20, -18, (50, 16)), axis=-1)
    k2 = np.sort(10 ** rng.uniform(-27, -25, (50, 16)), axis=-1)  # far below k1 everywhere
    fast = correlated_k.mix_two(k1, k2, w)
    monkeypatch.setattr(correlated_k, "NEGLIGIBLE", 0.0)
    full = correlated_k.mix_two(k1, k2, w)
    # the shortcut changes each k by less than NEGLIGIBLE relative (module docstring; no outside source)
    np.testing.assert_allclose(fast, full, rtol=1e-4)


def test_build_date_follows_source_date_epoch(monkeypatch):
    from retrieve.opacity_build.provenance import build_date

    monkeypatch.setenv("SOURCE_DATE_EPOCH", "1700000000")
    # reproducible-builds.org convention: seconds since 1970-01-01 UTC (1700000000 = 2023-11-14T22:13:20Z)
    assert build_date() == "2023-11-14T22:13:20+00:00"
    assert build_date("2020-01-01") == "2020-01-01"
