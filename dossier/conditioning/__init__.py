"""Conditioning: time histories into steady-state curves per operating point, with an account of
what was kept and dropped; drift from a control tire; ply-steer and conicity offsets; model-free
estimates.
"""
