"""Ingest: rig files' bytes parsed into channels in internal units and the ISO 8855 axes."""
