"""Type names for the geodesy core's vectorised functions (``numpy.typing``).

A function that "accepts a scalar or an array and returns the same shape" takes ``ArrayLike``
(a float, a list, a numpy array...) and returns ``FloatOrArray``: a Python float for a scalar input,
an array of float64 otherwise. Pure module (no Django).
"""

from __future__ import annotations

from typing import TypeAlias

import numpy as np
from numpy.typing import ArrayLike, NDArray

__all__ = ["ArrayLike", "BoolArray", "FloatArray", "FloatOrArray"]

#: An array of float64 values (metres, degrees, m², ... as the name of the variable says).
FloatArray: TypeAlias = NDArray[np.float64]
#: An array of booleans (masks).
BoolArray: TypeAlias = NDArray[np.bool_]
#: What a scalar-or-array function returns: a float for a scalar input, an array otherwise.
FloatOrArray: TypeAlias = float | NDArray[np.float64]
