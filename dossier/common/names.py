"""Names made from user text: file names and anchors."""

from __future__ import annotations


def slug(text: str) -> str:
    """`text` as a file-name and anchor fragment: lower-case letters and digits, other characters as '-'."""
    return "".join(ch.lower() if ch.isalnum() else "-" for ch in text).strip("-")
