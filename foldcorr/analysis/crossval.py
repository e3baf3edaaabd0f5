"""The analysis layer: scikit-learn cross-validation into confusion tensors.

:func:`cross_tally` fits a fresh copy of an estimator on every training split
and tallies its predictions on the held-out split into one fold tensor, ready
for :func:`foldcorr.evaluation.evaluate`, :func:`foldcorr.analysis.uncertainty.bootstrap`
and :func:`foldcorr.analysis.folds.fold_statistics`; :func:`compare_estimators`
does the same for several estimators on the same splits and compares them
(:func:`foldcorr.analysis.many.compare_many`). :data:`rk_scorer` lets
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

from collections.abc import Mapping
from typing import TYPE_CHECKING, Any, Literal, overload

import numpy as np
import xarray as xr
from sklearn.base import is_classifier
from sklearn.metrics import make_scorer
from sklearn.model_selection import check_cv, cross_val_predict
from sklearn.utils import indexable

from foldcorr.analysis.many import ManyComparison, compare_many
from foldcorr.errors import InvalidInputError, OptionError
from foldcorr.metrics import rk
from foldcorr.tensor import tally

if TYPE_CHECKING:
    from numpy.typing import ArrayLike

__all__ = ["compare_estimators", "cross_tally", "rk_score", "rk_scorer"]


@overload
def cross_tally(estimator: Any, X: Any, y: ArrayLike, *, cv: Any = ...,
                groups: ArrayLike | None = ..., classes: ArrayLike | None = ...,
                n_jobs: int | None = ..., params: dict[str, Any] | None = ...,
                return_predictions: Literal[False] = ...) -> xr.DataArray: ...


@overload
def cross_tally(estimator: Any, X: Any, y: ArrayLike, *, cv: Any = ...,
                groups: ArrayLike | None = ..., classes: ArrayLike | None = ...,
                n_jobs: int | None = ..., params: dict[str, Any] | None = ...,
                return_predictions: Literal[True]) -> tuple[xr.DataArray, np.ndarray]: ...


def cross_tally(estimator: Any, X: Any, y: ArrayLike, *, cv: Any = 5,
                groups: ArrayLike | None = None, classes: ArrayLike | None = None,
                n_jobs: int | None = None, params: dict[str, Any] | None = None,
                return_predictions: bool = False) -> xr.DataArray | tuple[xr.DataArray, np.ndarray]:
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
        The test splits must hold every sample exactly once.
    groups : array_like, optional
        Group labels for group-aware splitters such as ``GroupKFold``.
    classes : sequence, optional
        Fixed class order; default every label seen in ``y`` and the
        predictions, sorted.
    n_jobs : int, optional
        Folds fitted in parallel, as ``n_jobs`` of
        :func:`sklearn.model_selection.cross_val_predict`.
    params : dict, optional
        Passed to the estimator's ``fit`` (per-sample values are split with
        the training rows), as ``params`` of ``cross_val_predict``.
    return_predictions : bool, default False
        Also return the held-out prediction of every sample, in input order.

    Returns
    -------
    xarray.DataArray or (xarray.DataArray, numpy.ndarray)
        Dims ``(fold, actual, predicted)``, folds numbered from 0 in split
        order; ``attrs`` name the estimator and the splitter. With
        ``return_predictions``, the tensor and the predictions.

    Raises
    ------
    OptionError
        When the test splits of ``cv`` do not hold every sample exactly once.

    Notes
    -----
    The splits come from :func:`sklearn.model_selection.check_cv`, so ``cv``
    means exactly what it means to ``cross_validate``, and the predictions from
    :func:`sklearn.model_selection.cross_val_predict` on those splits, so a
    sample's prediction is the one ``cross_val_predict`` gives.

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
    splitter, splits, fold = _held_out_folds(cv, X, y, groups, is_classifier(estimator))
    pred = cross_val_predict(estimator, X, y, cv=splits, n_jobs=n_jobs, params=params)
    t = tally(np.asarray(y), np.asarray(pred), folds=fold, classes=classes)
    t.attrs["estimator"] = type(estimator).__name__
    t.attrs["cv"] = type(splitter).__name__
    return (t, np.asarray(pred)) if return_predictions else t


def compare_estimators(estimators: Mapping[str, Any], X: Any, y: ArrayLike, *, cv: Any = 5,
                       groups: ArrayLike | None = None, cluster: ArrayLike | None = None,
                       n_jobs: int | None = None,
                       params: dict[str, Any] | None = None, level: float = 0.95,
                       n_resamples: int = 2000, n_permutations: int | None = None,
                       seed: int | np.random.Generator | None = None,
                       undefined: str = "zero") -> ManyComparison:
    """Cross-validate two or more estimators on the same splits and compare them by R_K.

    Parameters
    ----------
    estimators : mapping of str to scikit-learn estimator
        Model name -> estimator (at least two); a fresh clone of each is
        fitted per fold.
    X : array_like or DataFrame, shape (n_samples, n_features)
        Features.
    y : array_like, shape (n_samples,)
        Class labels.
    cv : int, cross-validation generator or iterable, default 5
        As in :func:`cross_tally`; the splits are drawn once and every
        estimator is fitted and tested on the same ones.
    groups : array_like, optional
        Group labels for group-aware splitters such as ``GroupKFold``.
    cluster : array_like, optional
        One cluster id per sample: the intervals and the test resample whole
        clusters (pass ``cluster=groups`` when the groups are correlated
        samples, such as repeated measurements of one source).
    n_jobs : int, optional
        Folds fitted in parallel, as in :func:`cross_tally`.
    params : dict, optional
        Passed to every estimator's ``fit``, as in :func:`cross_tally`.
    level, n_resamples, n_permutations, seed, undefined
        As in :func:`foldcorr.analysis.many.compare_many`.

    Returns
    -------
    ManyComparison
        The comparison of :func:`foldcorr.analysis.many.compare_many` of the
        held-out predictions, with the folds of the splits.

    Raises
    ------
    InvalidInputError
        With fewer than two estimators (checked before anything is fitted).
    OptionError
        When the test splits of ``cv`` do not hold every sample exactly once,
        or on a bad level or number of resamples.

    Notes
    -----
    The splits come from :func:`sklearn.model_selection.check_cv` (stratified
    k-fold for an int ``cv`` when every estimator is a classifier) and each
    estimator's held-out predictions from
    :func:`sklearn.model_selection.cross_val_predict` on those splits, so each
    model's R_K is ``matthews_corrcoef`` of its ``cross_val_predict`` output.
    Comparing on the same splits and samples is what makes the comparison
    paired.

    Examples
    --------
    >>> from sklearn.datasets import load_iris
    >>> from sklearn.neighbors import KNeighborsClassifier
    >>> from sklearn.tree import DecisionTreeClassifier
    >>> X, y = load_iris(return_X_y=True)
    >>> models = {"knn": KNeighborsClassifier(),
    ...           "shallow": DecisionTreeClassifier(max_depth=2, random_state=0)}
    >>> res = compare_estimators(models, X, y, cv=3, n_resamples=200, seed=0)
    >>> res.best, res.tied, res.per_fold.sizes["fold"]
    ('knn', ('knn',), 3)
    """
    if not isinstance(estimators, Mapping) or len(estimators) < 2:
        raise InvalidInputError("`estimators` must map at least two model names to "
                                f"estimators; got {estimators!r:.80}")
    X, y, groups = indexable(X, y, groups)
    classifier = all(is_classifier(e) for e in estimators.values())
    _, splits, fold = _held_out_folds(cv, X, y, groups, classifier)
    predictions = {name: cross_val_predict(e, X, y, cv=splits, n_jobs=n_jobs, params=params)
                   for name, e in estimators.items()}
    return compare_many(np.asarray(y), predictions, folds=fold, cluster=cluster, level=level,
                        n_resamples=n_resamples, n_permutations=n_permutations, seed=seed,
                        undefined=undefined)


def _held_out_folds(cv, X, y, groups, classifier: bool):
    """The splitter, its splits and each sample's fold; every sample must be tested once."""
    splitter = check_cv(cv, y, classifier=classifier)
    splits = list(splitter.split(X, y, groups))
    fold = np.full(len(y), -1)
    for i, (_, test) in enumerate(splits):
        fold[test] = np.where(fold[test] == -1, i, -2)
    if (fold < 0).any():
        raise OptionError(f"`cv` must split so that every sample is tested exactly once; "
                          f"{type(splitter).__name__} leaves {int((fold == -1).sum())} untested "
                          f"and tests {int((fold == -2).sum())} more than once")
    return splitter, splits, fold


def rk_score(y_true: ArrayLike, y_pred: ArrayLike, *,
             sample_weight: ArrayLike | None = None) -> float:
    """R_K of one pair of label arrays, as a plain float (the score behind :data:`rk_scorer`).

    ``sample_weight`` weights each sample's count, as in scikit-learn's metrics.

    Examples
    --------
    >>> rk_score([0, 1, 1, 0], [0, 1, 0, 0])
    0.5773502691896258
    >>> rk_score([0, 1, 1, 0], [0, 1, 0, 0], sample_weight=[1, 1, 0, 1])
    1.0
    """
    weights = None if sample_weight is None else np.asarray(sample_weight, dtype=float)
    return float(rk(tally(np.asarray(y_true), np.asarray(y_pred), weights=weights)))


#: A scikit-learn scorer of R_K (greater is better), for ``scoring=`` in
#: ``cross_validate``, ``cross_val_score`` or ``GridSearchCV`` (see the module
#: example). Its value equals scikit-learn's ``"matthews_corrcoef"`` scorer (R_K
#: is Gorodkin's multiclass MCC, the same formula); it exists so that model
#: selection and ``foldcorr`` reports compute the figure with one definition,
#: one undefined-value rule (0/0 counts as 0, as in :func:`foldcorr.metrics.rk`)
#: and from the same confusion tensor.
rk_scorer = make_scorer(rk_score)
