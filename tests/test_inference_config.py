"""Bad fit configurations: one-line messages naming file and key, exit code 2 through the CLI."""
import numpy as np
import pytest

from retrieve.cli.main import main
from retrieve.inference.config import config_to_toml, load_config

from test_inference_synthetic import MODEL_TOML, make_case, simulate


@pytest.fixture(scope="module")
def case(tmp_path_factory):
    folder = tmp_path_factory.mktemp("cfg")
    make_case(folder)
    return folder


def _run(case, toml, tmp_path, capsys, extra=()):
    cfg = case / f"bad_{tmp_path.name}.toml"
    cfg.write_text(toml)
    code = main(["fit", *extra, "--config", str(cfg), "--out", str(tmp_path / "run"), "--no-progress"])
    err = capsys.readouterr().err.strip()
    return code, err, cfg


def _edit(old, new, text=MODEL_TOML):
    assert old in text
    return text.replace(old, new)


BAD = {
    "unknown-section": (_edit("[sampler]", "[samplr]"), "unknown key 'samplr' (did you mean 'sampler'?)"),
    "unknown-sampler-key": (_edit("max_steps = 200", "max_step = 200"), "did you mean 'max_steps'?"),
    "unknown-model-key": (_edit("layers = 12", "layer = 12"), "did you mean 'layers'?"),
    "unknown-dataset-key": (_edit('file = "ifs.ecsv"', 'file = "ifs.ecsv"\nscal = true'),
                            "did you mean 'scale'?"),
    "wrong-type": (_edit("max_steps = 200", 'max_steps = "200"'), "key 'max_steps' must be int"),
    "wrong-type-switch": (_edit('file = "ifs.ecsv"', 'file = "ifs.ecsv"\nscale = 1'), "key 'scale' must be bool"),
    "inverted-bounds": (_edit("low = 800.0, high = 2000.0", "low = 2000.0, high = 800.0"),
                        "[parameters] t_iso: inverted or empty bounds"),
    "unknown-prior": (_edit('prior = "uniform", low = 0.5', 'prior = "flat", low = 0.5'), "unknown prior 'flat'"),
    "missing-file": (_edit('file = "ifs.ecsv"', 'file = "nowhere.ecsv"'), "nowhere.ecsv: no such file"),
    "no-file-key": (_edit('file = "ifs.ecsv"\n', ''), "[[datasets]] ifs: no 'file'"),
    "no-datasets": (_edit('[[datasets]]\nname = "ifs"\nfile = "ifs.ecsv"\n', ''), "no datasets"),
    "missing-parameter": (_edit('t_iso = { prior = "uniform", low = 800.0, high = 2000.0 }\n', ''),
                          "missing parameter 't_iso' needed by the model"),
    "unknown-parameter": (_edit("log_g = 4.0", "log_g = 4.0\nlog_vmr_CH4 = -4.0"),
                          "unknown parameter 'log_vmr_CH4'"),
    "misspelt-parameter": (_edit("log_g = 4.0", "log_gg = 4.0"), "unknown parameter 'log_gg' (did you mean 'log_g'?)"),
    "two-distances": (_edit("distance_pc = 10.0", "distance_pc = 10.0\nparallax_mas = 100.0"),
                      "give only one of distance_pc / parallax_mas"),
    "t-above-tables": (_edit("low = 800.0, high = 2000.0", "low = 800.0, high = 4000.0"),
                       "'t_iso' reaches 4000 K, above the opacity tables' maximum temperature 3000 K"),
    "t-below-tables": (_edit("t_iso = { prior = \"uniform\", low = 800.0, high = 2000.0 }",
                             "t_iso = { prior = \"gaussian\", mean = 400.0, sigma = 200.0 }"),
                       "below the opacity tables' minimum temperature 300 K"),
    "nuisance-switched-off": (_edit("log_g = 4.0", "log_g = 4.0\nscale_ifs = 1.0"),
                              "'scale_ifs' is given but dataset 'ifs' has scale off"),
    "nuisance-missing": (_edit('file = "ifs.ecsv"', 'file = "ifs.ecsv"\ninflate_errors = true'),
                         "missing parameter 'log_inflate_ifs'"),
    "gp-with-covariance": (_edit('file = "ifs.ecsv"', 'file = "ifs.ecsv"\ncovariance = "c.npy"\n'
                                 'correlated_noise = true'), "cannot be combined with a covariance file"),
    "odd-walkers": (_edit("max_steps = 200", "max_steps = 200\nwalkers = 7"), "'walkers' must be even"),
    "few-walkers": (_edit("max_steps = 200", "max_steps = 200\nwalkers = 4"), "fewer than 2 × 3 free parameters"),
    "bad-optimiser": (_edit("max_steps = 200", 'max_steps = 200\noptimiser = "diferential-evolution"'),
                      "did you mean 'differential-evolution'?"),
    "bad-moves": (_edit("max_steps = 200", 'max_steps = 200\nmoves = "strech"'), "did you mean 'stretch'?"),
    "mixture-without-pilot": (_edit("max_steps = 200", 'max_steps = 200\nmoves = "pilot-mixture"'),
                              'moves = "pilot-mixture" needs a pilot run; add pilot = "chain" or pilot = "nested"'),
    "bad-pilot": (_edit("max_steps = 200", 'max_steps = 200\npilot = "nestd"'), "did you mean 'nested'?"),
    "few-pilot-points": (_edit("max_steps = 200", 'max_steps = 200\npilot = "nested"\npilot_live_points = 5'),
                         "'pilot_live_points' must be >= 10, got 5"),
    "short-pilot-chain": (_edit("max_steps = 200", 'max_steps = 200\npilot = "chain"\npilot_steps = 1'),
                          "'pilot_steps' must be >= 2, got 1"),
    "no-pilot-rounds": (_edit("max_steps = 200", 'max_steps = 200\npilot = "chain"\npilot_rounds = 0'),
                        "'pilot_rounds' must be >= 1, got 0"),
    "bad-coordinates": (_edit("max_steps = 200", 'max_steps = 200\ncoordinates = "unbound"'),
                        "did you mean 'unbounded'?"),
    "no-free-parameter": ("[parameters]\nlog_g = 4.0\n", "no free parameter"),
    "not-toml": ("[parameters\nlog_g = 4.0\n", "not valid TOML"),
}


@pytest.mark.parametrize("name", sorted(BAD))
def test_bad_config_exit_code_and_message(name, case, tmp_path, capsys):
    toml, message = BAD[name]
    code, err, cfg = _run(case, toml, tmp_path, capsys)
    assert code == 2
    assert message in err, err
    assert err.count("\n") == 0 and "Traceback" not in err       # one line, no traceback
    if name not in ("missing-file",):
        assert str(cfg) in err                                      # names the configuration file


def test_spectrum_outside_the_tables_wavelength_range(case, tmp_path, capsys):
    simulate(case, lo=1.0, hi=1.7, name="wide")
    wide = case / "wide.ecsv"
    import astropy.table
    t = astropy.table.Table.read(wide, format="ascii.ecsv")
    t["wavelength"] = np.linspace(1.5, 2.9, len(t)) * t["wavelength"].unit    # runs past 2.6 µm
    t.write(wide, format="ascii.ecsv", overwrite=True)
    code, err, _ = _run(case, MODEL_TOML, tmp_path, capsys, extra=[f"wide={wide}"])
    assert code == 2
    assert "[[datasets]] wide" in err and "outside the opacity tables' range 0.8–2.6 µm" in err


def test_existing_run_folder_exit_code(case, tmp_path, capsys):
    (tmp_path / "run").mkdir()
    (tmp_path / "run" / "manifest.json").write_text("{}")
    code, err, _ = _run(case, MODEL_TOML, tmp_path, capsys)
    assert code == 2 and "run folder exists; use --overwrite" in err


def test_resume_without_checkpoint_exit_code(case, tmp_path, capsys):
    code, err, _ = _run(case, MODEL_TOML, tmp_path, capsys, extra=["--resume"])
    assert code == 2 and "no chain.h5 to resume from" in err


def test_config_round_trips_through_toml_writer(case):
    cfg = load_config(case / "fit.toml")
    import tomllib
    from retrieve.inference.config import parse_config
    again = parse_config(tomllib.loads(config_to_toml(cfg)), base_dir=cfg.base_dir)
    assert again.digest == cfg.digest and again.sampler == cfg.sampler


def test_command_line_spectra_complete_the_datasets(case, tmp_path):
    from retrieve.inference.run import merge_spectra
    cfg = load_config(case / "fit.toml")
    simulate(case, name="extra")
    # a bare path whose dataset name matches an entry replaces that entry's file
    merged = merge_spectra(cfg, [str(case / "ifs.ecsv")])
    assert [d.name for d in merged.datasets] == ["ifs"] and merged.datasets[0].file == case / "ifs.ecsv"
    # an unknown name is added with the noise switches off; NAME=PATH binds explicitly
    merged = merge_spectra(cfg, [str(case / "extra.ecsv"), f"ifs={case / 'extra.ecsv'}"])
    assert [d.name for d in merged.datasets] == ["ifs", "extra"]
    assert merged.dataset("ifs").file == case / "extra.ecsv"
    assert merged.dataset("extra").noise_switches() == (False, False, False)


def test_resume_refuses_changed_input(case, tmp_path, capsys):
    import shutil
    folder = tmp_path / "c"
    shutil.copytree(case, folder)
    cfg = folder / "fit.toml"
    assert main(["fit", "--config", str(cfg), "--out", str(tmp_path / "run"), "--max-steps", "100",
                 "--no-progress"]) == 0
    simulate(folder, seed=99)                     # the spectrum file changes under the run
    code = main(["fit", "--config", str(cfg), "--out", str(tmp_path / "run"), "--resume", "--no-progress"])
    assert code == 2 and "changed since the run started" in capsys.readouterr().err
