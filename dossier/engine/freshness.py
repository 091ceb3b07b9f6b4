"""Is an output folder already the build of these inputs? A light check, run before anything heavy.

The build key is the SHA-256 (with the code version, see :mod:`.cache`) of the project's own
files, the theme chain's files and the theme name. A build writes it beside the marker; an
output whose key matches and whose files still match their integrity manifest is up to date.
"""

from __future__ import annotations

from pathlib import Path

from ..common.errors import UserError
from ..document.theme import load_theme
from ..project.load import Project, load_project
from ..publish.archive import verify
from ..publish.layout import BUILD_KEY
from ..publish.writer import refuse_sealed
from .cache import digest


def build_key(project_sha256: dict[str, str], theme_files: dict[str, bytes], theme_name: str) -> str:
    """`project_sha256`: the loaded project's files by their SHA-256 (``Project.sha256``, so that no
    input is hashed again); `theme_files`: the theme chain's (``Theme.files``)."""
    return digest(project_sha256, theme_files, theme_name)


def output_is_current(out_dir: Path, key: str) -> bool:
    try:
        if (Path(out_dir) / BUILD_KEY).read_text(encoding="utf-8").strip() != key:
            return False
        return verify(out_dir).files_ok
    except (OSError, UserError):
        return False


def up_to_date(project: Path | Project, out_dir: Path | None, theme_name: str) -> Path | None:
    """Return the output folder if it is already the build of the project (a folder, or loaded) as
    it is now, else None."""
    if not isinstance(project, Project):
        project = load_project(project)
    out = Path(out_dir) if out_dir else project.folder / "dossier-out"
    refuse_sealed(out)
    key = build_key(project.sha256, load_theme(theme_name).files, theme_name)
    return out if output_is_current(out, key) else None
