"""The emcee driver: analytic linear-Gaussian posterior, convergence rule, determinism, resume, kill -9."""
import os
import signal
import subprocess
import sys
import textwrap
import time

import numpy as np
import pytest

from retrieve.errors import InputFileError, UserError
from retrieve.inference import fit, load_run, parse_config
from retrieve.inference.checkpoint import Checkpoint, read_checkpoint, write_checkpoint
from retrieve.inference.convergence import ConvergenceRule, autocorr_time, burn_in_and_thin
from retrieve.inference.toymodel import LinearModelFactory
from linear_case import ALPHA, N_COEF, SIGMA, X, linear_config, write_linear_data


@pytest.fixture(scope="module")
def linear_data(tmp_path_factory):
    path = tmp_path_factory.mktemp("lin") / "lin.ecsv"
    return path, write_linear_data(path, seed=7)


def _config(path, **sampler):
    return linear_config(path, {"max_steps": 20000, "check_every": 500, "seed": 1, "progress": False}, **sampler)


def test_linear_gaussian_posterior_is_recovered(linear_data, tmp_path):
    path, y = linear_data
    res = fit(_config(path), out_dir=tmp_path / "run", model_factory=LinearModelFactory(N_COEF))
    assert res.converged and res.n_steps < 20000       # the τ rule stops the chain
    # Bishop (2006) PRML eqs. 3.53–3.54: S_N⁻¹ = αI + β ΦᵀΦ, m_N = β S_N Φᵀ t
    phi = np.vander(X - 1.0, N_COEF, increasing=True)
    beta = 1 / SIGMA ** 2
    s_n = np.linalg.inv(ALPHA * np.eye(N_COEF) + beta * phi.T @ phi)
    m_n = beta * s_n @ phi.T @ y
    samples = np.column_stack([res.samples[f"coef_{k}"] for k in range(N_COEF)])
    # Monte Carlo error of the chain mean: sqrt(var τ / (n_steps_used × n_walkers))
    n_used = (res.n_steps - res.burn_in) * res.n_walkers
    mc_err = np.sqrt(np.diag(s_n) * np.max(res.tau) / n_used)
    assert np.all(np.abs(samples.mean(axis=0) - m_n) < 4 * mc_err)
    # variances within 4 × the relative error sqrt(2 / n_eff) of a variance estimate (common practice, no source)
    n_eff = n_used / np.max(res.tau)
    np.testing.assert_allclose(samples.var(axis=0), np.diag(s_n), rtol=4 * np.sqrt(2 / n_eff))
    corr = np.corrcoef(samples.T)
    corr_true = s_n / np.sqrt(np.outer(np.diag(s_n), np.diag(s_n)))
    assert np.all(np.abs(corr - corr_true) < 4 / np.sqrt(n_eff))


def test_differential_evolution_moves_sample_the_same_posterior(linear_data, tmp_path):
    path, y = linear_data
    res = fit(_config(path, max_steps=2000, check_every=500, moves="differential-evolution"),
              out_dir=tmp_path / "run", model_factory=LinearModelFactory(N_COEF))
    # same analytic reference as above: Bishop (2006) PRML eqs. 3.53–3.54
    phi = np.vander(X - 1.0, N_COEF, increasing=True)
    s_n = np.linalg.inv(ALPHA * np.eye(N_COEF) + phi.T @ phi / SIGMA ** 2)
    m_n = s_n @ phi.T @ y / SIGMA ** 2
    samples = np.column_stack([res.samples[f"coef_{k}"] for k in range(N_COEF)])
    n_used = (res.n_steps - res.burn_in) * res.n_walkers
    mc_err = np.sqrt(np.diag(s_n) * np.max(res.tau) / n_used)
    assert np.all(np.abs(samples.mean(axis=0) - m_n) < 4 * mc_err)
    n_eff = n_used / np.max(res.tau)
    np.testing.assert_allclose(samples.var(axis=0), np.diag(s_n), rtol=4 * np.sqrt(2 / n_eff))


def test_same_seed_same_chain_and_other_seed_differs(linear_data, tmp_path):
    path, _ = linear_data
    runs = []
    for i, seed in enumerate((3, 3, 4)):
        fit(_config(path, max_steps=400, check_every=200, seed=seed), out_dir=tmp_path / f"r{i}",
            model_factory=LinearModelFactory(N_COEF))
        runs.append(read_checkpoint(tmp_path / f"r{i}" / "chain.h5").chain)
    assert np.array_equal(runs[0], runs[1])
    assert not np.array_equal(runs[0], runs[2])


def test_resume_reproduces_the_uninterrupted_chain(linear_data, tmp_path):
    path, _ = linear_data
    factory = LinearModelFactory(N_COEF)
    fit(_config(path, max_steps=900, check_every=300), out_dir=tmp_path / "full", model_factory=factory)
    fit(_config(path, max_steps=300, check_every=300), out_dir=tmp_path / "part", model_factory=factory)
    res = fit(_config(path, max_steps=900, check_every=300), out_dir=tmp_path / "part", resume=True,
              model_factory=factory)
    assert res.n_steps == 900
    full = read_checkpoint(tmp_path / "full" / "chain.h5")
    part = read_checkpoint(tmp_path / "part" / "chain.h5")
    assert np.array_equal(full.chain, part.chain)
    assert np.array_equal(full.log_prob, part.log_prob)
    assert np.array_equal(full.accepted, part.accepted)


_KILL_SCRIPT = textwrap.dedent("""
    import sys
    from retrieve.inference import fit, parse_config
    from retrieve.inference.toymodel import LinearModelFactory
    cfg = parse_config({{"parameters": {{"coef_0": {{"prior": "uniform", "low": -5, "high": 5}},
                                        "coef_1": {{"prior": "uniform", "low": -5, "high": 5}}}},
                         "datasets": [{{"name": "ifs", "file": {path!r}}}],
                         "sampler": {{"max_steps": 10000000, "check_every": 50, "seed": 9, "progress": False,
                                     "tau_factor": 1e9}}}})   # never stops by convergence
    fit(cfg, out_dir={out!r}, model_factory=LinearModelFactory(2))
""")


def _kill_cfg(path, max_steps):
    return parse_config({"parameters": {"coef_0": {"prior": "uniform", "low": -5, "high": 5},
                                        "coef_1": {"prior": "uniform", "low": -5, "high": 5}},
                         "datasets": [{"name": "ifs", "file": str(path)}],
                         "sampler": {"max_steps": max_steps, "check_every": 50, "seed": 9, "progress": False,
                                     "tau_factor": 1e9}})


@pytest.mark.slow
def test_sigkill_during_sampling_then_resume(linear_data, tmp_path):
    path, _ = linear_data
    out = tmp_path / "killed"
    script = _KILL_SCRIPT.format(path=str(path), out=str(out))
    proc = subprocess.Popen([sys.executable, "-c", script], stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
    chain = out / "chain.h5"
    deadline = time.time() + 60
    while not chain.exists() and time.time() < deadline and proc.poll() is None:
        time.sleep(0.05)
    time.sleep(0.7)                       # let it sample (and rewrite the checkpoint) for a while
    assert proc.poll() is None, proc.stderr.read().decode()
    os.kill(proc.pid, signal.SIGKILL)
    proc.wait()
    ck = read_checkpoint(chain)           # never an unreadable file
    assert ck.n_steps >= 50 and ck.n_steps % 50 == 0
    target = ck.n_steps + 150
    factory = LinearModelFactory(2)
    res = fit(_kill_cfg(path, target), out_dir=out, resume=True, model_factory=factory)
    assert res.n_steps == target
    resumed = read_checkpoint(chain)
    assert resumed.chain.shape == (target, res.n_walkers, 2) and np.all(np.isfinite(resumed.log_prob))
    fit(_kill_cfg(path, target), out_dir=tmp_path / "straight", model_factory=factory)
    straight = read_checkpoint(tmp_path / "straight" / "chain.h5")
    assert np.array_equal(resumed.chain, straight.chain)   # the kill cost nothing but time
    assert len(load_run(out, model_factory=factory).samples) > 0


def test_convergence_rule_and_burn_in():
    rule = ConvergenceRule(tau_factor=50, tau_rtol=0.01)
    # the rule from the emcee documentation (autocorrelation analysis): N > 50 τ and Δτ/τ < 1 %
    assert rule.converged(1000, np.array([10.0, 19.9]), np.array([10.05, 19.8]))
    assert not rule.converged(900, np.array([10.0, 19.9]), np.array([10.05, 19.8]))   # 900 < 50 × 19.9
    assert not rule.converged(5000, np.array([10.0, 19.9]), np.array([10.5, 19.8]))  # τ moved 5 %
    assert not rule.converged(5000, np.array([10.0, 19.9]), None)
    assert burn_in_and_thin(np.array([10.0, 20.0]), 1000) == (60, 5)
    assert burn_in_and_thin(np.array([10.0, 20.0]), 100) == (50, 5)   # at most half the chain


def test_autocorr_time_of_an_ar1_process():
    # AR(1) x_t = φ x_{t-1} + ε has τ = (1 + φ) / (1 − φ) (Sokal 1997, "Monte Carlo Methods in Statistical Mechanics: Foundations and New Algorithms")
    rng = np.random.default_rng(2)
    phi, n, w = 0.8, 20000, 4
    x = np.zeros((n, w))
    eps = rng.standard_normal((n, w))
    for t in range(1, n):
        x[t] = phi * x[t - 1] + eps[t]
    tau = autocorr_time(x[:, :, None])
    np.testing.assert_allclose(tau, (1 + phi) / (1 - phi), rtol=0.15)


def test_checkpoint_round_trip_and_corrupt_file(tmp_path):
    rs = np.random.RandomState(5).get_state()
    ck = Checkpoint(["a", "b"], np.random.default_rng(0).normal(size=(4, 6, 2)), np.zeros((4, 6)),
                    np.arange(6), rs, np.array([[4, 1.0, 2.0]]), "abc", 5, False, {"x": 2}, 24, 1.5)
    write_checkpoint(tmp_path / "c.h5", ck)
    back = read_checkpoint(tmp_path / "c.h5")
    assert np.array_equal(back.chain, ck.chain) and back.failures == {"x": 2}
    assert np.array_equal(back.random_state[1], rs[1]) and back.random_state[2:] == rs[2:]
    assert not list(tmp_path.glob(".c.h5.tmp*"))     # the temporary file was renamed away
    (tmp_path / "bad.h5").write_bytes(b"\x89HDF\r\n\x1a\n" + b"\0" * 50)
    with pytest.raises(InputFileError, match="unreadable chain file"):
        read_checkpoint(tmp_path / "bad.h5")


def test_existing_run_folder_is_not_overwritten(linear_data, tmp_path):
    path, _ = linear_data
    cfg = _config(path, max_steps=100, check_every=100)
    fit(cfg, out_dir=tmp_path / "r", model_factory=LinearModelFactory(N_COEF))
    with pytest.raises(UserError, match="use --overwrite"):
        fit(cfg, out_dir=tmp_path / "r", model_factory=LinearModelFactory(N_COEF))
    (tmp_path / "other").mkdir()
    (tmp_path / "other" / "notes.txt").write_text("keep me")
    with pytest.raises(UserError, match="not a run folder"):
        fit(cfg, out_dir=tmp_path / "other", overwrite=True, model_factory=LinearModelFactory(N_COEF))
    assert (tmp_path / "other" / "notes.txt").read_text() == "keep me"
    res = fit(cfg, out_dir=tmp_path / "r", overwrite=True, model_factory=LinearModelFactory(N_COEF))
    assert res.n_steps == 100


def test_process_pool_matches_serial_and_reports_failures(linear_data, tmp_path):
    path, _ = linear_data
    cfg = parse_config({"parameters": {"coef_0": {"prior": "uniform", "low": -5, "high": 5},
                                       "coef_1": {"prior": "uniform", "low": -5, "high": 5}},
                        "datasets": [{"name": "ifs", "file": str(path)}],
                        "sampler": {"max_steps": 200, "check_every": 100, "seed": 2, "progress": False,
                                    "optimiser_max_evaluations": 2000}})
    factory = LinearModelFactory(2, fail_above=0.0)   # half of the prior fails: evaluations raise
    serial = fit(cfg, out_dir=tmp_path / "s", model_factory=factory, workers=1)
    pooled = fit(cfg, out_dir=tmp_path / "p", model_factory=factory, workers=2)
    a = read_checkpoint(tmp_path / "s" / "chain.h5").chain
    b = read_checkpoint(tmp_path / "p" / "chain.h5").chain
    assert np.array_equal(a, b)
    assert serial.failures["toy failure region"] > 0
    assert pooled.failures == serial.failures
    manifest = load_run(tmp_path / "p", model_factory=factory).manifest
    assert manifest["evaluation_failures"] == dict(serial.failures)
    assert np.all(a[..., 0] <= 0.0)     # no walker ever accepted in the failing region


class _ModelFailsInWorkers:
    """A posterior whose model cannot be built in a child process (e.g. a table missing there)."""

    ndim = 1

    def __init__(self):
        self.parent = os.getpid()

    @property
    def model(self):
        if os.getpid() != self.parent:
            raise OSError("opacity table not readable")
        return object()

    def evaluate(self, theta):
        return 0.0, ""


def test_a_worker_that_cannot_build_the_model_fails_with_one_line(tmp_path):
    from retrieve.inference.sampler import EvaluationMap
    t0 = time.perf_counter()
    with pytest.raises(UserError, match=r"a worker process could not build the model \(OSError: opacity table "
                                        r"not readable\); try --workers 1"):
        with EvaluationMap(_ModelFailsInWorkers(), workers=2) as ev:
            ev.evaluate([np.zeros(1), np.ones(1)])
    assert time.perf_counter() - t0 < 30          # it fails instead of respawning workers for ever
