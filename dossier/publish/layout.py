"""The names inside a dossier output folder: the one place each is stated."""

from __future__ import annotations

RESULTS_NAME = "results.json"
PROVENANCE_NAME = "provenance.json"
ENVIRONMENT_NAME = "environment.json"
FONTS_NAME = "pdf-fonts.json"  # the fonts each PDF volume embedded
REPORT_NAME = "dossier.pdf"
INPUTS = "inputs"  # the archived project inside an output folder
MANIFEST = "manifest-sha256.txt"  # the integrity manifest; its SHA-256 is the dossier's digest
SIGNATURES = "signatures"
SUPPLIER_SEAL = f"{SIGNATURES}/supplier-seal.json"
ATTACHED_MANIFEST = "integrity/manifest-sha256.txt"  # in the report PDF: every file but the PDF itself
MARKER = ".dossier-output"  # marks a folder as made by dossier (so that it may be replaced)
BUILD_KEY = ".dossier-build-key"  # the key of the inputs the folder was built from
BOOKKEEPING = (MARKER, BUILD_KEY)  # hidden files beside the payload, not part of the dossier
