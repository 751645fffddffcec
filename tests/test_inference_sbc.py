"""Injection–recovery over the prior (simulation-based calibration, Talts et al. 2018, arXiv:1804.06788).

Truths are drawn from the prior, spectra simulated with the real ForwardModel
(synthetic opacity tables, 12 channels, 8 levels, Gaussian noise), and each is fitted
with a short chain.  If the posterior is calibrated, each truth falls inside
its central 68 % (95 %) interval with probability 0.68 (0.95), so the counts
are binomial; we require them inside the central 99.8 % binomial range.
"""
import dataclasses

import numpy as np
import pytest
from scipy import stats

from retrieve.inference import fit
from retrieve.inference.config import parse_config

from test_inference_synthetic import MODEL_TOML, simulate, write_tables

N_DRAWS = 20
LAYERS = 8
CHANNELS = 12


@pytest.mark.slow
def test_coverage_of_68_and_95_percent_intervals(tmp_path):
    import tomllib
    write_tables(tmp_path / "tables")
    mapping = tomllib.loads(MODEL_TOML)
    mapping["model"]["layers"] = LAYERS          # a cheaper atmosphere: the test is about the sampler
    mapping["sampler"].update(max_steps=400, check_every=200, optimiser_max_evaluations=500,
                              predictive_draws=0)
    cfg = parse_config(mapping, where="sbc.toml", base_dir=tmp_path)
    rng = np.random.default_rng(2024)
    inside68 = inside95 = 0
    trials = 0
    for i in range(N_DRAWS):
        truth = {name: float(prior.sample(rng)) for name, prior in cfg.free.items()}
        simulate(tmp_path, params=truth, seed=1000 + i, name="ifs", layers=LAYERS, n=CHANNELS)
        res = fit(cfg.replace(sampler=dataclasses.replace(cfg.sampler, seed=i)),
                  out_dir=tmp_path / f"run{i}", progress=False)
        for name, value in truth.items():
            x = np.asarray(res.samples[name])
            lo68, hi68, lo95, hi95 = np.percentile(x, [16, 84, 2.5, 97.5])
            inside68 += lo68 <= value <= hi68
            inside95 += lo95 <= value <= hi95
            trials += 1
    print(f"SBC: {inside68}/{trials} inside 68 %, {inside95}/{trials} inside 95 %")
    # binomial acceptance range at 0.1 % / 99.9 % (scipy.stats.binom); parameters of one draw are pooled
    lo, hi = stats.binom(trials, 0.68).ppf([0.001, 0.999])
    assert lo <= inside68 <= hi, (inside68, trials)
    lo, hi = stats.binom(trials, 0.95).ppf([0.001, 0.999])
    assert lo <= inside95 <= hi, (inside95, trials)
