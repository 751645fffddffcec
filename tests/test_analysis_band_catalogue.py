"""Band catalogue: shipped file, user extension, and band positions against HITRAN2020 line lists."""
from pathlib import Path

import numpy as np
import pytest

from retrieve.analysis.band_catalogue import bands_of, load_catalogue, shipped_catalogue
from retrieve.errors import InputFileError, UserError

REQUIRED_MOLECULES = ("H2O", "CH4", "CO", "CO2", "NH3", "K", "Na")


def _band(catalogue, molecule, label):
    return next(b for b in catalogue if b.molecule == molecule and b.band == label)


def test_shipped_catalogue_covers_required_absorbers_with_sources():
    cat = shipped_catalogue()
    for mol in REQUIRED_MOLECULES:
        bands = bands_of(cat, mol, (0.8, 5.0))
        assert bands, mol
    for b in cat:
        assert b.window_lo_um <= b.center_um <= b.window_hi_um
        assert b.source.strip()
        for lo, hi in b.continuum_um:
            # a continuum window must not sit inside its own band (common practice, no source)
            assert hi <= b.window_lo_um + 1e-9 or lo >= b.window_hi_um - 1e-9, (b.key, lo, hi)


def _read_par(path):
    """(wavenumber cm-1, S at 296 K, v', v'') of a HITRAN 160-character file (Rothman et al. 2005 layout)."""
    rows = []
    for line in Path(path).read_text().splitlines():
        if len(line) < 100:
            continue
        quanta = (line[67:82].strip(), line[82:97].strip())
        v = tuple(int(q) if q.isdigit() else -1 for q in quanta)
        rows.append((float(line[3:15]), float(line[15:25]), v[0], v[1], int(line[2])))
    return np.array(rows)


def test_co_bands_contain_hitran_band_heads_and_centroids(reference_dir):
    # HITRAN2020 CO sample (Gordon et al. 2022, JQSRT 277, 107949): 12C16O lines by vibrational band
    lines = _read_par(reference_dir / "hitran" / "co_hitran2020_sample.par")
    main = lines[lines[:, 4] == 1]
    cat = shipped_catalogue()
    for v_up, label in ((1, "4.7um"), (2, "2.3um"), (3, "1.6um")):
        sel = main[(main[:, 2] == v_up) & (main[:, 3] == 0)]
        head_um = 1e4 / sel[:, 0].max()
        centroid_um = 1e4 / np.average(sel[:, 0], weights=sel[:, 1])
        b = _band(cat, "CO", label)
        assert b.window_lo_um <= centroid_um <= b.window_hi_um, (label, centroid_um)
        lam = 1e4 / sel[:, 0]
        inside = (lam >= b.window_lo_um) & (lam <= b.window_hi_um)
        assert sel[inside, 1].sum() >= 0.8 * sel[:, 1].sum(), label   # most of the 296 K band strength
        if v_up >= 2:
            # overtone R-branch band head at the short-wavelength end of the window, within 0.02 um
            assert b.window_lo_um - 0.02 <= head_um <= b.window_lo_um + 0.02, (label, head_um)


def test_ch4_bands_contain_hitran_band_centroids(reference_dir):
    # HITRAN2020 CH4 nu3 fundamental and 2nu3 overtone lines (Gordon et al. 2022, JQSRT 277, 107949)
    folder = reference_dir / "hitran" / "ch4_nu3"
    cat = shipped_catalogue()
    cases = (("CH4_M6_I1_0_0_0_0_1A1_to_0_0_1_0_1F2.par", "3.3um"),
             ("CH4_M6_I1_0_0_0_0_1A1_to_0_0_2_0_F2.par", "1.6um"))
    for name, label in cases:
        lines = _read_par(folder / name)
        centroid_um = 1e4 / np.average(lines[:, 0], weights=lines[:, 1])
        b = _band(cat, "CH4", label)
        assert b.window_lo_um <= centroid_um <= b.window_hi_um, (label, centroid_um)
        assert abs(b.center_um - centroid_um) < 0.05, (label, centroid_um)


def test_user_file_adds_and_replaces(tmp_path):
    user = tmp_path / "mybands.toml"
    user.write_text('''
[[band]]
molecule = "CH4"
band = "1.6um"
center_um = 1.66
window_um = [1.62, 1.70]
continuum_um = [[1.56, 1.60]]
source = "test replacement"

[[band]]
molecule = "FeH"
band = "0.99um"
center_um = 0.99
window_um = [0.985, 1.00]
source = "value from memory (Wing-Ford band)"
''')
    cat = load_catalogue(user)
    assert _band(cat, "CH4", "1.6um").window_hi_um == 1.70
    assert _band(cat, "FeH", "0.99um").source.startswith("value from memory")
    assert len(cat) == len(shipped_catalogue()) + 1


@pytest.mark.parametrize("body, word", [
    ('[[band]]\nmolecule = "X"\nband = "a"\ncenter_um = 1.0\nwindow_um = [1.1, 1.2]\nsource = "s"\n', "center_um"),
    ('[[band]]\nmolecule = "X"\nband = "a"\ncenter_um = 1.0\nwindow_um = [0.9, 1.2]\nsource = "s"\ncolour = 1\n',
     "colour"),
    ('[[band]]\nmolecule = "X"\nband = "a"\ncenter_um = 1.0\nwindow_um = [0.9, 1.2]\n', "source"),
    ('[[band]]\nmolecule = "X"\nband = "a"\ncenter_um = 1.0\nwindow_um = [1.2, 0.9]\nsource = "s"\n', "window_um"),
])
def test_bad_user_file_is_one_line_error_naming_file_and_key(tmp_path, body, word):
    path = tmp_path / "bad.toml"
    path.write_text(body)
    with pytest.raises(InputFileError) as exc:
        load_catalogue(path)
    msg = str(exc.value)
    assert "\n" not in msg and str(path) in msg and word in msg
    assert isinstance(exc.value, UserError)


def test_missing_user_file(tmp_path):
    with pytest.raises(InputFileError, match="not found"):
        load_catalogue(tmp_path / "nope.toml")
