"""Certified data shipped with the package for the self-check: Longley (1967) with the
NIST StRD certified values.

The data are Longley's 16 annual observations (1947-1962) of total employment and six
predictors, as NIST distributes them in the StRD file ``Longley.dat`` (public data).  The
certified values are NIST's, given to 15 significant digits, for the model
``y = b0 + b1 x1 + ... + b6 x6`` fitted by least squares to the decimal data.  A float64
copy of the data differs from the decimals by the rounding of the GNP deflator's tenths
(at most half a unit in the 17th digit), so agreement with the certified values is
limited by that rounding and the problem's sensitivity to it.

References
----------
Longley, J. W. (1967). An appraisal of least squares programs for the electronic computer
from the point of view of the user. Journal of the American Statistical Association 62,
819-841.
NIST Statistical Reference Datasets, linear regression, "Longley" (higher difficulty),
certified values: https://www.itl.nist.gov/div898/strd/lls/data/Longley.shtml
"""

from __future__ import annotations

__all__ = ["LONGLEY_NAMES", "LONGLEY_ROWS", "LONGLEY_CERTIFIED", "CERTIFIED_DIGITS"]

#: Column names: the response first, then x1..x6 in NIST's order.
LONGLEY_NAMES = ("employment", "gnp_deflator", "gnp", "unemployed", "armed_forces", "population", "year")

#: (y, x1, ..., x6) per year, 1947-1962, exactly as the decimals of ``Longley.dat``.
LONGLEY_ROWS = (
    (60323, 83.0, 234289, 2356, 1590, 107608, 1947),
    (61122, 88.5, 259426, 2325, 1456, 108632, 1948),
    (60171, 88.2, 258054, 3682, 1616, 109773, 1949),
    (61187, 89.5, 284599, 3351, 1650, 110929, 1950),
    (63221, 96.2, 328975, 2099, 3099, 112075, 1951),
    (63639, 98.1, 346999, 1932, 3594, 113270, 1952),
    (64989, 99.0, 365385, 1870, 3547, 115094, 1953),
    (63761, 100.0, 363112, 3578, 3350, 116219, 1954),
    (66019, 101.2, 397469, 2904, 3048, 117388, 1955),
    (67857, 104.6, 419180, 2822, 2857, 118734, 1956),
    (68169, 108.4, 442769, 2936, 2798, 120445, 1957),
    (66513, 110.8, 444546, 4681, 2637, 121950, 1958),
    (68655, 112.6, 482704, 3813, 2552, 123366, 1959),
    (69564, 114.2, 502601, 3931, 2514, 125368, 1960),
    (69331, 115.7, 518173, 4806, 2572, 127852, 1961),
    (70551, 116.9, 554894, 4007, 2827, 130081, 1962),
)

#: NIST's certified values, as the published decimal strings: estimates and standard
#: deviations of b0 (the intercept) to b6, the residual standard deviation and R-squared.
LONGLEY_CERTIFIED = {
    "coefficients": ("-3482258.63459582", "15.0618722713733", "-0.358191792925910E-01", "-2.02022980381683",
                     "-1.03322686717359", "-0.511041056535807E-01", "1829.15146461355"),
    "standard_errors": ("890420.383607373", "84.9149257747669", "0.334910077722432E-01", "0.488399681651699",
                        "0.214274163161675", "0.226073200069370", "455.478499142212"),
    "residual_standard_deviation": "304.854073561965",
    "r_squared": "0.995479004577296",
}

#: The certified values are given to 15 significant digits.
CERTIFIED_DIGITS = 15.0
