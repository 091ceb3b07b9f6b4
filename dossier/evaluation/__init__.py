"""Evaluation: targets judged, candidates compared with the baseline, vehicle balance of the
fitments, each specimen's identity from its sidewall.
"""
