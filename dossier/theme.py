"""Themes: data plus templates.

A theme is a folder with ``theme.toml`` (``name``, optional ``parent``, ``[options]`` defaults),
Jinja2 templates, ``screen.css``, ``print.css`` and a matplotlib style ``figures.mplstyle``.
Template search order: the project's ``templates/`` override folder, the theme, its parent
(and so on). Built-in themes live in the repository's ``themes/`` folder, installed as the
``dossier_themes`` package.
"""

from __future__ import annotations

import tomllib
from dataclasses import dataclass
from importlib import resources
from pathlib import Path

from .errors import UserError

THEME_FILE = "theme.toml"
STATIC_FILES = ("screen.css", "print.css")


@dataclass(frozen=True)
class Theme:
    name: str
    folders: tuple[Path, ...]  # this theme first, then its parents
    options: dict

    def find(self, filename: str) -> Path | None:
        """Return the first `filename` along the theme chain, or None."""
        for folder in self.folders:
            if (folder / filename).is_file():
                return folder / filename
        return None

    @property
    def figure_style(self) -> Path | None:
        return self.find("figures.mplstyle")


def builtin_themes_dir() -> Path:
    return Path(str(resources.files("dossier_themes")))


def load_theme(name: str, search_dir: Path | None = None) -> Theme:
    """Load theme `name` and its parents from `search_dir` (default: the built-in themes)."""
    root = search_dir or builtin_themes_dir()
    folders: list[Path] = []
    options: dict = {}
    seen: set[str] = set()
    current = name
    while current:
        if current in seen:
            raise UserError(f"theme {name!r}: parent chain loops back to {current!r}")
        seen.add(current)
        folder = root / current
        spec_path = folder / THEME_FILE
        if not spec_path.is_file():
            known = sorted(p.name for p in root.iterdir() if (p / THEME_FILE).is_file())
            raise UserError(f"theme {current!r} not found in {root}; available: {', '.join(known)}")
        spec = tomllib.loads(spec_path.read_text(encoding="utf-8"))
        folders.append(folder)
        options = {**spec.get("options", {}), **options}  # the child's options win
        current = spec.get("parent") or ""
    return Theme(name, tuple(folders), options)
