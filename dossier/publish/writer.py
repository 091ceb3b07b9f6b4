"""The writer: the only stage that writes. Atomic, and never deletes what the user made.

The whole dossier is written into a fresh temporary folder beside the target, then swapped in.
An existing target is replaced only if it carries our marker file (so it is a previous build);
anything else there is refused, not deleted. An interrupted build (Ctrl-C, SIGTERM: see
:mod:`dossier.common.interrupts`) removes its temporary folder and leaves the previous output as it
was; a signal that comes while the finished folder is being swapped in waits until the swap is
complete. Our folders are removed marker last, so that one whose removal was cut short (a killed
process) is still recognisably ours and is removed by the next build.
"""

from __future__ import annotations

import json
import os
import shutil
import tempfile
from pathlib import Path

from ..common.errors import OutputError
from ..common.interrupts import acknowledge, check, deferred, note_replaced
from .layout import MARKER, SUPPLIER_SEAL


def refuse_sealed(out_dir: Path) -> None:
    """Refuse early to build into a folder that holds a sealed, released revision."""
    if (Path(out_dir) / SUPPLIER_SEAL).is_file():
        raise OutputError(
            f"{out_dir}: holds a sealed, released revision, which is frozen; build a new revision "
            "into another folder. Nothing was changed."
        )


def refuse_foreign(out_dir: Path) -> None:
    """Refuse, before any work, a target that is not ours to replace: a file, a folder of the
    user's (not empty, no marker), or a sealed release."""
    out_dir = Path(out_dir)
    if out_dir.exists():
        if not out_dir.is_dir():
            raise OutputError(f"{out_dir}: exists and is not a folder; choose another --out")
        if any(out_dir.iterdir()) and not (out_dir / MARKER).is_file():
            raise OutputError(
                f"{out_dir}: folder exists, is not empty and was not made by dossier "
                f"(no {MARKER} file); choose another --out. Nothing was changed."
            )
        refuse_sealed(out_dir)


def write_dossier(out_dir: Path, files: dict[str, bytes], extra: dict[str, bytes] | None = None) -> None:
    """Write `files` (relative path -> bytes) as the folder `out_dir`, atomically.

    `extra` are hidden bookkeeping files beside the marker (not part of the dossier's payload).
    """
    out_dir = Path(out_dir)
    refuse_foreign(out_dir)
    parent = out_dir.parent
    try:
        parent.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise OutputError(f"{out_dir}: the folder {parent} cannot be made ({exc.strerror})") from None
    _remove_stale_builds(parent, out_dir.name)
    tmp: Path | None = None
    try:
        with deferred():  # the folder never exists without its marker, nor without our knowing its name
            tmp = Path(tempfile.mkdtemp(prefix=f".{out_dir.name}.building-", dir=parent))
            (tmp / MARKER).write_text("Made by dossier (a build in progress).\n", encoding="utf-8")
        for rel, data in sorted(files.items()):
            target = tmp / rel
            target.parent.mkdir(parents=True, exist_ok=True)
            target.write_bytes(data)
        (tmp / MARKER).write_text("Made by dossier. This folder is replaced by the next build.\n", encoding="utf-8")
        for rel, data in (extra or {}).items():
            (tmp / rel).write_bytes(data)
        check()  # a signal whose exception something swallowed: nothing made after it is swapped in
        with deferred():  # once begun, the swap runs to its end; a signal meanwhile acts afterwards
            _swap(tmp, out_dir)
            note_replaced(out_dir)
    except BaseException as exc:
        acknowledge(exc)  # an interruption has reached us: let this cleanup run to its end
        if tmp is not None:
            _remove_ours(tmp)  # gone already if it was swapped in
        if isinstance(exc, OSError):  # a full disk, a folder we may not write in: the user's to fix
            raise OutputError(
                f"{out_dir}: cannot be written ({exc.strerror or exc}: {exc.filename}); "
                "the previous output, if any, is unchanged"
            ) from None
        raise


def _remove_stale_builds(parent: Path, name: str) -> None:
    """Remove half-written build folders that a killed build left behind (ours: they carry the marker)."""
    for stale in parent.glob(f".{name}.building-*"):
        if stale.is_dir() and (stale / MARKER).is_file():
            _remove_ours(stale)


def _remove_ours(folder: Path) -> None:
    """Remove a folder of ours, its marker last: cut short, it is still recognisably ours."""
    if not folder.is_dir() or folder.is_symlink():
        return
    for child in folder.iterdir():
        if child.name == MARKER:
            continue
        if child.is_dir() and not child.is_symlink():
            shutil.rmtree(child, ignore_errors=True)
        else:
            try:
                child.unlink()
            except OSError:
                pass
    if any(child.name != MARKER for child in folder.iterdir()):
        return  # something could not be removed: keep the marker, the next build tries again
    try:
        (folder / MARKER).unlink(missing_ok=True)
        folder.rmdir()
    except OSError:
        pass


def _swap(new: Path, target: Path) -> None:
    if not target.exists():
        os.replace(new, target)
        return
    old = target.with_name(f".{target.name}.previous")
    if old.exists():
        _remove_ours(old)  # left by an interrupted swap; it is ours (it was renamed from a marked build)
    os.replace(target, old)
    try:
        os.replace(new, target)
    except BaseException:
        os.replace(old, target)  # put the previous output back where it was
        raise
    _remove_ours(old)


def json_bytes(data) -> bytes:
    """Serialise `data` the same way every time (sorted keys would reorder records; keep order)."""
    return (json.dumps(data, indent=2, ensure_ascii=False) + "\n").encode("utf-8")
