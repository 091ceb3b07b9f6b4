"""The project: the manifest's schema and validation, its typed result, the metric catalogue, the
reference conditions, and the loader — the one place a project's files are read.
"""
