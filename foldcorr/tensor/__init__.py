"""The tensor layer: labels in, labelled confusion tensors out.

A confusion tensor is an :class:`xarray.DataArray` named ``count`` with dims
``(..., "actual", "predicted")``; both class dims carry the same ordered class
coordinate and every leading dim (``fold``, ``split``, ``model``, ``label``)
is free. Nothing in this layer computes a metric.
"""

from foldcorr.tensor.core import *  # noqa: F401,F403
from foldcorr.tensor.core import __all__ as _core_all

__all__ = list(_core_all)
