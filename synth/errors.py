"""Exceptions of synth: one base class, subclasses that are also builtins.

Every error a user can cause is a :class:`PatchError` (or another subclass of
:class:`ModalError`); the command line prints it on one line and exits with
status 2.  Errors keep their structured fields and pickle (batch rendering uses
processes).
"""
from __future__ import annotations

__all__ = ["ModalError", "PatchError", "RenderError", "InputFileError", "COMMAND_LINE", "option_error"]

#: The ``file`` of errors about a command-line option (``command line: --output: ...``).
COMMAND_LINE = "command line"


class ModalError(Exception):
    """Base class of every error synth raises on purpose."""


class PatchError(ValueError, ModalError):
    """A patch (or any YAML spec) that cannot be used.

    Parameters
    ----------
    message : str
        What is wrong and what is allowed.
    file : str or None
        The file the value came from.
    line : int or None
        1-based line in `file`, where the YAML parser knows it.
    key : str or None
        Dotted key path, e.g. ``resonator.length``.
    """

    def __init__(self, message, file=None, line=None, key=None):
        super().__init__(message)
        self.message = message
        self.file = file
        self.line = line
        self.key = key

    def __str__(self):
        where = ""
        if self.file is not None:
            where = str(self.file)
            if self.line is not None:
                where += f":{self.line}"
            where += ": "
        key = f"{self.key}: " if self.key else ""
        return f"{where}{key}{self.message}"

    def __reduce__(self):
        return (type(self), (self.message, self.file, self.line, self.key))


class InputFileError(PatchError):
    """An input file (MIDI, map, spec) that is missing, unreadable or corrupt."""


class RenderError(RuntimeError, ModalError):
    """A render that cannot be done as asked (it would clip, or is too large)."""


class RunError(RenderError):
    """A run that started and could not finish (every cluster worker gone): exit status 1, not 2."""

    exit_status = 1


def option_error(message, option):
    """The PatchError about command-line `option` (``command line: --option: message``)."""
    return PatchError(message, file=COMMAND_LINE, key=option)
