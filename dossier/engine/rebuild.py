"""Rebuild a dossier from the inputs it archived, with the theme it recorded, and compare.

Works on an output folder (:func:`rebuild_and_compare`) and on the report PDF alone
(:func:`rebuild_report_pdf`, from the inputs it carries). The rebuild is assembled in memory
(:func:`dossier.engine.build.assemble`): nothing is written, no cache is used.
"""

from __future__ import annotations

import json
import os
from dataclasses import dataclass
from pathlib import Path

from ..common.errors import UserError, VerifyError
from ..document.theme import load_theme
from ..project.load import project_from_files
from ..project.manifest import MANIFEST_NAME
from ..publish import integrity
from ..publish.archive import ids, read_folder, read_pdf
from ..publish.environment import differences, environment_record
from ..publish.layout import ATTACHED_MANIFEST, ENVIRONMENT_NAME, INPUTS, REPORT_NAME
from ..publish.pdf_compare import pdf_difference
from .build import assemble
from .workers import WorkerPool


@dataclass(frozen=True)
class Rebuild:
    """What a rebuild from the archived inputs reproduced."""

    differing: tuple[str, ...]  # files whose bytes differ, each with what differs in it
    environment: tuple[str, ...]  # versions (or the theme) that differ from the recorded ones

    @property
    def reproduced(self) -> bool:
        return not self.differing

    def lines(self) -> list[str]:
        out = [f"environment differs: {e}" for e in self.environment]
        out += [f"not reproduced: {d}" for d in self.differing]
        out.append(
            "rebuild: "
            + ("every file reproduced byte for byte" if self.reproduced else f"{len(self.differing)} file(s) differ")
        )
        return out


def _recorded_environment(files: dict[str, bytes]) -> dict:
    try:
        return json.loads(files[ENVIRONMENT_NAME])
    except (KeyError, ValueError):
        return {}


def _rebuild(inputs: dict[str, bytes], theme: str) -> dict[str, bytes]:
    """Assemble, in memory, the dossier of the project held in `inputs` (relative path -> bytes)."""
    if MANIFEST_NAME not in inputs:
        raise VerifyError(f"no archived manifest ({INPUTS}/{MANIFEST_NAME}); cannot rebuild")
    try:
        project = project_from_files(inputs, Path(INPUTS))
    except UserError as exc:
        raise VerifyError(f"the archived inputs do not make a project: {exc}") from None
    with WorkerPool(os.cpu_count() or 1) as pool:
        return assemble(project, load_theme(theme), pool=pool).files  # never a cache: nothing written


def _rebuild_recorded(files: dict[str, bytes]) -> tuple[dict[str, bytes], list[str]]:
    """Rebuild from the `inputs/` among `files` with their recorded theme; the rebuilt files and
    the versions that differ from the recorded ones."""
    inputs = {k[len(INPUTS) + 1 :]: v for k, v in files.items() if k.startswith(INPUTS + "/")}
    recorded = _recorded_environment(files)
    theme = recorded.get("theme", "default")
    env = differences(recorded, environment_record(theme)) if recorded else ["no environment record"]
    return _rebuild(inputs, theme), env


def _compare(old: dict[str, bytes], new: dict[str, bytes], names) -> list[str]:
    out = []
    for name in sorted(names):
        a, b = old.get(name), new.get(name)
        if a == b:
            continue
        if a is None or b is None:
            out.append(f"{name} ({'absent from the original' if a is None else 'not made by the rebuild'})")
        elif name.endswith(".pdf"):
            out.append(f"{name} ({pdf_difference(a, b)})")
        else:
            out.append(f"{name} (content differs)")
    return out


def rebuild_and_compare(folder: Path) -> Rebuild:
    """Rebuild a dossier folder from its archived inputs, with its recorded theme, and compare
    every file it holds (signatures aside) with the rebuilt ones."""
    folder = Path(folder)
    files = read_folder(folder)
    ids(files, folder)
    new, env = _rebuild_recorded(files)
    names = {n for n in set(files) | set(new) if integrity.is_listed(n) or n == integrity.MANIFEST}
    return Rebuild(tuple(_compare(files, new, names)), tuple(env))


def rebuild_report_pdf(path: Path) -> Rebuild:
    """Rebuild from the inputs the report PDF carries and compare with what it carries (and the
    rebuilt report with the PDF itself)."""
    data, attached = read_pdf(path)
    new, env = _rebuild_recorded(attached)
    old = {**{n: d for n, d in attached.items() if n != ATTACHED_MANIFEST}, REPORT_NAME: data}
    return Rebuild(tuple(_compare(old, new, set(old))), tuple(env))
