"""Shared support, below every other layer: errors, argument validation, labels and
weights, probability distributions, row threads, dense linear algebra, number text,
categorical fields, files and the version.  Imports nothing else of lintools.
"""
