"""What the figure stage hands to the render stage: light, so that rendering from the cache
needs no plotting library."""

from __future__ import annotations

from dataclasses import dataclass


@dataclass(frozen=True)
class FigureArtifact:
    """A finished figure: file name, caption, alt text for screen readers, and SVG bytes."""

    filename: str
    title: str
    caption: str
    alt: str
    svg: bytes
