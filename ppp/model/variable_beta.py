"""Bond-order-dependent bond lengths and resonance integrals, iterated to self-consistency with the SCF.

The scheme (each step a published relation):

1. Coulson bond order of each pi bond from the SCF density, p_ij = P_ij (Coulson 1939).
2. Bond length from the linear bond-length--bond-order relation r = a - b p, with a = 1.520 A and
   b = 0.186 A for C-C bonds (linearised Coulson (1939) relation as used in common PPP practice; the
   constants from memory). It gives 1.334 A at p = 1 (ethylene), 1.396 A at p = 2/3 (benzene), 1.520 A at
   p = 0 (a pure single bond between sp2 carbons).
3. Resonance integral scaled with that length, relative to the parameter set's value beta_ref which holds
   at the reference length r_ref:

   * ``law = "overlap"``: beta(r) = beta_ref S(r) / S(r_ref), the proportionality of beta to the overlap
     integral (Mulliken 1949; Wolfsberg & Helmholz 1952), with the 2p pi - 2p pi Slater overlap
     S(rho) = exp(-rho) (1 + rho + 2 rho^2/5 + rho^3/15), rho = zeta r / a0 (Mulliken, Rieke, Orloff &
     Orloff, J. Chem. Phys. 17, 1248 (1949)), zeta = 1.625 for carbon (Slater's rules, 1930);
   * ``law = "exponential"``: beta(r) = beta_ref exp(-(r - r_ref) / delta), the exponential distance
     dependence common in PPP and Su-Schrieffer-Heeger-type models (common practice).

4. Rebuild the core Hamiltonian and repeat the SCF from the previous density until no beta moves by more
   than ``tol_ev``. Only the resonance integrals follow the bond orders; the coordinates (and so gamma)
   stay those of the idealised geometry (common practice in variable-beta PPP work).

How the fixed point is reached: given an SCF loop that accepts a density-dependent core (``scf_iterate``),
the betas are rebuilt from the density at every SCF iteration, inside one DIIS history, and the run
stops only when |FP - PF| and the energy change meet the full SCF thresholds *and* the last beta change
is below ``tol_ev``. The density is then an SCF solution of its own final betas, so it is the result
(no confirming cycle). Only when that joint run fails does the cycle of step 4 run (one SCF per beta
update, loosely converged, then a full-tolerance SCF on the final betas).

Only bonds whose type pair is listed in the settings are varied (by default C-C); the others keep their
fixed beta (and any twist factor, which multiplies beta_ref).
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..errors import ConvergenceError, ParameterError
from ..units import BOHR_ANGSTROM

LAWS = ("overlap", "exponential")
#: SCF thresholds (energy, max |FP-PF|; eV) inside the beta cycles, before the final full-tolerance SCF.
INNER_TOL_ENERGY = 1e-9
INNER_TOL_GRAD = 1e-6
#: Cycle limit of the SCF / beta / reaction-field loop when a solvent reaction field takes part.
SOLVENT_MAX_CYCLES = 400


@dataclass(frozen=True)
class BondOrderBeta:
    """Settings of the variable-beta scheme (lengths in A, energies in eV).

    pairs : tuple of sorted type-name pairs whose beta follows the bond order
    length_intercept, length_slope : a, b of r = a - b p
    reference_length : r_ref, the length at which the parameter set's beta holds
    law : "overlap" or "exponential"
    slater_exponent : zeta of the 2p orbitals for the overlap law
    decay_length : delta of the exponential law
    max_cycles : SCF/beta cycles before giving up
    tol_ev : convergence threshold on max |change of beta|
    """

    pairs: tuple[tuple[str, str], ...] = (("C", "C"),)
    length_intercept: float = 1.520
    length_slope: float = 0.186
    reference_length: float = 1.397
    law: str = "overlap"
    slater_exponent: float = 1.625
    decay_length: float = 0.3
    max_cycles: int = 60
    tol_ev: float = 1e-6

    def __post_init__(self):
        if self.law not in LAWS:
            raise ParameterError(f"unknown bond-order beta law '{self.law}'; valid: {', '.join(LAWS)}")
        for name in ("length_intercept", "reference_length", "slater_exponent", "decay_length"):
            if not getattr(self, name) > 0:
                raise ParameterError(f"bond-order beta setting {name} must be positive")


def slater_pi_overlap(r_angstrom, zeta: float):
    """Overlap of two 2p pi Slater orbitals with equal exponent zeta at distance r (A).

    S = exp(-rho) (1 + rho + 2 rho^2 / 5 + rho^3 / 15), rho = zeta r / a0
    (Mulliken, Rieke, Orloff & Orloff 1949). Benzene C-C (1.397 A, zeta 1.625): S = 0.245.
    """
    rho = zeta * np.asarray(r_angstrom, dtype=float) / BOHR_ANGSTROM
    return np.exp(-rho) * (1.0 + rho + 0.4 * rho ** 2 + rho ** 3 / 15.0)


def bond_length(order, settings: BondOrderBeta):
    """Bond length (A) from Coulson bond order p: r = a - b p."""
    return settings.length_intercept - settings.length_slope * np.asarray(order, dtype=float)


def beta_factor(length, settings: BondOrderBeta):
    """beta(r) / beta(r_ref) for the configured law (dimensionless)."""
    r = np.asarray(length, dtype=float)
    if settings.law == "overlap":
        return slater_pi_overlap(r, settings.slater_exponent) / slater_pi_overlap(
            settings.reference_length, settings.slater_exponent)
    return np.exp(-(r - settings.reference_length) / settings.decay_length)


def _factor_function(settings: BondOrderBeta):
    """Function p -> beta(r(p)) / beta(r_ref) (as :func:`beta_factor` of :func:`bond_length`) with the
    constants of the settings evaluated once, for the per-iteration core update."""
    a, b = settings.length_intercept, settings.length_slope
    if settings.law == "overlap":
        k = settings.slater_exponent / BOHR_ANGSTROM
        s_ref = float(slater_pi_overlap(settings.reference_length, settings.slater_exponent))

        def factor(order):
            rho = k * (a - b * order)
            return np.exp(-rho) * (1.0 + rho * (1.0 + rho * (0.4 + rho / 15.0))) / s_ref
        factor.s_ref = s_ref
        return factor
    r_ref, delta = settings.reference_length, settings.decay_length

    def factor(order):
        return np.exp(-((a - b * order) - r_ref) / delta)
    factor.s_ref = float(slater_pi_overlap(r_ref, settings.slater_exponent))  # for the kernel form
    return factor


def bond_sigma_energy(lengths, beta_ref, settings: BondOrderBeta) -> np.ndarray:
    """Sigma-bond compression energy (eV) of bonds of length r (A) with table beta ``beta_ref`` (eV):
    the energy that makes the linear relation r = a - b p the stationarity condition of the total energy.

    A bond's pi energy depends on its length through 2 p beta(r) (its two elements of sum_ij P_ij h_ij),
    so dE_pi/dr = 2 p beta'(r). With

        E_sigma(r) = (2/b) [ (r - a) beta(r) - integral_a^r beta(s) ds ],   dE_sigma/dr = (2/b) (r - a) beta'(r),

    d(E_pi + E_sigma)/dr = 2 beta'(r) (p - (a - r)/b) vanishes exactly at r = a - b p. For a beta linear
    in r this is a harmonic spring (K/2)(r - a)^2 with K = 2 beta'/b: the balance of pi bond-order forces
    against sigma-bond compressibility of Longuet-Higgins & Salem (1959) (from memory). The integral is
    taken by 16-point Gauss-Legendre quadrature (beta(s) is smooth: exact to rounding here).
    """
    r = np.asarray(lengths, dtype=float)
    a, b = settings.length_intercept, settings.length_slope
    if b == 0.0:  # lengths fixed at a: nothing to compress
        return np.zeros_like(r)
    x, w = np.polynomial.legendre.leggauss(16)
    mid, half = 0.5 * (r + a), 0.5 * (r - a)
    integral = half * (beta_factor(mid[..., None] + half[..., None] * x, settings) @ w)
    return (2.0 / b) * np.asarray(beta_ref, dtype=float) * ((r - a) * beta_factor(r, settings) - integral)


def model_energy(core0: np.ndarray, types, bonds: np.ndarray, dens: np.ndarray, e_pi: float,
                 settings: BondOrderBeta) -> float:
    """Energy of the bond-order-beta model (eV): the pi energy ``e_pi`` of a self-consistent solution
    (``ChromophoreResult.e_total``: electronic plus core repulsion, plus the reaction field's free energy
    in a solvent) plus the :func:`bond_sigma_energy` of its varied bonds at the lengths r = a - b P_ij.

    The fixed points of :func:`iterate` are the stationary points of this energy in the orbitals and the
    lengths together, so where several exist (a long cyanine: bond-equalised and bond-alternating) it
    tells which is the ground state of the model. core0 : (N, N) core with the table betas (before any
    bond-order update), eV; dens : (N, N) the solution's density.
    """
    bonds = np.asarray(bonds, dtype=int).reshape(-1, 2)
    mask = variable_bonds(types, bonds, settings)
    i, j = bonds[mask, 0], bonds[mask, 1]
    r = bond_length(np.asarray(dens)[i, j], settings)
    return float(e_pi + np.sum(bond_sigma_energy(r, np.asarray(core0)[i, j], settings)))


class CoreOfBondOrders:
    """The core Hamiltonian as a function of the density, for the joint SCF run: the start core with the
    varied betas rebuilt from the bond orders P_ij (steps 1-3 of the module doc) and, with a reaction
    field, the diagonal h_ii + V_i(P).

    core0 : (N, N) start core, eV;  i, j : (K,) the varied bonds;  beta_ref : (K,) their table betas, eV

    ``kernel_form`` states the update as plain numbers for the compiled SCF loop
    (:func:`ppp.solvers.kernels.scf_loop`, which evaluates the same law at every iteration), or is None
    when a reaction field takes part (that stays on the numpy loop).
    """

    def __init__(self, core0, i, j, beta_ref, settings: BondOrderBeta, diag0=None, diag_update=None):
        self.core0, self.i, self.j, self.beta_ref = core0, i, j, beta_ref
        # flat (row-major) positions of the (i, j) and (j, i) elements: one-dimensional indexing costs a
        # fifth of the two-dimensional kind at dye size, and it runs at every SCF iteration
        n = np.shape(core0)[0]
        i_, j_ = np.asarray(i, dtype=np.intp), np.asarray(j, dtype=np.intp)
        self._ij, self._ji = i_ * n + j_, j_ * n + i_
        self.factor = _factor_function(settings)
        self.diag0, self.diag_update = diag0, diag_update
        self.kernel_form = None
        if diag_update is None:
            k = settings.slater_exponent / BOHR_ANGSTROM
            s_ref = self.factor.s_ref  # slater_pi_overlap(r_ref), as the factor function uses it
            self.kernel_form = (core0, np.asarray(i, dtype=np.int64), np.asarray(j, dtype=np.int64),
                                np.asarray(beta_ref, dtype=float), LAWS.index(settings.law),
                                settings.length_intercept, settings.length_slope, k, s_ref,
                                settings.reference_length, settings.decay_length)

    def __call__(self, dens: np.ndarray) -> np.ndarray:
        c = self.core0.copy()  # C-ordered (ndarray.copy's default): ravel() below is a view of it
        beta = self.beta_ref * self.factor(np.take(dens, self._ij))  # P_ij of the (row-major) flattened P
        flat = c.ravel()
        flat[self._ij] = beta
        flat[self._ji] = beta
        if self.diag_update is not None:
            np.fill_diagonal(c, self.diag0 + self.diag_update(dens))
        return c


def variable_bonds(types, bonds: np.ndarray, settings: BondOrderBeta) -> np.ndarray:
    """Boolean mask (M,) of the bonds whose beta follows the bond order."""
    wanted = {(a, b) for a, b in settings.pairs} | {(b, a) for a, b in settings.pairs}  # either order
    return np.array([(types[i], types[j]) in wanted for i, j in np.asarray(bonds).reshape(-1, 2).tolist()],
                    dtype=bool)


@dataclass(frozen=True)
class VariableBetaResult:
    """Outcome of the SCF / bond-order / beta iteration.

    core : (N, N) final core Hamiltonian, eV
    scf : the SCF result on ``core``
    bond_orders : (M,) final Coulson bond orders of all bonds
    lengths : (M,) bond lengths, A (NaN for bonds with fixed beta)
    cycles : number of SCF runs
    """

    core: np.ndarray
    scf: object
    bond_orders: np.ndarray
    lengths: np.ndarray
    cycles: int


def iterate(core: np.ndarray, gamma: np.ndarray, n_occ: int, types, bonds: np.ndarray,
            settings: BondOrderBeta, scf_kernel, dens0: np.ndarray | None = None,
            scf_iterate=None, diag_update=None, scf_finish=None, scf_finish_tol=(1e-11, 1e-9),
            **scf_kwargs) -> VariableBetaResult:
    """Iterate SCF -> bond orders -> lengths -> beta until beta is self-consistent.

    Parameters
    ----------
    core : (N, N) core Hamiltonian whose off-diagonal bonded elements are the reference betas
        (already multiplied by any twist factor), eV
    gamma : (N, N) eV;  n_occ : doubly occupied orbitals;  types : N type names;  bonds : (M, 2)
    scf_kernel : callable ``(core, gamma, n_occ, dens0=..., **scf_kwargs) -> SCFResult``
    dens0 : optional starting density; its bond orders also give the starting betas
    scf_iterate : optional single-attempt SCF loop ``(core, gamma, n_occ, dens0, max_iter=...,
        conv_tol=..., conv_tol_grad=..., core_update=...) -> (converged, iterations, dens)``
        (``ppp.solvers.scf.iterate``). When given, the betas are first updated inside one SCF run at
        every iteration (one DIIS history instead of one SCF per beta cycle); the cycle below then
        only confirms the fixed point, or starts from scratch when that joint run did not converge.
    diag_update : optional callable dens -> (N,) addend to the diagonal of the core Hamiltonian (a
        density-dependent one-electron term such as a solvent reaction field,
        :meth:`ppp.model.solvent.ReactionField.potential`), iterated to self-consistency together with the
        betas. With it, the settings may list no varied bonds (fixed beta, reaction field only).
    scf_finish : optional ``(core, gamma, n_occ, dens, converged, iterations, strategy) -> SCFResult``
        (``ppp.solvers.scf.finish``). With it, a joint run that converges to the full SCF tolerance
        (``conv_tol``/``conv_tol_grad`` of ``scf_kwargs``, else ``scf_finish_tol``) with a last change
        of the core below ``tol_ev`` is the result (cycles = 1): no confirming SCF cycles.

    Raises ConvergenceError when an SCF fails or the cycle does not settle within ``max_cycles``.
    """
    bonds = np.asarray(bonds, dtype=int).reshape(-1, 2)
    mask = variable_bonds(types, bonds, settings)
    core = np.array(core, dtype=float, copy=True)
    i, j = bonds[mask, 0], bonds[mask, 1]
    beta_ref = core[i, j].copy()
    diag0 = np.diagonal(core).copy()
    varies = bool(mask.any()) or diag_update is not None
    dens = dens0
    lengths = np.full(len(bonds), np.nan)
    if dens0 is not None and mask.any():  # start from the betas that belong to the given density
        core[i, j] = core[j, i] = beta_ref * beta_factor(bond_length(dens0[i, j], settings), settings)
    if dens0 is not None and diag_update is not None:
        np.fill_diagonal(core, diag0 + diag_update(dens0))
    if not varies:  # no beta follows the bond orders and no reaction field: one SCF on the fixed core
        scf = scf_kernel(core, gamma, n_occ, dens0=dens, **scf_kwargs)
        if not scf.converged:
            raise ConvergenceError("SCF did not converge")
        orders = scf.dens[bonds[:, 0], bonds[:, 1]].copy() if len(bonds) else np.zeros(0)
        return VariableBetaResult(core, scf, orders, lengths, 1)
    # inner cycles converge the SCF loosely (the betas move anyway); the last SCF uses full tolerance
    loose = dict(scf_kwargs, conv_tol=INNER_TOL_ENERGY, conv_tol_grad=INNER_TOL_GRAD)
    if scf_iterate is not None:
        core0 = core.copy()
        core_of = CoreOfBondOrders(core0, i, j, beta_ref, settings, diag0, diag_update)

        start = dens
        if start is None:
            alt = scf_kwargs.get("alt_dens0")
            if alt is not None and scf_kwargs.get("alt_first"):
                start = np.asarray(alt, dtype=float)
            else:
                c = np.linalg.eigh(core)[1][:, :n_occ]
                start = 2.0 * c @ c.T
        # One SCF run in which the core follows the density at every iteration, to the full SCF
        # tolerance and with the core change between the last two iterations below tol_ev: its density
        # is then an SCF solution of the fixed model core_of(P) (same |FP - PF| test as a separate SCF
        # on that core) and the core is self-consistent, so no confirming cycle is needed.
        full = dict(conv_tol=scf_kwargs.get("conv_tol", scf_finish_tol[0]),
                    conv_tol_grad=scf_kwargs.get("conv_tol_grad", scf_finish_tol[1]))
        ok, its, joint = scf_iterate(core, gamma, n_occ, start, max_iter=scf_kwargs.get("max_iter", 100),
                                     core_update=core_of, core_tol=settings.tol_ev, **full)
        if ok and scf_finish is not None:
            core = core_of(joint)
            scf = scf_finish(core, gamma, n_occ, joint, True, its, "diis")
            if scf.converged:
                orders = scf.dens[bonds[:, 0], bonds[:, 1]].copy() if len(bonds) else np.zeros(0)
                lengths[mask] = bond_length(orders[mask], settings)
                return VariableBetaResult(core, scf, orders, lengths, 1)
        if ok:  # the cycle below now only has to confirm the fixed point
            dens = joint
            core = core_of(joint)
    # With a reaction field a symmetric dye can sit next to a symmetry-breaking point (a long cyanine in a
    # polar solvent), where this fixed-point loop converges linearly but slowly (measured: factor 0.9 per
    # cycle for a heptamethine cyanine in ethanol); Anderson mixing was tried and jumps between the two
    # mirror-image solutions, so the loop simply gets more cycles.
    max_cycles = settings.max_cycles if diag_update is None else max(settings.max_cycles, SOLVENT_MAX_CYCLES)
    for cycle in range(1, max_cycles + 1):
        scf = scf_kernel(core, gamma, n_occ, dens0=dens, **loose)
        if not scf.converged:
            raise ConvergenceError(
                f"SCF did not converge in cycle {cycle} of the bond-order beta iteration "
                f"(last |FP-PF| = {scf.max_error:.1e} eV)")
        dens = scf.dens
        orders = dens[bonds[:, 0], bonds[:, 1]].copy() if len(bonds) else np.zeros(0)
        r = bond_length(orders[mask], settings)
        new = beta_ref * beta_factor(r, settings)
        change = float(np.max(np.abs(new - core[i, j]), initial=0.0))
        core[i, j] = core[j, i] = new
        if diag_update is not None:
            new_diag = diag0 + diag_update(dens)
            change = max(change, float(np.max(np.abs(new_diag - np.diagonal(core)))))
            np.fill_diagonal(core, new_diag)
        lengths[mask] = r
        if change < settings.tol_ev:
            # one more SCF on the final core so that orbitals and core belong together
            scf = scf_kernel(core, gamma, n_occ, dens0=dens, **scf_kwargs)
            if not scf.converged:
                raise ConvergenceError("SCF did not converge on the final bond-order betas")
            orders = scf.dens[bonds[:, 0], bonds[:, 1]].copy() if len(bonds) else np.zeros(0)
            return VariableBetaResult(core, scf, orders, lengths, cycle + 1)
    raise ConvergenceError(
        f"bond-order beta iteration did not settle in {max_cycles} cycles "
        f"(last change {change:.1e} eV)")


def from_table(table: dict, where: str) -> BondOrderBeta:
    """Settings from a parameter file's ``[bond_order_beta]`` table (all keys optional but ``pairs``)."""
    known = {"enabled", "pairs", "length_intercept_angstrom", "length_slope_angstrom",
             "reference_length_angstrom", "law", "slater_exponent", "decay_length_angstrom", "source"}
    extra = set(table) - known
    if extra:
        raise ParameterError(f"{where}: unknown key(s) in [bond_order_beta]: {', '.join(sorted(extra))}")
    pairs_raw = table.get("pairs", ["C-C"])
    if not isinstance(pairs_raw, list) or not all(isinstance(p, str) and len(p.split("-")) == 2
                                                  for p in pairs_raw):
        raise ParameterError(f"{where}: [bond_order_beta] pairs must be a list of 'A-B' strings")

    def num(key, default):
        val = table.get(key, default)
        if isinstance(val, bool) or not isinstance(val, (int, float)) or not math.isfinite(val):
            raise ParameterError(f"{where}: [bond_order_beta] {key} must be a finite number")
        return float(val)

    return BondOrderBeta(
        pairs=tuple(tuple(sorted(p.split("-"))) for p in pairs_raw),
        length_intercept=num("length_intercept_angstrom", 1.520),
        length_slope=num("length_slope_angstrom", 0.186),
        reference_length=num("reference_length_angstrom", 1.397),
        law=str(table.get("law", "overlap")),
        slater_exponent=num("slater_exponent", 1.625),
        decay_length=num("decay_length_angstrom", 0.3),
    )
