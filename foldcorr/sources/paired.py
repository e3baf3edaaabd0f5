"""The sources layer for comparisons: models' predictions of the same samples.

Either one table holds every prediction (one column per model), or the
tables, one per model, are joined on an id column. Every problem is an
:class:`~foldcorr.errors.InvalidInputError` naming the file and column; ids
that repeat or that are not in both tables are refused with counts.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd
import xarray as xr

from foldcorr.tensor import joint_tally
from foldcorr.errors import InvalidInputError
from foldcorr.sources.problems import file_error
from foldcorr.sources.locations import local_or_bytes
from foldcorr.sources.tables import classes_like, comparable_labels, read_table, text_labels
from foldcorr.tensor import ACTUAL, FOLD, PREDICTED, tally_columns

__all__ = ["PairSpec", "load_joint", "load_joint_cells", "ModelTable", "load_models",
           "same_kind", "load_clustered"]


@dataclass(frozen=True)
class PairSpec:
    """Which columns hold what when comparing two models.

    Attributes
    ----------
    truth : str
        Column of actual labels (read from the first table).
    pred_a, pred_b : str or None
        Prediction columns of model A and model B. With one table both are
        needed; with two tables they default to ``pred`` in each.
    pred : str
        Prediction column of each table when joining two tables.
    id : str or None
        Id column joining two tables.
    fold : str or None
        Fold column (of the first table); ``"auto"`` uses ``fold`` when present.
    classes : tuple or None
        Fixed class order.
    cluster : str or None
        Column of cluster ids (of the first table): samples sharing one are
        resampled, and swapped by the permutation test, together.
    """

    truth: str = ACTUAL
    pred_a: str | None = None
    pred_b: str | None = None
    pred: str = PREDICTED
    id: str | None = None
    fold: str | None = "auto"
    classes: tuple | None = None
    cluster: str | None = None


def _need(path, df, names) -> None:
    for name in names:
        if name is not None and name not in df.columns:
            raise file_error(path, f"column {name!r} not found; the table has {list(df.columns)!r}")


def _fold_of(df, spec) -> str | None:
    if spec.fold == "auto":
        return FOLD if FOLD in df.columns else None
    return spec.fold


def _first(values) -> str:
    return repr(values.iloc[0].item() if hasattr(values.iloc[0], "item") else values.iloc[0])


def same_kind(*columns: pd.Series, warn: bool = True) -> list[pd.Series]:
    """Label columns compared in one type: all as text when numeric meets non-numeric.

    With ``warn``, a :class:`~foldcorr.errors.LabelTypeWarning` says so when
    the text reads as numbers (see :func:`foldcorr.tensor.coding.compared_labels`);
    id columns pass ``warn=False``.

    Examples
    --------
    >>> [c.tolist() for c in same_kind(pd.Series([1, 2]), pd.Series(["1", "x"]))]
    [['1', '2'], ['1', 'x']]
    """
    numeric = [pd.api.types.is_numeric_dtype(s) and not pd.api.types.is_bool_dtype(s)
               for s in columns]
    if len(set(numeric)) < 2:
        return list(columns)
    if warn:  # the warning of the label rule, once, for a numeric and a text column
        comparable_labels(columns[numeric.index(True)], columns[numeric.index(False)])
    return [text_labels(s) for s in columns]


def load_joint(path, spec: PairSpec = PairSpec(), *, path_b=None) -> xr.DataArray:
    """Read two models' predictions of the same samples into a joint tensor.

    Parameters
    ----------
    path : str or path-like
        The table with truth (and both predictions, without ``path_b``).
    spec : PairSpec
        Column roles.
    path_b : str or path-like, optional
        A second table with model B's predictions, joined on ``spec.id``.

    Returns
    -------
    xarray.DataArray
        The joint tensor ``([fold,] actual, predicted_a, predicted_b)``, with
        ``source`` in ``attrs``.

    Raises
    ------
    InvalidInputError
        On a missing column, a missing ``--id`` with two tables, ids that
        repeat or differ between the tables (with counts), truth that differs
        between the tables, or labels as :func:`foldcorr.analysis.compare.joint_tally`.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp())
    >>> _ = (d / "a.csv").write_text("id,actual,predicted\\n1,x,x\\n2,y,x\\n")
    >>> _ = (d / "b.csv").write_text("id,predicted\\n2,y\\n1,x\\n")
    >>> j = load_joint(d / "a.csv", PairSpec(id="id"), path_b=d / "b.csv")
    >>> int(j.sel(actual="y", predicted_a="x", predicted_b="y"))
    1
    """
    pair = _pair_columns(path, spec, path_b)
    try:
        j = joint_tally(pair.truth, pair.a, pair.b, folds=pair.folds, classes=pair.classes,
                        names=pair.names)
    except InvalidInputError as exc:
        raise file_error(path, str(exc)) from None
    j.attrs["source"] = pair.source
    return j


def load_joint_cells(path, spec: PairSpec, *, path_b=None):
    """Read two models' predictions of the same samples by cluster (``spec.cluster``).

    The tables are read and checked as by :func:`load_joint`; the cluster
    column is read from the first table.

    Returns
    -------
    foldcorr.tensor.ClusterCells
        Joint cells ``(actual, predicted_a, predicted_b)`` by cluster and
        fold; its ``tensor()`` is what :func:`load_joint` returns.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "p.csv"
    >>> _ = p.write_text("actual,a,b,site\\nx,x,y,s1\\ny,x,y,s1\\ny,y,y,s2\\n")
    >>> load_joint_cells(p, PairSpec(pred_a="a", pred_b="b", cluster="site")).n_clusters
    2
    """
    from foldcorr.tensor import cluster_tally

    if spec.cluster is None:
        raise InvalidInputError("name the column of cluster ids (--cluster COL)")
    pair = _pair_columns(path, spec, path_b)
    try:
        return cluster_tally(pair.truth, pair.a, pair.b, cluster=pair.clusters,
                             folds=pair.folds, classes=pair.classes)
    except InvalidInputError as exc:
        raise file_error(path, str(exc)) from None


@dataclass(frozen=True)
class _Pair:
    """Row-aligned columns of a two-model comparison, as read and checked."""

    truth: pd.Series
    a: pd.Series
    b: pd.Series
    folds: pd.Series | None
    clusters: pd.Series | None
    classes: list | None
    names: tuple
    source: str


def _pair_columns(path, spec: PairSpec, path_b) -> _Pair:
    """Truth, both predictions, folds and clusters of one or two tables, checked."""
    path = local_or_bytes(path)
    df = read_table(path, labels=[spec.truth, spec.pred, spec.pred_a, spec.pred_b])
    fold = _fold_of(df, spec)
    if path_b is None:
        if spec.pred_a is None or spec.pred_b is None:
            raise InvalidInputError(
                "with one table, name both prediction columns (--pred-a COL --pred-b COL); "
                f"got pred_a={spec.pred_a!r}, pred_b={spec.pred_b!r}")
        if spec.pred_a == spec.pred_b:
            raise InvalidInputError(f"--pred-a and --pred-b name the same column {spec.pred_a!r}")
        _need(path, df, [spec.truth, spec.pred_a, spec.pred_b, fold, spec.cluster])
        truth, a, b = df[spec.truth], df[spec.pred_a], df[spec.pred_b]
        names = (spec.truth, spec.pred_a, spec.pred_b)
        source = path.name
    else:
        path_b = local_or_bytes(path_b)
        if spec.id is None:
            raise InvalidInputError(
                "with two tables, name the id column that joins them (--id COL)")
        col_a, col_b = spec.pred_a or spec.pred, spec.pred_b or spec.pred
        _need(path, df, [spec.id, spec.truth, col_a, fold, spec.cluster])
        other = read_table(path_b, labels=[spec.truth, col_b])
        _need(path_b, other, [spec.id, col_b])
        ids_a, ids_b = same_kind(df[spec.id], other[spec.id], warn=False)
        _check_ids(path, path_b, ids_a, ids_b, spec.id)
        position = pd.Index(ids_b).get_indexer(ids_a)
        other = other.iloc[position].reset_index(drop=True)
        df = df.reset_index(drop=True)
        if spec.truth in other.columns:
            t_a, t_b = same_kind(df[spec.truth], other[spec.truth])
            differ = (t_a.astype(object) != t_b.astype(object)).to_numpy()
            if differ.any():
                first = ids_a.iloc[int(differ.nonzero()[0][0])]
                raise InvalidInputError(
                    f"{path.name} and {path_b.name} disagree on column {spec.truth!r} for "
                    f"{int(differ.sum())} of {len(df)} ids (first id {first!r}); both tables "
                    "must describe the same samples")
        truth, a, b = df[spec.truth], df[col_a], other[col_b]
        names = (spec.truth, col_a, col_b)
        source = f"{path.name} + {path_b.name}"
    truth, a, b = same_kind(truth, a, b)
    classes = None if spec.classes is None else classes_like(spec.classes, truth)
    if path_b is not None:  # B's labels checked in B's own row order, before the join's
        try:
            tally_columns({PREDICTED: (col_b, b.iloc[np.argsort(position)])}, classes=classes)
        except InvalidInputError as exc:
            raise file_error(path_b, str(exc)) from None
    return _Pair(truth, a, b, None if fold is None else df[fold],
                 None if spec.cluster is None else df[spec.cluster], classes, names, source)


def _check_ids(path_a, path_b, ids_a: pd.Series, ids_b: pd.Series, name: str) -> None:
    for path, ids in ((path_a, ids_a), (path_b, ids_b)):
        if ids.isna().any():
            raise file_error(path, f"id column {name!r} has {int(ids.isna().sum())} missing ids")
        dup = ids.duplicated()
        if dup.any():
            raise file_error(path, f"id column {name!r} repeats {int(dup.sum())} ids (first "
                                   f"{_first(ids[dup])}); ids must be unique")
    only_a = ~ids_a.isin(ids_b)
    only_b = ~ids_b.isin(ids_a)
    if only_a.any() or only_b.any():
        parts = []
        if only_a.any():
            parts.append(f"{int(only_a.sum())} ids of {local_or_bytes(path_a).name} are not in "
                         f"{local_or_bytes(path_b).name} (first {_first(ids_a[only_a])})")
        if only_b.any():
            parts.append(f"{int(only_b.sum())} ids of {local_or_bytes(path_b).name} are not in "
                         f"{local_or_bytes(path_a).name} (first {_first(ids_b[only_b])})")
        raise InvalidInputError(f"the tables must hold the same ids in column {name!r}: "
                                + "; ".join(parts))


@dataclass(frozen=True)
class ModelTable:
    """Several models' predictions of the same samples, row-aligned.

    Attributes
    ----------
    truth : pandas.Series
        Actual label per sample.
    predictions : dict of str to pandas.Series
        Model name -> predicted label per sample, in the order given.
    folds : pandas.Series or None
        Fold per sample, or None.
    source : str
        The file name(s) read.
    clusters : pandas.Series or None
        Cluster id per sample (``spec.cluster``, from the first table), or None.
    """

    truth: pd.Series
    predictions: dict
    folds: pd.Series | None
    source: str
    clusters: pd.Series | None = None


def _model_names(paths) -> list[str]:
    stems = [local_or_bytes(p).stem for p in paths]
    return [s if stems.count(s) == 1 else f"{s} ({i + 1})" for i, s in enumerate(stems)]


def load_models(paths, spec: PairSpec = PairSpec(), *, models=None) -> ModelTable:
    """Read the predictions of two or more models of the same samples.

    Parameters
    ----------
    paths : sequence of str or path-like
        One table holding a column per model (``models``), or one table per
        model joined on ``spec.id`` (the first holds truth and folds; each
        holds its predictions in ``spec.pred``; models are named by file).
    spec : PairSpec
        Column roles (``truth``, ``pred``, ``id``, ``fold``).
    models : sequence of str, optional
        With one table, its prediction columns, one per model.

    Returns
    -------
    ModelTable

    Raises
    ------
    InvalidInputError
        On a missing or repeated column, fewer than two models, a missing
        ``id`` with several tables, ids that repeat or differ between tables,
        or truth that differs between tables.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp())
    >>> _ = (d / "p.csv").write_text("actual,m1,m2,m3\\nx,x,y,x\\ny,y,y,x\\n")
    >>> mt = load_models([d / "p.csv"], models=["m1", "m2", "m3"])
    >>> list(mt.predictions), mt.predictions["m3"].tolist()
    (['m1', 'm2', 'm3'], ['x', 'x'])
    """
    paths = [local_or_bytes(p) for p in paths]
    first = read_table(paths[0], labels=[spec.truth, spec.pred, *(models or [])])
    fold = _fold_of(first, spec)
    if len(paths) == 1:
        models = list(models or [])
        if len(models) < 2 or len(set(models)) < len(models):
            raise InvalidInputError(f"name two or more different prediction columns, one per "
                                    f"model (--models A,B,...); got {models!r}")
        _need(paths[0], first, [spec.truth, *models, fold, spec.cluster])
        predictions = {name: first[name] for name in models}
        source = paths[0].name
    else:
        if models is not None:
            raise InvalidInputError("--models names the prediction columns of one table; with "
                                    "one table per model, each table's column is --pred")
        if spec.id is None:
            raise InvalidInputError("with one table per model, name the id column that joins "
                                    "them (--id COL)")
        _need(paths[0], first, [spec.id, spec.truth, spec.pred, fold, spec.cluster])
        first = first.reset_index(drop=True)
        predictions = {}
        for name, path in zip(_model_names(paths), paths):
            table = first if path == paths[0] else _aligned(paths[0], first, path, spec)
            predictions[name] = table[spec.pred]
        source = " + ".join(p.name for p in paths)
    truth, *preds = same_kind(first[spec.truth], *predictions.values())
    return ModelTable(truth, dict(zip(predictions, preds)),
                      None if fold is None else first[fold], source,
                      None if spec.cluster is None else first[spec.cluster])


def _aligned(path_a: Path, first: pd.DataFrame, path: Path, spec: PairSpec) -> pd.DataFrame:
    """The table ``path`` in the row order of ``first``, joined on ``spec.id``; truth checked."""
    other = read_table(path, labels=[spec.truth, spec.pred])
    _need(path, other, [spec.id, spec.pred])
    ids_a, ids_b = same_kind(first[spec.id], other[spec.id], warn=False)
    _check_ids(path_a, path, ids_a, ids_b, spec.id)
    other = other.iloc[pd.Index(ids_b).get_indexer(ids_a)].reset_index(drop=True)
    if spec.truth in other.columns:
        t_a, t_b = same_kind(first[spec.truth], other[spec.truth])
        differ = (t_a.astype(object) != t_b.astype(object)).to_numpy()
        if differ.any():
            raise InvalidInputError(
                f"{path_a.name} and {path.name} disagree on column {spec.truth!r} for "
                f"{int(differ.sum())} of {len(first)} ids (first id "
                f"{ids_a.iloc[int(differ.nonzero()[0][0])]!r}); every table must describe the "
                "same samples")
    return other


def load_clustered(path, *, truth: str = ACTUAL, pred: str = PREDICTED, fold: str | None = "auto",
                   cluster: str, classes=None):
    """Read a prediction table whole and count its samples by cluster (and fold).

    Parameters
    ----------
    path : str or path-like
        A prediction table (CSV, Parquet, JSON Lines).
    truth, pred, fold : str
        Column roles, as for :func:`foldcorr.sources.load`.
    cluster : str
        Column of cluster ids: samples sharing one are resampled together.
    classes : sequence, optional
        Fixed class order.

    Returns
    -------
    foldcorr.tensor.ClusterCells
        Its ``tensor()`` is the table's confusion tensor.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "p.csv"
    >>> _ = p.write_text("actual,predicted,site\\nx,x,s1\\ny,x,s1\\ny,y,s2\\n")
    >>> load_clustered(p, cluster="site").n_clusters
    2
    """
    from foldcorr.tensor import cluster_tally

    path = local_or_bytes(path)
    df = read_table(path, labels=[truth, pred])
    fold = FOLD if fold == "auto" and FOLD in df.columns else (None if fold == "auto" else fold)
    _need(path, df, [truth, pred, cluster, fold])
    actual, predicted = same_kind(df[truth], df[pred])
    chosen = None if classes is None else classes_like(classes, actual)
    try:
        return cluster_tally(actual, predicted, cluster=df[cluster],
                             folds=None if fold is None else df[fold], classes=chosen)
    except InvalidInputError as exc:
        raise file_error(path, str(exc)) from None
