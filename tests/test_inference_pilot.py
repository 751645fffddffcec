"""Nested-sampling pilot, Gaussian-mixture proposals and the pilot-mixture moves."""
import emcee
import numpy as np
import pytest
from scipy import stats

from retrieve.inference import fit, parse_config
from retrieve.inference.checkpoint import read_checkpoint
from retrieve.inference.convergence import autocorr_time
from retrieve.inference.mixture import GaussianMixture, defensive, fit_mixture
from retrieve.inference.moves import MixtureIndependenceMove
from retrieve.inference.toymodel import LinearModelFactory
from retrieve.observations import Dataset
from retrieve.observations.writers import write_dataset

from linear_case import N_COEF, SIGMA, X, analytic_posterior, linear_config, write_linear_data


@pytest.fixture(scope="module")
def linear_data(tmp_path_factory):
    path = tmp_path_factory.mktemp("pilot") / "lin.ecsv"
    return path, write_linear_data(path, seed=11)


def _config(path, **sampler):
    return linear_config(path, {"max_steps": 3000, "check_every": 50, "seed": 1, "progress": False,
                                "pilot": "nested", "moves": "pilot-mixture", "pilot_live_points": 100}, **sampler)


# --------------------------------------------------------------------------- mixtures
def test_mixture_density_matches_scipy():
    mix = GaussianMixture([0.3, 0.7], [[0.0, 1.0], [2.0, -1.0]],
                          [[[1.0, 0.3], [0.3, 0.5]], [[0.2, 0.0], [0.0, 2.0]]])
    x = np.random.default_rng(0).normal(size=(50, 2)) * 2
    # reference: scipy.stats.multivariate_normal
    ref = np.log(0.3 * stats.multivariate_normal(mix.means[0], mix.covariances[0]).pdf(x)
                 + 0.7 * stats.multivariate_normal(mix.means[1], mix.covariances[1]).pdf(x))
    np.testing.assert_allclose(mix.log_pdf(x), ref, rtol=1e-12, atol=0)


def test_mixture_draws_have_the_mixture_moments():
    mix = GaussianMixture([0.25, 0.75], [[-2.0, 0.0], [1.0, 3.0]], [np.eye(2) * 0.5, [[1.0, 0.6], [0.6, 1.0]]])
    x = mix.sample(200000, np.random.RandomState(3))
    mean = mix.weights @ mix.means                     # law of total expectation (textbook)
    np.testing.assert_allclose(x.mean(0), mean, rtol=0, atol=0.01)
    second = sum(w * (c + np.outer(m, m)) for w, m, c in zip(mix.weights, mix.means, mix.covariances))
    np.testing.assert_allclose(np.cov(x.T), second - np.outer(mean, mean), rtol=0, atol=0.03)


def test_em_recovers_a_two_component_mixture_and_bic_picks_two():
    truth = GaussianMixture([0.4, 0.6], [[-3.0, 0.0, 1.0], [2.0, 1.0, -1.0]],
                            [np.diag([0.5, 1.0, 0.3]), [[1.0, 0.5, 0.0], [0.5, 1.0, 0.0], [0.0, 0.0, 0.2]]])
    x = truth.sample(6000, np.random.default_rng(4))
    mix = fit_mixture(x, np.random.default_rng(5), components=(1, 2, 4))
    assert mix.n_components == 2
    order = np.argsort(mix.means[:, 0])
    np.testing.assert_allclose(mix.weights[order], truth.weights, rtol=0, atol=0.02)
    np.testing.assert_allclose(mix.means[order], truth.means, rtol=0, atol=0.06)
    np.testing.assert_allclose(mix.covariances[order], truth.covariances, rtol=0, atol=0.1)


def test_repeated_points_do_not_pass_for_information():
    """An equal-weight resample repeats points; the BIC must see the distinct ones, not the repeats."""
    rng = np.random.default_rng(6)
    base = rng.normal(size=(300, 3))
    resample = base[rng.integers(0, 300, size=30000)]
    assert fit_mixture(resample, np.random.default_rng(7), components=(1, 2, 4, 8)).n_components == 1


def test_defensive_mixture_is_wider_and_keeps_a_broad_component():
    x = np.random.default_rng(8).normal(size=(2000, 2))
    mix = fit_mixture(x, np.random.default_rng(9), components=(1,))
    d = defensive(mix, x, inflate=1.5, broad_weight=0.1, broad_scale=3.0)
    assert d.n_components == 2 and d.weights[-1] == pytest.approx(0.1, rel=1e-12, abs=0)
    np.testing.assert_allclose(d.covariances[0], 2.25 * mix.covariances[0], rtol=1e-12, atol=0)
    np.testing.assert_allclose(d.covariances[1], 9.0 * np.cov(x.T), rtol=1e-6, atol=0)


# --------------------------------------------------------------------------- the move
def test_independence_move_samples_the_target_despite_a_poor_proposal():
    """Metropolis–Hastings with an independence proposal leaves the target invariant (Tierney 1994, §2.3.3)."""
    mean = np.array([1.0, -2.0])
    cov = np.array([[1.0, 0.8], [0.8, 2.0]])
    target = stats.multivariate_normal(mean, cov)
    proposal = GaussianMixture([1.0], [[0.5, -1.0]], [np.eye(2) * 4.0])     # offset and too wide
    sampler = emcee.EnsembleSampler(16, 2, target.logpdf, moves=MixtureIndependenceMove(proposal))
    sampler.random_state = np.random.RandomState(10).get_state()
    sampler.run_mcmc(np.random.default_rng(11).normal(size=(16, 2)), 6000, progress=False)
    chain = sampler.get_chain(discard=500)
    tau = float(np.max(autocorr_time(chain)))
    flat = chain.reshape(-1, 2)
    n_eff = flat.shape[0] / tau
    assert 0.05 < np.mean(sampler.acceptance_fraction) < 0.6
    assert np.all(np.abs(flat.mean(0) - mean) < 5 * np.sqrt(np.diag(cov) / n_eff))
    np.testing.assert_allclose(flat.var(0), np.diag(cov), rtol=5 * np.sqrt(2 / n_eff), atol=0)


# --------------------------------------------------------------------------- the engine
def test_pilot_mixture_fit_recovers_the_analytic_posterior(linear_data, tmp_path):
    path, y = linear_data
    res = fit(_config(path), out_dir=tmp_path / "run", model_factory=LinearModelFactory(N_COEF))
    m_n, s_n, ln_z = analytic_posterior(y)
    assert res.converged
    samples = np.column_stack([res.samples[f"coef_{k}"] for k in range(N_COEF)])
    n_used = (res.n_steps - res.burn_in) * res.n_walkers
    n_eff = n_used / np.max(res.tau)
    assert np.all(np.abs(samples.mean(0) - m_n) < 4 * np.sqrt(np.diag(s_n) / n_eff))
    np.testing.assert_allclose(samples.var(0), np.diag(s_n), rtol=4 * np.sqrt(2 / n_eff), atol=0)
    # the pilot's loose evidence is still an evidence: Bishop (2006) eq. 3.86
    from retrieve.inference import load_run
    pilot = load_run(tmp_path / "run", model_factory=LinearModelFactory(N_COEF)).manifest["pilot"]
    assert abs(pilot["ln_z"] - ln_z) < 3 * pilot["ln_z_err"] + 0.2
    assert pilot["likelihood_calls"] > 0 and pilot["mixture_components"] >= 1
    assert np.max(res.tau) < 10            # independence draws from a good mixture decorrelate fast
    # the report says where the walkers came from and that the pilot's ln Z is no model comparison
    from retrieve.report.build import report_content
    notes = report_content(load_run(tmp_path / "run", model_factory=LinearModelFactory(N_COEF)), figures=()).notes
    assert any("nested-sampling pilot" in n and "not an evidence for model comparison" in n for n in notes)


def test_pilot_runs_are_reproducible_and_independent_of_workers(linear_data, tmp_path):
    path, _ = linear_data
    factory = LinearModelFactory(N_COEF)
    cfg = _config(path, max_steps=200, check_every=100)
    chains = []
    for name, workers in (("a", 1), ("b", 1), ("c", 2)):
        fit(cfg, out_dir=tmp_path / name, model_factory=factory, workers=workers)
        chains.append(read_checkpoint(tmp_path / name / "chain.h5").chain)
    assert np.array_equal(chains[0], chains[1])
    assert np.array_equal(chains[0], chains[2])
    other = _config(path, max_steps=200, check_every=100, seed=2)
    fit(other, out_dir=tmp_path / "d", model_factory=factory)
    assert not np.array_equal(chains[0], read_checkpoint(tmp_path / "d" / "chain.h5").chain)


def test_resume_reuses_the_frozen_mixture(linear_data, tmp_path):
    path, _ = linear_data
    factory = LinearModelFactory(N_COEF)
    fit(_config(path, max_steps=300, check_every=100, tau_factor=1e9), out_dir=tmp_path / "full",
        model_factory=factory)
    fit(_config(path, max_steps=100, check_every=100, tau_factor=1e9), out_dir=tmp_path / "part",
        model_factory=factory)
    res = fit(_config(path, max_steps=300, check_every=100, tau_factor=1e9), out_dir=tmp_path / "part",
              resume=True, model_factory=factory)
    assert res.n_steps == 300
    full = read_checkpoint(tmp_path / "full" / "chain.h5")
    part = read_checkpoint(tmp_path / "part" / "chain.h5")
    assert np.array_equal(full.chain, part.chain)
    np.testing.assert_array_equal(full.proposal.means, part.proposal.means)
    assert part.pilot["likelihood_calls"] == full.pilot["likelihood_calls"]


def _chain_config(path, **sampler):
    return _config(path, **{"pilot": "chain", "pilot_steps": 300, **sampler})


def test_chain_pilot_mixture_recovers_the_analytic_posterior(linear_data, tmp_path):
    path, y = linear_data
    factory = LinearModelFactory(N_COEF)
    res = fit(_chain_config(path, pilot_rounds=1), out_dir=tmp_path / "run", model_factory=factory)
    m_n, s_n, _ = analytic_posterior(y)          # Bishop (2006) eqs. 3.53–3.54
    assert res.converged
    samples = np.column_stack([res.samples[f"coef_{k}"] for k in range(N_COEF)])
    n_eff = (res.n_steps - res.burn_in) * res.n_walkers / np.max(res.tau)
    assert np.all(np.abs(samples.mean(0) - m_n) < 4 * np.sqrt(np.diag(s_n) / n_eff))
    np.testing.assert_allclose(samples.var(0), np.diag(s_n), rtol=4 * np.sqrt(2 / n_eff), atol=0)
    assert np.max(res.tau) < 10            # independence draws from a good mixture decorrelate fast
    from retrieve.inference import load_run
    from retrieve.report.build import report_content
    run = load_run(tmp_path / "run", model_factory=factory)
    pilot = run.manifest["pilot"]
    assert pilot["steps"] == 300 and pilot["mixture_components"] >= 1 and "ln_z" not in pilot
    # one round of DE moves: one call per walker and pilot step (no proposal leaves these wide
    # priors; outside them a proposal costs no call); the optimiser's calls are not counted in it
    assert pilot["likelihood_calls"] == 300 * res.n_walkers
    notes = report_content(run, figures=()).notes
    assert any("preliminary 300-step chain" in n and "not part of the posterior sample" in n for n in notes)


def test_chain_pilot_is_reproducible_independent_of_workers_and_resumable(linear_data, tmp_path):
    path, _ = linear_data
    factory = LinearModelFactory(N_COEF)
    cfg = _chain_config(path, max_steps=200, check_every=100, tau_factor=1e9)
    chains = []
    for name, workers in (("a", 1), ("b", 1), ("c", 2)):
        fit(cfg, out_dir=tmp_path / name, model_factory=factory, workers=workers)
        chains.append(read_checkpoint(tmp_path / name / "chain.h5"))
    assert np.array_equal(chains[0].chain, chains[1].chain)
    assert np.array_equal(chains[0].chain, chains[2].chain)
    fit(_chain_config(path, max_steps=200, check_every=100, tau_factor=1e9, seed=2), out_dir=tmp_path / "d",
        model_factory=factory)
    assert not np.array_equal(chains[0].chain, read_checkpoint(tmp_path / "d" / "chain.h5").chain)
    # killed after the first checkpoint and resumed: the chain of the uninterrupted run, same frozen mixture
    fit(_chain_config(path, max_steps=100, check_every=100, tau_factor=1e9), out_dir=tmp_path / "part",
        model_factory=factory)
    fit(cfg, out_dir=tmp_path / "part", resume=True, model_factory=factory)
    part = read_checkpoint(tmp_path / "part" / "chain.h5")
    assert np.array_equal(part.chain, chains[0].chain)
    np.testing.assert_array_equal(part.proposal.means, chains[0].proposal.means)


def test_round_lengths_split_the_pilot_steps():
    from retrieve.inference.sampler import _round_lengths
    assert _round_lengths(2000, 4) == [500, 500, 500, 500]
    assert _round_lengths(301, 3) == [101, 100, 100]
    assert _round_lengths(3, 5) == [3]                     # every round keeps ≥ 2 steps
    assert sum(_round_lengths(1499, 7)) == 1499


def test_chain_pilot_in_rounds_recovers_the_analytic_posterior(linear_data, tmp_path):
    path, y = linear_data
    factory = LinearModelFactory(N_COEF)
    res = fit(_chain_config(path, pilot_rounds=3), out_dir=tmp_path / "run", model_factory=factory)
    m_n, s_n, _ = analytic_posterior(y)          # Bishop (2006) eqs. 3.53–3.54
    assert res.converged and np.max(res.tau) < 10
    samples = np.column_stack([res.samples[f"coef_{k}"] for k in range(N_COEF)])
    n_eff = (res.n_steps - res.burn_in) * res.n_walkers / np.max(res.tau)
    assert np.all(np.abs(samples.mean(0) - m_n) < 4 * np.sqrt(np.diag(s_n) / n_eff))
    np.testing.assert_allclose(samples.var(0), np.diag(s_n), rtol=4 * np.sqrt(2 / n_eff), atol=0)
    pilot = read_checkpoint(tmp_path / "run" / "chain.h5").pilot
    assert pilot["rounds"] == 3 and pilot["steps"] == 300 and "3 rounds" in pilot["method"]
    # rounds 2 and 3 use independence draws, some of which the priors' tails reject without a call,
    # and every walker still makes one proposal per step
    assert 0 < pilot["likelihood_calls"] <= 300 * res.n_walkers
    # the mixture of the last round, fitted to the pilot's second half, matches the posterior it
    # was fitted to (Bishop 2006 eqs. 3.53–3.54), within the pilot's own sampling error
    ck = read_checkpoint(tmp_path / "run" / "chain.h5")
    w = ck.proposal.weights[:-1] / ck.proposal.weights[:-1].sum()     # without the defensive component
    mean = w @ ck.proposal.means[:-1]
    assert np.all(np.abs(mean - m_n) < 0.2 * np.sqrt(np.diag(s_n)))
    # same seed, same rounds: the same chain
    again = fit(_chain_config(path, pilot_rounds=3), out_dir=tmp_path / "again", model_factory=factory)
    assert again.n_steps == res.n_steps
    assert np.array_equal(read_checkpoint(tmp_path / "again" / "chain.h5").chain, ck.chain)


class _SquareModel:
    """m(λ) = c0² + c1 (λ − 1): c0 and −c0 predict the same spectrum, so the posterior has two mirror modes."""

    parameter_names = ["coef_0", "coef_1"]

    def __init__(self, datasets):
        self.x = {d.name: np.asarray(d.wavelength_um, float) - 1.0 for d in datasets}

    def evaluate(self, params):
        from types import SimpleNamespace
        c0, c1 = params["coef_0"], params["coef_1"]
        return SimpleNamespace(per_dataset={k: c0 ** 2 + c1 * x for k, x in self.x.items()})


class _SquareFactory:
    def __call__(self, object_data):
        return _SquareModel(object_data.datasets)


def test_pilot_mixture_visits_both_mirror_modes_with_equal_weight(tmp_path):
    """Two modes 4 prior-σ apart with a valley of Δln p ≈ 10⁴: the mixture moves jump between them.

    By symmetry each mode holds exactly half of the posterior mass (no
    external reference needed); the walkers' time in the c0 > 0 mode must
    match 1/2 within the binomial error of the effective sample size.
    """
    rng = np.random.default_rng(12)
    y = 4.0 + 0.5 * (X - 1) + rng.normal(0, SIGMA, X.size)        # c0 = ±2, c1 = 0.5
    path = tmp_path / "sq.ecsv"
    write_dataset(Dataset("ifs", "spectrum", X, y, np.full(X.size, SIGMA)), path)
    cfg = parse_config({
        "parameters": {"coef_0": {"prior": "uniform", "low": -4.0, "high": 4.0},
                       "coef_1": {"prior": "uniform", "low": -4.0, "high": 4.0}},
        "datasets": [{"name": "ifs", "file": str(path)}],
        "sampler": {"max_steps": 4000, "check_every": 50, "seed": 3, "progress": False, "pilot": "nested",
                    "moves": "pilot-mixture", "pilot_live_points": 100}})
    res = fit(cfg, out_dir=tmp_path / "run", model_factory=_SquareFactory())
    c0 = np.asarray(res.samples["coef_0"])
    assert res.converged
    frac = np.mean(c0 > 0)
    n_eff = (res.n_steps - res.burn_in) * res.n_walkers / np.max(res.tau)
    assert abs(frac - 0.5) < 4 * np.sqrt(0.25 / n_eff)
    assert np.all(np.abs(np.abs(c0) - 2.0) < 0.2)                  # nothing in the valley


class _Interrupt(Exception):
    pass


class _DiesAfter:
    """Wraps a posterior; raises after ``n`` evaluations (a kill during the pilot)."""

    def __init__(self, post, n):
        self.post, self.n, self.count = post, n, 0

    def __getattr__(self, name):
        return getattr(self.post, name)

    def evaluate(self, theta):
        self.count += 1
        if self.count > self.n:
            raise _Interrupt()
        return self.post.evaluate(theta)


def test_interrupted_pilot_continues_from_its_saved_state(linear_data, tmp_path, monkeypatch):
    from retrieve.inference import pilot as pilot_module
    from retrieve.inference.run import build_posterior, read_datasets
    path, _ = linear_data
    cfg = _config(path)
    post, _ = build_posterior(cfg, read_datasets(cfg), LinearModelFactory(N_COEF))
    whole = pilot_module.run_pilot(post, 50, 1.0, seed=3)
    monkeypatch.setattr(pilot_module, "CHECKPOINT_EVERY_S", 0.0)      # save after every iteration
    state = tmp_path / "pilot-state.pkl"
    with pytest.raises(_Interrupt):
        pilot_module.run_pilot(_DiesAfter(post, 1500), 50, 1.0, seed=3, state_file=state)
    assert state.is_file()
    again = pilot_module.run_pilot(post, 50, 1.0, seed=3, state_file=state, resume=True)
    assert again.n_calls == whole.n_calls
    assert np.array_equal(again.samples, whole.samples)


def test_resume_before_the_first_chain_checkpoint_repeats_the_start(linear_data, tmp_path):
    path, _ = linear_data
    factory = LinearModelFactory(N_COEF)
    cfg = _config(path, max_steps=100, check_every=50)
    fit(cfg, out_dir=tmp_path / "full", model_factory=factory)
    fit(cfg, out_dir=tmp_path / "part", model_factory=factory)
    (tmp_path / "part" / "chain.h5").unlink()           # as if killed before the first checkpoint
    with pytest.warns(RuntimeWarning, match="no chain checkpoint yet; repeating the start stage"):
        fit(cfg, out_dir=tmp_path / "part", resume=True, model_factory=factory)
    assert np.array_equal(read_checkpoint(tmp_path / "full" / "chain.h5").chain,
                          read_checkpoint(tmp_path / "part" / "chain.h5").chain)
    assert not (tmp_path / "part" / "pilot-state.pkl").exists()
