"""What rewritten Python calls in place of ``np.mean``, ``arr.mean()`` and ``np.add.reduce``.

``exact_mean`` is the exact sum rounded once (``exact_sum``) divided by the count, one more
rounding: the same for every order, layout and chunking of the data. ``exact_reduce`` is
``np.add.reduce``'s sum (along axis 0 unless told otherwise) done by ``exact_sum``.
"""
from __future__ import annotations

import math

import numpy as np

from .sums import _normalize_axes, exact_sum


def exact_mean(values, axis=None):
    """The mean of ``values`` (an array, or any iterable of numbers) along ``axis`` (None: all),
    as ``exact_sum(values, axis) / count``; NaN for an empty selection, as numpy gives."""
    if not isinstance(values, (np.ndarray, np.generic)):
        if axis is None:
            items = list(values)
            if not items:
                return math.nan
            return exact_sum(items) / len(items)
        values = np.asarray(values, dtype=np.float64)
    array = np.asarray(values)
    if axis is None:
        count = array.size
    else:
        count = math.prod(array.shape[k] for k in _normalize_axes(axis, array.ndim))
    total = exact_sum(array, axis=axis)
    if count == 0:
        return total * np.nan
    return total / count


def exact_reduce(values, axis=0):
    """``np.add.reduce(values, axis)`` as an exact sum rounded once."""
    return exact_sum(values, axis=axis)
