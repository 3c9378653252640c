"""Input/output shape handling shared by the environment functions.

The physics functions accept scalars, numpy arrays or pandas Series and give back
the same kind of object: a Series keeps the index of the first Series argument, an
array keeps its shape, and all-scalar input gives a Python float. NaN passes through.
"""

from __future__ import annotations

import numpy as np
import pandas as pd


def first_index(*args):
    """Index of the first pandas Series/DataFrame/Index among ``args`` (or ``None``)."""
    for a in args:
        if isinstance(a, (pd.Series, pd.DataFrame)):
            return a.index
        if isinstance(a, pd.Index):
            return a
    return None


def all_scalar(*args) -> bool:
    return all(np.ndim(a) == 0 and not isinstance(a, (pd.Series, pd.Index)) for a in args)


def as_float_arrays(*args):
    """Broadcast ``args`` to float64 arrays (Series lose their index; use :func:`wrap`)."""
    arrays = [np.asarray(a.to_numpy(dtype=float, na_value=np.nan) if isinstance(a, (pd.Series, pd.Index))
                         else a, dtype=float) for a in args]
    return np.broadcast_arrays(*arrays)


def wrap(values, index, scalar: bool, name: str | None = None):
    """Give ``values`` back in the caller's type (Series with ``index``, float, or ndarray)."""
    values = np.asarray(values)
    if index is not None:
        return pd.Series(values.reshape(-1) if values.ndim else np.repeat(values, len(index)),
                         index=index, name=name)
    if scalar:
        return values.item() if values.ndim == 0 else values.reshape(-1)[0].item()
    return values


def frame(columns: dict, index) -> pd.DataFrame:
    """A DataFrame from 1-D arrays (``index`` or a RangeIndex)."""
    cols = {k: np.atleast_1d(np.asarray(v)) for k, v in columns.items()}
    n = len(next(iter(cols.values())))
    return pd.DataFrame(cols, index=index if index is not None else pd.RangeIndex(n))
