"""Every exception a user can cause, and the exit code the command line maps each to.

The one place they are defined. Everything derived from :class:`UserError` is printed without a
traceback; anything else is reported as an internal error (exit 70).
"""

from __future__ import annotations

from dataclasses import dataclass

EXIT_OK = 0
EXIT_ABORTED = 1  # a prompt was aborted (end of input); nothing was changed
EXIT_USAGE = 2  # click's own code for a bad command line
EXIT_INPUT = 3  # manifest or rig data rejected
EXIT_BUILD = 4  # a stage could not produce a trustworthy result (e.g. a fit failed)
EXIT_VERIFY = 5  # verification failed: a file added, removed or altered, a bad signature, a rebuild that differs
EXIT_STATE = 6  # the dossier is not in a state that allows this (sealing a draft, countersigning an unsealed one)
EXIT_UNCHECKED = 7  # intact, but a signature's key was not checked against a key the user trusts
EXIT_INTERNAL = 70  # a bug: please report it
EXIT_SIGINT = 130  # stopped by Ctrl-C (SIGINT): 128 + 2, the shells' convention
EXIT_SIGTERM = 143  # stopped by SIGTERM: 128 + 15


class UserError(Exception):
    """A problem with what the user supplied; printed as-is, no traceback."""

    exit_code = EXIT_INPUT


@dataclass(frozen=True)
class Problem:
    """One located complaint: where, and what is wrong there."""

    location: str
    message: str

    def __str__(self) -> str:
        return f"{self.location}: {self.message}"


class ManifestError(UserError):
    """The manifest failed validation; carries every problem found, not just the first."""

    def __init__(self, manifest_path: str, problems: list[Problem]):
        self.manifest_path = manifest_path
        self.problems = list(problems)
        lines = [f"{manifest_path}: {len(self.problems)} problem(s) in the manifest"]
        lines += [f"  {p}" for p in self.problems]
        super().__init__("\n".join(lines))


class RigDataError(UserError):
    """A rig data file could not be read; names the file and, where known, line and column."""

    def __init__(self, file: str, message: str, line: int | None = None, column: str | None = None):
        where = file
        if line is not None:
            where += f", line {line}"
        if column is not None:
            where += f", column '{column}'"
        self.file, self.line, self.column = file, line, column
        super().__init__(f"{where}: {message}")


class SidewallError(UserError, ValueError):
    """A sidewall designation or code that cannot be read; the message says what was expected."""


class NarrativeError(UserError):
    """A narrative file refers to something the build does not have, or cannot be rendered."""


class StageError(UserError):
    """A pipeline stage could not produce a result it would stand behind."""

    exit_code = EXIT_BUILD


class OutputError(UserError):
    """The output folder cannot be written without risking the user's own files."""

    exit_code = EXIT_BUILD


class VerifyError(UserError):
    """Verification failed."""

    exit_code = EXIT_VERIFY


class StateError(UserError):
    """The dossier's state does not allow what was asked (e.g. sealing a draft)."""

    exit_code = EXIT_STATE


class UncheckedError(UserError):
    """The files are intact, but nobody checked who signed them."""

    exit_code = EXIT_UNCHECKED
