"""End to end: `retrieve fit` with the real ForwardModel on synthetic tables; run folder and load_run."""
import json

import numpy as np
import pytest
from astropy.table import Table

from retrieve.cli.main import main
from retrieve.inference import load_run
from retrieve.inference.checkpoint import read_checkpoint

from test_inference_synthetic import MODEL_TOML, TRUTH, make_case

NOISE_TOML = MODEL_TOML.replace('file = "ifs.ecsv"', 'file = "ifs.ecsv"\nscale = true\ninflate_errors = true') \
    .replace("log_g = 4.0", "log_g = 4.0\nscale_ifs = { prior = \"truncated-gaussian\", mean = 1.0, sigma = 0.1, "
             "low = 0.5, high = 1.5 }\nlog_inflate_ifs = { prior = \"uniform\", low = -40.0, high = -30.0 }")


@pytest.fixture(scope="module")
def finished_run(tmp_path_factory):
    folder = tmp_path_factory.mktemp("e2e")
    cfg = make_case(folder, NOISE_TOML)
    out = folder / "run"
    code = main(["fit", "--config", str(cfg), "--out", str(out), "--max-steps", "300", "--seed", "5",
                 "--no-progress"])
    assert code == 0
    return folder, out


def test_run_folder_contents(finished_run):
    folder, out = finished_run
    for name in ("config.toml", "chain.h5", "posterior_samples.ecsv", "summary.ecsv", "summary.json",
                 "spectrum_ifs.ecsv", "manifest.json", "data/ifs.ecsv"):
        assert (out / name).is_file(), name
    manifest = json.loads((out / "manifest.json").read_text())
    assert manifest["status"] == "finished" and manifest["seed"] == 5
    assert manifest["convergence"]["n_steps"] == 300
    assert manifest["param_names"] == ["scale_ifs", "log_inflate_ifs", "radius_rjup", "t_iso", "log_vmr_H2O"]
    assert set(manifest["opacity_tables"]) == {"H2O"} and len(manifest["opacity_tables"]["H2O"]["checksum"]) == 64
    import hashlib
    digest = hashlib.sha256((folder / "ifs.ecsv").read_bytes()).hexdigest()   # reference: hashlib
    assert digest in manifest["input_sha256"].values()
    assert manifest["versions"]["emcee"] and manifest["evaluations_per_s"] > 0
    summary = json.loads((out / "summary.json").read_text())["quantities"]
    for q in ("radius_rjup", "t_iso", "log_vmr_H2O", "mass_mjup", "metallicity", "teff_k"):
        assert {"median", "p16", "p84", "p2_5", "p97_5", "map"} <= set(summary[q]), q
    spec = Table.read(out / "spectrum_ifs.ecsv", format="ascii.ecsv")
    assert spec.colnames[:4] == ["wavelength", "data", "uncertainty", "model_best"]
    assert np.all(spec["model_p2_5"] <= spec["model_p50"]) and np.all(spec["model_p50"] <= spec["model_p97_5"])


def test_summary_matches_the_samples_and_truth_is_plausible(finished_run):
    _, out = finished_run
    run = load_run(out)
    s = run.samples
    row = {r["name"]: r for r in run.summary}
    # percentiles as numpy.percentile (linear interpolation) of the stored samples (reference: numpy)
    np.testing.assert_allclose(row["t_iso"]["p16"], np.percentile(s["t_iso"], 16), rtol=1e-12)
    np.testing.assert_allclose(row["mass_mjup"]["median"], np.median(s["mass_mjup"]), rtol=1e-12)
    # the short chain still brackets the simulated truth within its 99.9 % range (simulation input)
    for name in ("t_iso", "radius_rjup"):
        lo, hi = np.percentile(s[name], [0.05, 99.95])
        assert lo < TRUTH[name] < hi, name
    # an isothermal atmosphere emits a blackbody at T_iso whatever its opacity (Kirchhoff; common practice,
    # no source), so the T_eff derived from the model's integrated flux must equal t_iso
    np.testing.assert_allclose(row["teff_k"]["map"], row["t_iso"]["map"], rtol=5e-3)
    # MAP entry is the parameter vector with the highest log posterior in the chain
    ck = read_checkpoint(out / "chain.h5")
    i = np.unravel_index(np.argmax(ck.log_prob), ck.log_prob.shape)
    assert row["t_iso"]["map"] == ck.chain[i][run.param_names.index("t_iso")]


def test_load_run_rebuilds_a_consistent_posterior(finished_run):
    _, out = finished_run
    run = load_run(out)
    ck = read_checkpoint(out / "chain.h5")
    theta = ck.chain[-1, 0]
    # the rebuilt forward model + likelihood reproduce the ln p stored during sampling
    np.testing.assert_allclose(run.log_posterior(theta), ck.log_prob[-1, 0], rtol=1e-10)
    assert run.forward_model.parameter_names[:2] == ["log_g", "radius_rjup"]
    assert run.object_data["ifs"].n_points == 16
    assert run.chain.shape == (300, run.manifest["convergence"]["n_walkers"], 5)
    assert run.map_parameters["log_g"] == 4.0


def test_resume_through_the_cli_extends_the_chain(finished_run, tmp_path):
    folder, out = finished_run
    import shutil
    copy = tmp_path / "copy"
    shutil.copytree(out, copy)
    code = main(["fit", "--config", str(folder / "fit.toml"), "--out", str(copy), "--resume", "--max-steps", "400",
                 "--no-progress"])
    assert code == 0
    ck = read_checkpoint(copy / "chain.h5")
    assert ck.n_steps == 400
    assert np.array_equal(ck.chain[:300], read_checkpoint(out / "chain.h5").chain)
