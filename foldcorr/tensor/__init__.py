"""The tensor layer: labels in, labelled confusion tensors out.

A confusion tensor is an :class:`xarray.DataArray` named ``count`` with dims
``(..., "actual", "predicted")``; both class dims carry the same ordered class
coordinate and every leading dim (``fold``, ``split``, ``model``, ``label``)
is free. The tensor kinds: multiclass (:mod:`~foldcorr.tensor.dims`,
counted by :mod:`~foldcorr.tensor.counting`), multilabel
(:mod:`~foldcorr.tensor.multilabel`) and joint (:mod:`~foldcorr.tensor.joint`);
per-sample records are in :mod:`~foldcorr.tensor.samples`. Clustered cells are in
:mod:`~foldcorr.tensor.cells`. Cells are dense
or sparse (:mod:`~foldcorr.tensor.backing`). Nothing in this
layer computes a metric.
"""

from foldcorr.tensor import backing, cells, counting, dims, joint, multilabel, samples
from foldcorr.tensor.backing import *  # noqa: F401,F403
from foldcorr.tensor.cells import *  # noqa: F401,F403
from foldcorr.tensor.counting import *  # noqa: F401,F403
from foldcorr.tensor.dims import *  # noqa: F401,F403
from foldcorr.tensor.joint import *  # noqa: F401,F403
from foldcorr.tensor.multilabel import *  # noqa: F401,F403
from foldcorr.tensor.samples import *  # noqa: F401,F403

__all__ = [name for module in (dims, backing, cells, counting, multilabel, joint, samples)
           for name in module.__all__]
