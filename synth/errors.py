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
    """Base class of every error synth raises on purpose.

    Catch it to handle any problem a user can cause (a bad patch, a render
    that would clip, a file that cannot be written) in one place; its
    subclasses are also builtins (:class:`PatchError` is a ValueError,
    :class:`RenderError` a RuntimeError).

    Examples
    --------
    >>> import synth
    >>> try:
    ...     synth.patch_from_text("name: empty")
    ... except synth.ModalError as error:
    ...     print(type(error).__name__, error.line, error.key)
    PatchError 1 resonator
    """


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

    Attributes
    ----------
    message, file, line, key
        As given; ``str(error)`` joins them into one line,
        ``file:line: key: message``.

    Examples
    --------
    >>> import pickle
    >>> import synth
    >>> error = synth.PatchError("must be > 0, got -1", file="harp.yaml", line=4, key="resonator.length")
    >>> print(error)
    harp.yaml:4: resonator.length: must be > 0, got -1
    >>> isinstance(error, ValueError), pickle.loads(pickle.dumps(error)).line
    (True, 4)
    >>> patch = synth.patch_from_text('''
    ... name: cello-ish
    ... resonator: {type: string, material: steel, length: 690 mm, diameter: 1.2 mm, pitch: C2}
    ... render: {sample_rate: 8000}
    ... ''')
    >>> try:  # C9 (8372 Hz) is above Nyquist at 8 kHz
    ...     synth.partial_table(synth.retune(patch, "C9"))
    ... except synth.PatchError as error:
    ...     print(error.key)
    render.sample_rate
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
    """An input file (patch, MIDI, map, spec) that is missing, unreadable or corrupt.

    A :class:`PatchError` naming the file.

    Examples
    --------
    >>> import synth
    >>> try:
    ...     synth.load_patch("no-such-patch.yaml")
    ... except synth.InputFileError as error:
    ...     print(error)
    no-such-patch.yaml: file not found
    """


class RenderError(RuntimeError, ModalError):
    """A render that cannot be done as asked (it would clip, or is too large), or a file that cannot be written.

    Examples
    --------
    >>> import synth
    >>> patch = synth.patch_from_text('''
    ... name: loud-at-absolute-scale
    ... resonator: {type: string, material: nylon, length: 300 mm, diameter: 0.8 mm, pitch: G4}
    ... excitation: {type: pluck, strength: 100}
    ... render: {duration: 0.05 s, sample_rate: 8000, max_modes: 12, peak_db: null}
    ... ''')
    >>> try:
    ...     synth.render(patch)
    ... except synth.RenderError as error:
    ...     print(type(error).__name__, "would clip" in str(error))
    RenderError True
    """


class RunError(RenderError):
    """A run that started and could not finish (every cluster worker gone): exit status 1, not 2."""

    exit_status = 1


def option_error(message, option):
    """The PatchError about command-line `option` (``command line: --option: message``)."""
    return PatchError(message, file=COMMAND_LINE, key=option)
