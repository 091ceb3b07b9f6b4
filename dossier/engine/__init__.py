"""The engine: the build recipe, its content cache and worker processes, the freshness check and
the rebuild from archived inputs.
"""
