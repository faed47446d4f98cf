"""Where an excitation moves pi charge, and how the pi orbitals sit against the non-bonding level.

Singlet CIS state n with normalised amplitudes X_ia (sum X^2 = 1), orbitals C (centre x orbital):

* transition density on centre mu (spin-adapted, as in ppp.analysis.properties):
      rho_0n(mu) = sqrt(2) sum_ia X_ia C_mu,i C_mu,a ;  sum_mu rho = 0,  sum_mu rho R_mu = mu_0n
* unrelaxed one-particle difference density (excited minus ground; Head-Gordon, Grana, Maurice &
  White 1995), diagonal part:
      dP(mu) = sum_i sum_ab X_ia X_ib C_mu,a C_mu,b - sum_a sum_ij X_ia X_ja C_mu,i C_mu,j ;  sum = 0
  and the change in net pi charge is dq = -dP.

Reference level of the orbital diagram: the Fock diagonal of a neutral carbon centre (pi population 1
on every centre), F_CC = -I_C + 1/2 gamma_CC = -(I_C + A_C)/2, the negative Mulliken electronegativity
of carbon with gamma_CC = I_C - A_C (Pariser 1953). In an alternant hydrocarbon the SCF orbitals come
in pairs placed symmetrically about this level (pairing theorem: Coulson & Rushbrooke 1940; McLachlan
1959), so an orbital below it is bonding, one above it antibonding, one on it non-bonding.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

#: Orbitals within this distance of the reference level count as non-bonding, eV.
NONBONDING_TOL_EV = 0.1


def transition_density(mo_coeff: np.ndarray, n_occ: int, amplitudes: np.ndarray) -> np.ndarray:
    """Transition density per centre (N,) for one state; amplitudes (n_occ, n_vir)."""
    co, cv = mo_coeff[:, :n_occ], mo_coeff[:, n_occ:]
    return np.sqrt(2.0) * np.einsum("ia,mi,ma->m", amplitudes, co, cv)


def difference_density(mo_coeff: np.ndarray, n_occ: int, amplitudes: np.ndarray) -> np.ndarray:
    """Diagonal of the unrelaxed CIS difference density (N,), electrons; amplitudes (n_occ, n_vir)."""
    co, cv = mo_coeff[:, :n_occ], mo_coeff[:, n_occ:]
    x = np.asarray(amplitudes, dtype=float)
    gain = np.einsum("ma,ab,mb->m", cv, x.T @ x, cv)
    loss = np.einsum("mi,ij,mj->m", co, x @ x.T, co)
    return gain - loss


def reference_level(types, ip: np.ndarray, u: np.ndarray) -> tuple[float, str]:
    """Non-bonding reference level (eV) and a one-line statement of what it is.

    Uses carbon (type "C") when the chromophore has one; otherwise the mean of -I + U/2 over its
    centres.
    """
    types = list(types)
    ip = np.asarray(ip, dtype=float)
    u = np.asarray(u, dtype=float)
    if "C" in types:
        k = types.index("C")
        value = float(-ip[k] + 0.5 * u[k])
        return value, f"reference \u2212I_C + \u00bd\u03b3_CC = {value:.3f} eV (neutral-carbon Fock diagonal)"
    value = float(np.mean(-ip + 0.5 * u))
    return value, f"reference mean(\u2212I + \u00bd\u03b3_ii) over the centres = {value:.3f} eV"


def classify_orbitals(mo_energy: np.ndarray, reference_ev: float,
                      tol_ev: float = NONBONDING_TOL_EV) -> tuple[str, ...]:
    """'bonding', 'non-bonding' or 'antibonding' for each orbital by its energy against the reference."""
    out = []
    for e in np.asarray(mo_energy, dtype=float):
        d = e - reference_ev
        out.append("non-bonding" if abs(d) <= tol_ev else ("bonding" if d < 0 else "antibonding"))
    return tuple(out)


@dataclass(frozen=True)
class ExcitationPicture:
    """Per-centre quantities of one excited state, for drawing.

    transition : (N,) transition density rho_0n
    charge_change : (N,) change in net pi charge on excitation, dq = -dP (elementary charges)
    """

    transition: np.ndarray
    charge_change: np.ndarray


def excitation_picture(mo_coeff: np.ndarray, n_occ: int, amplitudes: np.ndarray) -> ExcitationPicture:
    return ExcitationPicture(transition_density(mo_coeff, n_occ, amplitudes),
                             -difference_density(mo_coeff, n_occ, amplitudes))
