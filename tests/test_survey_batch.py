"""retrieve batch on a real local Dask cluster: kill midway, re-run, broken object.

Three objects with tiny fits of the demo survey (synthetic opacity table,
12 channels, 10 layers): ``slow`` (its own configuration with a long chain,
so that it is mid-run when the survey is killed), ``demo_00`` (short chain)
and ``broken`` (an unreadable spectrum).  The first ``retrieve batch`` runs
on its own LocalCluster with 2 workers and is SIGKILLed (the whole process
group: client, scheduler and workers) once ``demo_00`` is complete and
``slow`` has written a checkpoint.  The re-run connects to a separate
2-worker cluster through ``--scheduler`` and must skip ``demo_00``, resume
``slow`` from its checkpoint and report ``broken`` again.
"""
import json
import os
import shutil
import signal
import subprocess
import sys
import time
from pathlib import Path

import h5py
import numpy as np
import pytest
from astropy.table import Table

from retrieve.survey.demo import make_demo_survey

pytest.importorskip("distributed")


def _survey(tmp_path: Path):
    demo = make_demo_survey(tmp_path, n_objects=1, max_steps=40, check_every=20, optimiser_evaluations=100)
    slow_cfg = tmp_path / "slow.toml"
    slow_cfg.write_text(demo.config.read_text().replace("max_steps = 40", "max_steps = 4000")
                        .replace("check_every = 20", "check_every = 10"))
    (tmp_path / "spectra" / "broken.ecsv").write_text("# not a table\n1 2 3\n")
    cat = Table()
    cat["object"] = ["slow", "demo_00", "broken"]
    cat["spectra"] = ["ifs=spectra/demo_00.ecsv", "ifs=spectra/demo_00.ecsv", "ifs=spectra/broken.ecsv"]
    cat["config"] = ["slow.toml", "", ""]
    cat["distance_pc"] = [12.0, 12.0, 12.0]
    cat["spectral_type"] = ["T2", "T3", "L9"]
    path = tmp_path / "catalogue.ecsv"
    cat.write(path, format="ascii.ecsv", overwrite=True)
    return demo, path


def _batch(cat, cfg, out, *extra):
    return [sys.executable, "-m", "retrieve.cli.main", "batch", str(cat), "--config", str(cfg), "--out", str(out),
            *extra]


def _wait_for(cond, proc, timeout):
    t_end = time.monotonic() + timeout
    while time.monotonic() < t_end:
        if cond():
            return True
        if proc.poll() is not None:
            return False
        time.sleep(0.05)
    return False


@pytest.mark.slow
def test_batch_killed_midway_resumes_skips_finished_and_reports_broken(tmp_path):
    demo, cat = _survey(tmp_path)
    out = tmp_path / "survey"
    slow, fast = out / "slow", out / "demo_00"
    proc = subprocess.Popen(_batch(cat, demo.config, out, "--workers", "2"), start_new_session=True,
                            stdout=subprocess.PIPE, stderr=subprocess.STDOUT, text=True)
    try:
        ready = _wait_for(lambda: (fast / "completed.json").is_file() and (slow / "chain.h5").is_file(), proc, 240)
    finally:
        os.killpg(proc.pid, signal.SIGKILL)  # our own process group: batch client, scheduler, workers
        text = proc.communicate()[0]
    assert ready, text
    time.sleep(0.5)  # let the kernel reap the killed workers before reading their files
    shutil.copy(slow / "chain.h5", tmp_path / "slow_at_kill.h5")
    assert not (slow / "completed.json").exists(), "slow finished before the kill; lengthen its chain"
    with h5py.File(tmp_path / "slow_at_kill.h5") as f:
        chain_at_kill = f["chain"][...]
    fast_marker = (fast / "completed.json").stat().st_mtime_ns
    fast_chain = (fast / "chain.h5").stat().st_mtime_ns

    from distributed import LocalCluster
    with LocalCluster(n_workers=2, threads_per_worker=1, host="127.0.0.1", dashboard_address=None,
                      processes=True, silence_logs=40) as cluster:
        # a shorter chain for the re-run: the resumed object only has to finish its last stretch
        rerun = subprocess.run(_batch(cat, demo.config, out, "--scheduler", cluster.scheduler_address,
                                      "--max-steps", str(chain_at_kill.shape[0] + 20)),
                               capture_output=True, text=True, timeout=240)
    assert rerun.returncode == 1, rerun.stdout + rerun.stderr          # 1: an object failed
    assert "2/3 objects finished, 1 failed" in rerun.stdout
    assert "demo_00: already finished, skipped" in rerun.stderr

    # finished object not redone: marker and chain untouched
    assert (fast / "completed.json").stat().st_mtime_ns == fast_marker
    assert (fast / "chain.h5").stat().st_mtime_ns == fast_chain
    # interrupted object resumed: its final chain continues the checkpoint found at the kill
    manifest = json.loads((slow / "manifest.json").read_text())
    assert manifest["resumed_from_step"] == chain_at_kill.shape[0] > 0
    with h5py.File(slow / "chain.h5") as f:
        final = f["chain"][...]
    assert final.shape[0] == chain_at_kill.shape[0] + 20
    np.testing.assert_array_equal(final[:chain_at_kill.shape[0]], chain_at_kill)
    assert (slow / "completed.json").is_file()

    # the broken object is reported, in its folder and in the tables
    assert "not a valid ECSV" in (out / "broken" / "error.txt").read_text()
    status = Table.read(out / "survey_status.ecsv")
    by = {r["object"]: r for r in status}
    assert by["broken"]["status"] == "failed" and by["slow"]["resumed"] and by["demo_00"]["skipped"]
    summary = Table.read(out / "survey_summary.ecsv")
    assert list(summary["object"]) == ["slow", "demo_00", "broken"]
    assert list(summary["status"]) == ["finished", "finished", "failed"]
    assert list(summary["spectral_type"]) == ["T2", "T3", "L9"]                     # catalogue column carried
    own = Table.read(slow / "summary.ecsv")
    row = own[list(own["name"]).index("t_iso")]
    assert summary["t_iso_median"][0] == pytest.approx(row["median"], rel=1e-12, abs=0)   # from the run's summary
    assert summary["t_iso_p16"][0] < summary["t_iso_median"][0] < summary["t_iso_p84"][0]
    assert np.isnan(summary["t_iso_median"][2])
    assert (out / "_logs" / "slow.log").read_text().count("attempt started") == 2
    if "h2o_h" in summary.colnames:  # band depths where the identification module is installed
        assert (out / "survey_band_depths.png").is_file()
