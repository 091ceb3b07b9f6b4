"""Is an output folder already the build of these inputs? A light check, run before anything heavy.

The build key is the SHA-256 (with the code version, see :mod:`dossier.cache`) of the project's
own files, the theme chain's files and the theme name. A build writes it beside the marker; an
output whose key matches and whose files still match their integrity manifest is up to date.
"""

from __future__ import annotations

from pathlib import Path

from .archive import verify
from .cache import digest
from .errors import UserError
from .ingest import read_project_files
from .manifest import load_manifest
from .output import refuse_sealed
from .theme import Theme, load_theme

BUILD_KEY = ".dossier-build-key"


def theme_files(theme: Theme) -> dict[str, bytes]:
    """Every file of the theme chain, for the keys."""
    return {f"{i}/{p.relative_to(folder).as_posix()}": p.read_bytes()
            for i, folder in enumerate(theme.folders) for p in sorted(folder.rglob("*")) if p.is_file()}


def build_key(project_files: dict[str, bytes], theme_bytes: dict[str, bytes], theme_name: str) -> str:
    """`theme_bytes`: the theme chain's files as :func:`theme_files` reads them."""
    return digest(project_files, theme_bytes, theme_name)


def output_is_current(out_dir: Path, key: str) -> bool:
    try:
        if (Path(out_dir) / BUILD_KEY).read_text(encoding="utf-8").strip() != key:
            return False
        return verify(out_dir).files_ok
    except (OSError, UserError):
        return False


def up_to_date(project_dir: Path, out_dir: Path | None, theme_name: str) -> Path | None:
    """Return the output folder if it is already the build of the project as it is now, else None."""
    manifest = load_manifest(project_dir)
    out = Path(out_dir) if out_dir else manifest.project_dir / "dossier-out"
    refuse_sealed(out)
    key = build_key(read_project_files(manifest), theme_files(load_theme(theme_name)), theme_name)
    return out if output_is_current(out, key) else None
