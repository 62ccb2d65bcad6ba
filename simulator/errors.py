"""Exceptions that carry a message written for the person at the keyboard.

The command line turns :class:`InputError` into exit status 2 and
:class:`OperatingPointError` into exit status 3, printing only the message.
"""


class NoisechainError(Exception):
    """Base class of every error the package raises on purpose."""


class InputError(NoisechainError, ValueError):
    """Bad input: a file, an option or an argument that cannot be used."""


class ScenarioError(InputError):
    """A scenario file or value that is malformed or unphysical.

    Parameters
    ----------
    message : str
        What is wrong and what was expected.
    source : str, optional
        File name (or ``"<string>"``) the scenario came from.
    key : str, optional
        Key path inside the scenario, for example ``"cavity.linewidth_hz"``.
    """

    def __init__(self, message, *, source=None, key=None):
        self.source = source
        self.key = key
        self.detail = message
        where = ": ".join(part for part in (source, key) if part)
        super().__init__(f"{where}: {message}" if where else message)


class OperatingPointError(NoisechainError):
    """The drive puts the system at an unstable or invalid operating point."""


class ExecutionError(NoisechainError):
    """Work could not be completed (a worker died); what finished is kept."""
