"""NIST Statistical Reference Datasets (StRD), linear least squares, "higher" difficulty.

Source: NIST Information Technology Laboratory, StRD, datasets Wampler1 and
Wampler2 (Wampler, R. H., 1970, "A Report on the Accuracy of Some Widely-Used
Least Squares Computer Programs", J. Am. Stat. Assoc. 65:549–565).  Both are
degree-5 polynomials in x = 0, 1, …, 20 with zero residuals; the y values
below are the data files' values, and each certified coefficient is exact
(Wampler1: all 1; Wampler2: 10⁻ᵏ for xᵏ).  The values were checked against a
public copy of the data files' contents.
"""

X = list(range(21))

WAMPLER1_Y = [
    1, 6, 63, 364, 1365, 3906, 9331, 19608, 37449, 66430, 111111, 177156,
    271453, 402234, 579195, 813616, 1118481, 1508598, 2000719, 2613660, 3368421,
]
WAMPLER1_CERTIFIED = [1.0, 1.0, 1.0, 1.0, 1.0, 1.0]

WAMPLER2_Y = [
    1.00000, 1.11111, 1.24992, 1.42753, 1.65984, 1.96875, 2.38336, 2.94117,
    3.68928, 4.68559, 6.00000, 7.71561, 9.92992, 12.75603, 16.32384, 20.78125,
    26.29536, 33.05367, 41.26528, 51.16209, 63.00000,
]
WAMPLER2_CERTIFIED = [1.0, 1e-1, 1e-2, 1e-3, 1e-4, 1e-5]

# NIST states results by the log relative error, LRE = −log10(|estimate − certified| / |certified|),
# the number of correct significant digits.  Targets for pricefold (project's own bar).
MIN_LRE = {"Wampler1": 7.0, "Wampler2": 9.0}
