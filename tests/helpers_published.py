"""Published worked examples shared by several test modules (one copy, with its source)."""

from __future__ import annotations

import numpy as np

NAN = np.nan

# Krippendorff, K. (2011). Computing Krippendorff's alpha-reliability. 4 observers (judges, rows) x 12 units
# (items, columns); NaN = no value. Alpha: nominal .743, ordinal .815, interval .849, ratio .797.
K2011 = np.array([
    [1, 2, 3, 3, 2, 1, 4, 1, 2, NAN, NAN, NAN],
    [1, 2, 3, 3, 2, 2, 4, 1, 2, 5, NAN, 3],
    [NAN, 3, 3, 3, 2, 3, 4, 2, 2, 5, 1, NAN],
    [1, 2, 3, 3, 2, 4, 4, 1, 2, 5, 1, NAN],
])
