"""Exception hierarchy. Every failure the user can cause or meet is one of these.

The command line turns each into a single line ``error: <molecule>: <reason>``; ``--traceback`` shows the
full trace. Anything else escaping to the user is a bug.
"""
from __future__ import annotations


def one_line(text: object) -> str:
    """A message on one line: a library's multi-line text (RDKit's invariant violations span five) with
    its line breaks and runs of white space turned into single spaces."""
    return " ".join(str(text).split())


class PPPError(Exception):
    """Base class. ``molecule`` names the input (label or SMILES) when known; ``kind`` is a stable
    machine-readable reason tag used by batch records."""

    kind = "error"

    def __init__(self, reason: str, molecule: str | None = None):
        super().__init__(reason)
        self.reason = reason
        self.molecule = molecule

    def with_molecule(self, molecule: str) -> "PPPError":
        if self.molecule is None:
            self.molecule = molecule
        return self

    def __str__(self) -> str:
        if self.molecule:
            return f"{self.molecule}: {self.reason}"
        return self.reason


class InputError(PPPError):
    """The molecule or file cannot be used as given."""

    kind = "input"


class ParseError(InputError):
    """Unparsable SMILES, corrupt or truncated MOL/SDF."""

    kind = "parse"


class UnsupportedError(InputError):
    """Parsed, but outside the model: radical, open shell, no pi-system, element without parameters."""

    kind = "unsupported"


class RadicalError(UnsupportedError):
    """An atom carries an unpaired electron."""

    kind = "radical"


class OpenShellError(UnsupportedError):
    """A chromophore with an odd number of pi electrons."""

    kind = "open_shell"


class NoPiSystemError(UnsupportedError):
    """No conjugated multiple bond: nothing for the pi model to describe."""

    kind = "no_pi_system"


class UnsupportedElementError(UnsupportedError):
    """An element or bonding situation of a pi-centre that the model does not cover."""

    kind = "unsupported_element"


class TooLargeError(InputError):
    """More pi-centres than the chosen solver handles."""

    kind = "too_large"


class ParameterError(PPPError):
    """Unknown, missing or malformed parameter set, or a centre/bond type it does not cover."""

    kind = "parameters"


class ConvergenceError(PPPError):
    """The SCF did not converge; no excited-state numbers are produced from an unconverged density."""

    kind = "convergence"


class StorageError(PPPError):
    """Output cannot be written (exists without overwrite permission) or a results file is unreadable."""

    kind = "storage"
