"""A content-addressed cache of stage results, so that rebuilds redo only what changed.

A result is stored under the SHA-256 of everything it depends on: the stage's inputs (arrays,
dataclasses, settings, bytes) and the code version (a hash of the package's own source files).
A changed input therefore gives a different key and can never reuse a stale result. Entries are
pickles written atomically into ``PROJECT/.dossier-cache/`` (an interrupted write leaves no
temporary file); a damaged entry is ignored and recomputed. The cache only ever holds our own
results: deleting the folder is always safe.
"""

from __future__ import annotations

import dataclasses
import datetime as dt
import enum
import hashlib
import os
import pickle
import tempfile
from collections.abc import Callable
from functools import lru_cache
from pathlib import Path
from typing import Any

import numpy as np

from ..common.interrupts import acknowledge, check, deferred

CACHE_DIR = ".dossier-cache"
BUDGET_BYTES = 500 * 1024 * 1024  # above this, the least recently used entries are removed


class _Missing:
    def __repr__(self) -> str:
        return "MISSING"


MISSING = _Missing()


@lru_cache(maxsize=1)
def code_version() -> str:
    """SHA-256 over the package's source files and the versions of the software that shapes the
    output (:mod:`dossier.publish.environment`): any code change or upgrade invalidates every entry."""
    from ..publish.environment import software, text_libraries

    h = hashlib.sha256(repr((sorted(software().items()), sorted(text_libraries().items()))).encode())
    package = Path(__file__).resolve().parents[1]  # dossier/, every stage's code
    for p in sorted(package.rglob("*.py")):
        h.update(p.relative_to(package).as_posix().encode())
        h.update(p.read_bytes())
    return h.hexdigest()


def digest(*parts: Any) -> str:
    """A stable SHA-256 of nested values: dataclasses, arrays, dicts, sequences, scalars, bytes.

    A dataclass instance met several times (the same fit in three figure jobs) is hashed once.
    """
    h = hashlib.sha256(code_version().encode())
    memo: dict[int, bytes] = {}
    for part in parts:
        _feed(h, part, memo)
    return h.hexdigest()


def digest_each(items, *common: Any) -> list[str]:
    """One digest per item, each of `common` and the item: what :func:`digest` gives for
    ``digest(*common, item)``, with each object met in several items hashed once."""
    memo: dict[int, bytes] = {}
    out = []
    for item in items:
        h = hashlib.sha256(code_version().encode())
        for part in (*common, item):
            _feed(h, part, memo)
        out.append(h.hexdigest())
    return out


CONTENT_KEY = "_dossier_content_key"


def with_content_key(value: Any, key: str) -> Any:
    """Remember on `value` the key it was computed (or cached) under.

    The key digests everything the value was computed from, so digesting it stands for digesting
    the value itself: later keys that include the value hash 64 characters instead of its arrays.
    """
    if dataclasses.is_dataclass(value) and not isinstance(value, type):
        object.__setattr__(value, CONTENT_KEY, key)
    return value


def _feed(h, x, memo: dict[int, bytes]) -> None:
    if x is None or isinstance(x, (bool, int, float, str)):
        h.update(f"{type(x).__name__}:{x!r};".encode())
    elif isinstance(x, bytes):
        h.update(b"bytes:" + len(x).to_bytes(8, "little") + x)
    elif isinstance(x, np.ndarray):
        h.update(f"nd:{x.dtype}:{x.shape};".encode())
        h.update(np.ascontiguousarray(x).tobytes())
    elif isinstance(x, np.generic):
        _feed(h, x.item(), memo)
    elif dataclasses.is_dataclass(x) and not isinstance(x, type):
        if id(x) not in memo:  # the object stays alive during the digest, so its id is its own
            key = getattr(x, CONTENT_KEY, None)
            if key is not None:
                memo[id(x)] = f"key:{key};".encode()
            else:
                sub = hashlib.sha256(f"dc:{type(x).__qualname__}(".encode())
                for f in dataclasses.fields(x):
                    sub.update(f.name.encode())
                    _feed(sub, getattr(x, f.name), memo)
                memo[id(x)] = sub.digest()
        h.update(memo[id(x)])
    elif isinstance(x, dict):
        h.update(b"{")
        for k in sorted(x, key=repr):
            _feed(h, k, memo)
            _feed(h, x[k], memo)
        h.update(b"}")
    elif isinstance(x, (list, tuple)):
        h.update(b"[")
        for v in x:
            _feed(h, v, memo)
        h.update(b"]")
    elif isinstance(x, (dt.date, dt.datetime)):
        h.update(f"date:{x.isoformat()};".encode())
    elif isinstance(x, Path):
        h.update(f"path:{x.as_posix()};".encode())
    elif isinstance(x, enum.Enum):
        h.update(f"enum:{x!r};".encode())
    elif callable(x) and hasattr(x, "__qualname__"):
        # functions held in data (a metric's computation): their code is in the code version
        h.update(f"fn:{x.__module__}.{x.__qualname__};".encode())
    else:
        raise TypeError(f"cannot digest a {type(x).__name__}")


class Cache:
    """Get-or-compute by key; counts hits and misses (the benchmark and tests read them)."""

    def __init__(self, folder: Path | None):
        self.folder = Path(folder) if folder else None
        self.hits = 0
        self.misses = 0
        self.computed: list[str] = []  # what this build computed, by label ("figure …", "pdf …"), in order
        self._used: set[Path] = set()  # entries read or written by this build: never pruned

    def get(self, key: str) -> Any:
        """Return the stored value, or MISSING (a damaged entry counts as missing, never trusted)."""
        if self.folder is not None:
            path = self.folder / key[:2] / f"{key}.pkl"
            if path.is_file():
                try:
                    value = pickle.loads(path.read_bytes())
                    self.hits += 1
                    self._used.add(path)
                    os.utime(path)  # recently used: kept longest when the cache is pruned
                    return value
                except Exception:
                    pass
        self.misses += 1
        return MISSING

    def get_or_compute(self, key: str, compute: Callable[[], Any], label: str = "") -> Any:
        value = self.get(key)
        if value is MISSING:
            value = compute()
            self.put(key, value, label)
        return value

    def put(self, key: str, value: Any, label: str = "") -> None:
        check()  # a signal whose exception the computation swallowed: never store what it made
        self.computed.append(label or key[:12])
        if self.folder is not None:
            self._store(key, value)

    def _store(self, key: str, value: Any) -> None:
        target = self.folder / key[:2] / f"{key}.pkl"
        tmp = None
        try:
            target.parent.mkdir(parents=True, exist_ok=True)
            with deferred():  # the temporary file never exists without our knowing its name
                fd, tmp = tempfile.mkstemp(dir=target.parent, prefix=".tmp-")
            with os.fdopen(fd, "wb") as fh:
                pickle.dump(value, fh, protocol=pickle.HIGHEST_PROTOCOL)
            os.replace(tmp, target)
            tmp = None
            self._used.add(target)
        except OSError:
            pass  # a cache that cannot be written only costs time
        except BaseException as exc:
            acknowledge(exc)  # an interruption has reached us: let the cleanup below run to its end
            raise
        finally:
            if tmp is not None:  # not stored (a full disk, Ctrl-C, SIGTERM): leave no temporary file
                try:
                    os.unlink(tmp)
                except OSError:
                    pass

    def compiled_templates(self):
        """Jinja2's bytecode cache in ``templates/`` of this cache (None without a cache folder, or
        when it cannot be made: a cache that cannot be written only costs time)."""
        if self.folder is None:
            return None
        import jinja2

        try:
            (self.folder / "templates").mkdir(parents=True, exist_ok=True)
        except OSError:
            return None
        return jinja2.FileSystemBytecodeCache(str(self.folder / "templates"))

    def prune(self, budget_bytes: int = BUDGET_BYTES) -> int:
        """Keep the cache under `budget_bytes`: remove the least recently used entries (never one
        this build used) until it holds at most 80 % of the budget. Returns the entries removed.

        Only our own entry files (``??/<sha256>.pkl``) are ever removed.
        """
        if self.folder is None or not self.folder.is_dir():
            return 0
        entries = []
        for path in self.folder.glob("??/*.pkl"):
            try:
                st = path.stat()
            except OSError:
                continue
            entries.append((st.st_mtime, st.st_size, path))
        total = sum(size for _, size, _ in entries)
        if total <= budget_bytes:
            return 0
        removed = 0
        for _, size, path in sorted(entries, key=lambda e: (e[0], e[2].name)):
            if total <= 0.8 * budget_bytes:
                break
            if path in self._used:
                continue
            try:
                path.unlink()
            except OSError:
                continue
            total -= size
            removed += 1
        return removed
