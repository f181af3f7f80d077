"""One signal policy for every command: SIGTERM is a Ctrl-C that exits 143.

``timeout``, CI cancellation and container stops send SIGTERM; a terminal sends
SIGINT.  Both stop a command the same way: a single-file command unwinds (its
temporary file is removed, nothing half-written is left) and a library run
stops taking new work, lets running jobs finish, writes a manifest that
matches the disk and shuts its workers down, so no child process outlives it.
The exit status tells them apart: 130 for SIGINT, 143 for SIGTERM (128 + the
signal number, as shells report them).
"""
from __future__ import annotations

import signal
import threading

__all__ = ["Terminated", "install", "exit_status", "StopFlag", "INTERRUPT_STATUS", "TERMINATE_STATUS"]

INTERRUPT_STATUS = 128 + signal.SIGINT  # 130
TERMINATE_STATUS = 128 + signal.SIGTERM  # 143


class Terminated(KeyboardInterrupt):
    """SIGTERM, raised in the main thread where Ctrl-C raises KeyboardInterrupt."""


def _raise_terminated(signum, frame):
    raise Terminated


def install():
    """Make SIGTERM raise :class:`Terminated` in the main thread (no-op elsewhere)."""
    if threading.current_thread() is threading.main_thread():
        signal.signal(signal.SIGTERM, _raise_terminated)


def exit_status(interrupt):
    """130 for a Ctrl-C (KeyboardInterrupt), 143 for :class:`Terminated`."""
    return TERMINATE_STATUS if isinstance(interrupt, Terminated) else INTERRUPT_STATUS


class StopFlag:
    """Context manager: the first SIGINT or SIGTERM sets :attr:`requested`; a second one raises.

    Attributes
    ----------
    requested : bool
    signum : int or None
        The first signal received.
    """

    def __init__(self):
        self.requested = False
        self.signum = None
        self._previous = {}

    def _handle(self, signum, frame):
        if self.requested:
            raise Terminated if signum == signal.SIGTERM else KeyboardInterrupt
        self.requested = True
        self.signum = signum

    @property
    def status(self):
        """Exit status for the signal received (None if none was)."""
        if self.signum is None:
            return None
        return TERMINATE_STATUS if self.signum == signal.SIGTERM else INTERRUPT_STATUS

    def __enter__(self):
        if threading.current_thread() is threading.main_thread():
            for signum in (signal.SIGINT, signal.SIGTERM):
                previous = signal.getsignal(signum)
                if previous is not signal.SIG_IGN:
                    self._previous[signum] = previous
                    signal.signal(signum, self._handle)
        return self

    def __exit__(self, *exc):
        for signum, previous in self._previous.items():
            signal.signal(signum, previous)
        return False
