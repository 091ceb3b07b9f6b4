"""The ground floor: every exception with its exit code, interrupt handling, names made from user text.

Imports nothing else of dossier.
"""
