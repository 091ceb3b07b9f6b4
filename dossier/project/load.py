"""The loader: the one place a project's files are read.

:func:`load_project` reads ``dossier.toml`` once, validates it in one pass (the schema, then the
cross-references), and reads every file it names — rig files, narrative files — and every
template override under ``templates/``, once each. Those same bytes are then hashed, archived
under ``inputs/`` and parsed: no later stage opens a project file again.
"""

from __future__ import annotations

import hashlib
import tomllib
from dataclasses import dataclass, replace
from pathlib import Path

from ..common.errors import ManifestError, Problem
from .checks import check_references
from .manifest import MANIFEST_NAME, Manifest, typed_manifest
from .paths import guarded
from .schema import MANIFEST_SCHEMA

MAX_FILE_BYTES = 200 * 1024 * 1024  # refuse absurd inputs before reading them into memory
MAX_MANIFEST_BYTES = 10 * 1024 * 1024
MAX_TEMPLATE_FILES = 500
TEMPLATES = "templates"  # a project's template and stylesheet overrides


@dataclass(frozen=True)
class Project:
    """A loaded project: its validated manifest and the bytes of every input, as read."""

    manifest: Manifest
    files: dict[str, bytes]  # relative POSIX path -> bytes: the manifest, rig files, narrative, templates/
    sha256: dict[str, str]  # relative POSIX path -> SHA-256 of its bytes: every input hashed once, here

    @property
    def folder(self) -> Path:
        return self.manifest.project_dir

    @property
    def templates(self) -> dict[str, bytes]:
        """The template overrides, keyed by their path inside ``templates/``."""
        prefix = f"{TEMPLATES}/"
        return {k[len(prefix) :]: v for k, v in self.files.items() if k.startswith(prefix)}


def load_project(project_dir: Path) -> Project:
    """Read and validate the project in `project_dir`; raise ManifestError listing every problem."""
    project_dir = Path(project_dir)
    path = project_dir / MANIFEST_NAME
    if not project_dir.is_dir():
        raise ManifestError(str(project_dir), [Problem("project", "is not a folder")])
    if not path.is_file():
        raise ManifestError(
            str(path), [Problem(MANIFEST_NAME, f"not found in {project_dir}; a project folder needs one")]
        )
    try:
        raw_bytes = path.read_bytes()
    except OSError as exc:
        raise ManifestError(str(path), [Problem("file", f"cannot be read: {exc.strerror}")]) from None
    return _project(
        raw_bytes,
        project_dir,
        lambda key, rel, problems: _read_named(project_dir, key, rel, problems),
        lambda: _read_templates(project_dir),
    )


def project_from_files(files: dict[str, bytes], project_dir: Path) -> Project:
    """The project whose files are `files` (relative path -> bytes, as archived under ``inputs/``),
    validated exactly as :func:`load_project` validates one on disk; nothing is read."""
    project_dir = Path(project_dir)
    if MANIFEST_NAME not in files:
        raise ManifestError(str(project_dir / MANIFEST_NAME), [Problem(MANIFEST_NAME, "not among the files")])

    def named(key: str, rel: str, problems: list[Problem]) -> bytes | None:
        if rel not in files:
            problems.append(Problem(key, f"file not found: {rel!r} (not among the archived inputs)"))
        return files.get(rel)

    templates = {k: v for k, v in files.items() if k.startswith(f"{TEMPLATES}/")}
    return _project(files[MANIFEST_NAME], project_dir, named, lambda: templates)


def _project(raw_bytes: bytes, project_dir: Path, read_named, read_templates) -> Project:
    shown = str(project_dir / MANIFEST_NAME)
    if len(raw_bytes) > MAX_MANIFEST_BYTES:
        raise ManifestError(
            shown,
            [Problem("file", f"is {len(raw_bytes) / 1e6:.1f} MB; the limit is {MAX_MANIFEST_BYTES / 1e6:.0f} MB")],
        )
    try:
        raw = tomllib.loads(raw_bytes.decode("utf-8-sig"))
    except RecursionError:
        raise ManifestError(
            shown,
            [Problem("TOML syntax", "nested too deeply (tables or lists inside each other hundreds of levels deep)")],
        ) from None
    except UnicodeDecodeError as exc:
        raise ManifestError(shown, [Problem("file", f"is not UTF-8 text ({exc.reason} at byte {exc.start})")]) from None
    except tomllib.TOMLDecodeError as exc:
        raise ManifestError(shown, [Problem("TOML syntax", str(exc))]) from None
    problems: list[Problem] = []
    data = validated(raw, problems)
    files = {MANIFEST_NAME: raw_bytes}
    if data is not None:
        named = [(f"runs[{i}].file", r["file"]) for i, r in enumerate(data.get("runs") or []) if r and r.get("file")]
        named += [(f"narrative.{part}", rel) for part, rel in (data.get("narrative") or {}).items() if rel]
        for key, rel in named:
            if rel not in files:
                content = read_named(key, rel, problems)
                if content is not None:
                    files[rel] = content
    if problems:
        raise ManifestError(shown, problems)
    files.update(read_templates())
    assert data is not None  # the schema returns None only with a problem, raised above
    digests = {name: hashlib.sha256(content).hexdigest() for name, content in sorted(files.items())}
    manifest = replace(typed_manifest(data, project_dir), sha256=digests[MANIFEST_NAME])
    return Project(manifest, dict(sorted(files.items())), digests)


def validated(raw: dict, problems: list[Problem]) -> dict | None:
    """Validate a parsed TOML document: the schema, then (if it holds) the cross-references."""
    data = MANIFEST_SCHEMA(raw, "", problems)
    if data is not None:
        if not problems:
            check_references(data, problems)
        else:
            # Report the cross-references too where the values they relate have the right types;
            # a check that meets a value the schema rejected stops, the schema's problem stands.
            found: list[Problem] = []
            try:
                check_references(data, found)
            except (TypeError, KeyError, AttributeError, ValueError):
                pass
            problems.extend(found)
    return data


def parse_manifest(raw: dict, project_dir: Path, shown: str = MANIFEST_NAME) -> Manifest:
    """Validate a parsed TOML document and return its typed result (no files are read)."""
    problems: list[Problem] = []
    data = validated(raw, problems)
    if problems:
        raise ManifestError(shown, problems)
    assert data is not None  # the schema returns None only with a problem, raised above
    return typed_manifest(data, project_dir)


def _read_named(project_dir: Path, key: str, rel: str, problems: list[Problem]) -> bytes | None:
    """The bytes of a file the manifest names at `key`, or None with a problem appended."""
    path, wrong = guarded(project_dir, rel)
    if path is None:
        problems.append(Problem(key, str(wrong)))
        return None
    return _read_bounded(path, key, rel, problems)


def _read_bounded(path: Path, key: str, rel: str, problems: list[Problem]) -> bytes | None:
    try:
        size = path.stat().st_size
        if size > MAX_FILE_BYTES:
            problems.append(Problem(key, f"{rel!r} is {size / 1e6:.0f} MB; the limit is {MAX_FILE_BYTES / 1e6:.0f} MB"))
            return None
        return path.read_bytes()
    except OSError as exc:
        problems.append(Problem(key, f"{rel!r} cannot be read: {exc.strerror}"))
        return None


def _read_templates(project_dir: Path) -> dict[str, bytes]:
    """Every file under ``templates/``, each guarded as a named file is (inside the project after
    resolving links, a regular file); raise ManifestError naming each one that is not."""
    folder = project_dir / TEMPLATES
    if not folder.is_dir():
        return {}
    problems: list[Problem] = []
    out = {}
    for p in sorted(folder.rglob("*")):
        rel = p.relative_to(project_dir).as_posix()
        if p.is_dir() and not p.is_symlink():
            continue
        path, wrong = guarded(project_dir, rel)
        if path is None:
            problems.append(Problem(rel, f"(a template override) {wrong}"))
            continue
        content = _read_bounded(path, rel, rel, problems)
        if content is not None:
            out[rel] = content
    if len(out) > MAX_TEMPLATE_FILES:
        problems.append(Problem(TEMPLATES, f"holds {len(out)} files; the limit is {MAX_TEMPLATE_FILES}"))
    if problems:
        raise ManifestError(str(folder), problems)
    return out
