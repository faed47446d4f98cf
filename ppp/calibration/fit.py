"""Least-squares calibration of parameter-set values against measured band positions, with k-fold
cross-validation so that the reported error is an out-of-sample one.

The fitted quantities are named ``beta:A-B`` (resonance integral of an A-B bond), ``ip:T`` (valence-state
ionisation potential I of centre type T), ``u:T`` (one-centre repulsion of T) and ``alkyl:T`` (inductive
shift of I per alkyl substituent on a centre of type T, the set's ``[alkyl_shift]`` table; 0 when absent). The objective is

    sum_m r_m^2 + sum_k ((x_k - x0_k) / s_k)^2

with r_m = E_calc,m - E_exp,m in eV (a molecule whose band cannot be matched contributes a flat
:data:`FAILED_RESIDUAL_EV`) and a weak Gaussian prior pulling each value towards its starting (literature)
value x0_k with width s_k (:data:`PRIOR_WIDTH_EV`): ridge regularisation (Tikhonov 1963; common practice
in semi-empirical parametrisation) so that values the data barely constrain stay physical. The widths can
be scaled by one factor, fixed or chosen by cross-validation on the data (:func:`select_prior_scale`; its
error is then reported by a nested cross-validation, :func:`cross_validate` with ``prior_scale="auto"``).
The minimiser is ``scipy.optimize.least_squares`` (trust-region reflective, with bounds). The Jacobian is taken by
forward differences, recomputing only the molecules that contain the varied type or bond.
"""
from __future__ import annotations

import datetime
import hashlib
import tomllib
from dataclasses import dataclass, replace
from types import MappingProxyType

import numpy as np
import scipy.optimize

from ..driver import Options
from ..errors import InputError, ParameterError
from ..model.params import CentreType, ParameterSet, _pair_key
from .evaluate import PreparedEntry, predict

KINDS = ("beta", "ip", "u", "alkyl")
#: Residual (eV) given to a molecule whose band cannot be matched under trial parameters.
FAILED_RESIDUAL_EV = 1.0
#: Width (eV) of the prior on each kind of parameter.
PRIOR_WIDTH_EV = {"beta": 0.5, "ip": 2.0, "u": 2.0, "alkyl": 0.5}
#: Forward-difference step (eV).
FD_STEP_EV = 1e-3
#: Box bounds as offsets from the starting value (eV); beta additionally stays negative.
BOUND_OFFSET_EV = {"beta": 1.5, "ip": 6.0, "u": 6.0, "alkyl": 1.5}


@dataclass(frozen=True)
class FitParameter:
    """One adjustable value of a parameter set."""

    kind: str  # "beta", "ip", "u" or "alkyl"
    key: str  # "A-B" for beta (sorted), type name otherwise

    @property
    def name(self) -> str:
        return f"{self.kind}:{self.key}"

    def types(self) -> tuple[str, ...]:
        return tuple(self.key.split("-")) if self.kind == "beta" else (self.key,)

    def value(self, pset: ParameterSet) -> float:
        if self.kind == "beta":
            return float(pset.beta[_pair_key(*self.key.split("-"))])
        if self.kind == "alkyl":
            return float(pset.alkyl_shift.get(self.key, 0.0))
        t = pset.types[self.key]
        return float(t.ip_ev if self.kind == "ip" else t.u_ev)


def parse_parameter(spec: str, pset: ParameterSet) -> FitParameter:
    """``beta:C-N.amino``, ``ip:N.amino``, ``u:O.oxo`` or ``alkyl:N.amino`` -> FitParameter (checked against
    the set)."""
    kind, sep, key = spec.strip().partition(":")
    if not sep or kind not in KINDS:
        raise InputError(f"fit parameter '{spec}': write beta:A-B, ip:TYPE, u:TYPE or alkyl:TYPE")
    if kind == "beta":
        parts = key.split("-")
        if len(parts) != 2 or _pair_key(*parts) not in pset.beta:
            raise InputError(f"fit parameter '{spec}': parameter set '{pset.name}' has no {key} bond")
        key = "-".join(_pair_key(*parts))
    elif key not in pset.types:
        raise InputError(f"fit parameter '{spec}': parameter set '{pset.name}' has no type {key}")
    return FitParameter(kind, key)


def _entry_keys(pe: PreparedEntry) -> set[str]:
    """Type names, sorted bond-pair keys and "alkyl:T" (a centre of type T bearing an alkyl group)
    occurring in a prepared molecule."""
    keys: set[str] = set()
    for prep in pe.chromophores:
        types = prep.system.types
        keys.update(types)
        keys.update("-".join(_pair_key(types[i], types[j])) for i, j in prep.system.bonds)
        if prep.system.alkyl_counts is not None:
            keys.update(f"alkyl:{t}" for t, n in zip(types, prep.system.alkyl_counts.tolist()) if n)
    return keys


def default_parameters(prepared, pset: ParameterSet, min_count: int = 3) -> list[FitParameter]:
    """Heteroatom ip values, heteroatom bond betas and the alkyl shifts the set defines
    (``[alkyl_shift]``) that occur in at least ``min_count`` molecules."""
    counts: dict[str, int] = {}
    for pe in prepared:
        for k in _entry_keys(pe):
            counts[k] = counts.get(k, 0) + 1
    out = []
    for k, n in sorted(counts.items()):
        if n < min_count:
            continue
        if k.startswith("alkyl:"):
            if k[6:] in pset.alkyl_shift:
                out.append(FitParameter("alkyl", k[6:]))
        elif "-" in k and _pair_key(*k.split("-")) in pset.beta and k != "C-C":
            out.append(FitParameter("beta", k))
        elif "-" not in k and k in pset.types and k != "C":
            out.append(FitParameter("ip", k))
    return out


def apply(pset: ParameterSet, params, values) -> ParameterSet:
    """A copy of ``pset`` with the given parameters set to ``values`` (not written to disk)."""
    types = dict(pset.types)
    beta = dict(pset.beta)
    alkyl = dict(pset.alkyl_shift)
    for p, v in zip(params, values):
        v = float(v)
        if p.kind == "beta":
            beta[_pair_key(*p.key.split("-"))] = v
        elif p.kind == "alkyl":
            alkyl[p.key] = v
        else:
            t = types[p.key]
            types[p.key] = CentreType(t.name, t.z, v if p.kind == "ip" else t.ip_ev,
                                      v if p.kind == "u" else t.u_ev, t.source)
    return replace(pset, types=MappingProxyType(types), beta=MappingProxyType(beta),
                   alkyl_shift=MappingProxyType(alkyl))


def _bounds(params, x0):
    lo, hi = [], []
    for p, v in zip(params, x0):
        off = BOUND_OFFSET_EV[p.kind]
        lo.append(v - off)
        hi.append(min(v + off, -0.05) if p.kind == "beta" else v + off)
        if p.kind == "u":
            lo[-1] = max(lo[-1], 1.0)
    return np.array(lo), np.array(hi)


@dataclass(frozen=True)
class FitResult:
    """Outcome of one least-squares fit.

    params : fitted parameters;  x0, x : (k,) start and fitted values, eV
    energies : (n,) fitted band energies of the training entries, eV (NaN: unmatched)
    residuals_ev : (n,) E_calc - E_exp of the training entries, eV (NaN: unmatched)
    cost : final objective;  nfev : objective evaluations;  status : scipy's message
    """

    params: tuple[FitParameter, ...]
    x0: np.ndarray
    x: np.ndarray
    energies: np.ndarray
    residuals_ev: np.ndarray
    cost: float
    nfev: int
    status: str


def fit(prepared, pset: ParameterSet, params, options: Options = Options(), max_nfev: int = 30,
        prior_scale: float = 1.0, reference_solvents: bool = False) -> FitResult:
    """Least-squares fit of ``params`` to the prepared entries (see the module docstring).

    prior_scale : multiplies the prior widths; 0 switches the prior off (plain least squares)
    max_nfev : objective evaluations allowed (each is one pass over the entries)
    reference_solvents : compute each entry in the solvent of its measurement (ppp.model.solvent), so
        that the fitted values belong to the model with the reaction field
    """
    prepared = tuple(prepared)
    params = tuple(params)
    if not params:
        raise InputError("nothing to fit: no parameters chosen")
    if not prepared:
        raise InputError("nothing to fit: no reference entries")
    x0 = np.array([p.value(pset) for p in params])
    measured = np.array([pe.entry.energy_ev for pe in prepared])
    scales = np.array([PRIOR_WIDTH_EV[p.kind] for p in params])
    if prior_scale < 0:
        raise InputError("prior_scale must not be negative")
    n_prior = len(params) if prior_scale > 0 else 0
    widths = scales * prior_scale if prior_scale > 0 else scales
    keys = [_entry_keys(pe) for pe in prepared]
    touches = np.array([[p.key in k for p in params] for k in keys])
    cache: dict[bytes, np.ndarray] = {}
    warm: dict = {}  # converged densities of the last evaluation: nearby parameters converge fast

    def energies(x, only=None, base=None):
        key = x.tobytes()
        if only is None and key in cache:
            return cache[key]
        trial = apply(pset, params, x)
        out = np.array(base, copy=True) if base is not None else np.full(len(prepared), np.nan)
        idx = range(len(prepared)) if only is None else np.flatnonzero(only)
        for m in idx:
            e = predict(prepared[m], trial, options, warm=warm, reference_solvents=reference_solvents)
            out[m] = np.nan if e is None else e
        if only is None:
            cache[key] = out
        return out

    def residuals(x):
        e = energies(x)
        r = np.where(np.isfinite(e), e - measured, FAILED_RESIDUAL_EV)
        return np.concatenate([r, (x - x0) / widths][:1 + (n_prior > 0)])

    def jacobian(x):
        e0 = energies(x)
        r0 = np.where(np.isfinite(e0), e0 - measured, FAILED_RESIDUAL_EV)
        jac = np.zeros((len(prepared) + n_prior, len(params)))
        for k in range(len(params)):
            xs = x.copy()
            h = FD_STEP_EV if xs[k] + FD_STEP_EV <= hi[k] else -FD_STEP_EV
            xs[k] += h
            e = energies(xs, only=touches[:, k], base=e0)
            r = np.where(np.isfinite(e), e - measured, FAILED_RESIDUAL_EV)
            jac[:len(prepared), k] = (r - r0) / h
            if n_prior:
                jac[len(prepared) + k, k] = 1.0 / widths[k]
        return jac

    lo, hi = _bounds(params, x0)
    sol = scipy.optimize.least_squares(residuals, x0, jac=jacobian, bounds=(lo, hi), method="trf",
                                       x_scale=scales, max_nfev=max_nfev, xtol=1e-4, ftol=1e-6)
    e = energies(sol.x)
    return FitResult(params, x0, sol.x, e, e - measured, float(sol.cost), int(sol.nfev), str(sol.message))


def folds(prepared, k: int, rng: np.random.Generator) -> np.ndarray:
    """Fold number (0..k-1) of each entry, stratified by class: each class is shuffled and dealt
    round-robin, so every fold sees every class in proportion."""
    out = np.zeros(len(prepared), dtype=int)
    by_class: dict[str, list[int]] = {}
    for m, pe in enumerate(prepared):
        by_class.setdefault(pe.entry.cls, []).append(m)
    start = 0
    for cls in sorted(by_class):
        idx = np.array(by_class[cls])
        rng.shuffle(idx)
        out[idx] = (start + np.arange(len(idx))) % k
        start += len(idx)
    return out


@dataclass(frozen=True)
class CrossValidation:
    """Out-of-fold predictions of a k-fold cross-validation.

    energies : (n,) band energy of each entry predicted by the fit that did not see it, eV
    fold : (n,) fold number of each entry;  fits : the k fold fits
    prior_scales : the prior scale each fold's fit used (with ``prior_scale="auto"``: the one its own
        inner cross-validation chose)
    """

    energies: np.ndarray
    fold: np.ndarray
    fits: tuple[FitResult, ...]
    prior_scales: tuple[float, ...] = ()


#: Prior scales tried by ``prior_scale="auto"`` (multipliers of :data:`PRIOR_WIDTH_EV`): from a pull four
#: times stronger than the standard one to a sixteen times weaker one (widths of 8 eV for beta, 32 eV for
#: ip: hardly a pull; the box bounds of :func:`fit` still hold), in steps of four: few values, because each
#: costs k fits per fold. Nested cross-validated errors on classes of the reference set (bond-order beta,
#: 5 folds, up to 30 evaluations), this grid / steps of two from 0.25 to 16 / steps of two from 0.25 to 4:
#: benzenoid 0.120 / 0.120 / 0.145 eV, carbonyl 0.244 / 0.231 / 0.194 eV, push-pull 0.219 / - / 0.178 eV.
#: With 8-16 molecules the choice itself is noisy at that level; no grid was better on every class.
PRIOR_GRID = (0.25, 1.0, 4.0, 16.0)


def _cv_error(energies: np.ndarray, prepared) -> float:
    """Mean |E_cv - E_exp| (eV), an unmatched entry counting as :data:`FAILED_RESIDUAL_EV` (as in the fit)."""
    r = np.abs(np.asarray(energies) - np.array([pe.entry.energy_ev for pe in prepared]))
    return float(np.mean(np.where(np.isfinite(r), r, FAILED_RESIDUAL_EV)))


@dataclass(frozen=True)
class PriorSelection:
    """Prior scale chosen by cross-validation: ``scale``, and the cross-validated error (eV) of every
    value of ``grid`` (``cv_error_ev``)."""

    scale: float
    grid: tuple[float, ...]
    cv_error_ev: tuple[float, ...]


def select_prior_scale(prepared, pset: ParameterSet, params, options: Options = Options(), k: int = 5,
                       seed: int = 20240601, max_nfev: int = 30, grid=PRIOR_GRID,
                       reference_solvents: bool = False) -> PriorSelection:
    """Strength of the pull towards the starting values chosen by k-fold cross-validation: each value of
    ``grid`` is cross-validated on ``prepared`` and the one with the lowest error wins (the first of equal
    ones, i.e. the stronger pull); the usual way of setting a ridge penalty (Hastie, Tibshirani & Friedman,
    The Elements of Statistical Learning, 2009, sections 3.4 and 7.10). The winner's own error is biased
    low by the choice: report the error of the whole procedure instead (:func:`cross_validate` with
    ``prior_scale="auto"``, a nested cross-validation)."""
    prepared = tuple(prepared)
    k = min(k, len(prepared))
    errors = tuple(_cv_error(cross_validate(prepared, pset, params, options, k=k, seed=seed, max_nfev=max_nfev,
                                            prior_scale=s, reference_solvents=reference_solvents).energies,
                             prepared) for s in grid)
    return PriorSelection(float(grid[int(np.argmin(errors))]), tuple(float(s) for s in grid), errors)


def cross_validate(prepared, pset: ParameterSet, params, options: Options = Options(), k: int = 5,
                   seed: int = 20240601, max_nfev: int = 30, prior_scale: float | str = 1.0,
                   reference_solvents: bool = False) -> CrossValidation:
    """k-fold cross-validation of :func:`fit`: each fold is predicted by parameters fitted without it.

    prior_scale : a number (see :func:`fit`), or "auto": each fold's training part chooses its own scale by
        an inner cross-validation (:func:`select_prior_scale`, at most k inner folds, seed + 1 + fold), so
        that the error reported is that of the whole procedure, choice included (nested cross-validation;
        Varma & Simon 2006). Costs about len(PRIOR_GRID) * k fits per fold instead of one.
    """
    prepared = tuple(prepared)
    if not 2 <= k <= len(prepared):
        raise InputError(f"cross-validation needs 2 <= k <= {len(prepared)} folds, got {k}")
    auto = isinstance(prior_scale, str)
    if auto and prior_scale != "auto":
        raise InputError(f"prior scale must be a number or 'auto', got '{prior_scale}'")
    fold = folds(prepared, k, np.random.default_rng(seed))
    energies = np.full(len(prepared), np.nan)
    fits, scales = [], []
    for f in range(k):
        train = [pe for pe, g in zip(prepared, fold) if g != f]
        scale = prior_scale
        if auto:  # an inner cross-validation needs two folds of at least one entry each
            scale = (select_prior_scale(train, pset, params, options, k=min(k, len(train)), seed=seed + 1 + f,
                                        max_nfev=max_nfev, reference_solvents=reference_solvents).scale
                     if len(train) >= 2 else 1.0)
        scales.append(float(scale))
        res = fit(train, pset, params, options, max_nfev=max_nfev, prior_scale=scale,
                  reference_solvents=reference_solvents)
        fits.append(res)
        trial = apply(pset, params, res.x)
        for m in np.flatnonzero(fold == f):
            e = predict(prepared[m], trial, options, reference_solvents=reference_solvents)
            energies[m] = np.nan if e is None else e
    return CrossValidation(energies, fold, tuple(fits), tuple(scales))


def write_parameter_file(pset: ParameterSet, result: FitResult, name: str, reference_path: str,
                         reference_sha256: str, description: str, uncertainty: dict[str, float],
                         cv_summary: dict[str, float], train_summary: dict[str, float],
                         bond_order_beta: bool | None = None,
                         uncertainty_kind: str = "k-fold cross-validated", solvents: str = "gas",
                         prior: dict | None = None) -> str:
    """TOML text of a new parameter set: ``pset`` with the fitted values and a [provenance] table.

    The base file's layout is kept (parsed and re-emitted); each fitted value's ``source`` says it was
    fitted, on which data set (path and SHA-256) and when. ``solvents`` ("gas" or "reference") is recorded
    in [provenance]: the errors in [uncertainty] hold for runs of the same kind (ppp.calibration.uncertainty).
    ``prior``: how the pull towards the start values was set (e.g. the scale and its selection), recorded
    in [provenance] as ``prior``.
    """
    import tomli_w

    data = tomllib.loads(pset.text)
    today = datetime.datetime.now(datetime.timezone.utc).strftime("%Y-%m-%d")
    note = f"fitted by ppp fit on {reference_path} (sha256 {reference_sha256[:12]}) {today}"
    data["name"] = name
    data["default"] = False
    data["description"] = description
    data["version"] = f"{pset.version}+fit{today}"
    for p, v in zip(result.params, result.x):
        if p.kind == "beta":
            key = _find_beta_key(data["beta"], p.key)
            data["beta"][key] = {"value_ev": round(float(v), 4), "source": note}
        elif p.kind == "alkyl":
            data.setdefault("alkyl_shift", {})[p.key] = {"value_ev": round(float(v), 4), "source": note}
        else:
            entry = data["types"][p.key]
            entry["ip_ev" if p.kind == "ip" else "u_ev"] = round(float(v), 4)
            entry["source"] = f"{entry.get('source', '')}; {p.kind} {note}"
    if bond_order_beta is not None:
        table = data.setdefault("bond_order_beta", default_bond_order_beta_table())
        table["enabled"] = bool(bond_order_beta)
    data["uncertainty"] = {
        "source": f"{uncertainty_kind} mean absolute error per class, {note}",
        "mae_ev": {k: round(float(v), 4) for k, v in uncertainty.items()},
    }
    data["provenance"] = {
        "base_set": pset.name, "base_sha256": pset.sha256,
        "reference": reference_path, "reference_sha256": reference_sha256, "date": today,
        "fitted": [p.name for p in result.params],
        "start_values_ev": [round(float(v), 4) for v in result.x0],
        "fitted_values_ev": [round(float(v), 4) for v in result.x],
        "n_training": int(len(result.residuals_ev)),
        "training_residuals_ev": [round(float(r), 4) if np.isfinite(r) else "unmatched"
                                  for r in result.residuals_ev],
        "training_mae_ev": {k: round(float(v), 4) for k, v in train_summary.items()},
        "cross_validated_mae_ev": {k: round(float(v), 4) for k, v in cv_summary.items()},
        "optimizer": f"scipy.optimize.least_squares trf; {result.status}",
        "solvents": solvents,
    }
    if prior:
        data["provenance"]["prior"] = prior
    header = (f"# ppp parameter set \"{name}\", written by ppp fit from \"{pset.name}\".\n"
              f"# Fitted values carry their provenance in 'source'; see [provenance] for the data set.\n")
    text = header + tomli_w.dumps(data)
    try:
        tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:  # pragma: no cover - tomli_w writes valid TOML
        raise ParameterError(f"internal: written parameter file is not valid TOML: {exc}") from None
    return text


def default_bond_order_beta_table() -> dict:
    """The [bond_order_beta] table of the published scheme in ppp.model.variable_beta, written out."""
    return {
        "enabled": False,
        "pairs": ["C-C"],
        "length_intercept_angstrom": 1.520,
        "length_slope_angstrom": 0.186,
        "reference_length_angstrom": 1.397,
        "law": "overlap",
        "slater_exponent": 1.625,
        "source": ("r = 1.520 - 0.186 p (linearised Coulson 1939 relation, common practice, from memory); "
                   "beta proportional to the 2p-2p pi Slater overlap (Mulliken 1949; Mulliken, Rieke, "
                   "Orloff & Orloff 1949), zeta = 1.625 (Slater 1930); r_ref = benzene 1.397 A"),
    }


def _find_beta_key(table: dict, key: str) -> str:
    a, b = key.split("-")
    for k in table:
        if _pair_key(*k.split("-")) == _pair_key(a, b):
            return k
    return key


def file_sha256(path: str) -> str:
    with open(path, "rb") as fh:
        return hashlib.sha256(fh.read()).hexdigest()
