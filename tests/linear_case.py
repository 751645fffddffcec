"""The linear-Gaussian test case shared by the sampler tests (analytic posterior and evidence).

Model m(λ) = Σ c_k (λ − 1)^k with Gaussian priors c_k ~ N(0, 1/α) and
Gaussian noise σ: posterior and evidence in closed form (Bishop 2006,
*Pattern Recognition and Machine Learning*, eqs. 3.53–3.54 and 3.86).
"""
import numpy as np

from retrieve.inference import parse_config
from retrieve.observations import Dataset
from retrieve.observations.writers import write_dataset

N_COEF = 3
ALPHA = 0.25          # prior precision: coef_k ~ N(0, 1/α) = N(0, 2²)
SIGMA = 0.2           # noise: β = 1/σ²
X = np.linspace(1.0, 2.0, 25)


def write_linear_data(path, seed: int):
    """Simulated quadratic spectrum with noise σ written to ``path``; returns the fluxes."""
    rng = np.random.default_rng(seed)
    y = 0.5 + 1.0 * (X - 1) - 0.8 * (X - 1) ** 2 + rng.normal(0, SIGMA, X.size)
    write_dataset(Dataset("ifs", "spectrum", X, y, np.full(X.size, SIGMA)), path)
    return y


def linear_config(path, defaults: dict, **sampler):
    """Fit configuration of the linear case: Gaussian priors, ``[sampler]`` = defaults updated by ``sampler``."""
    sd = float(1 / np.sqrt(ALPHA))
    return parse_config({
        "parameters": {f"coef_{k}": {"prior": "gaussian", "mean": 0.0, "sigma": sd} for k in range(N_COEF)},
        "datasets": [{"name": "ifs", "file": str(path)}], "sampler": {**defaults, **sampler}})


def analytic_posterior(y):
    """Posterior mean, covariance and ln evidence (Bishop 2006, eqs. 3.53–3.54 and 3.86)."""
    phi = np.vander(X - 1.0, N_COEF, increasing=True)
    beta = 1 / SIGMA ** 2
    a = ALPHA * np.eye(N_COEF) + beta * phi.T @ phi
    s_n = np.linalg.inv(a)
    m_n = beta * s_n @ phi.T @ y
    e_m = 0.5 * beta * np.sum((y - phi @ m_n) ** 2) + 0.5 * ALPHA * m_n @ m_n
    ln_z = (0.5 * N_COEF * np.log(ALPHA) + 0.5 * X.size * np.log(beta) - e_m
            - 0.5 * np.linalg.slogdet(a)[1] - 0.5 * X.size * np.log(2 * np.pi))
    return m_n, s_n, ln_z
