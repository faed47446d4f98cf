"""Uncertainty of a predicted band position from the measured error of its chemical class.

A parameter set may carry an ``[uncertainty]`` table: the mean absolute error (eV) of its band positions
per chemical class, measured against a reference set, out of sample (k-fold cross-validated for a fitted
set; the plain error for a set that was never fitted to that reference). A predicted band is given the
figure of its molecule's class (:func:`ppp.calibration.classes.classify`), or the overall figure ("all")
when the class has none. The figure in nm follows from d(lambda) = lambda dE / E. The figures belong to
gas-phase runs (the default) unless the set was fitted with ``ppp fit --solvents reference``; a run of the
other kind gets none (docs/accuracy.md gives the measured errors of the solvent configuration).
"""
from __future__ import annotations

import tomllib
from dataclasses import dataclass
from functools import lru_cache

from ..errors import PPPError
from ..model import params as param_registry
from ..units import ev_to_nm


@dataclass(frozen=True)
class BandUncertainty:
    """Expected error of one band: class used, figure in eV, and the same in nm at the band."""

    cls: str
    sigma_ev: float
    sigma_nm: float
    source: str

    def __str__(self) -> str:
        what = "overall error" if self.cls == "all" else f"{self.cls}-class error"  # "all": no class fits
        return f"\u00b1 {self.sigma_nm:.0f} nm ({what} {self.sigma_ev:.2f} eV)"


def band_uncertainty(energy_ev: float, cls: str, pset: param_registry.ParameterSet,
                     response: str = "cis") -> BandUncertainty | None:
    """Uncertainty of a band at ``energy_ev`` for a molecule of class ``cls`` under ``pset`` (None if the
    set carries no figures for singlets of that ``response`` method: "cis" or "rpa")."""
    table = pset.uncertainty_rpa if response == "rpa" else pset.uncertainty
    if not table or not energy_ev > 0:
        return None
    used = cls if cls in table else "all"
    if used not in table:
        return None
    sigma = float(table[used])
    return BandUncertainty(used, sigma, float(ev_to_nm(energy_ev)) * sigma / energy_ev, pset.uncertainty_source)


def measured_with(pset: param_registry.ParameterSet) -> str:
    """How a set's [uncertainty] figures were measured: "reference" (each row in its own solvent, a set
    written by ``ppp fit --solvents reference``) or "gas"."""
    return _solvents_of(pset.text)


@lru_cache(maxsize=16)
def _solvents_of(text: str) -> str:
    return str(tomllib.loads(text).get("provenance", {}).get("solvents", "gas"))


def for_result(result, state=None) -> BandUncertainty | None:
    """Uncertainty of a result's band (default: its first allowed band), or None when unavailable."""
    from .classes import classify_smiles

    state = state if state is not None else result.first_bright
    if state is None:
        return None
    try:
        pset = param_registry.load(result.options.parameters)
        cls = classify_smiles(result.canonical_smiles)
    except PPPError:
        return None
    if result.options.in_solvent != (measured_with(pset) == "reference"):
        return None  # the class errors were measured the other way (gas phase / solvent): none applies
    return band_uncertainty(state.energy_ev, cls, pset, result.options.response)
