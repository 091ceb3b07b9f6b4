"""What shapes the output's bytes besides the inputs: the theme and the software that made them.

A dossier records this as ``environment.json`` so that a rebuild years later can say which
version differs instead of only "differs". The same inputs give the same bytes wherever every
version below is the same: Python packages that lay out, draw, compress or compute (WeasyPrint,
pydyf, fontTools, matplotlib, Pillow, NumPy, SciPy, Jinja2, markdown-it-py), and the system
libraries WeasyPrint lays text out with (Pango, HarfBuzz, fontconfig, FreeType) and zlib, which
compresses every PDF stream. The fonts WeasyPrint embedded are recorded per PDF beside it.
"""

from __future__ import annotations

import ctypes
import ctypes.util
import platform
import zlib
from functools import lru_cache
from importlib import metadata

from .. import __version__

PACKAGES = (
    "weasyprint",
    "pydyf",
    "fonttools",
    "matplotlib",
    "pillow",
    "numpy",
    "scipy",
    "jinja2",
    "markdown-it-py",
    "cffi",
)


def _package_version(name: str) -> str:
    try:
        return metadata.version(name)
    except metadata.PackageNotFoundError:
        return "not installed"


def _library(*names: str):
    for name in names:
        try:
            return ctypes.CDLL(name)
        except OSError:
            continue
    found = ctypes.util.find_library(names[0].split(".")[0].removeprefix("lib"))
    return ctypes.CDLL(found) if found else None


def _int_version(value: int, base: int) -> str:
    return f"{value // (base * base)}.{value // base % base}.{value % base}"


# (record name, library file names as WeasyPrint loads them, version function, its result as text)
_VERSION_FUNCTIONS = (
    (
        "pango",
        ("libpango-1.0.so.0", "libpango-1.0.dylib", "libpango-1.0-0.dll"),
        "pango_version",
        ctypes.c_int,
        lambda v: _int_version(v, 100),
    ),
    (
        "harfbuzz",
        ("libharfbuzz.so.0", "libharfbuzz.0.dylib", "libharfbuzz-0.dll"),
        "hb_version_string",
        ctypes.c_char_p,
        bytes.decode,
    ),
    (
        "fontconfig",
        ("libfontconfig.so.1", "libfontconfig.1.dylib", "libfontconfig-1.dll"),
        "FcGetVersion",
        ctypes.c_int,
        lambda v: _int_version(v, 100),
    ),
)


@lru_cache(maxsize=1)
def text_libraries() -> dict[str, str]:
    """Versions of the system libraries WeasyPrint lays text out with (as WeasyPrint loads them)."""
    out = {}
    for name, files, function, restype, as_text in _VERSION_FUNCTIONS:
        lib = _library(*files)
        if lib is not None:
            fn = getattr(lib, function)
            fn.restype = restype
            out[name] = as_text(fn())
    ft = _library("libfreetype.so.6", "libfreetype.6.dylib", "libfreetype-6.dll")
    if ft is not None:
        lib = ctypes.c_void_p()
        if ft.FT_Init_FreeType(ctypes.byref(lib)) == 0:
            v = [ctypes.c_int(), ctypes.c_int(), ctypes.c_int()]
            ft.FT_Library_Version(lib, *(ctypes.byref(x) for x in v))
            ft.FT_Done_FreeType(lib)
            out["freetype"] = ".".join(str(x.value) for x in v)
    out["zlib"] = zlib.ZLIB_RUNTIME_VERSION
    return {k: out[k] for k in sorted(out)}


def font_subsetter() -> str:
    """How WeasyPrint subsets the fonts it embeds (the two ways give different bytes)."""
    try:
        from ..document.pdfa import font_subsetter as which
    except ImportError:
        return "unknown"
    return which()


@lru_cache(maxsize=1)
def software() -> dict[str, str]:
    """Versions of dossier, Python and every package that shapes the output's bytes."""
    out = {"dossier": __version__, "python": platform.python_version()}
    out.update({name: _package_version(name) for name in PACKAGES})
    return out


def environment_record(theme_name: str) -> dict:
    """The record written as ``environment.json``."""
    return {
        "theme": theme_name,
        "software": software(),
        "text_libraries": text_libraries(),
        "font_subsetter": font_subsetter(),
    }


def differences(recorded: dict, current: dict) -> list[str]:
    """Every version (or the theme) that differs between two records, as 'what: old → new'."""
    out = []
    if recorded.get("theme") != current.get("theme"):
        out.append(f"theme: {recorded.get('theme')} → {current.get('theme')}")
    for group in ("software", "text_libraries"):
        a, b = recorded.get(group) or {}, current.get(group) or {}
        for name in sorted(set(a) | set(b)):
            if a.get(name) != b.get(name):
                out.append(f"{name}: {a.get(name, 'absent')} → {b.get(name, 'absent')}")
    if recorded.get("font_subsetter") != current.get("font_subsetter"):
        out.append(f"font subsetter: {recorded.get('font_subsetter')} → {current.get('font_subsetter')}")
    return out


def embedded_font_record(pdfs: dict[str, bytes]) -> dict:
    """The fonts each PDF volume embedded (name, version, SHA-256 of the embedded program)."""
    from dataclasses import asdict

    from ..document.pdfa import embedded_fonts

    return {name: [asdict(f) for f in embedded_fonts(data)] for name, data in sorted(pdfs.items())}
