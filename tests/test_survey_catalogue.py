"""Survey building blocks without a cluster: catalogue, per-object configuration, one task, progress, [survey]."""
import json
import math
import os
import tomllib
from pathlib import Path

import numpy as np
import pytest
from astropy.table import Table

from retrieve.errors import ConfigError, InputFileError, UserError
from retrieve.inference.config import load_config, parse_config
from retrieve.survey.batch import (COMPLETED, ERROR, ObjectTask, SurveySettings, build_tasks, fingerprint,
                                   jobqueue_options, run_object, survey_settings)
from retrieve.survey.catalogue import object_config, read_catalogue
from retrieve.survey.demo import make_demo_survey
from retrieve.survey.progress import SurveyProgress


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    return make_demo_survey(tmp_path_factory.mktemp("demo"), n_objects=2, max_steps=20, check_every=10,
                            optimiser_evaluations=60)


def _catalogue(folder: Path, **columns) -> Path:
    t = Table(columns)
    path = folder / "cat.ecsv"
    t.write(path, format="ascii.ecsv", overwrite=True)
    return path


# --------------------------------------------------------------------------- catalogue
def test_catalogue_columns_paths_and_overrides(tmp_path):
    path = _catalogue(tmp_path, object=["a", "b"], spectra=["ifs=s/a.ecsv; phot=/abs/p.ecsv", "s/b.ecsv"],
                      distance_pc=[12.5, np.nan], distance_pc_err=[0.5, np.nan], seed=[7, np.nan],
                      fix_log_g=[np.nan, 4.5], spectral_type=["T5", "L8"])
    a, b = read_catalogue(path)
    # relative paths are taken from the catalogue's folder; NAME=PATH keeps its name (our convention)
    assert a.spectra == (f"ifs={tmp_path / 's/a.ecsv'}", "phot=/abs/p.ecsv")
    assert b.spectra == (str(tmp_path / "s/b.ecsv"),)
    assert a.distance == ("distance_pc", 12.5, 0.5) and b.distance is None
    assert a.seed == 7 and b.seed is None
    assert a.fixed == {} and b.fixed == {"log_g": 4.5}
    assert a.info == {"spectral_type": "T5"} and a.row == 1 and b.row == 2


@pytest.mark.parametrize("columns, fragment", [
    ({"object": ["a"]}, "missing column 'spectra'"),
    ({"object": ["a", "a"], "spectra": ["x", "y"]}, "row 2 column 'object': 'a' repeats row 1"),
    ({"object": ["a b"], "spectra": ["x"]}, "row 1 column 'object'"),
    ({"object": ["a"], "spectra": [""]}, "row 1 (a) column 'spectra': no spectrum file"),
    ({"object": ["a"], "spectra": ["x"], "distance_p": [3.0]}, "column 'distance_p' looks like 'distance_pc'"),
    ({"object": ["a"], "spectra": ["x"], "distance_pc": [3.0], "parallax_mas": [300.0]}, "both distance_pc"),
    ({"object": ["a"], "spectra": ["x"], "parallax_mas_err": [0.1], "parallax_mas": [np.nan]},
     "'parallax_mas_err' is given without 'parallax_mas'"),
    ({"object": ["a"], "spectra": ["x"], "distance_pc": [-3.0]}, "must be > 0"),
    ({"object": ["a"], "spectra": ["x"], "seed": [1.5]}, "non-negative integer"),
])
def test_catalogue_errors_are_one_line_naming_file_row_and_column(tmp_path, columns, fragment):
    path = _catalogue(tmp_path, **columns)
    with pytest.raises(InputFileError) as err:
        read_catalogue(path)
    msg = str(err.value)
    assert fragment in msg and str(path) in msg and "\n" not in msg


def test_object_config_applies_overrides_and_its_text_parses_back_to_the_same_fit(demo, tmp_path):
    base = load_config(demo.config)
    path = _catalogue(tmp_path, object=["hd_1"], spectra=["x.ecsv"], parallax_mas=[40.0], parallax_mas_err=[0.2],
                      seed=[5], fix_t_iso=[1234.0])
    (entry,) = read_catalogue(path)
    cfg = object_config(base, entry)
    assert cfg.object_name == "hd_1" and cfg.sampler.seed == 5
    assert "distance_pc" not in cfg.fixed and "t_iso" not in cfg.free and cfg.fixed["t_iso"] == 1234.0
    prior = cfg.free["parallax_mas"].to_dict()
    assert prior["prior"] == "truncated-gaussian" and (prior["mean"], prior["sigma"]) == (40.0, 0.2)
    # the text written to the run folder must describe exactly this fit (Run.config re-parses it)
    again = parse_config(tomllib.loads(cfg.text), base_dir=base.base_dir)
    assert again.digest == cfg.digest and again.object_name == "hd_1"
    assert again.sampler.seed == 5


def test_reserved_object_names_are_refused(demo, tmp_path):
    path = _catalogue(tmp_path, object=["survey_summary.ecsv"], spectra=["x.ecsv"])
    with pytest.raises(UserError, match="reserved"):
        build_tasks(read_catalogue(path), demo.config, tmp_path / "out")


# --------------------------------------------------------------------------- one task, in this process
def _task(demo, folder: Path, spectrum: Path, name="obj"):
    cfg = object_config(load_config(demo.config), read_catalogue(
        _catalogue(folder, object=[name], spectra=[f"ifs={spectrum}"]))[0])
    spectra = (f"ifs={spectrum}",)
    return ObjectTask(name, cfg, spectra, folder / "out" / name, folder / "out" / "_logs" / f"{name}.log",
                      fingerprint(cfg, spectra))


def test_run_object_writes_a_run_folder_then_skips_it_and_refuses_a_changed_fit(demo, tmp_path):
    task = _task(demo, tmp_path, demo.spectra[0])
    first = run_object(task)
    assert first["status"] == "finished" and not first["skipped"], first
    marker = json.loads((task.run_dir / COMPLETED).read_text())
    assert marker["fingerprint"] == task.fingerprint and marker["n_steps"] == 20
    # the run folder is the one `retrieve fit` writes: load_run opens it
    from retrieve.inference import load_run
    run = load_run(task.run_dir)
    assert run.chain.shape == (20, 8, 3) and run.config.object_name == "obj"
    mtime = os.stat(task.run_dir / "chain.h5").st_mtime_ns
    second = run_object(task)
    assert second["status"] == "finished" and second["skipped"]
    assert os.stat(task.run_dir / "chain.h5").st_mtime_ns == mtime
    changed = run_object(ObjectTask(**{**task.__dict__, "fingerprint": "other"}))
    assert changed["status"] == "failed" and "different configuration" in changed["error"]
    log = task.log_path.read_text()
    assert "attempt started" in log and "finished (" in log


def test_run_object_records_a_broken_spectrum_and_retries_it(demo, tmp_path):
    bad = tmp_path / "bad.ecsv"
    bad.write_text("this is not a table\n")
    task = _task(demo, tmp_path, bad, name="bad")
    out = run_object(task)
    assert out["status"] == "failed" and str(bad) in out["error"] and "\n" not in out["error"]
    assert (task.run_dir / ERROR).read_text().splitlines()[0] == out["error"]
    bad.write_bytes(Path(demo.spectra[1]).read_bytes())  # repaired: the next attempt succeeds
    again = run_object(ObjectTask(**{**task.__dict__, "fingerprint": fingerprint(task.config, task.spectra)}))
    assert again["status"] == "finished" and not (task.run_dir / ERROR).exists()


def test_run_object_replaces_an_incomplete_run_without_checkpoint(demo, tmp_path):
    task = _task(demo, tmp_path, demo.spectra[0])
    task.run_dir.mkdir(parents=True)
    (task.run_dir / "config.toml").write_text("# an attempt killed before the first checkpoint\n")
    (task.run_dir / "manifest.json").write_text("{}\n")
    out = run_object(task)
    assert out["status"] == "finished" and not out["resumed"]
    assert "replacing an incomplete run" in task.log_path.read_text()


# --------------------------------------------------------------------------- progress and [survey]
def test_progress_counts_and_event_order():
    p = SurveyProgress(["a", "b", "c"], stream=None)
    p.handle_event((0.0, {"object": "a", "state": "running", "worker": "w1"}))
    p.handle_event((0.0, {"object": "b", "state": "running", "worker": "w2"}))
    # a's end event overtakes its result, c starts on the same worker: never 3 running on 2 workers
    p.handle_event((1.0, {"object": "a", "state": "ended", "status": "finished"}))
    p.handle_event((1.0, {"object": "c", "state": "running", "worker": "w1"}))
    assert p.counts()["running"] == 2
    p.done("a", {"status": "finished", "elapsed_s": 1.0})
    p.done("b", {"status": "failed", "error": "boom"})
    p.done("c", {"status": "finished", "skipped": True})
    assert p.line() == "survey: 2/3 finished (1 skipped), 0 running, 1 failed, 0 waiting"
    t = p.table()
    assert list(t["status"]) == ["finished", "failed", "finished"] and t["error"][1] == "boom"


def test_survey_settings_validation():
    s = survey_settings({"cluster": "slurm", "workers": 4, "job_setup": ["module load x"]}, "f.toml")
    assert s.cluster == "slurm" and s.workers == 4 and s.job_setup == ("module load x",)
    for bad, fragment in (({"cluster": "sge"}, "unknown"), ({"worker": 2}, "did you mean 'workers'"),
                          ({"workers": 0}, ">= 1"), ({"job_setup": [1]}, "list of strings")):
        with pytest.raises(ConfigError, match=fragment):
            survey_settings(bad, "f.toml")


def test_slurm_job_script_from_survey_keys():
    jq = pytest.importorskip("dask_jobqueue")
    s = SurveySettings(cluster="slurm", queue="short", account="proj7", walltime="01:30:00", cores_per_job=2,
                       memory_per_job="4GB", job_directives=("--constraint=cpu",), job_setup=("module load mpi",))
    cluster = jq.SLURMCluster(**jobqueue_options(s))
    try:
        script = cluster.job_script()
    finally:
        cluster.close()
    # directive spellings as dask-jobqueue's SLURM template writes them (library: dask_jobqueue.slurm)
    for line in ("#SBATCH -p short", "#SBATCH -A proj7", "#SBATCH -t 01:30:00", "#SBATCH --cpus-per-task=2",
                 "#SBATCH --constraint=cpu", "module load mpi"):
        assert line in script
    # two single-threaded worker processes for two cores
    assert "--nworkers 2" in script and "--nthreads 1" in script


def test_missing_dask_jobqueue_is_a_clear_error(monkeypatch):
    import builtins
    from retrieve.survey.batch import jobqueue_cluster
    real_import = builtins.__import__

    def fake(name, *args, **kw):
        if name == "dask_jobqueue":
            raise ImportError(name)
        return real_import(name, *args, **kw)
    monkeypatch.setattr(builtins, "__import__", fake)
    with pytest.raises(UserError, match="needs dask-jobqueue; install it"):
        jobqueue_cluster(SurveySettings(cluster="pbs"))


# --------------------------------------------------------------------------- summary pieces
def test_summary_reads_detections_written_by_the_identification_step(tmp_path):
    from retrieve.survey.summary import _detections
    det = Table({"molecule": ["H2O", "CH4"], "ln_bayes_factor": [30.2, 0.4], "significance_sigma": [8.1, 1.2],
                 "abundance_class": ["constrained", "unconstrained"]})
    det.write(tmp_path / "detections.ecsv", format="ascii.ecsv")
    bands = Table({"molecule": ["H2O", "H2O", "CH4"], "band": ["1.4um", "1.9um", "1.6um"],
                   "flag": ["detected", "tentative", "not detected"]})
    bands.write(tmp_path / "bands.ecsv", format="ascii.ecsv")
    out = _detections(tmp_path)
    assert out["sigma_H2O"] == 8.1 and out["ln_b_CH4"] == 0.4 and out["class_CH4"] == "unconstrained"
    assert out["bands_detected"] == "H2O:1.4um"


def test_band_depth_of_a_flat_spectrum_is_one(tmp_path):
    pytest.importorskip("retrieve.analysis.indices")
    from retrieve.observations import Dataset
    from retrieve.observations.writers import write_dataset
    from retrieve.survey.summary import band_depths
    (tmp_path / "data").mkdir()
    wl = np.linspace(1.0, 1.75, 40)
    write_dataset(Dataset("ifs", "spectrum", wl, np.full(40, 2e-15), np.full(40, 2e-17), resolving_power=40.0),
                  tmp_path / "data" / "ifs.ecsv")
    depths = band_depths(tmp_path)
    # a flat spectrum has index 1 (ratio of equal mean fluxes; common practice, no source)
    for name in ("h2o_j", "ch4_j", "h2o_h", "ch4_h"):
        assert abs(depths[name] - 1.0) < 3 * depths[f"{name}_err"] + 1e-12
    assert math.isnan(depths.get("h2o_k", math.nan))  # K band not covered


def test_an_object_with_a_bad_configuration_fails_alone(demo, tmp_path):
    path = _catalogue(tmp_path, object=["good", "nocfg"], spectra=[f"ifs={demo.spectra[0]}"] * 2,
                      config=["", "missing.toml"])
    good, nocfg = build_tasks(read_catalogue(path), demo.config, tmp_path / "out")
    assert good.setup_error == "" and good.config.object_name == "good"
    out = run_object(nocfg)
    assert out["status"] == "failed" and "missing.toml: configuration file not found" in out["error"]
    assert (tmp_path / "out" / "nocfg" / ERROR).is_file()


def test_batch_cli_bad_catalogue_is_exit_code_2_before_any_cluster(demo, tmp_path, capsys):
    from retrieve.cli.main import main
    path = _catalogue(tmp_path, object=["a"], spectrum=["x.ecsv"])
    code = main(["batch", str(path), "--config", str(demo.config), "--out", str(tmp_path / "out")])
    err = capsys.readouterr().err
    assert code == 2 and "missing column 'spectra'" in err and err.count("\n") == 1
    assert not (tmp_path / "out").exists()


def test_survey_figure_picks_the_best_covered_index_pair(tmp_path):
    from retrieve.survey.summary import survey_figure
    t = Table({"object": ["a", "b", "c"], "h2o_h": [0.9, 0.8, np.nan], "h2o_h_err": [0.01, 0.02, np.nan],
               "ch4_h": [1.0, 0.7, np.nan], "ch4_h_err": [0.02, 0.02, np.nan],
               "h2o_j": [np.nan, 0.6, np.nan], "ch4_j": [np.nan, 0.9, np.nan]})
    path = survey_figure(t, tmp_path / "fig.png")
    # PNG signature (PNG specification, section 5.2)
    assert path == tmp_path / "fig.png" and path.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    assert survey_figure(Table({"object": ["a"], "h2o_h": [np.nan], "ch4_h": [np.nan]}), tmp_path / "n.png") is None
    assert not (tmp_path / "n.png").exists()


def test_identification_after_a_finished_fit_without_refitting(demo, tmp_path):
    pytest.importorskip("retrieve.analysis.identify")
    from retrieve.survey.summary import object_row
    task = _task(demo, tmp_path, demo.spectra[0])
    assert run_object(task)["status"] == "finished"
    chain_mtime = os.stat(task.run_dir / "chain.h5").st_mtime_ns
    with_id = ObjectTask(**{**task.__dict__, "identify": True})
    out = run_object(with_id)
    assert out["status"] == "finished" and not out["skipped"], out
    assert os.stat(task.run_dir / "chain.h5").st_mtime_ns == chain_mtime      # the fit was not redone
    assert json.loads((task.run_dir / COMPLETED).read_text())["identified"] is True
    assert run_object(with_id)["skipped"]
    det = Table.read(task.run_dir / "detections.ecsv")
    row = object_row("obj", {"status": "finished", "error": ""}, task.run_dir)
    # the summary copies the identification step's numbers
    assert row["sigma_H2O"] == pytest.approx(float(det["significance_sigma"][0]), rel=1e-12, abs=0)
    assert row["ln_b_H2O"] == pytest.approx(float(det["ln_bayes_factor"][0]), rel=1e-12, abs=0)


def test_object_logs_of_concurrent_threads_stay_apart(tmp_path):
    import logging
    import threading
    from retrieve.survey.progress import object_log
    barrier = threading.Barrier(2)

    def work(name):
        with object_log(tmp_path / f"{name}.log", name):
            barrier.wait()
            logging.getLogger("retrieve.inference").warning("message of %s", name)
            barrier.wait()
    threads = [threading.Thread(target=work, args=(n,)) for n in ("a", "b")]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    assert "message of a" in (tmp_path / "a.log").read_text() and "message of b" not in (tmp_path / "a.log").read_text()
    assert "message of b" in (tmp_path / "b.log").read_text() and "message of a" not in (tmp_path / "b.log").read_text()
