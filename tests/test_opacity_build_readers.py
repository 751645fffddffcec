"""Readers of the opacity builder: HITRAN .par (plain, bz2, extended), ExoMol, HITRAN CIA."""
import bz2

import numpy as np
import pytest

from retrieve.errors import InputFileError, UserError
from retrieve.opacity.table import LOG10_FLOOR
from retrieve.opacity_build.cia import cia_table, read_cia
from retrieve.opacity_build.exomol import read_def, read_exomol
from retrieve.opacity_build.grid import BuildGrid
from retrieve.opacity_build.hitran import (HITRAN_ISOTOPOLOGUES, HITRAN_MOLECULES, iter_record_blocks,
                                           parse_records, read_hitran)
from retrieve.opacity_build.linelist import concatenate

Q_FLAT = lambda T: 100.0 + 0.0 * np.asarray(T)  # noqa: E731 - strengths at 296 K do not use Q(T)


def _raw_fields(line: str) -> dict:
    return {"molecule": int(line[0:2]), "wavenumber": float(line[3:15]), "strength": float(line[15:25]),
            "einstein_a": float(line[25:35]), "gamma_air": float(line[35:40]), "gamma_self": float(line[40:45]),
            "e_lower": float(line[45:55]), "n_air": float(line[55:59]), "delta_air": float(line[59:67]),
            "g_upper": float(line[146:153]), "g_lower": float(line[153:160])}


def test_hitran_records_match_the_raw_text_fields(reference_dir):
    path = reference_dir / "hitran" / "co_hitran2020_sample.par"
    text = path.read_text().splitlines()
    records, tails = next(iter_record_blocks(path))
    parsed = parse_records(records)
    assert tails is None and records.shape[0] == len(text) == 5381  # README: 5381 lines
    for i in list(range(20)) + [2000, 5380]:
        raw = _raw_fields(text[i])
        for key, value in raw.items():
            # source: the record text itself, HITRAN 2004 column layout (Rothman et al. 2005, Table 1)
            assert parsed[key][i] == pytest.approx(value, rel=1e-12, abs=0.0), (i, key)
    # source: README of the reference sample - 1344 lines of the main isotopologue, 6 isotopologues
    assert np.sum(parsed["isotopologue"] == 1) == 1344
    assert set(np.unique(parsed["isotopologue"])) == {1, 2, 3, 4, 5, 6}


def test_hitran_all_records_match_numpy_conversion(reference_dir):
    path = reference_dir / "hitran" / "co_hitran2020_sample.par"
    records, _ = next(iter_record_blocks(path))
    parsed = parse_records(records, ["wavenumber", "strength", "e_lower", "delta_air"])
    for key, (a, b) in {"wavenumber": (3, 15), "strength": (15, 25), "e_lower": (45, 55),
                        "delta_air": (59, 67)}.items():
        ref = np.ascontiguousarray(records[:, a:b]).view(f"S{b - a}").ravel().astype(np.float64)
        # source: numpy's decimal string conversion of the same text (common practice, no source)
        np.testing.assert_allclose(parsed[key], ref, rtol=1e-14, atol=1e-18 if key == "delta_air" else 0.0)


def test_hitran_extended_records_give_h2_he_broadening(reference_dir):
    path = reference_dir / "hitran" / "co_hitran2020_sample_h2he_broadening.par"
    lines = path.read_text().splitlines()
    chunks = list(read_hitran(path, partition=Q_FLAT, isotopologues=None, chunk_lines=700))
    main = concatenate([c for c in chunks if c.isotopologue == "5/1"])
    raw = [ln for ln in lines if ln[2] == "1"]
    tails = [ln[160:].split(",") for ln in raw]
    # source: README of the reference sample (Tan et al. 2022): γ_He, err, ref, n_He, err, ref, γ_H2, ...
    np.testing.assert_allclose(main.gamma_he, [float(t[1]) for t in tails])
    np.testing.assert_allclose(main.n_he, [float(t[4]) for t in tails])
    np.testing.assert_allclose(main.gamma_h2, [float(t[7]) for t in tails])
    np.testing.assert_allclose(main.n_h2, [float(t[10]) for t in tails])
    np.testing.assert_allclose(main.wavenumber_cm, [float(ln[3:15]) for ln in raw])
    assert sum(len(c) for c in chunks) == 5381


def test_hitran_bz2_and_chunks_give_identical_lines(reference_dir, tmp_path):
    src = reference_dir / "hitran" / "co_hitran2020_sample.par"
    packed = tmp_path / "co.par.bz2"
    packed.write_bytes(bz2.compress(src.read_bytes()))
    plain = concatenate(read_hitran(src, partition=Q_FLAT))
    small = concatenate(read_hitran(packed, partition=Q_FLAT, chunk_lines=97))
    # common practice, no source: compression and chunking must not change what is read
    np.testing.assert_array_equal(plain.wavenumber_cm, small.wavenumber_cm)
    np.testing.assert_array_equal(plain.strength_ref, small.strength_ref)
    np.testing.assert_array_equal(plain.e_lower_cm, small.e_lower_cm)


def test_hitran_tables_agree_with_hapi():
    hapi = pytest.importorskip("hapi")
    for (m, i), (mass, abundance) in HITRAN_ISOTOPOLOGUES.items():
        # source: hapi isotopologue table (HITRAN), molecularMass / abundance
        assert mass == pytest.approx(hapi.molecularMass(m, i), rel=1e-6, abs=0.0), (m, i)
        assert abundance == pytest.approx(hapi.abundance(m, i), rel=1e-3, abs=0.0), (m, i)
    for m, name in HITRAN_MOLECULES.items():
        # source: hapi.moleculeName (HITRAN molecule numbers; hapi spells NO+ as "NOp")
        assert hapi.moleculeName(m) == name.replace("+", "p"), m


def test_hitran_errors_are_one_line(tmp_path):
    bad = tmp_path / "bad.par"
    bad.write_text("not a hitran file\n")
    with pytest.raises(InputFileError, match="shorter than 160"):
        list(read_hitran(bad, partition=Q_FLAT))
    with pytest.raises(InputFileError, match="not found"):
        list(read_hitran(tmp_path / "missing.par", partition=Q_FLAT))


def _write_exomol_from_hitran(reference_dir, folder):
    """ExoMol files holding the HITRAN CO (main isotopologue) lines: states from E'' and E''+ν."""
    hapi = pytest.importorskip("hapi")
    lines = [ln for ln in (reference_dir / "hitran" / "co_hitran2020_sample.par").read_text().splitlines()
             if ln[2] == "1"]
    nu = np.array([float(ln[3:15]) for ln in lines])
    a = np.array([float(ln[25:35]) for ln in lines])
    e_low = np.array([float(ln[45:55]) for ln in lines])
    g_up = np.array([float(ln[146:153]) for ln in lines])
    g_low = np.array([float(ln[153:160]) for ln in lines])
    j_low = (g_low - 1) / 2  # CO: g = 2J + 1 (nuclear spin factor 1 for 12C16O)
    levels = {}
    for e, g in list(zip(np.round(e_low, 4), g_low)) + list(zip(np.round(e_low + nu, 4), g_up)):
        levels.setdefault((e, g), len(levels) + 1)
    with open(folder / "12C-16O__Test.states", "w") as fh:
        for (e, g), idx in levels.items():
            fh.write(f"{idx:12d} {e:12.6f} {int(g):6d} {int((g - 1) / 2):7d}  +  X 0\n")
    with open(folder / "12C-16O__Test.trans", "w") as fh:
        for k in range(nu.size):
            up = levels[(round(e_low[k] + nu[k], 4), g_up[k])]
            lo = levels[(round(e_low[k], 4), g_low[k])]
            fh.write(f"{up:12d} {lo:12d} {a[k]:10.4e}\n")
    temps = np.arange(100.0, 3001.0, 10.0)
    np.savetxt(folder / "12C-16O__Test.pf", np.column_stack([temps, [hapi.partitionSum(5, 1, t) for t in temps]]),
               fmt="%8.1f %14.6f")
    (folder / "12C-16O__Test.def").write_text(
        "EXOMOL.def                # ID\n(12C)(16O)                # IsoFormula\n12C-16O                   # Iso-slug\n"
        "Test                      # Isotopologue dataset name\n27.994915 4.6487e-26      # Isotopologue mass (Da) and (kg)\n"
        "0.07                      # Default value of Lorentzian half-width for all lines (in cm-1/bar)\n"
        "0.5                       # Default value of temperature exponent for all lines\n")
    (folder / "12C-16O__H2.broad").write_text("".join(f"a0 {0.07 - 0.0005 * j:.4f} {0.6:.3f} {j}\n" for j in range(41)))
    return nu, e_low, j_low, float(hapi.abundance(5, 1))


def test_exomol_reader_reproduces_hitran_strengths(reference_dir, tmp_path):
    nu, e_low, j_low, abundance = _write_exomol_from_hitran(reference_dir, tmp_path)
    info = read_def(tmp_path / "12C-16O__Test.def")
    # the .def file's own text, written above (mass 27.994915 Da, dataset name "Test")
    assert info["mass_amu"] == pytest.approx(27.994915, rel=1e-6, abs=0.0) and info["dataset"] == "Test"
    ll = concatenate(read_exomol(tmp_path / "12C-16O__Test.def", isotopologue_abundance=abundance,
                                 chunk_lines=300))
    assert ll.species == "CO" and len(ll) == nu.size
    s_hitran = np.array([float(ln[15:25]) for ln in
                         (reference_dir / "hitran" / "co_hitran2020_sample.par").read_text().splitlines()
                         if ln[2] == "1"])
    order = np.argsort(nu)
    got = np.argsort(ll.wavenumber_cm)
    np.testing.assert_allclose(ll.wavenumber_cm[got], nu[order], atol=2e-4)
    strong = s_hitran[order] > 1e-26
    # source: Šimečková et al. 2006, JQSRT 98, 130, eq. 20 - A, g', E'' and the TIPS Q reproduce
    # HITRAN's S(296 K) (both given to 4 digits)
    np.testing.assert_allclose(ll.strength(296.0)[got][strong], s_hitran[order][strong], rtol=3e-3)
    # broadening looked up by J'' from the a0 rows we wrote; J'' > 40 takes the last row
    # (ExoMol convention, Tennyson et al. 2016 sec. 4.7 - value from memory)
    np.testing.assert_allclose(ll.gamma_h2, 0.07 - 0.0005 * np.minimum(j_low, 40), atol=1e-9)
    assert ll.gamma_he is not None and np.all(ll.gamma_he == 0.04)


def test_exomol_missing_files_are_reported(tmp_path):
    (tmp_path / "1H2-16O__X.def").write_text("18.0106 # Isotopologue mass (Da) and (kg)\n")
    with pytest.raises(UserError, match="no 1H2-16O__X.states"):
        list(read_exomol(tmp_path / "1H2-16O__X.def"))


def _write_cia(path):
    """A HITRAN-format CIA file: two temperatures over one range, one temperature over a second."""
    nu1 = np.arange(2000.0, 6000.01, 5.0)
    nu2 = np.arange(7000.0, 9000.01, 5.0)
    blocks = []
    for t, nu in ((300.0, nu1), (1000.0, nu1), (500.0, nu2)):
        k = 1e-46 * (t / 300.0) * np.exp(-((nu - nu.mean()) / 800.0) ** 2)
        head = f"{'H2-H2':>20s}{nu[0]:10.4f}{nu[-1]:10.4f}{nu.size:7d}{t:7.1f}{k.max():10.3E}{0.0:6.3f}{'':21s}{1:3d}"
        blocks.append((head, nu, k))
    with open(path, "w") as fh:
        for head, nu, k in blocks:
            fh.write(head + "\n")
            for a, b in zip(nu, k):
                fh.write(f" {a:10.4f} {b:10.3E}\n")
    return blocks


def test_cia_reader_and_binning(tmp_path):
    path = tmp_path / "H2-H2_test.cia"
    blocks = _write_cia(path)
    pair, parsed = read_cia(path)
    assert pair == "H2-H2" and len(parsed) == 3
    # source: the file's own text (values written with 4 significant digits)
    np.testing.assert_allclose(parsed[0]["value"], blocks[0][2], rtol=1e-3)
    grid = BuildGrid(wavelength_range_um=(1.0, 4.0), resolving_power=100)
    table = cia_table(path, grid)
    assert table.kind == "cia" and list(table.temperature_K) == [300.0, 500.0, 1000.0]
    edges = grid.output_edges()
    k300 = 10.0 ** table.log10_value[0].astype(np.float64)
    checked = 0
    for b in (20, 60, 100):
        lam = np.linspace(edges[b], edges[b + 1], 2001)
        ref = np.interp(1e4 / lam, blocks[0][1], blocks[0][2], left=0, right=0)
        if ref.mean() > 0:
            # common practice, no source: bin value = average over the bin of the tabulated curve
            assert k300[b] == pytest.approx(ref.mean(), rel=2e-3, abs=0.0)
            checked += 1
    assert checked >= 2   # the bins above must actually fall inside the tabulated range
    # the second range (7000-9000 cm⁻¹) has only T = 500 K: held at that value at 300 K
    in_second = (1e4 / table.wavelength_um > 7100) & (1e4 / table.wavelength_um < 8900)
    assert in_second.sum() >= 3 and np.all(table.log10_value[1][in_second] > LOG10_FLOOR)  # not two floors
    np.testing.assert_allclose(table.log10_value[0][in_second], table.log10_value[1][in_second])


def test_cia_bad_header_names_the_line(tmp_path):
    path = tmp_path / "bad.cia"
    path.write_text("H2-H2 1 2\n")
    with pytest.raises(InputFileError, match="line 1"):
        read_cia(path)


def test_cli_exomol_build_matches_hitran_build(reference_dir, tmp_path, capsys):
    from retrieve.cli.main import main
    from retrieve.opacity.table import read_table
    from retrieve.opacity_build.build import build_cross_section_table

    _write_exomol_from_hitran(reference_dir, tmp_path)
    (tmp_path / "12C-16O__H2.broad").unlink()  # default broadening on both sides
    opts = ["--wavelength-range", "2.3", "2.4", "--resolving-power", "200", "--temperatures", "1000",
            "--pressures", "0.1", "--no-progress", "--workers", "1"]
    code = main(["opacity", "build", "--exomol", str(tmp_path / "12C-16O__Test.def"), "--out",
                 str(tmp_path / "out"), *opts])
    capsys.readouterr()
    assert code == 0
    exo = read_table(tmp_path / "out" / "CO.xsec.h5")
    hapi = pytest.importorskip("hapi")
    from retrieve.opacity_build.partition import read_partition_file
    lines = concatenate(read_hitran(reference_dir / "hitran" / "co_hitran2020_sample.par",
                                    partition=read_partition_file(tmp_path / "12C-16O__Test.pf")))
    grid = BuildGrid(wavelength_range_um=(2.3, 2.4), resolving_power=200, temperatures_K=(1000.0,),
                     pressures_bar=(0.1,))
    hit = build_cross_section_table(lines, grid, "CO", progress=False)
    assert hapi.abundance(5, 1) < 1
    # source: Šimečková et al. 2006 eq. 20 - the same lines from A (ExoMol files) or from S (HITRAN)
    # give the same opacity; 4-digit A and S values -> 0.5 %
    np.testing.assert_allclose(10.0 ** exo.log10_value.astype(float) * hapi.abundance(5, 1),
                               10.0 ** hit.log10_value.astype(float), rtol=5e-3)


def test_hitran_missing_final_newline_and_crlf(reference_dir, tmp_path):
    src = reference_dir / "hitran" / "co_hitran2020_sample.par"
    ref = concatenate(read_hitran(src, partition=Q_FLAT, isotopologues=None))
    text = src.read_bytes()
    for name, data in (("nonl.par", text.rstrip(b"\n")), ("crlf.par", text.replace(b"\n", b"\r\n"))):
        path = tmp_path / name
        path.write_bytes(data)
        for chunk in (1000, 10 ** 6):
            got = concatenate(read_hitran(path, partition=Q_FLAT, isotopologues=None, chunk_lines=chunk))
            # common practice, no source: line endings do not change the records read
            # (chunks are split by isotopologue, so compare as sorted sets)
            np.testing.assert_array_equal(np.sort(got.wavenumber_cm), np.sort(ref.wavenumber_cm))
            np.testing.assert_array_equal(np.sort(got.strength_ref), np.sort(ref.strength_ref))


def test_cli_cia_build_and_info(tmp_path, capsys):
    from retrieve.cli.main import main

    src = tmp_path / "H2-H2_test.cia"
    _write_cia(src)
    out = tmp_path / "H2-H2.cia.h5"
    assert main(["opacity", "build", "--cia", str(src), "--out", str(out), "--wavelength-range", "1.0", "4.0",
                 "--resolving-power", "100", "--date", "2026-01-01T00:00:00+00:00"]) == 0
    assert main(["opacity", "info", str(out)]) == 0
    text = capsys.readouterr().out
    # the file's own header values (pair, temperatures) and a verified checksum
    assert "H2-H2" in text and "300-1000 K, 3 values" in text and "checksum:    OK" in text


def test_hitran_ch4_nu3_band_totals(reference_dir):
    folder = reference_dir / "hitran" / "ch4_nu3"
    path = folder / "CH4_M6_I1_0_0_0_0_1A1_to_0_0_1_0_1F2.par"
    ll = concatenate(read_hitran(path, partition=Q_FLAT, chunk_lines=2000))
    # 12CH4 mass from the HITRAN isotopologue table (hapi.molecularMass(6, 1) = 16.0313 Da)
    assert ll.species == "CH4" and ll.mass_amu == pytest.approx(16.0313, rel=1e-6, abs=0.0)
    # source: ../shared/reference/README.md table (HITRAN2020 ν3 band of 12CH4): 6489 lines,
    # 2731-3254 cm⁻¹, Σ S(296 K) = 1.082e-17 cm/molecule
    assert len(ll) == 6489
    assert ll.wavenumber_cm.min() == pytest.approx(2731, abs=1) and ll.wavenumber_cm.max() == pytest.approx(3254, abs=1)
    assert ll.strength_ref.sum() == pytest.approx(1.082e-17, rel=1e-3, abs=0.0)


def test_exomol_split_bz2_trans_files_read_like_one(reference_dir, tmp_path):
    _, _, _, abundance = _write_exomol_from_hitran(reference_dir, tmp_path)
    whole = concatenate(read_exomol(tmp_path / "12C-16O__Test.def"))
    rows = (tmp_path / "12C-16O__Test.trans").read_bytes().splitlines(keepends=True)
    (tmp_path / "12C-16O__Test.trans").unlink()
    half = len(rows) // 2
    # ExoMol splits big lists by wavenumber range: <slug>__<dataset>__<from>-<to>.trans.bz2
    (tmp_path / "12C-16O__Test__00000-02000.trans.bz2").write_bytes(bz2.compress(b"".join(rows[:half])))
    (tmp_path / "12C-16O__Test__02000-15000.trans.bz2").write_bytes(bz2.compress(b"".join(rows[half:])))
    split = concatenate(read_exomol(tmp_path / "12C-16O__Test.def", chunk_lines=100))
    # common practice, no source: splitting and compressing the transitions changes nothing
    np.testing.assert_array_equal(split.wavenumber_cm, whole.wavenumber_cm)
    np.testing.assert_array_equal(split.einstein_a, whole.einstein_a)
    np.testing.assert_array_equal(split.strength(1500.0), whole.strength(1500.0))


def test_hitran_extended_records_of_unequal_length(reference_dir, tmp_path):
    src = reference_dir / "hitran" / "co_hitran2020_sample_h2he_broadening.par"
    lines = src.read_bytes().splitlines()
    ragged = tmp_path / "ragged.par"
    ragged.write_bytes(b"\n".join(ln.rstrip() if i % 2 else ln for i, ln in enumerate(lines)) + b"\n")
    ref = concatenate(read_hitran(src, partition=Q_FLAT))      # equal lengths: column-wise parsing
    got = concatenate(read_hitran(ragged, partition=Q_FLAT))   # unequal: row-wise parsing
    # common practice, no source: both parsers read the same numbers
    for key in ("gamma_h2", "n_h2", "gamma_he", "n_he", "wavenumber_cm"):
        np.testing.assert_array_equal(getattr(got, key), getattr(ref, key))
