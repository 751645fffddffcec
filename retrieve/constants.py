"""Physical constants and the fixed internal units of the hot path.

Internal units (plain float arrays, never astropy Quantities, inside the model):

=====================  ===================================
quantity               unit
=====================  ===================================
wavelength             micron (µm)
wavenumber             cm⁻¹
pressure               bar
temperature            K
gravity                cm s⁻² (``log_g`` is log10 of this, cgs)
cross section          cm² per molecule
mass opacity           cm² g⁻¹
CIA coefficient        cm⁵ per molecule² (α = k n₁ n₂ in cm⁻¹)
spectral flux density  W m⁻² µm⁻¹ (at Earth, or at the surface for F_λ)
radius                 m (user-facing: R_Jup)
distance               m (user-facing: pc or parallax in mas)
=====================  ===================================

Values from CODATA 2018 / IAU 2015 via astropy.constants, converted once here.
"""
import astropy.constants as _c
import astropy.units as _u

# CGS
H_CGS = _c.h.cgs.value            # erg s
C_CGS = _c.c.cgs.value            # cm s^-1
K_B_CGS = _c.k_B.cgs.value        # erg K^-1
AMU_CGS = _c.u.cgs.value          # g
SIGMA_SB_CGS = _c.sigma_sb.cgs.value

# SI
H_SI = _c.h.si.value
C_SI = _c.c.si.value
K_B_SI = _c.k_B.si.value
SIGMA_SB_SI = _c.sigma_sb.si.value

# second radiation constant c2 = hc/k in cm K (for Boltzmann factors with E in cm^-1)
C2_CM_K = H_CGS * C_CGS / K_B_CGS

BAR_TO_DYN_CM2 = 1.0e6
BAR_TO_PA = 1.0e5
ATM_TO_BAR = 1.01325

R_JUP_M = _u.R_jup.to(_u.m)        # IAU 2015 nominal equatorial Jupiter radius
M_JUP_KG = _u.M_jup.to(_u.kg)
PC_M = _u.pc.to(_u.m)
G_SI = _c.G.si.value

# Molecular / atomic masses in amu (IUPAC standard atomic weights; common practice)
MASS_AMU = {
    "H2": 2.01588, "He": 4.002602, "H": 1.00794,
    "H2O": 18.01528, "CH4": 16.04246, "CO": 28.0101, "CO2": 44.0095,
    "NH3": 17.03052, "K": 39.0983, "Na": 22.98977, "H-": 1.00849,
}

# Solar He/H2 number ratio.  Asplund et al. (2009, ARA&A 47, 481), Table 1:
# n(He)/n(H) = 10^(10.93-12) = 0.0851; all H in H2 -> He/H2 = 2 * 0.0851.
HE_TO_H2_SOLAR = 2.0 * 10 ** (10.93 - 12.0)
