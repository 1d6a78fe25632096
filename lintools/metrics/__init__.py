"""Judging probabilities and scores: calibration scores, reliability bins and checks,
discrimination (ROC area, Kolmogorov-Smirnov, gains), band tests, stability,
collinearity and recalibration maps.  Imports models and support.
"""
