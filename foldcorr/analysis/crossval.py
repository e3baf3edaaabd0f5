"""The analysis layer: scikit-learn cross-validation into confusion tensors.

:func:`cross_tally` fits a fresh copy of an estimator on every training split
and tallies its predictions on the held-out split into one fold tensor, ready
for :func:`foldcorr.evaluation.evaluate`, :func:`foldcorr.analysis.uncertainty.bootstrap`
and :func:`foldcorr.analysis.folds.fold_statistics`. :data:`rk_scorer` lets
scikit-learn's own model selection (``cross_validate``, ``GridSearchCV``) rank
models by R_K.

Examples
--------
>>> from sklearn.datasets import load_iris
>>> from sklearn.model_selection import cross_validate
>>> from sklearn.neighbors import KNeighborsClassifier
>>> X, y = load_iris(return_X_y=True)
>>> out = cross_validate(KNeighborsClassifier(), X, y, cv=3, scoring=rk_scorer)
>>> out["test_score"].shape, bool((out["test_score"] > 0.8).all())
((3,), True)
"""

from __future__ import annotations

import numpy as np
import xarray as xr
from sklearn.base import clone, is_classifier
from sklearn.metrics import make_scorer
from sklearn.model_selection import check_cv
from sklearn.utils import indexable

from foldcorr.metrics import rk
from foldcorr.tensor import tally

__all__ = ["cross_tally", "rk_score", "rk_scorer"]


def cross_tally(estimator, X, y, *, cv=5, groups=None, classes=None) -> xr.DataArray:
    """Run cross-validation and tally every held-out prediction into a fold tensor.

    Parameters
    ----------
    estimator : scikit-learn estimator
        Anything with ``fit`` and ``predict``; a fresh clone is fitted per fold.
    X : array_like or DataFrame, shape (n_samples, n_features)
        Features.
    y : array_like, shape (n_samples,)
        Class labels.
    cv : int, cross-validation generator or iterable, default 5
        As in scikit-learn: an int gives (stratified, for classifiers) k-fold.
    groups : array_like, optional
        Group labels for group-aware splitters such as ``GroupKFold``.
    classes : sequence, optional
        Fixed class order; default every label seen in ``y`` and the
        predictions, sorted.

    Returns
    -------
    xarray.DataArray
        Dims ``(fold, actual, predicted)``, folds numbered from 0 in split
        order; ``attrs`` name the estimator and the splitter.

    Notes
    -----
    Splits come from :func:`sklearn.model_selection.check_cv`, so ``cv`` means
    exactly what it means to ``cross_validate``. Each sample appears in the
    test split of at most one fold for k-fold splitters; the tensor counts what
    the splits hold.

    Examples
    --------
    >>> from sklearn.datasets import load_iris
    >>> from sklearn.tree import DecisionTreeClassifier
    >>> X, y = load_iris(return_X_y=True)
    >>> t = cross_tally(DecisionTreeClassifier(random_state=0), X, y, cv=3)
    >>> t.dims, t.sizes["fold"], int(t.sum())
    (('fold', 'actual', 'predicted'), 3, 150)
    """
    X, y, groups = indexable(X, y, groups)
    splitter = check_cv(cv, y, classifier=is_classifier(estimator))
    truths, preds, folds = [], [], []
    for fold, (train, test) in enumerate(splitter.split(X, y, groups)):
        model = clone(estimator).fit(_take(X, train), _take(y, train))
        preds.append(np.asarray(model.predict(_take(X, test))))
        truths.append(np.asarray(_take(y, test)))
        folds.append(np.full(len(test), fold))
    t = tally(np.concatenate(truths), np.concatenate(preds), folds=np.concatenate(folds),
              classes=classes)
    t.attrs["estimator"] = type(estimator).__name__
    t.attrs["cv"] = type(splitter).__name__
    return t


def rk_score(y_true, y_pred) -> float:
    """R_K of one pair of label arrays, as a plain float (the score behind :data:`rk_scorer`).

    Examples
    --------
    >>> rk_score([0, 1, 1, 0], [0, 1, 0, 0])
    0.5773502691896258
    """
    return float(rk(tally(np.asarray(y_true), np.asarray(y_pred))))


def _take(values, index):
    """Rows ``index`` of an array, a DataFrame/Series (by position) or a list."""
    if hasattr(values, "iloc"):
        return values.iloc[index]
    if isinstance(values, np.ndarray) or hasattr(values, "__array__"):
        return values[index]
    return [values[i] for i in index]


#: A scikit-learn scorer of R_K (greater is better), for ``scoring=`` in
#: ``cross_validate``, ``cross_val_score`` or ``GridSearchCV`` (see the module
#: example).
rk_scorer = make_scorer(rk_score)
