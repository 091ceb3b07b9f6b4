"""Every path a project names, guarded the same way before it is read.

One function for rig files, narrative files, template overrides and anything else the manifest
names: the path is relative and stays inside the project after every symbolic link is resolved,
holds no NUL byte, fits the file system's limits, names a regular file, and no link loops.
"""

from __future__ import annotations

import errno
import os
from pathlib import Path

MAX_NAME_BYTES = 255  # one path component (the common file-system limit)
MAX_PATH_BYTES = 4096  # a whole path (PATH_MAX on Linux)


def guarded(project_dir: Path, rel: str) -> tuple[Path | None, str | None]:
    """The file `rel` names inside `project_dir`, or None and what is wrong with it."""
    if "\x00" in rel:
        return None, f"contains a NUL byte: {rel!r}"
    parts = rel.split("/")
    too_long = next((p for p in parts if len(p.encode("utf-8", "surrogateescape")) > MAX_NAME_BYTES), None)
    if too_long is not None:
        return None, f"has a name longer than {MAX_NAME_BYTES} bytes ({too_long[:40]!r}…)"
    target = project_dir / rel
    if len(os.fsencode(target)) > MAX_PATH_BYTES:
        return None, f"is longer than {MAX_PATH_BYTES} bytes"
    try:
        resolved = target.resolve(strict=True)
    except FileNotFoundError:
        return None, f"file not found: {rel!r} (paths are relative to the manifest's folder)"
    except RuntimeError:  # Python before 3.13 reports a symbolic-link loop so
        return None, f"is a symbolic link that loops: {rel!r}"
    except OSError as exc:
        reason = "a symbolic link that loops" if exc.errno == errno.ELOOP else (exc.strerror or str(exc))
        return None, f"cannot be followed ({reason}): {rel!r}"
    if not resolved.is_relative_to(project_dir.resolve()):
        return None, f"resolves outside the project folder (symbolic link?): {rel!r}"
    if not resolved.is_file():
        return None, f"is not a regular file: {rel!r}" + (" (a folder)" if resolved.is_dir() else "")
    return resolved, None
