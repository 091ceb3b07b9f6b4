"""Tell how two PDFs of the same volume differ: in what a reader sees, or only in font bytes.

A rebuild on a machine whose fonts or font subsetter differ gives PDFs whose pages draw the same
glyphs at the same places while the embedded font programs differ byte for byte. A reviewer
needs to know which of the two happened: "numbers or text differ" is a finding about the
dossier, "only the font programs differ" is a finding about the machine.
"""

from __future__ import annotations

import hashlib
import io


def _pages(pdf) -> list[bytes]:
    """The drawing instructions of every page (content streams, decoded and joined)."""
    import pikepdf

    out = []
    for page in pdf.pages:
        contents = page.obj.get("/Contents")
        if contents is None:
            out.append(b"")
        elif isinstance(contents, pikepdf.Array):
            out.append(b"\n".join(c.read_bytes() for c in contents))
        else:
            out.append(contents.read_bytes())
    return out


def _fonts(pdf_bytes: bytes) -> dict[str, str]:
    """Embedded font programs: font name (subset tag dropped) -> SHA-256 of the program."""
    from ..document.pdfa import embedded_fonts

    return {f.base_font.split("+", 1)[-1]: f.sha256 for f in embedded_fonts(pdf_bytes)}


def _attachments(pdf) -> dict[str, str]:
    return {
        name: hashlib.sha256(spec.get_file().read_bytes()).hexdigest() for name, spec in sorted(pdf.attachments.items())
    }


def pdf_difference(a: bytes, b: bytes) -> str:
    """A short description of how PDF `b` differs from PDF `a` (two builds of one volume)."""
    import pikepdf

    if a == b:
        return "identical"
    with pikepdf.open(io.BytesIO(a)) as pa, pikepdf.open(io.BytesIO(b)) as pb:
        pages_a, pages_b = _pages(pa), _pages(pb)
        if len(pages_a) != len(pages_b):
            return f"numbers or text differ: {len(pages_a)} pages against {len(pages_b)}"
        changed = [i + 1 for i, (x, y) in enumerate(zip(pages_a, pages_b)) if x != y]
        if changed:
            shown = ", ".join(str(i) for i in changed[:8]) + (" …" if len(changed) > 8 else "")
            return f"numbers or text differ on page(s) {shown}"
        att_a, att_b = _attachments(pa), _attachments(pb)
        if att_a != att_b:
            names = sorted(n for n in set(att_a) | set(att_b) if att_a.get(n) != att_b.get(n))
            return "the pages are the same; attached files differ: " + ", ".join(names[:8])
        fonts_a, fonts_b = _fonts(a), _fonts(b)
        if fonts_a != fonts_b:
            names = sorted(n for n in set(fonts_a) | set(fonts_b) if fonts_a.get(n) != fonts_b.get(n))
            return (
                "the pages and attachments are the same; only the embedded font programs differ ("
                + ", ".join(names)
                + "): the machine's fonts or font subsetter differ, not the dossier"
            )
        return "the pages, attachments and fonts are the same; metadata or images differ"
