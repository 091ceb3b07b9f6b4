"""A small declarative validation library for TOML documents (the manifest, theme files).

Each node type validates one value at one key path and appends a located :class:`Problem` for
anything wrong, so that a whole document is checked in one pass and every problem is reported
(``runs[1].columns.fy.unit: unknown unit 'klbf'; expected one of N, kN, lbf, kgf``). Unknown keys
are errors, with a spelling suggestion. Nothing here reads a file.
"""

from __future__ import annotations

import dataclasses
import datetime as dt
import difflib
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import PurePosixPath
from typing import Any

from ..common.errors import Problem
from ..standards import units

Checker = Callable[[Any, str, list[Problem]], Any]

# Bounds on every value, far beyond any real project, so that no input can exhaust time or memory.
MAX_TEXT_CHARS = 2_000
MAX_LIST_ITEMS = 1_000


def _type_name(value: Any) -> str:
    return {
        str: "a string",
        int: "an integer",
        float: "a number",
        bool: "true/false",
        list: "a list",
        dict: "a table",
        dt.date: "a date",
    }.get(type(value), type(value).__name__)


@dataclass(frozen=True)
class Text:
    """A non-empty string of at most `max_length` characters, without control characters."""

    max_length: int = MAX_TEXT_CHARS

    def __call__(self, value, path, problems):
        if not isinstance(value, str) or not value.strip():
            problems.append(Problem(path, f"must be a non-empty string; got {shown(value)}"))
            return None
        if len(value) > self.max_length:
            problems.append(Problem(path, f"must be at most {self.max_length} characters; got {len(value)}"))
            return None
        bad = next((ch for ch in value if ord(ch) < 32 and ch not in "\t\n\r"), None)
        if bad is not None:
            problems.append(Problem(path, f"must not contain control characters; got {bad!r} in {value[:40]!r}"))
            return None
        return value.strip()


@dataclass(frozen=True)
class Choice:
    """One of a fixed set of strings."""

    options: tuple[str, ...]

    def __call__(self, value, path, problems):
        if value not in self.options:
            hint = suggest(value, self.options) if isinstance(value, str) else ""
            problems.append(Problem(path, f"must be one of {', '.join(self.options)}; got {shown(value)}{hint}"))
            return None
        return value


@dataclass(frozen=True)
class Number:
    """A finite number, optionally within [minimum, maximum]."""

    minimum: float | None = None
    maximum: float | None = None
    exclusive_minimum: bool = False

    def __call__(self, value, path, problems):
        if (
            isinstance(value, bool)
            or not isinstance(value, (int, float))
            or value != value
            or value in (float("inf"), float("-inf"))
        ):
            problems.append(Problem(path, f"must be a finite number; got {shown(value)}"))
            return None
        if self.minimum is not None and (value < self.minimum or (self.exclusive_minimum and value == self.minimum)):
            op = ">" if self.exclusive_minimum else ">="
            problems.append(Problem(path, f"must be {op} {self.minimum:g}; got {value!r}"))
            return None
        if self.maximum is not None and value > self.maximum:
            problems.append(Problem(path, f"must be <= {self.maximum:g}; got {value!r}"))
            return None
        return float(value)


@dataclass(frozen=True)
class Integer:
    """An integer in [minimum, maximum] (both closed)."""

    minimum: int = 0
    maximum: int = 1_000_000

    def __call__(self, value, path, problems):
        if isinstance(value, bool) or not isinstance(value, int) or not self.minimum <= value <= self.maximum:
            problems.append(
                Problem(path, f"must be an integer from {self.minimum} to {self.maximum}; got {shown(value)}")
            )
            return None
        return value


@dataclass(frozen=True)
class Boolean:
    def __call__(self, value, path, problems):
        if not isinstance(value, bool):
            problems.append(Problem(path, f"must be true or false; got {shown(value)}"))
            return None
        return value


@dataclass(frozen=True)
class DateTime:
    """A TOML local or offset date-time, e.g. 2026-11-03T09:40:00 (a manifest uses one kind
    throughout: see :func:`dossier.project.checks.check_references`)."""

    def __call__(self, value, path, problems):
        if isinstance(value, dt.datetime):
            return value
        problems.append(Problem(path, f"must be a TOML date-time such as 2026-11-03T09:40:00; got {shown(value)}"))
        return None


@dataclass(frozen=True)
class Date:
    def __call__(self, value, path, problems):
        if isinstance(value, dt.datetime):
            return value.date()
        if isinstance(value, dt.date):
            return value
        problems.append(Problem(path, f"must be a TOML date such as 2026-11-20; got {shown(value)}"))
        return None


@dataclass(frozen=True)
class Unit:
    """A unit spelling accepted for `quantity` (see :mod:`dossier.standards.units`)."""

    quantity: str

    def __call__(self, value, path, problems):
        accepted = units.accepted_units(self.quantity)
        if value not in accepted:
            hint = suggest(value, accepted) if isinstance(value, str) else ""
            problems.append(
                Problem(
                    path,
                    f"unknown unit {shown(value)} for {self.quantity}; expected one of {', '.join(accepted)}{hint}",
                )
            )
            return None
        return value


@dataclass(frozen=True)
class RelativePath:
    """A path inside the project folder, written relative to the manifest."""

    def __call__(self, value, path, problems):
        if not isinstance(value, str) or not value.strip():
            problems.append(Problem(path, f"must be a file path relative to the project folder; got {shown(value)}"))
            return None
        posix = PurePosixPath(value.replace("\\", "/"))
        if not posix.parts or posix.name in ("", "."):
            problems.append(Problem(path, f"must name a file inside the project folder; got {value!r}"))
            return None
        if posix.is_absolute() or ":" in posix.parts[0] or ".." in posix.parts:
            problems.append(Problem(path, f"must stay inside the project folder (relative, no '..'); got {value!r}"))
            return None
        return str(posix)


@dataclass(frozen=True)
class ListOf:
    item: Checker
    min_items: int = 0
    max_items: int = MAX_LIST_ITEMS

    def __call__(self, value, path, problems):
        if not isinstance(value, list):
            problems.append(Problem(path, f"must be a list; got {shown(value)}"))
            return None
        if len(value) < self.min_items:
            problems.append(Problem(path, f"must have at least {self.min_items} item(s); got {len(value)}"))
        if len(value) > self.max_items:
            problems.append(Problem(path, f"must have at most {self.max_items} item(s); got {len(value)}"))
            return None
        return [self.item(v, f"{path}[{i}]", problems) for i, v in enumerate(value)]


@dataclass(frozen=True)
class Key:
    checker: Checker
    required: bool = True
    default: Any = None
    help: str = ""


@dataclass(frozen=True)
class Table:
    """A TOML table with known keys; unknown keys are errors with a suggestion."""

    keys: dict[str, Key]

    def __call__(self, value, path, problems):
        if not isinstance(value, dict):
            problems.append(Problem(path, f"must be a table; got {shown(value)}"))
            return None
        out = {}
        for name in value:
            if name not in self.keys:
                problems.append(Problem(join_path(path, name), f"unknown key{suggest(name, list(self.keys))}"))
        for name, key in self.keys.items():
            if name in value:
                out[name] = key.checker(value[name], join_path(path, name), problems)
            elif key.required:
                problems.append(Problem(join_path(path, name), "is required" + (f" ({key.help})" if key.help else "")))
                out[name] = None
            else:
                out[name] = key.default
        return out


@dataclass(frozen=True)
class MapOf:
    """A table whose keys are chosen from `allowed` and whose values share one checker per key."""

    allowed: dict[str, Checker]

    def __call__(self, value, path, problems):
        if not _is_table(value, path, problems):
            return None
        out = {}
        for name, item in value.items():
            if name not in self.allowed:
                problems.append(
                    Problem(
                        join_path(path, name),
                        f"unknown channel{suggest(name, list(self.allowed))}; channels are {', '.join(self.allowed)}",
                    )
                )
                continue
            out[name] = self.allowed[name](item, join_path(path, name), problems)
        return out


@dataclass(frozen=True)
class NamedTables:
    """A table of entries named by the user (a lab's name, …), each checked by `item`."""

    item: Checker
    max_name_chars: int = 120

    def __call__(self, value, path, problems):
        if not _is_table(value, path, problems):
            return None
        out = {}
        for name, item in value.items():
            if not name.strip() or len(name) > self.max_name_chars:
                problems.append(
                    Problem(
                        join_path(path, name), f"a name of 1 to {self.max_name_chars} characters; got {shown(name)}"
                    )
                )
                continue
            out[name] = self.item(item, join_path(path, name), problems)
        return out


def _is_table(value, path: str, problems: list[Problem]) -> bool:
    """Whether `value` is a TOML table; if not, a located problem says what was found."""
    if isinstance(value, dict):
        return True
    problems.append(Problem(path, f"must be a table; got {shown(value)}"))
    return False


def join_path(path: str, name: str) -> str:
    """`path.name`, the name quoted as TOML quotes it when it is not a bare key."""
    bare = name.replace("_", "").replace("-", "").isalnum() and name.isascii()
    shown_name = name if bare else '"' + name.replace("\\", "\\\\").replace('"', '\\"') + '"'
    return f"{path}.{shown_name}" if path else shown_name


def shown(value: Any) -> str:
    if isinstance(value, str):
        return repr(value)
    if isinstance(value, (dict, list)):
        return _type_name(value)
    return f"{_type_name(value)} {value!r}"


def suggest(word: str, options) -> str:
    close = difflib.get_close_matches(str(word), list(options), n=1, cutoff=0.6)
    return f" (did you mean '{close[0]}'?)" if close else ""


def options_of(cls, checkers: dict[str, Checker], help: dict[str, str] | None = None) -> Table:
    """A table of settings whose keys, required-ness and defaults are the fields of dataclass `cls`.

    The dataclass is the one place an option's default is stated; the schema only adds its check.
    """
    fields = {f.name: f for f in dataclasses.fields(cls)}
    if set(checkers) != set(fields):
        raise TypeError(f"{cls.__name__}: checkers for {sorted(checkers)} but fields {sorted(fields)}")
    keys = {}
    for name, f in fields.items():
        has_default = f.default is not dataclasses.MISSING
        keys[name] = Key(
            checkers[name],
            required=not has_default,
            default=f.default if has_default else None,
            help=(help or {}).get(name, ""),
        )
    return Table(keys)


def default_of(cls, name: str):
    """The default of field `name` of dataclass `cls` (the one place it is stated)."""
    f = next(f for f in dataclasses.fields(cls) if f.name == name)
    if f.default is dataclasses.MISSING:
        raise TypeError(f"{cls.__name__}.{name} has no default")
    return f.default
