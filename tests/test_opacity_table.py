"""The opacity table file format: round trip, checksum and axis refusal."""
import h5py
import numpy as np
import pytest

from retrieve.errors import OpacityTableError
from retrieve.opacity.table import (LOG10_FLOOR, OpacityTable, read_table, regrid_wavelength,
                                    write_table)


def _table(kind="cross_section"):
    wl = np.geomspace(1.0, 2.0, 7)
    t = np.array([300.0, 1000.0, 2000.0])
    p = np.array([1e-3, 1e-1, 10.0])
    rng = np.random.default_rng(1)
    if kind == "cia":
        return OpacityTable("cia", "H2-H2", wl, t, rng.uniform(-46, -44, (3, 7)))
    return OpacityTable(kind, "H2O", wl, t, rng.uniform(-25, -20, (3, 3, 7)), pressure_bar=p,
                        provenance={"inputs": [], "note": "test"})


@pytest.mark.parametrize("kind", ["cross_section", "cia"])
def test_round_trip_preserves_values_and_checksum(tmp_path, kind):
    table = _table(kind)
    path = write_table(table, tmp_path / "t.h5")
    back = read_table(path)
    np.testing.assert_array_equal(back.log10_value, table.log10_value)
    np.testing.assert_array_equal(back.wavelength_um, table.wavelength_um)
    assert back.checksum == table.checksum
    assert back.kind == kind
    assert not list(tmp_path.glob("*.partial"))


def test_edited_data_is_refused(tmp_path):
    path = write_table(_table(), tmp_path / "t.h5")
    with h5py.File(path, "r+") as f:
        f["log10_value"][0, 0, 0] = -10.0
    with pytest.raises(OpacityTableError, match="checksum mismatch"):
        read_table(path)


def test_wrong_axes_are_refused():
    with pytest.raises(OpacityTableError, match="does not match axes"):
        OpacityTable("cross_section", "CO", np.arange(1.0, 4.0), np.array([500.0, 900.0]),
                     np.zeros((2, 2, 2)), pressure_bar=np.array([1.0, 2.0]))
    with pytest.raises(OpacityTableError, match="not strictly ascending"):
        OpacityTable("cia", "H2-H2", np.array([1.0, 3.0, 2.0]), np.array([500.0]), np.zeros((1, 3)))


def test_non_table_file_is_refused(tmp_path):
    bad = tmp_path / "junk.h5"
    bad.write_bytes(b"\x00\x01 not hdf5")
    with pytest.raises(OpacityTableError, match="cannot open as HDF5"):
        read_table(bad)


def test_regrid_is_linear_and_floors_outside():
    table = _table("cia")
    new = np.array([0.5, table.wavelength_um[2], 0.5 * (table.wavelength_um[3] + table.wavelength_um[4]), 3.0])
    out = regrid_wavelength(table, new)
    row = table.log10_value[1]
    assert out.log10_value[1, 0] == LOG10_FLOOR and out.log10_value[1, 3] == LOG10_FLOOR
    assert out.log10_value[1, 1] == pytest.approx(row[2], rel=1e-6, abs=0.0)
    frac = (new[2] - table.wavelength_um[3]) / (table.wavelength_um[4] - table.wavelength_um[3])
    assert out.log10_value[1, 2] == pytest.approx(row[3] + frac * (row[4] - row[3]), rel=1e-6, abs=0.0)
