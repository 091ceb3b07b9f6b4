"""Metrics: the trade's numbers from the fitted models, each with its 95 % interval."""
