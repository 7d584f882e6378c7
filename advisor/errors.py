"""The library's exceptions: one root, a few subclasses, each with its own exit code.

The CLI turns any :class:`AdvisorError` into one line on stderr and ``exit_code``; the
library itself never prints and never exits.
"""

from __future__ import annotations


class AdvisorError(Exception):
    """Root of every error the library raises on purpose."""

    exit_code = 1


class UsageError(AdvisorError):
    """The command line asks for something no run can do (a missing input, an unknown choice)."""

    exit_code = 2


class InputNotFound(AdvisorError):
    """A database, log file, table or column the user named does not exist."""

    exit_code = 3


class InputInvalid(AdvisorError):
    """An input exists but cannot be used (wrong format, type or values)."""

    exit_code = 4


class SettingInvalid(AdvisorError):
    """An option value cannot work (page too small for one key, capacity below 1, ...)."""

    exit_code = 5


class InputBusy(AdvisorError):
    """The database is locked by another process."""

    exit_code = 6


class OutputRefused(AdvisorError):
    """An output file exists and was not to be replaced, or could not be written."""

    exit_code = 7


class LayoutInvalid(AdvisorError):
    """A layout breaks a B-tree invariant (a bug, or a hand-edited export)."""

    exit_code = 8
