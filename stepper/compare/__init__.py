"""Comparing two runs: alignment, the first divergence and what kind it is.

:mod:`.diff` lines up instances and rounds, :mod:`.divergence` classifies the
first difference, :mod:`.schema` holds the kinds and the JSON Schema of
``diff --json``.
"""
