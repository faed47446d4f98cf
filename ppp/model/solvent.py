"""Solvent reaction field for the PPP model: generalized-Born screening of the net pi charges.

The model (each piece a published approximation):

* Ground state, in equilibrium with the whole solvent polarisation. The solute's net pi charges
  q_i = Z_i - P_ii interact with the reaction field of a dielectric continuum of static permittivity eps
  through the generalized-Born (GB) energy of Still, Tempczyk, Hawley & Hendrickson (J. Am. Chem. Soc.
  112, 6127 (1990)), with the ALPB dielectric factor of Sigalov, Fenley & Onufriev (2006) (:func:`screening`):

      G_rf = -1/2 f(eps) sum_ij q_i q_j Gamma_ij,     f(eps) = (1 - 1/eps) / (1 + 0.571412/eps),
      Gamma_ij = C / sqrt(r_ij^2 + a_i a_j exp(-r_ij^2 / (4 a_i a_j)))       (C = e^2 / 4 pi eps0)

  with effective Born radii a_i. Added to the SCF energy functional (a self-consistent reaction field,
  as in the solvaton model of Klopman (1967) and its PPP/CNDO use by Germer (1974)), its derivative adds
  V_i = dG_rf / dP_ii = f(eps) (Gamma q)_i to the diagonal of the Fock matrix (q depends on P with
  dq_i/dP_ii = -1).

* Vertical excitation: non-equilibrium solvation (Marcus 1956; the orientational / electronic split of
  e.g. Aguilar, Olivares del Valle & Tomasi 1993; Cammi & Tomasi 1995). The orientational part
  f(eps) - f(n^2) stays with the ground-state charges q0; the electronic part f(n^2) follows
  the excited state's charges q1 = q0 + dq. The non-equilibrium free energy of the excited state minus the
  equilibrium free energy of the ground state is

      dG = dE(solute) - f(eps) dq.Gamma.q0 - 1/2 f(n^2) dq.Gamma.dq .

  CIS on the reaction-field SCF orbitals already contains the first two terms (the reaction potential of
  q0 is a fixed one-electron operator in the Fock matrix, so the orbital-energy differences carry
  -f(eps) dq.Gamma.q0). The last term is added to each state as a first-order state-specific correction
  from the relaxed CIS charge difference dq (Z-vector, ppp.solvers.relaxed), as in the corrected
  linear-response scheme of Caricato, Mennucci, Tomasi, Ingrosso, Cammi, Corni & Scalmani (J. Chem. Phys.
  124, 124520 (2006)), which uses the relaxed density, here without re-solving the CIS in the field. It is
  <= 0: the fast electronic polarisation always lowers an excited state that moves charge. (The unrelaxed
  CIS difference density overstates the charge moved, by a factor near 2 for 4-nitroaniline.)

* Effective Born radii from the atoms' intrinsic radii rho_i (Bondi 1964 van der Waals radii; boron from
  Mantina, Chamberlin, Valero, Cramer & Truhlar 2009) descreened by the other pi-centres' spheres with the
  r^-6 volume integral of Grycuk (J. Chem. Phys. 119, 4817 (2003)), which is exact for a charge at the
  centre of a spherical solute:

      1 / a_i^3 = 1 / rho_i^3 - (3 / 4 pi) Int_{solute outside sphere i} |r - r_i|^-6 dV .

  The solute is the union of the pi-centres' spheres (hydrogen atoms and saturated substituents are not
  placed by ppp and are left out: the radii are a lower bound and the solvent effect an upper bound for
  substituted molecules). The integral is done by quadrature around each centre (Gauss-Legendre in 1/r,
  Fibonacci directions); the radial range ends at 10 A, beyond which the missing part is below 0.5 % of
  1 / rho^3 even for a full shell.

No constant here is fitted to measured spectra: eps and n are handbook values (ppp/data/solvents.toml),
the radii are van der Waals radii, and the f(eps) and f(n^2) factors follow from continuum electrostatics
(alpha of the ALPB factor from the exact solution for a spherical cavity).
"""
from __future__ import annotations

import math
import tomllib
from dataclasses import dataclass
from functools import lru_cache
from pathlib import Path

import numpy as np
from scipy.spatial.distance import cdist

from ..errors import InputError, ParameterError
from ..solvers.relaxed import relaxed_difference_charges
from ..structure.cavity import vdw_radius
from ..units import COULOMB_EV_ANGSTROM

SOLVENT_FILE = Path(__file__).resolve().parent.parent / "data" / "solvents.toml"

#: Quadrature of the Born-radius integral (see module doc).
_N_RADIAL = 32
_N_ANGULAR = 302
_R_MAX = 10.0


@dataclass(frozen=True)
class Solvent:
    """A solvent: name, static relative permittivity eps, refractive index n, source of the values."""

    name: str
    epsilon: float
    refractive_index: float
    source: str = ""

    @property
    def f_static(self) -> float:
        """f(eps): screening by the whole solvent polarisation (:func:`screening`)."""
        return screening(self.epsilon)

    @property
    def f_optical(self) -> float:
        """f(n^2): the part carried by the electronic (fast) polarisation (:func:`screening`)."""
        return screening(self.refractive_index ** 2)

    @property
    def is_vacuum(self) -> bool:
        return self.epsilon == 1.0 and self.refractive_index == 1.0


#: Constant of the analytical linearised Poisson-Boltzmann (ALPB) correction to generalized Born,
#: Sigalov, Fenley & Onufriev, J. Chem. Phys. 124, 124902 (2006); from memory.
ALPB_ALPHA = 0.571412


def screening(eps: float) -> float:
    """Dielectric screening factor f(eps) = (1 - 1/eps) / (1 + alpha/eps), alpha = 0.571412.

    Generalized Born alone uses the Born factor 1 - 1/eps, exact for a charge at the centre of a sphere;
    for a neutral molecule the field is dipolar, whose exact factor in a sphere is the Kirkwood-Onsager
    2 (eps - 1) / (2 eps + 1) = (1 - 1/eps) / (1 + 1/(2 eps)). The ALPB correction of Sigalov, Fenley &
    Onufriev (2006) applies the factor above, alpha chosen by them from the exact Poisson solution for a
    spherical cavity (close to the dipole value 1/2); it gives the solvent-polarity dependence of the
    Onsager reaction field behind the Lippert-Mataga treatment (within 3 % of the dipole factor). Its second part,
    alpha/eps Q^2 / A for the net charge Q, shifts every orbital energy of an ion by the same amount and so
    changes no density and no excitation energy; it is left out (ion free energies are those of the
    screened GB term). f(1) = 0.
    """
    return (1.0 - 1.0 / eps) / (1.0 + ALPB_ALPHA / eps)


@lru_cache(maxsize=4)
def _table(path: str) -> dict[str, Solvent]:
    """name and aliases (lower case) -> Solvent."""
    try:
        data = tomllib.loads(Path(path).read_text(encoding="utf-8"))
    except (OSError, tomllib.TOMLDecodeError) as exc:
        raise ParameterError(f"cannot read solvent file '{path}': {exc}") from None
    out: dict[str, Solvent] = {}
    for name, row in data.items():
        try:
            eps, n = float(row["epsilon"]), float(row["refractive_index"])
        except (KeyError, TypeError, ValueError):
            raise ParameterError(f"solvent file '{path}': [{name}] needs numbers epsilon and "
                                 f"refractive_index") from None
        if not (math.isfinite(eps) and eps >= 1.0 and math.isfinite(n) and n >= 1.0):
            raise ParameterError(f"solvent file '{path}': [{name}] needs eps >= 1 and n >= 1")
        s = Solvent(name, eps, n, str(row.get("source", "")))
        for key in [name, *row.get("aliases", [])]:
            out[key.lower()] = s
    return out


def available() -> list[str]:
    """Names of the known solvents (without aliases)."""
    return sorted({s.name for s in _table(str(SOLVENT_FILE)).values()})


def load(name: str) -> Solvent:
    """The solvent of this name or alias (case-insensitive); InputError listing the valid names if unknown."""
    s = _table(str(SOLVENT_FILE)).get(str(name).strip().lower())
    if s is None:
        raise InputError(f"unknown solvent '{name}'; valid: {', '.join(available())}")
    return s


def reference_solvent(text: str) -> str:
    """Solvent name of a reference-set row, without qualifiers such as "(acidic)" or "pH 9-13"."""
    base = text.split("(")[0]
    base = base.split(" pH")[0]
    return base.strip()


def _fibonacci_sphere(n: int) -> np.ndarray:
    """(n, 3) nearly uniform unit vectors (Fibonacci lattice; equal weights 4 pi / n)."""
    k = np.arange(n) + 0.5
    z = 1.0 - 2.0 * k / n
    phi = math.pi * (1.0 + math.sqrt(5.0)) * k
    s = np.sqrt(1.0 - z * z)
    return np.column_stack([s * np.cos(phi), s * np.sin(phi), z])


def born_radii(coords: np.ndarray, rho: np.ndarray, cavity: np.ndarray | None = None) -> np.ndarray:
    """Effective Born radii a (N,), A, by the r^-6 descreening integral (Grycuk 2003; module doc).

    coords : (N, 3) A;  rho : (N,) intrinsic radii, A. An isolated sphere gives a = rho exactly.
    cavity : optional (K, 4) rows [x, y, z, radius] of further atoms that belong to the solute
        (hydrogens, saturated substituents; :func:`ppp.structure.cavity.cavity_spheres`)
    """
    extra = np.zeros((0, 4)) if cavity is None else np.asarray(cavity, dtype=float).reshape(-1, 4)
    return _born_radii_cached(np.ascontiguousarray(coords, dtype=float).tobytes(),
                              np.ascontiguousarray(rho, dtype=float).tobytes(),
                              np.ascontiguousarray(extra).tobytes())


@lru_cache(maxsize=256)
def _born_radii_cached(coords_b: bytes, rho_b: bytes, extra_b: bytes) -> np.ndarray:
    n = len(rho_b) // 8
    extra = np.frombuffer(extra_b).reshape(-1, 4)
    coords = np.vstack([np.frombuffer(coords_b).reshape(-1, 3), extra[:, :3]])
    rho = np.concatenate([np.frombuffer(rho_b), extra[:, 3]])
    n_all = len(rho)
    dirs = _fibonacci_sphere(_N_ANGULAR)
    xg, wg = np.polynomial.legendre.leggauss(_N_RADIAL)
    w_ang = 4.0 * math.pi / _N_ANGULAR
    out = np.empty(n)
    for i in range(n):
        # x = 1/r from 1/R_MAX to 1/rho_i; r^-6 dV = r^-4 dr dOmega = x^2 dx dOmega
        lo, hi = 1.0 / _R_MAX, 1.0 / rho[i]
        x = 0.5 * (hi - lo) * xg + 0.5 * (hi + lo)
        wx = 0.5 * (hi - lo) * wg * x * x
        d = np.linalg.norm(coords - coords[i], axis=1)
        nb = np.nonzero((d < _R_MAX + rho) & (np.arange(n_all) != i))[0]
        if len(nb) == 0:
            out[i] = rho[i]
            continue
        pts = (coords[i] + (1.0 / x)[:, None, None] * dirs[None, :, :]).reshape(-1, 3)  # (radial*angular, 3)
        inside = (cdist(pts, coords[nb], "sqeuclidean") < rho[nb] ** 2).any(axis=1)
        integral = float(wx @ inside.reshape(len(x), -1).sum(axis=1)) * w_ang
        inv3 = 1.0 / rho[i] ** 3 - 3.0 / (4.0 * math.pi) * integral
        out[i] = inv3 ** (-1.0 / 3.0) if inv3 > 0 else _R_MAX
    out.setflags(write=False)
    return out


def gb_kernel(coords: np.ndarray, radii: np.ndarray) -> np.ndarray:
    """Generalized-Born interaction (N, N), eV per unit charges (Still et al. 1990):

    Gamma_ij = C / sqrt(r_ij^2 + a_i a_j exp(-r_ij^2 / (4 a_i a_j))); Gamma_ii = C / a_i (Born 1920).
    """
    coords = np.asarray(coords, dtype=float)
    diff = coords[:, None, :] - coords[None, :, :]
    r2 = (diff * diff).sum(axis=-1)
    aa = np.asarray(radii, dtype=float)[:, None] * np.asarray(radii, dtype=float)[None, :]
    return COULOMB_EV_ANGSTROM / np.sqrt(r2 + aa * np.exp(-r2 / (4.0 * aa)))


@dataclass(frozen=True)
class ReactionField:
    """The solvent terms of one chromophore.

    solvent : the Solvent;  kernel : (N, N) GB interaction Gamma, eV;  core_charges : (N,) Z
    radii : (N,) effective Born radii, A
    """

    solvent: Solvent
    kernel: np.ndarray
    core_charges: np.ndarray
    radii: np.ndarray

    def charges(self, dens: np.ndarray) -> np.ndarray:
        """Net pi charges q = Z - diag(P), (N,)."""
        return self.core_charges - np.diagonal(dens)

    def potential(self, dens: np.ndarray) -> np.ndarray:
        """Fock diagonal addend V = f(eps) Gamma q, (N,), eV (derivative of G_rf by P_ii)."""
        return self.solvent.f_static * (self.kernel @ self.charges(dens))

    def energy(self, dens: np.ndarray) -> float:
        """Reaction-field free energy G_rf = -1/2 f(eps) q.Gamma.q, eV."""
        q = self.charges(dens)
        return -0.5 * self.solvent.f_static * float(q @ self.kernel @ q)

    def excitation_shift(self, mo_energy: np.ndarray, mo_coeff: np.ndarray, gamma: np.ndarray, n_occ: int,
                         amplitudes: np.ndarray, multiplicity: int = 1) -> np.ndarray:
        """First-order state-specific electronic-polarisation term -1/2 f(n^2) dq.Gamma.dq per state (k,), eV.

        dq : the relaxed change of the net pi charges (Z-vector, ppp.solvers.relaxed), the derivative of
        the state's excitation energy with respect to the centres' one-electron energies in this model
        (reaction field of the SCF included), as in the corrected linear-response scheme of Caricato et al.
        (2006), which uses the relaxed excited-state density. amplitudes : (k, n_occ, n_vir).
        """
        amps = np.asarray(amplitudes, dtype=float)
        if amps.size == 0:
            return np.zeros(len(amps))
        dq = -relaxed_difference_charges(mo_energy, mo_coeff, gamma, n_occ, amps, multiplicity,
                                         rf_kernel=self.solvent.f_static * self.kernel)
        return self.shift_of(dq)

    def shift_of(self, dq: np.ndarray) -> np.ndarray:
        """-1/2 f(n^2) dq.Gamma.dq for charge changes dq (k, N), eV."""
        dq = np.atleast_2d(dq)
        return -0.5 * self.solvent.f_optical * np.einsum("km,mn,kn->k", dq, self.kernel, dq)


def element_of(type_name: str) -> str:
    """Element symbol of a centre type name ("N.aza" -> "N")."""
    return type_name.split(".")[0]


def equivalent_centres(types, bonds) -> np.ndarray:
    """(N,) class labels: centres that colour refinement of the pi graph cannot tell apart share a label
    (Weisfeiler & Lehman 1968 refinement from the centre types; symmetry-equivalent centres always share one).
    """
    n = len(types)
    nbrs: list[list[int]] = [[] for _ in range(n)]
    for i, j in np.asarray(bonds, dtype=int).reshape(-1, 2):
        nbrs[i].append(j)
        nbrs[j].append(i)
    names = {t: k for k, t in enumerate(sorted(set(types)))}
    colour = [names[t] for t in types]
    for _ in range(n):
        sig = [(colour[i], tuple(sorted(colour[j] for j in nbrs[i]))) for i in range(n)]
        ranks = {s: k for k, s in enumerate(sorted(set(sig)))}
        new = [ranks[s] for s in sig]
        if len(set(new)) == len(set(colour)):
            break
        colour = new
    return np.array(colour)


def reaction_field(solvent: Solvent, coords: np.ndarray, types, core_charges, bonds=None,
                   cavity: np.ndarray | None = None) -> ReactionField:
    """Build the reaction field of one chromophore (coords (N, 3) A, N type names, N core charges).

    cavity : optional (K, 4) [x, y, z, radius] of the molecule's other atoms (see :func:`born_radii`)
    bonds : optional (M, 2) pi bonds; the quadrature noise of the Born radii (about 0.1 %) is then
    removed from symmetry-equivalent centres by averaging over :func:`equivalent_centres`, so that a
    symmetric molecule keeps its symmetry.
    """
    rho = np.array([vdw_radius(element_of(t)) for t in types])
    radii = born_radii(coords, rho, cavity)
    if bonds is not None and len(radii):
        cls = equivalent_centres(types, bonds)
        sums = np.bincount(cls, weights=radii)
        radii = (sums / np.bincount(cls))[cls]
    return ReactionField(solvent, gb_kernel(coords, radii), np.asarray(core_charges, dtype=float), radii)
