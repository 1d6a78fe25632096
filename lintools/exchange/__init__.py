"""Exchange with the outside: lintools model files, PMML, the CSV reader, scoring a
model file on a table, and cross-checking delivered coefficients.  Imports models, the
engine and support.
"""
