"""``retrieve describe``: output, exit codes and error reporting."""
from __future__ import annotations

import subprocess
import sys

import numpy as np
import pytest

from retrieve.cli.main import main

SPEC = "# resolving_power: 40\nwavelength [um],flux [mJy],uncertainty [mJy]\n1.0,0.5,0.05\n1.1,0.6,0.03\n1.2,0.4,0.04\n"
BAD = "wavelength [um],flux [mJy],uncertainty [mJy]\n1.0,0.5,0.05\n1.1,0.6,-0.3\n"


@pytest.fixture
def files(tmp_path):
    (tmp_path / "spec.csv").write_text(SPEC)
    (tmp_path / "bad.csv").write_text(BAD)
    (tmp_path / "phot.csv").write_text("filter,flux [mJy],err [mJy]\ntwomass-Ks,1.0,0.1\n")
    np.save(tmp_path / "cov.npy", np.diag([0.05, 0.03, 0.04]) ** 2)
    return tmp_path


def test_describe_prints_summary(files, capsys):
    code = main(["describe", str(files / "spec.csv"), str(files / "phot.csv"), "--covariance", str(files / "cov.npy")])
    out = capsys.readouterr().out
    assert code == 0
    assert "kind             spectrum" in out and "points           3" in out
    assert "wavelength       1-1.2 um" in out and "resolving power  40" in out
    # median S/N of (0.5/0.05, 0.6/0.03, 0.4/0.04) = median(10, 20, 10) = 10 (arithmetic on the file values)
    assert "median S/N       10\n" in out
    assert "covariance       yes" in out and "covariance       no" in out  # second file has none
    assert "kind             photometry" in out and "filters          twomass-Ks" in out


def test_describe_bad_file_exit_2_one_line(files, capsys):
    code = main(["describe", str(files / "bad.csv")])
    err = capsys.readouterr().err
    assert code == 2
    assert err.count("\n") == 1 and "Traceback" not in err
    assert f"{files / 'bad.csv'}: column 'uncertainty', row 2: value must be > 0 (got -0.3)" in err


def test_describe_too_many_covariances(files, capsys):
    code = main(["describe", str(files / "spec.csv"), "--covariance", str(files / "cov.npy"),
                 "--covariance", str(files / "cov.npy")])
    assert code == 2 and "2 --covariance files for 1 datasets" in capsys.readouterr().err


def _run(*args):
    return subprocess.run([sys.executable, "-m", "retrieve.cli.main", *args], capture_output=True, text=True,
                          timeout=60)


def test_describe_subprocess_traceback_only_with_debug(files):
    plain = _run("describe", str(files / "bad.csv"))
    assert plain.returncode == 2 and "Traceback" not in plain.stderr
    assert plain.stderr.strip().count("\n") == 0 and "row 2" in plain.stderr
    debug = _run("--debug", "describe", str(files / "bad.csv"))
    assert debug.returncode != 0 and "Traceback" in debug.stderr and "InputFileError" in debug.stderr
