"""The models: least squares, binary and softmax logistic regression, their inference,
the exact separation check and the fit records.  Imports the engine and support.
"""
