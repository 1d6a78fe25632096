"""Stratified splitting: hold-out, folds, repeated folds, bootstrap and the balance
report.  Imports support only.
"""
