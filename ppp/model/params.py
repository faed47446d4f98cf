"""Registry of parameter sets.

Each set is one TOML file in the project's ``parameters/`` folder (shipped inside the wheel as
``ppp/_parameters``). A set is addressed by its file stem (``"classic"``) or by a path to a TOML file
of the same layout. The loaded set carries the SHA-256 of the file's bytes, which goes into every result.
"""
from __future__ import annotations

import hashlib
import math
import tomllib
from dataclasses import dataclass, field
from functools import lru_cache
from pathlib import Path
from types import MappingProxyType
from typing import Mapping

from ..errors import ParameterError
from ..structure.perceive import STRUCTURAL_Z  # parameter files must agree with the perceived types
from .variable_beta import BondOrderBeta, from_table as _bond_order_beta_from_table

GAMMA_FORMULAS = ("mataga-nishimoto", "ohno")



@dataclass(frozen=True)
class CentreType:
    """Atomic parameters of one pi-centre type (eV)."""

    name: str
    z: int
    ip_ev: float
    u_ev: float
    source: str


@dataclass(frozen=True)
class ParameterSet:
    """A loaded, validated parameter set. ``sha256`` is the hash of the file's bytes."""

    name: str
    version: str
    description: str
    sha256: str
    path: str
    text: str
    types: Mapping[str, CentreType]
    beta: Mapping[tuple[str, str], float]
    gamma_formula: str
    bond_length_angstrom: float
    is_default: bool = False
    #: settings of the bond-order-dependent beta scheme ([bond_order_beta] table), None if absent
    bond_order_beta: BondOrderBeta | None = None
    #: whether the set switches that scheme on unless the caller says otherwise
    bond_order_beta_enabled: bool = False
    #: band-position uncertainty (eV) per chemical class ([uncertainty] table), e.g. cross-validated MAE
    uncertainty: Mapping[str, float] = field(default_factory=lambda: MappingProxyType({}))
    #: where the uncertainty figures come from (free text)
    uncertainty_source: str = ""
    #: the same figures measured with RPA singlets ([uncertainty.rpa] table; empty when not measured)
    uncertainty_rpa: Mapping[str, float] = field(default_factory=lambda: MappingProxyType({}))
    #: inductive shift per alkyl substituent by centre type ([alkyl_shift] table), eV: the valence-state
    #: ionisation potential I of a centre of that type is lowered by this much for each saturated carbon
    #: bonded to it (:func:`ppp.model.hamiltonian.build_model`); types not listed get no shift
    alkyl_shift: Mapping[str, float] = field(default_factory=lambda: MappingProxyType({}))

    @property
    def short_hash(self) -> str:
        return self.sha256[:12]

    def beta_for(self, type_a: str, type_b: str) -> float | None:
        """Resonance integral for a bond between two types, or None if the set lacks the pair."""
        return self.beta.get(_pair_key(type_a, type_b))


def _pair_key(a: str, b: str) -> tuple[str, str]:
    return (a, b) if a <= b else (b, a)


def parameter_dirs() -> list[Path]:
    """Folders searched for named parameter sets, in order."""
    here = Path(__file__).resolve().parent.parent
    dirs = [here / "_parameters", here.parent / "parameters"]
    return [d for d in dirs if d.is_dir()]


def available() -> list[str]:
    """Names of the parameter sets that can be loaded by name."""
    names: set[str] = set()
    for d in parameter_dirs():
        names.update(p.stem for p in d.glob("*.toml"))
    return sorted(names)


def default_name() -> str:
    """Name of the set flagged ``default = true`` (``classic`` if none is flagged)."""
    for name in available():
        try:
            if load(name).is_default:
                return name
        except ParameterError:
            continue
    return "classic"


def _resolve(name_or_path: str) -> Path:
    p = Path(name_or_path)
    if p.suffix == ".toml" or p.exists():
        if not p.is_file():
            raise ParameterError(f"parameter file '{name_or_path}' does not exist")
        return p
    for d in parameter_dirs():
        cand = d / f"{name_or_path}.toml"
        if cand.is_file():
            return cand
    raise ParameterError(
        f"unknown parameter set '{name_or_path}'; valid sets: {', '.join(available()) or '(none found)'}"
    )


def load(name_or_path: str | None = None) -> ParameterSet:
    """Load and validate a parameter set by registry name or path (default set if None)."""
    if name_or_path is None:
        name_or_path = default_name()
    path = _resolve(str(name_or_path))
    return _load_path(str(path.resolve()))


@lru_cache(maxsize=32)
def _load_path(path: str) -> ParameterSet:
    try:
        raw = Path(path).read_bytes()
    except OSError as exc:
        raise ParameterError(f"cannot read parameter file '{path}': {exc.strerror}") from None
    return _parse(raw, path)


def from_bytes(raw: bytes, origin: str) -> ParameterSet:
    """A parameter set from the bytes of its file, e.g. the copy a batch results file keeps (``origin``
    names where they came from, in messages and as ``path``); validated as :func:`load` validates a file,
    with the same hash."""
    return _parse(bytes(raw), origin)


def _parse(raw: bytes, path: str) -> ParameterSet:
    try:
        text = raw.decode("utf-8")
        data = tomllib.loads(text)
    except (UnicodeDecodeError, tomllib.TOMLDecodeError) as exc:
        raise ParameterError(f"parameter file '{path}' is not valid TOML: {exc}") from None
    where = f"parameter file '{path}'"

    def need(table: Mapping, key: str, kind, ctx: str):
        if key not in table:
            raise ParameterError(f"{where}: missing '{key}' in {ctx}")
        val = table[key]
        if kind is float:
            if isinstance(val, bool) or not isinstance(val, (int, float)) or not math.isfinite(val):
                raise ParameterError(f"{where}: '{key}' in {ctx} must be a finite number, got {val!r}")
            return float(val)
        if not isinstance(val, kind):
            raise ParameterError(f"{where}: '{key}' in {ctx} must be {kind.__name__}, got {val!r}")
        return val

    name = need(data, "name", str, "the top level")
    version = str(data.get("version", "0"))
    description = str(data.get("description", ""))
    geometry = need(data, "geometry", dict, "the top level")
    bond_length = need(geometry, "bond_length_angstrom", float, "[geometry]")
    if not 0.5 < bond_length < 3.0:
        raise ParameterError(f"{where}: bond_length_angstrom {bond_length} outside 0.5-3.0 A")
    gamma = need(data, "gamma", dict, "the top level")
    formula = need(gamma, "formula", str, "[gamma]")
    if formula not in GAMMA_FORMULAS:
        raise ParameterError(f"{where}: unknown gamma formula '{formula}'; valid: {', '.join(GAMMA_FORMULAS)}")

    types_raw = need(data, "types", dict, "the top level")
    types: dict[str, CentreType] = {}
    for tname, entry in types_raw.items():
        ctx = f"[types.{tname}]"
        if not isinstance(entry, dict):
            raise ParameterError(f"{where}: {ctx} must be a table")
        if tname not in STRUCTURAL_Z:
            raise ParameterError(
                f"{where}: unknown centre type '{tname}'; known types: {', '.join(STRUCTURAL_Z)}"
            )
        z = need(entry, "z", int, ctx)
        if z != STRUCTURAL_Z[tname]:
            raise ParameterError(f"{where}: {ctx} z = {z}, but a {tname} centre has core charge {STRUCTURAL_Z[tname]}")
        ip = need(entry, "ip_ev", float, ctx)
        u = need(entry, "u_ev", float, ctx)
        if u <= 0:
            raise ParameterError(f"{where}: {ctx} u_ev must be positive, got {u}")
        source = need(entry, "source", str, ctx)
        types[tname] = CentreType(tname, z, ip, u, source)

    beta_raw = need(data, "beta", dict, "the top level")
    beta: dict[tuple[str, str], float] = {}
    for key, entry in beta_raw.items():
        ctx = f"[beta] '{key}'"
        parts = key.split("-")
        if len(parts) != 2 or not all(p in types for p in parts):
            raise ParameterError(f"{where}: {ctx} must name two defined types as 'A-B'")
        if not isinstance(entry, dict):
            raise ParameterError(f"{where}: {ctx} must be {{ value_ev = ..., source = ... }}")
        value = need(entry, "value_ev", float, ctx)
        need(entry, "source", str, ctx)
        if value >= 0:
            raise ParameterError(f"{where}: {ctx} beta must be negative, got {value}")
        beta[_pair_key(*parts)] = value

    bob, bob_on = None, False
    if "bond_order_beta" in data:
        table = need(data, "bond_order_beta", dict, "the top level")
        bob = _bond_order_beta_from_table(table, where)
        enabled = table.get("enabled", False)
        if not isinstance(enabled, bool):
            raise ParameterError(f"{where}: [bond_order_beta] enabled must be true or false")
        bob_on = enabled
        for pair in bob.pairs:
            if not all(t in types for t in pair):
                raise ParameterError(f"{where}: [bond_order_beta] pair '{'-'.join(pair)}' names an undefined type")
    alkyl: dict[str, float] = {}
    if "alkyl_shift" in data:
        table = need(data, "alkyl_shift", dict, "the top level")
        for tname, entry in table.items():
            ctx = f"[alkyl_shift] '{tname}'"
            if tname not in types:
                raise ParameterError(f"{where}: {ctx} names an undefined centre type")
            if not isinstance(entry, dict):
                raise ParameterError(f"{where}: {ctx} must be {{ value_ev = ..., source = ... }}")
            value = need(entry, "value_ev", float, ctx)
            need(entry, "source", str, ctx)
            if abs(value) > 5.0:
                raise ParameterError(f"{where}: {ctx} value_ev {value} outside -5 to 5 eV")
            alkyl[tname] = value
    unc: dict[str, float] = {}
    unc_rpa: dict[str, float] = {}
    unc_source = ""

    def class_errors(table: dict, label: str) -> dict[str, float]:
        classes = table.get("mae_ev", {})
        if not isinstance(classes, dict):
            raise ParameterError(f"{where}: [{label}] mae_ev must be a table of class = eV")
        out = {}
        for cls in classes:
            val = need(classes, cls, float, f"[{label}.mae_ev]")
            if val < 0:
                raise ParameterError(f"{where}: [{label}.mae_ev] {cls} must not be negative")
            out[cls] = val
        return out

    if "uncertainty" in data:
        table = need(data, "uncertainty", dict, "the top level")
        unc_source = str(table.get("source", ""))
        unc = class_errors(table, "uncertainty")
        if "rpa" in table:
            unc_rpa = class_errors(need(table, "rpa", dict, "[uncertainty]"), "uncertainty.rpa")

    pset = ParameterSet(
        name=name, version=version, description=description,
        sha256=hashlib.sha256(raw).hexdigest(), path=path, text=text,
        types=MappingProxyType(types), beta=MappingProxyType(beta),
        gamma_formula=formula, bond_length_angstrom=bond_length,
        is_default=bool(data.get("default", False)),
        bond_order_beta=bob, bond_order_beta_enabled=bob_on,
        uncertainty=MappingProxyType(unc), uncertainty_source=unc_source,
        uncertainty_rpa=MappingProxyType(unc_rpa), alkyl_shift=MappingProxyType(alkyl),
    )
    return pset
