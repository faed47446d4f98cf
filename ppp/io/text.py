"""Readable text report of a result, one block per molecule."""
from __future__ import annotations

import math


def _fmt_nm(nm: float) -> str:
    return f"{nm:7.1f}" if math.isfinite(nm) else "      -"


def format_result(res) -> str:
    """Multi-line report: header, ground state per chromophore, then the state table."""
    lines = []
    n_c = sum(c.model.n_centres for c in res.chromophores)
    n_e = sum(c.model.n_electrons for c in res.chromophores)
    lines.append(f"\u25b8 {res.name}")
    if res.name != res.smiles:
        lines.append(f"  input      {res.smiles}")
    lines.append(f"  pi-system  {n_c} centres, {n_e} electrons, {len(res.chromophores)} chromophore"
                 f"{'s' if len(res.chromophores) != 1 else ''}; parameters {res.parameters} "
                 f"[{res.parameters_sha256[:12]}], gamma {res.chromophores[0].model.gamma_formula}, "
                 f"singlets {'RPA' if res.options.response == 'rpa' else 'CIS'}, triplets CIS"
                 + (f", solvent {res.options.solvent} (reaction field)" if res.options.solvent else ""))
    for c in res.chromophores:
        tag = f"  [{c.index + 1}]" if len(res.chromophores) > 1 else "  "
        lines.append(
            f"{tag}ground     E(pi) {c.e_total:.4f} eV, SCF {c.scf.iterations} it ({c.scf.strategy}); "
            f"HOMO {c.homo_ev:.3f} eV, LUMO {c.lumo_ev:.3f} eV; dipole {c.ground.dipole_magnitude:.2f} D")
    multi = len(res.chromophores) > 1
    head = "  state " + ("chr " if multi else "") + "  E/eV    \u03bb/nm       f      polarization  character"
    lines.append(head)
    for st in res.states:
        pol = st.polarization if st.polarization_deg is None else f"{st.polarization} {st.polarization_deg:5.1f}\u00b0"
        f = f"{st.oscillator_strength:7.4f}" if st.multiplicity == 1 else "      -"
        chrom = f"{st.chromophore + 1:>3} " if multi else ""
        lines.append(f"  {st.label:<5} {chrom}{st.energy_ev:7.3f} {_fmt_nm(st.wavelength_nm)}  {f}   "
                     f"{pol:<13} {st.character}")
    for w in res.warnings:
        lines.append(f"  warning: {w}")
    b = res.first_bright
    if b is not None:
        from ..calibration.uncertainty import for_result
        unc = for_result(res, b)  # expected error of the molecule's class, if the parameter set has one
        lines.append(f"  first allowed band: {b.label} at {b.wavelength_nm:.1f} nm"
                     f"{' ' + str(unc) if unc is not None else ''} (f = {b.oscillator_strength:.3f})")
    return "\n".join(lines)
