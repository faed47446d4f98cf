"""Deterministic generator of dye-like push-pull molecules, for benchmarks and tests.

Each molecule is donor - pi-bridge units - acceptor, assembled as a SMILES string from fragments
whose first atom is the entry and whose last atom is the exit, until the pi-centre count reaches a
target drawn uniformly from [min_centres, max_centres]. A fraction are cationic polymethine
(cyanine-like) chains. The random generator is passed in, so a seed fixes the library.
"""
from __future__ import annotations

import numpy as np

# (SMILES fragment, pi centres it adds); the fragment is bonded to the previous one by its first atom
# and to the next one by its last atom
_BRIDGES = (
    ("c1ccc(cc1)", 6),        # 1,4-phenylene
    ("c1ccc(s1)", 5),         # 2,5-thienylene
    ("c1ccc(o1)", 5),         # 2,5-furylene
    ("/C=C/", 2),             # E-vinylene
    ("/N=N/", 2),             # E-azo
    ("C#C", 2),               # ethynylene
    ("c1ccc2cc(ccc2c1)", 10),  # 2,6-naphthylene
    ("c1cnc(cn1)", 6),        # 2,5-pyrazinylene
)
_DONORS = (("CN(C)", 1), ("CCN(CC)", 1), ("CO", 1), ("N", 1), ("O", 1), ("CS", 1),
           ("c1ccc(cc1)N(c1ccccc1)", 13))
_ACCEPTORS = (("[N+](=O)[O-]", 3), ("C#N", 2), ("C(C)=O", 2), ("C=O", 2), ("C(=O)OC", 3),
              ("/C=C(/C#N)C#N", 6), ("", 0))


def dye_smiles(rng: np.random.Generator, min_centres: int = 10, max_centres: int = 60) -> str:
    """One dye-like SMILES with about ``min_centres``..``max_centres`` pi-centres."""
    target = int(rng.integers(min_centres, max_centres + 1))
    if rng.random() < 0.15:  # cyanine: R2N-(CH=CH)k-CH=N+R2, 2k+3 centres
        k = max(1, (target - 3) // 2)
        return "CN(C)" + "/C=C" * k + "/C=[N+](C)C"
    donor, n = _DONORS[int(rng.integers(len(_DONORS)))]
    acceptor, na = _ACCEPTORS[int(rng.integers(len(_ACCEPTORS)))]
    parts, centres = [donor], n + na
    last = ""
    while centres < target or len(parts) < 2:
        frag, nf = _BRIDGES[int(rng.integers(len(_BRIDGES)))]
        if frag == last and frag in ("/N=N/", "C#C", "/C=C/"):
            continue  # no N=N-N=N or cumulated triple bonds
        if centres + nf > max_centres and len(parts) >= 2:
            break
        parts.append(frag)
        centres += nf
        last = frag
    if parts[-1] in ("/N=N/", "C#C", "/C=C/") and acceptor == "":
        acceptor = "C#N"
    text = ""
    for part in parts + [acceptor]:
        if text.endswith("/") and part.startswith("/"):
            part = part[1:]  # two direction marks in a row are not valid SMILES
        text += part
    return text


def dye_library(n: int, seed: int = 20240601, min_centres: int = 10, max_centres: int = 60) -> list[str]:
    """``n`` dye-like SMILES from a generator seeded with ``seed``."""
    rng = np.random.default_rng(seed)
    return [dye_smiles(rng, min_centres, max_centres) for _ in range(n)]


def write_smiles_file(path, smiles: list[str], prefix: str = "gen") -> None:
    with open(path, "w") as fh:
        for k, s in enumerate(smiles, start=1):
            fh.write(f"{s} {prefix}-{k:06d}\n")
