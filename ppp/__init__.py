"""ppp: UV-visible absorption of conjugated molecules from the Pariser-Parr-Pople model with CIS.

Quick use::

    import ppp
    res = ppp.compute("CN(C)c1ccc(cc1)/N=N/c1ccccc1", name="4-(dimethylamino)azobenzene")
    print(res)                       # table of states
    res.first_bright.wavelength_nm   # longest-wavelength allowed band, nm
"""
__version__ = "0.1.0"

from .driver import ChromophoreResult, MoleculeResult, Options, State, compute, solve_model  # noqa: E402
from .errors import (ConvergenceError, InputError, NoPiSystemError, OpenShellError, ParameterError,  # noqa: E402
                     ParseError, PPPError, RadicalError, UnsupportedElementError,
                     StorageError, TooLargeError, UnsupportedError)
from .model.params import available as available_parameters  # noqa: E402
from .model.params import load as load_parameters  # noqa: E402

__all__ = [
    "compute", "solve_model", "Options", "MoleculeResult", "ChromophoreResult", "State",
    "available_parameters", "load_parameters", "PPPError", "InputError", "ParseError",
    "UnsupportedError", "TooLargeError", "ParameterError", "ConvergenceError", "StorageError",
]
