"""`retrieve bands` and `retrieve identify` from the command line."""
import math

import numpy as np
import pytest
from astropy.table import Table

from retrieve.cli.main import main
from retrieve.observations import Dataset
from retrieve.observations.writers import write_dataset


def _grid():
    return 0.95 * np.exp(np.arange(int(math.log(2.45 / 0.95) * 40) + 1) / 40.0)


def _write(folder, name, depth, cov=False):
    wl = _grid()
    flux = 1e-15 * (1 - depth * np.exp(-0.5 * ((wl - 1.655) / 0.05) ** 2))
    sigma = np.full(wl.size, 2e-17)
    c = None
    if cov:
        c = sigma[:, None] * sigma[None, :] * (0.3 * np.exp(-0.5 * (wl[:, None] - wl[None, :]) ** 2 / 0.05 ** 2)
                                               + 0.7 * np.eye(wl.size))
    path = folder / f"{name}.ecsv"
    write_dataset(Dataset(name, "spectrum", wl, flux, sigma, covariance=c), path)
    return path


def test_bands_table_plot_and_user_index(tmp_path, capsys):
    flat = _write(tmp_path, "flat", 0.0, cov=True)
    deep = _write(tmp_path, "deep", 0.4)
    out, png = tmp_path / "idx.ecsv", tmp_path / "diagram.png"
    rc = main(["bands", str(flat), str(deep), "--out", str(out), "--plot", str(png), "--draws", "2000",
               "--index", "wide_ch4:1.60-1.70/1.56-1.60"])
    assert rc == 0 and png.stat().st_size > 1000
    t = Table.read(out)
    assert list(t["name"]) == ["flat", "deep"] and set(t["source"]) == {"data"}
    row_f, row_d = t[0], t[1]
    for name in ("h2o_j", "ch4_j", "h2o_h", "ch4_h", "h2o_k", "ch4_k", "wide_ch4"):
        assert row_f[name] == pytest.approx(1.0, abs=1e-12)     # noise-free flat spectrum: exactly 1
        assert 0.005 < row_f[f"{name}_err"] < 0.05
    # CH4-H numerator 1.635-1.675 um sits in the 1.655 um dip: index well below 1, H2O-K untouched
    assert row_d["ch4_h"] < 0.75 and row_d["h2o_k"] == pytest.approx(1.0, abs=1e-6)
    assert "Burgasser" in t.meta["windows"]["ch4_h"]["source"]
    assert "deep" in capsys.readouterr().out
    # refuses to overwrite without --overwrite
    assert main(["bands", str(flat), "--out", str(out)]) == 2


def test_bands_user_errors(tmp_path, capsys):
    assert main(["bands"]) == 2
    flat = _write(tmp_path, "flat", 0.0)
    assert main(["bands", str(flat), "--index", "bad-spec"]) == 2
    err = capsys.readouterr().err
    assert "--index" in err and len(err.strip().splitlines()) == 2
    assert main(["bands", str(flat), "--plot", str(tmp_path / "p.png"), "--x", "nope"]) == 2


def test_list_bands_shows_sources(capsys):
    assert main(["bands", "--list-bands"]) == 0
    out = capsys.readouterr().out
    for mol in ("H2O", "CH4", "CO", "CO2", "NH3", "K", "Na"):
        assert f"\n{mol} " in out
    assert "value from memory" in out and "HITRAN2020" in out
