"""Vibration–rotation structure of a 1Σ diatomic molecule from Dunham coefficients.

Used by :mod:`.co`.  Three pieces:

* term values E(v, J) = Σ Y_kl (v+½)^k [J(J+1)]^l  (Dunham 1932, Phys. Rev. 41, 721);
* an RKR potential built from the same Y_kl (Rydberg–Klein–Rees first-order
  semiclassical inversion; Le Roy's RKR1 formulation, J. Quant. Spectrosc.
  Radiat. Transf. 186, 158 (2017), eqs. 1–3);
* numerical vibration–rotation wavefunctions on a sinc-DVR grid (Colbert &
  Miller 1992, J. Chem. Phys. 96, 1982, eq. A6) for each J, whose matrix
  elements of a dipole-moment function give transition moments with the
  Herman–Wallis (vibration–rotation interaction) dependence built in.

Energies come from the Dunham expansion (spectroscopic accuracy); the
numerical wavefunctions are used only for intensities.
"""
from __future__ import annotations

import numpy as np
from scipy.interpolate import PchipInterpolator
from scipy.linalg import eigh

# h / (8 pi^2 c) in amu Å^2 cm^-1: B[cm^-1] = C_ROT / (mu[amu] r[Å]^2).
# Derived from CODATA 2018 h, c and the atomic mass constant (common practice).
from ...constants import AMU_CGS, C_CGS, H_CGS

C_ROT = H_CGS / (8.0 * np.pi ** 2 * C_CGS) / (AMU_CGS * 1e-16)


def dunham_energy(y: dict, v, j):
    """Term value E(v, J) in cm^-1 above the potential minimum (Y00 omitted).

    Parameters
    ----------
    y : dict
        ``{(k, l): Y_kl}`` in cm^-1.
    v, j : array_like
        Vibrational and rotational quantum numbers (broadcast together).
    """
    vh = np.asarray(v, dtype=np.float64) + 0.5
    jj = np.asarray(j, dtype=np.float64)
    jj = jj * (jj + 1.0)
    out = np.zeros(np.broadcast(vh, jj).shape)
    for (k, l), value in sorted(y.items()):
        out = out + value * vh ** k * jj ** l
    return out


def scale_isotopologue(y: dict, rho: float) -> dict:
    """Mass-scale Dunham coefficients: Y_kl' = Y_kl ρ^(k+2l), ρ = sqrt(μ/μ').

    First-order isotope relation (Dunham 1932); Born–Oppenheimer breakdown
    terms are neglected.
    """
    return {(k, l): value * rho ** (k + 2 * l) for (k, l), value in y.items()}


def _vib_term(y, vh):
    return sum(value * vh ** k for (k, l), value in sorted(y.items()) if l == 0)


def _rot_constant(y, vh):
    return sum(value * vh ** k for (k, l), value in sorted(y.items()) if l == 1)


def rkr_turning_points(y: dict, mu_amu: float, v_levels: np.ndarray, n_quad: int = 96):
    """Inner and outer classical turning points (Å) for each vibrational level.

    f(v) = sqrt(C/μ) ∫ dv'/sqrt(G(v)-G(v')),  g(v) = sqrt(μ/C) ∫ B(v') dv'/sqrt(G(v)-G(v')),
    integrals from v' = -½ to v, r± = sqrt(f/g + f²) ± f.  The endpoint
    singularity is removed with v' = v - u².
    """
    nodes, weights = np.polynomial.legendre.leggauss(n_quad)
    r_in, r_out = [], []
    for v in v_levels:
        top = np.sqrt(v + 0.5)
        u = 0.5 * top * (nodes + 1.0)
        w = 0.5 * top * weights
        vp = v - u ** 2
        dg = _vib_term(y, v + 0.5) - _vib_term(y, vp + 0.5)
        kernel = 2.0 * u / np.sqrt(dg)
        f = np.sqrt(C_ROT / mu_amu) * np.sum(w * kernel)
        g = np.sqrt(mu_amu / C_ROT) * np.sum(w * kernel * _rot_constant(y, vp + 0.5))
        root = np.sqrt(f / g + f * f)
        r_in.append(root - f)
        r_out.append(root + f)
    return np.array(r_in), np.array(r_out)


def rkr_potential(y: dict, mu_amu: float, v_max: float = 30.0):
    """Callable V(r) (cm^-1, r in Å) from RKR points, monotone-spline interpolated.

    Outside the RKR range the inner wall continues exponentially and the outer
    branch linearly; the wavefunctions used here (v ≲ 10) do not reach there.
    """
    v_levels = np.concatenate([np.linspace(-0.45, 0.0, 4), np.arange(0.25, v_max + 1e-9, 0.25)])
    r_in, r_out = rkr_turning_points(y, mu_amu, v_levels)
    energy = _vib_term(y, v_levels + 0.5)
    b_e = y[(0, 1)]
    r_e = np.sqrt(C_ROT / (mu_amu * b_e))
    r = np.concatenate([r_in[::-1], [r_e], r_out])
    e = np.concatenate([energy[::-1], [0.0], energy])
    spline = PchipInterpolator(r, e)
    # inner exponential continuation through the two innermost points
    slope_in = np.log(e[0] / e[1]) / (r[0] - r[1])
    slope_out = (e[-1] - e[-2]) / (r[-1] - r[-2])

    def potential(x):
        x = np.asarray(x, dtype=np.float64)
        out = spline(np.clip(x, r[0], r[-1]))
        out = np.where(x < r[0], e[0] * np.exp(slope_in * (x - r[0])), out)
        return np.where(x > r[-1], e[-1] + slope_out * (x - r[-1]), out)

    return potential, r_e


def sinc_dvr_kinetic(n: int, step: float, mu_amu: float) -> np.ndarray:
    """Kinetic-energy matrix (cm^-1) of the Colbert–Miller sinc DVR on a uniform grid."""
    i = np.arange(n)
    diff = i[:, None] - i[None, :]
    with np.errstate(divide="ignore"):
        off = 2.0 * (-1.0) ** diff / np.where(diff == 0, 1, diff) ** 2
    t = np.where(diff == 0, np.pi ** 2 / 3.0, off)
    return (C_ROT / mu_amu) / step ** 2 * t


def rovibrational_wavefunctions(potential, mu_amu: float, r_grid: np.ndarray, j_max: int, n_v: int):
    """Lowest ``n_v`` vibrational wavefunctions for each J = 0..j_max.

    Returns
    -------
    psi : ndarray (j_max+1, n_v, n_r)
        Grid-normalised vectors (Σ ψ² = 1), sign fixed so that the outermost
        lobe is positive (a convention; line strengths need only |<ψ'|μ|ψ''>|²
        for each pair, so the choice cannot change them).
    """
    step = r_grid[1] - r_grid[0]
    kinetic = sinc_dvr_kinetic(r_grid.size, step, mu_amu)
    v_grid = potential(r_grid)
    centrifugal = C_ROT / (mu_amu * r_grid ** 2)
    psi = np.empty((j_max + 1, n_v, r_grid.size))
    for j in range(j_max + 1):
        ham = kinetic + np.diag(v_grid + centrifugal * j * (j + 1))
        _, vecs = eigh(ham, subset_by_index=[0, n_v - 1])
        vecs = vecs.T
        # outermost significant amplitude positive
        for k in range(n_v):
            idx = np.nonzero(np.abs(vecs[k]) > 1e-3 * np.abs(vecs[k]).max())[0][-1]
            if vecs[k, idx] < 0:
                vecs[k] = -vecs[k]
        psi[j] = vecs
    return psi


def honl_london_sigma(m: np.ndarray) -> np.ndarray:
    """Hönl–London factor of a 1Σ–1Σ line, |m| with m = J''+1 (R) or -J'' (P).

    Common practice (Herzberg 1950, Spectra of Diatomic Molecules, ch. IV).
    """
    return np.abs(m).astype(np.float64)
