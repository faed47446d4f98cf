"""ppp: UV-visible absorption of conjugated molecules from the Pariser-Parr-Pople model with CIS.

Quick use::

    import ppp
    res = ppp.compute("CN(C)c1ccc(cc1)/N=N/c1ccccc1", name="4-(dimethylamino)azobenzene")
    print(res)                       # table of states
    res.first_bright.wavelength_nm   # longest-wavelength allowed band, nm
"""
__version__ = "0.1.0"

import importlib

#: Public names and the submodule each comes from, imported on first use (PEP 562): ``import ppp`` stays
#: light, so that the command line starts (and a Ctrl-C during its start is handled) before numpy,
#: scipy and RDKit are loaded. ``from ppp import compute`` and ``ppp.compute`` work as usual.
_PUBLIC = {
    "compute": ("driver", "compute"), "solve_model": ("driver", "solve_model"), "Options": ("driver", "Options"),
    "MoleculeResult": ("driver", "MoleculeResult"), "ChromophoreResult": ("driver", "ChromophoreResult"),
    "State": ("driver", "State"),
    "available_parameters": ("model.params", "available"), "load_parameters": ("model.params", "load"),
    **{name: ("errors", name) for name in (
        "PPPError", "InputError", "ParseError", "UnsupportedError", "UnsupportedElementError", "RadicalError",
        "OpenShellError", "NoPiSystemError", "TooLargeError", "ParameterError", "ConvergenceError",
        "StorageError")},
}

__all__ = [
    "compute", "solve_model", "Options", "MoleculeResult", "ChromophoreResult", "State",
    "available_parameters", "load_parameters", "PPPError", "InputError", "ParseError",
    "UnsupportedError", "TooLargeError", "ParameterError", "ConvergenceError", "StorageError",
]


def __getattr__(name: str):
    if name in _PUBLIC:
        module, attr = _PUBLIC[name]
        value = getattr(importlib.import_module(f"{__name__}.{module}"), attr)
        globals()[name] = value
        return value
    try:  # a subpackage or module, e.g. ppp.driver after a bare ``import ppp``
        return importlib.import_module(f"{__name__}.{name}")
    except ModuleNotFoundError as exc:
        if exc.name != f"{__name__}.{name}":
            raise
        raise AttributeError(f"module {__name__!r} has no attribute {name!r}") from None


def __dir__():
    return sorted(set(globals()) | set(_PUBLIC))
