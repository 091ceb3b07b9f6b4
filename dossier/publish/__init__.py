"""Publishing: results and provenance records, the integrity manifest and signatures, the
environment record, the output folder's names, the atomic writer, and the archive commands
(verify, seal, countersign, export, diff).
"""
