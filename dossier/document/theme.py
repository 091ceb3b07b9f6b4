"""Themes: data plus templates.

A theme is a folder with ``theme.toml`` (``name``, optional ``parent``, ``[options]``), Jinja2
templates, ``common.css`` (the rules the site and the PDF share), ``screen.css`` (the site only: a
change there re-renders no PDF), ``print.css`` (the PDF and printed pages) and a matplotlib style
``figures.mplstyle``. Its
``theme.toml`` is validated like the manifest: an unknown key, a misspelt option or a parent
that does not exist is an error naming the file and key. Template search order: the project's
``templates/`` override folder, the theme, its parent (and so on).

The built-in themes are the ``themes/`` folder that belongs to the code being run: beside the
``dossier`` package in a checkout, the installed ``dossier_themes`` package otherwise, so a
checkout never picks up another installation's copy. :func:`load_theme` reads every file of the
chain once; the stages take the theme's bytes from the :class:`Theme`.
"""

from __future__ import annotations

import tomllib
from dataclasses import dataclass
from importlib import resources
from pathlib import Path

from ..common.errors import ManifestError, Problem, UserError
from ..project.validation import Key, Table, Text

THEME_FILE = "theme.toml"
STATIC_FILES = ("common.css", "screen.css", "print.css")  # common.css: what the site and the PDF share
FIGURE_STYLE = "figures.mplstyle"
# The options a theme may set, with their defaults (the one place they are stated).
OPTIONS = {"organisation_label": "Tire evaluation dossier"}


def _parent(value, path, problems):
    """A theme name, or empty for none."""
    return value if value == "" else Text()(value, path, problems)


THEME_SCHEMA = Table(
    {
        "name": Key(Text(), help="the theme's name, equal to its folder's name"),
        "parent": Key(_parent, required=False, default="", help="the theme this one extends; empty for none"),
        # Options not given stay absent (None), so that a parent's value shows through.
        "options": Key(Table({name: Key(Text(), required=False) for name in OPTIONS}), required=False, default=None),
    }
)


@dataclass(frozen=True)
class Theme:
    """A theme and its parents, with the bytes of every file of the chain."""

    name: str
    chain: tuple[str, ...]  # this theme first, then its parents
    options: dict
    files: dict[str, bytes]  # "<position in the chain>/<path in the theme folder>" -> bytes

    def _own(self, index: int) -> dict[str, bytes]:
        prefix = f"{index}/"
        return {k[len(prefix) :]: v for k, v in self.files.items() if k.startswith(prefix)}

    def source(self, filename: str) -> bytes | None:
        """The first `filename` along the chain (this theme, then its parents), or None."""
        for i in range(len(self.chain)):
            found = self._own(i).get(filename)
            if found is not None:
                return found
        return None

    def stylesheet(self, filename: str) -> bytes | None:
        """A child theme's stylesheet adds to its parent's: parent rules first, the child's after."""
        parts = [self._own(i)[filename] for i in reversed(range(len(self.chain))) if filename in self._own(i)]
        return b"\n".join(parts) if parts else None

    @property
    def figure_style(self) -> bytes:
        """The matplotlib style of the nearest theme that has one (empty: matplotlib's defaults)."""
        return self.source(FIGURE_STYLE) or b""


def builtin_themes_dir() -> Path:
    """The ``themes/`` folder of this code: the checkout's own if run from one, else the installed one."""
    checkout = Path(__file__).resolve().parents[2]
    if (checkout / "pyproject.toml").is_file() and (checkout / "themes" / "default" / THEME_FILE).is_file():
        return checkout / "themes"
    return Path(str(resources.files("dossier_themes")))


def load_theme(name: str, search_dir: Path | None = None) -> Theme:
    """Load theme `name` and its parents from `search_dir` (default: the built-in themes)."""
    root = search_dir or builtin_themes_dir()
    chain: list[str] = []
    options: dict = {}
    files: dict[str, bytes] = {}
    current = name
    while current:
        if current in chain:
            raise UserError(f"theme {name!r}: parent chain loops back to {current!r}")
        folder = root / current
        spec_path = folder / THEME_FILE
        if not spec_path.is_file():
            known = sorted(p.name for p in root.iterdir() if (p / THEME_FILE).is_file())
            child = f" (the parent of theme {chain[-1]!r})" if chain else ""
            raise UserError(f"theme {current!r}{child} not found in {root}; available: {', '.join(known)}")
        spec = _theme_spec(spec_path, current)
        index = len(chain)
        chain.append(current)
        files.update(
            {
                f"{index}/{p.relative_to(folder).as_posix()}": p.read_bytes()
                for p in sorted(folder.rglob("*"))
                if p.is_file() and "__pycache__" not in p.parts
            }
        )
        given = {k: v for k, v in (spec["options"] or {}).items() if v is not None}
        options = {**given, **options}  # the child's options win
        current = spec["parent"]
    return Theme(name, tuple(chain), {**OPTIONS, **options}, files)


def _theme_spec(path: Path, folder_name: str) -> dict:
    """Validate one ``theme.toml``; raise ManifestError naming the file and every problem."""
    try:
        raw = tomllib.loads(path.read_text(encoding="utf-8"))
    except (UnicodeDecodeError, tomllib.TOMLDecodeError) as exc:
        raise ManifestError(str(path), [Problem("TOML syntax", str(exc))]) from None
    problems: list[Problem] = []
    spec = THEME_SCHEMA(raw, "", problems)
    if spec is not None and spec.get("name") and spec["name"] != folder_name:
        problems.append(Problem("name", f"must equal the theme's folder name {folder_name!r}; got {spec['name']!r}"))
    if problems:
        raise ManifestError(str(path), problems)
    return spec
