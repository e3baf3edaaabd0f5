"""The sparse tensor kind: nonzero cells, each with its fold and its cluster.

A :class:`ClusterCells` holds the nonzero cells of a confusion tensor (dims
``actual, predicted``) or of a joint tensor of two models (``actual,
predicted_a, predicted_b``), split by the cluster of samples they came from:
one row per (cluster, fold, cell) that holds samples, with its count. Memory
grows with the number of such rows (at most one per sample), never with
clusters x K x K. Clusters are units that share their fate (images of one
specimen, recordings of one site); resampling them whole is the job of
:mod:`foldcorr.analysis.clustered`. Nothing here computes a metric.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np
import pandas as pd
import xarray as xr

from foldcorr.errors import InvalidInputError
from foldcorr.tensor.counting import fixed_classes, sorted_codes
from foldcorr.tensor.dims import ACTUAL, COUNT, FOLD, PREDICTED, py_value
from foldcorr.tensor.joint import JOINT_DIMS

if TYPE_CHECKING:
    from numpy.typing import ArrayLike

__all__ = ["ClusterCells", "cluster_tally", "shared_classes"]


@dataclass(frozen=True)
class ClusterCells:
    """Nonzero cells of a tensor by cluster and fold (the sparse clustered tensor kind).

    Attributes
    ----------
    dims : tuple of str
        Class dims: ``("actual", "predicted")`` or ``("actual", "predicted_a",
        "predicted_b")``.
    classes : list
        Class coordinate shared by every class dim.
    folds : list or None
        Fold coordinate, or None without folds.
    clusters : numpy.ndarray
        Label of every cluster (G of them).
    cluster, fold, cell, count : numpy.ndarray
        One entry per nonzero (cluster, fold, cell): the cluster code
        (index into ``clusters``), fold code (0 without folds), flat cell code
        over the class dims (mixed radix K, ``actual`` first) and count.

    Examples
    --------
    >>> c = cluster_tally([0, 0, 1, 1], [0, 1, 1, 1], cluster=["a", "a", "b", "b"])
    >>> c.n_clusters, c.cell.tolist(), c.count.tolist()
    (2, [0, 1, 3], [1, 1, 2])
    >>> c.tensor().values.tolist()
    [[1, 1], [0, 2]]
    """

    dims: tuple
    classes: list
    folds: list | None
    clusters: np.ndarray
    cluster: np.ndarray
    fold: np.ndarray
    cell: np.ndarray
    count: np.ndarray

    @property
    def n_clusters(self) -> int:
        """Number of clusters G."""
        return len(self.clusters)

    @property
    def k(self) -> int:
        """Number of classes K."""
        return len(self.classes)

    @property
    def n_folds(self) -> int:
        """Number of folds (1 without folds)."""
        return 1 if self.folds is None else len(self.folds)

    def tensor(self) -> xr.DataArray:
        """The dense tensor of all clusters together, dims ``([fold,] *dims)``."""
        k, f = self.k, self.n_folds
        size = k ** len(self.dims)
        flat = np.bincount(self.fold * size + self.cell, weights=self.count,
                           minlength=f * size).astype(np.int64)
        lead = [] if self.folds is None else [FOLD]
        shape = ([f] if lead else []) + [k] * len(self.dims)
        coords = {d: self.classes for d in self.dims}
        if lead:
            coords[FOLD] = self.folds
        return xr.DataArray(flat.reshape(shape), dims=(*lead, *self.dims), coords=coords,
                            name=COUNT)


def cluster_tally(truth: ArrayLike, *predictions: ArrayLike, cluster: ArrayLike,
                  folds: ArrayLike | None = None,
                  classes: ArrayLike | None = None) -> ClusterCells:
    """Count samples into nonzero cells by cluster (and fold).

    Parameters
    ----------
    truth : array_like
        One actual label per sample.
    *predictions : array_like
        One predicted label per sample: one array gives cells over
        ``(actual, predicted)``, two arrays (two models of the same samples)
        cells over ``(actual, predicted_a, predicted_b)``.
    cluster : array_like
        One cluster id per sample; samples of one cluster are resampled
        together. Pass ``np.arange(n)`` for independent samples.
    folds : array_like, optional
        One fold label per sample.
    classes : sequence, optional
        Fixed class order; default every label seen, sorted.

    Returns
    -------
    ClusterCells

    Raises
    ------
    InvalidInputError
        On arrays of different length, missing values, labels outside
        ``classes``, or other than one or two prediction arrays.

    Examples
    --------
    >>> c = cluster_tally(["x", "y", "y"], ["x", "x", "y"], ["y", "y", "y"], cluster=[1, 1, 2])
    >>> c.dims, c.classes, c.n_clusters
    (('actual', 'predicted_a', 'predicted_b'), ['x', 'y'], 2)
    """
    if len(predictions) not in (1, 2):
        raise InvalidInputError(
            f"give one prediction array (a confusion tensor) or two (a joint tensor); "
            f"got {len(predictions)}")
    dims = (ACTUAL, PREDICTED) if len(predictions) == 1 else JOINT_DIMS
    columns = [_column(truth, "truth"), *(_column(p, "predictions") for p in predictions)]
    n = len(columns[0])
    extra = {"cluster": _column(cluster, "cluster")}
    if folds is not None:
        extra["folds"] = _column(folds, "folds")
    for name, values in {**dict(zip(["predictions"] * 2, columns[1:])), **extra}.items():
        if len(values) != n:
            raise InvalidInputError(
                f"`{name}` has {len(values)} values but there are {n} truth labels")
    codes, labels = _class_codes(columns, classes)
    cluster_codes, cluster_labels = _codes(extra["cluster"], "cluster")
    fold_codes, fold_labels = (np.zeros(n, np.int64), None) if folds is None \
        else _codes(extra["folds"], "folds")
    k = len(labels)
    cell = np.zeros(n, np.int64)
    for c in codes:
        cell = cell * k + c
    n_folds, size = (1 if fold_labels is None else len(fold_labels)), k ** len(dims)
    unique, count = np.unique((cluster_codes * n_folds + fold_codes) * size + cell,
                              return_counts=True)
    return ClusterCells(
        dims=dims, classes=labels, folds=fold_labels,
        clusters=np.asarray(cluster_labels, dtype=object),
        cluster=unique // size // n_folds, fold=(unique // size) % n_folds, cell=unique % size,
        count=count.astype(np.int64),
    )


def shared_classes(*columns) -> list:
    """The class list of several label arrays together: every label seen, sorted.

    Examples
    --------
    >>> shared_classes(["b", "a"], ["c", "a"])
    ['a', 'b', 'c']
    """
    return _class_codes([_column(c, "labels") for c in columns], None)[1]


def _column(values, name: str) -> np.ndarray:
    if isinstance(values, (pd.Series, pd.Index)):
        values = values.to_numpy()
    arr = np.asarray(values)
    if arr.ndim != 1:
        raise InvalidInputError(f"`{name}` must be one-dimensional; got shape {arr.shape!r}")
    return arr


def _codes(values: np.ndarray, name: str):
    """Codes of one column over its sorted distinct values."""
    codes, uniques = pd.factorize(values, use_na_sentinel=True)
    if (codes < 0).any():
        row = int(np.flatnonzero(codes < 0)[0])
        raise InvalidInputError(f"`{name}` row {row + 1}: missing value")
    codes, uniques = sorted_codes(codes, np.asarray(uniques, dtype=object))
    return codes.astype(np.int64), [py_value(u) for u in uniques]


def _class_codes(columns, classes):
    """Codes of every label column over one class list (given, or every label seen)."""
    if classes is not None:
        labels = fixed_classes(classes)
        index = pd.Index(labels)
        codes = [index.get_indexer(pd.Index(c)) for c in columns]
        for c, values in zip(codes, columns):
            if (c < 0).any():
                row = int(np.flatnonzero(c < 0)[0])
                raise InvalidInputError(
                    f"label {py_value(values[row])!r} (row {row + 1}) is not in `classes` "
                    f"{labels!r}")
        return [c.astype(np.int64) for c in codes], labels
    plain = columns
    if len({p.dtype.kind for p in plain}) > 1:  # keep 1 and "1" apart
        plain = [p.astype(object) for p in plain]
    codes, labels = _codes(np.concatenate(plain), "labels")
    return np.split(codes, np.cumsum([len(p) for p in plain])[:-1]), labels
