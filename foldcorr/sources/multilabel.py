"""Sources for multilabel tables, score sweeps and target prevalences.

A multilabel prediction table holds either indicator columns (one 0/1 column
per label and side, named explicitly or matched by prefix and suffix) or one
column of delimited label sets per side (``"gull|tern"``; an empty cell is the
empty set). A score table holds a binary truth column and a score column, or
one of each per label. Every problem is an
:class:`~foldcorr.errors.InvalidInputError` naming the file, column and row.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd
import xarray as xr

from foldcorr.errors import InvalidInputError, OptionError
from foldcorr.tensor import indicators_from_sets, multilabel_tally
from foldcorr.sources.problems import file_error
from foldcorr.sources.locations import local_or_bytes
from foldcorr.sources.tables import read_table
from foldcorr.tensor import FOLD

__all__ = ["MultilabelSpec", "ScoreSpec", "load_multilabel", "load_scores", "ScoreTable",
           "read_prevalence"]


@dataclass(frozen=True)
class MultilabelSpec:
    """Which columns of a table hold the multilabel truth and predictions.

    Exactly one of three layouts is used: ``truth_cols`` with ``pred_cols``
    (indicator columns, paired in order), ``truth_prefix`` with
    ``pred_prefix`` (indicator columns paired by the suffix after the
    prefix, which becomes the label name), or ``sep`` with ``truth`` and
    ``pred`` (one column of delimited label sets per side).

    Attributes
    ----------
    truth_cols, pred_cols : tuple of str or None
    truth_prefix, pred_prefix : str or None
    truth, pred : str
        Label-set columns (used with ``sep``).
    sep : str or None
        Delimiter of the label sets.
    fold : str or None
        Fold column; ``"auto"`` uses ``fold`` when present.
    weight : str or None
        Sample weight column.
    labels : tuple or None
        Fixed label list for label sets; a label outside it is an error.
    """

    truth_cols: tuple | None = None
    pred_cols: tuple | None = None
    truth_prefix: str | None = None
    pred_prefix: str | None = None
    truth: str = "actual"
    pred: str = "predicted"
    sep: str | None = None
    fold: str | None = "auto"
    weight: str | None = None
    labels: tuple | None = None


def _layout(spec) -> str:
    def given(*names):
        return any(getattr(spec, n, None) is not None for n in names)

    cols = given("truth_cols", "pred_cols", "score_cols")
    prefix = given("truth_prefix", "pred_prefix", "score_prefix")
    sets = getattr(spec, "sep", None) is not None
    chosen = [name for name, on in (("columns", cols), ("prefix", prefix), ("sets", sets)) if on]
    if len(chosen) > 1:
        raise OptionError(
            "choose one multilabel layout: --truth-cols/--pred-cols, --truth-prefix/--pred-prefix "
            f"or --sep with --truth/--pred; got {' and '.join(chosen)}")
    return chosen[0] if chosen else ""


def _pair_columns(path, columns: list, truth_cols, other_cols, truth_prefix, other_prefix,
                  other_name: str) -> tuple[list, list, list]:
    """Truth and other columns, paired, with the label of each pair."""
    if truth_cols is not None or other_cols is not None:
        if truth_cols is None or other_cols is None:
            raise OptionError(f"--truth-cols and --{other_name}-cols go together; give both")
        truth_cols, other_cols = list(truth_cols), list(other_cols)
        if len(truth_cols) != len(other_cols):
            raise OptionError(
                f"--truth-cols names {len(truth_cols)} columns but --{other_name}-cols names "
                f"{len(other_cols)}; they are paired in order")
        _require(path, columns, truth_cols + other_cols)
        return truth_cols, other_cols, truth_cols
    if truth_prefix is None or other_prefix is None:
        raise OptionError(f"--truth-prefix and --{other_name}-prefix go together; give both")
    if not truth_prefix or not other_prefix or truth_prefix == other_prefix:
        raise OptionError(f"--truth-prefix and --{other_name}-prefix must be different and "
                          f"non-empty; got {truth_prefix!r} and {other_prefix!r}")
    t = {c[len(truth_prefix):]: c for c in columns
         if c.startswith(truth_prefix) and not c.startswith(other_prefix)}
    o = {c[len(other_prefix):]: c for c in columns
         if c.startswith(other_prefix) and not c.startswith(truth_prefix)}
    if not t:
        raise file_error(path, f"no column starts with the truth prefix {truth_prefix!r}; "
                               f"the table has {columns!r}")
    if set(t) != set(o):
        raise file_error(path, f"columns do not pair by suffix: truth only {sorted(set(t) - set(o))!r}, "
                               f"{other_name} only {sorted(set(o) - set(t))!r}")
    labels = [s for s in t]  # table order of the truth columns
    return [t[s] for s in labels], [o[s] for s in labels], labels


def _require(path, columns, names) -> None:
    for name in names:
        if name is not None and name not in columns:
            raise file_error(path, f"column {name!r} not found; the table has {list(columns)!r}")


def _indicator_block(path, df: pd.DataFrame, cols: list) -> np.ndarray:
    out = np.empty((len(df), len(cols)), dtype=bool)
    for j, col in enumerate(cols):
        s = df[col]
        if s.isna().any():
            raise file_error(path, f"column {col!r} row {int(np.flatnonzero(s.isna())[0]) + 1}: "
                                   "missing indicator")
        if pd.api.types.is_bool_dtype(s):
            out[:, j] = s.to_numpy(dtype=bool)
            continue
        v = s.astype(str).str.strip().str.lower() if s.dtype == object else s
        if s.dtype == object:
            mapped = v.map({"1": True, "0": False, "true": True, "false": False,
                            "1.0": True, "0.0": False})
            bad = mapped.isna().to_numpy()
            values = mapped
        else:
            bad = ~np.isin(v.to_numpy(), (0, 1))
            values = v
        if bad.any():
            row = int(np.flatnonzero(bad)[0])
            raise file_error(path, f"column {col!r} row {row + 1}: indicator "
                                   f"{_py(s.iloc[row])!r} is not 0/1 or true/false")
        out[:, j] = np.asarray(values, dtype=bool)
    return out


def _label_sets(path, s: pd.Series, sep: str) -> list[list]:
    if not sep:
        raise OptionError("--sep must be a non-empty delimiter, e.g. '|'")
    text = s.astype(object).where(s.notna(), "")
    return [[p.strip() for p in str(v).split(sep) if p.strip()] for v in text]


def _fold(path, df, fold):
    name = (FOLD if FOLD in df.columns else None) if fold == "auto" else fold
    if name is not None:
        _require(path, df.columns, [name])
        if df[name].isna().any():
            raise file_error(path, f"column {name!r} row {int(np.flatnonzero(df[name].isna())[0]) + 1}: "
                                   "missing fold label")
    return name


def load_multilabel(path, spec: MultilabelSpec) -> xr.DataArray:
    """Read a multilabel prediction table into a multilabel tensor.

    Parameters
    ----------
    path : str or path-like
        A CSV, TSV, Parquet or JSON Lines table.
    spec : MultilabelSpec
        The layout and columns.

    Returns
    -------
    xarray.DataArray
        Dims ``([fold,] label, actual, predicted)``, ``source`` in ``attrs``.

    Raises
    ------
    InvalidInputError
        On a missing column, an indicator other than 0/1, columns that do
        not pair, or a label outside ``spec.labels``.
    OptionError
        On a mix of layouts or unpaired options.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "tags.csv"
    >>> _ = p.write_text("actual,predicted\\ngull|tern,gull\\n,tern\\n")
    >>> t = load_multilabel(p, MultilabelSpec(sep="|"))
    >>> t.coords["label"].values.tolist(), t.sel(label="tern").values.tolist()
    (['gull', 'tern'], [[0, 1], [1, 0]])
    """
    path = local_or_bytes(path)
    layout = _layout(spec)
    if not layout:
        raise OptionError("multilabel mode needs --truth-cols/--pred-cols, "
                          "--truth-prefix/--pred-prefix, or --sep with --truth/--pred")
    df = read_table(path)
    columns = list(df.columns)
    if layout == "sets":
        _require(path, columns, [spec.truth, spec.pred])
        truth_sets = _label_sets(path, df[spec.truth], spec.sep)
        pred_sets = _label_sets(path, df[spec.pred], spec.sep)
        labels = spec.labels
        if labels is None:
            seen = {x for s in truth_sets + pred_sets for x in s}
            labels = sorted(seen)
        try:
            truth, labels = indicators_from_sets(truth_sets, labels, name=f"column {spec.truth!r}")
            pred, _ = indicators_from_sets(pred_sets, labels, name=f"column {spec.pred!r}")
        except InvalidInputError as exc:
            raise file_error(path, str(exc)) from None
        used = {"truth_column": spec.truth, "pred_column": spec.pred, "sep": spec.sep}
    else:
        t_cols, p_cols, labels = _pair_columns(path, columns, spec.truth_cols, spec.pred_cols,
                                               spec.truth_prefix, spec.pred_prefix, "pred")
        truth = _indicator_block(path, df, t_cols)
        pred = _indicator_block(path, df, p_cols)
        used = {"truth_columns": ",".join(t_cols), "pred_columns": ",".join(p_cols)}
    fold = _fold(path, df, spec.fold)
    weights = None
    if spec.weight is not None:
        _require(path, columns, [spec.weight])
        weights = pd.to_numeric(df[spec.weight], errors="coerce").to_numpy(dtype=float)
    try:
        t = multilabel_tally(truth, pred, labels=labels,
                             folds=None if fold is None else df[fold].to_numpy(), weights=weights)
    except InvalidInputError as exc:
        raise file_error(path, str(exc)) from None
    t.attrs.update({"source": path.name, **used, **({"fold_column": fold} if fold else {})})
    return t


@dataclass(frozen=True)
class ScoreSpec:
    """Which columns of a table hold truth and scores for a sweep.

    Binary: ``truth`` and ``score``. Multilabel: ``truth_cols`` with
    ``score_cols`` (paired in order) or ``truth_prefix`` with
    ``score_prefix`` (paired by suffix).

    Attributes
    ----------
    truth, score : str
    truth_cols, score_cols : tuple of str or None
    truth_prefix, score_prefix : str or None
    fold : str or None
        Fold column; ``"auto"`` uses ``fold`` when present.
    positive : str or None
        The truth value that means positive; without it the truth must be
        0/1 or true/false.
    """

    truth: str = "actual"
    score: str = "score"
    truth_cols: tuple | None = None
    score_cols: tuple | None = None
    truth_prefix: str | None = None
    score_prefix: str | None = None
    fold: str | None = "auto"
    positive: str | None = None


@dataclass(frozen=True)
class ScoreTable:
    """Truth, scores and folds read for a sweep.

    Attributes
    ----------
    truth : numpy.ndarray of bool, shape (n,) or (n, L)
    scores : numpy.ndarray of float64, same shape
    labels : list or None
        Label names for a multilabel sweep; None for a binary one.
    folds : numpy.ndarray or None
    source : str
        File name.
    """

    truth: np.ndarray
    scores: np.ndarray
    labels: list | None
    folds: np.ndarray | None
    source: str


def _binary_truth(path, s: pd.Series, col: str, positive) -> np.ndarray:
    if s.isna().any():
        raise file_error(path, f"column {col!r} row {int(np.flatnonzero(s.isna())[0]) + 1}: "
                               "missing truth value")
    if positive is not None:
        text = s.astype(str).str.strip()
        hit = (text == str(positive).strip()).to_numpy()
        if not hit.any():
            shown = sorted(text.unique().tolist())[:10]
            raise file_error(path, f"--positive {positive!r} does not occur in column {col!r}; "
                                   f"its values include {shown!r}")
        return hit
    if pd.api.types.is_bool_dtype(s):
        return s.to_numpy(dtype=bool)
    values = s.astype(str).str.strip().str.lower()
    uniq = sorted(values.unique().tolist())
    if len(uniq) > 2:
        raise file_error(path, f"column {col!r} has {len(uniq)} distinct values "
                               f"({uniq[:10]!r}); a sweep needs binary truth: give --positive VALUE")
    mapped = values.map({"1": True, "0": False, "true": True, "false": False,
                         "1.0": True, "0.0": False})
    if mapped.isna().any():
        raise file_error(path, f"column {col!r}: values {uniq!r} are not 0/1 or true/false; "
                               "say which one is positive with --positive VALUE")
    return mapped.to_numpy(dtype=bool)


def _score_column(path, s: pd.Series, col: str) -> np.ndarray:
    values = pd.to_numeric(s, errors="coerce") if not pd.api.types.is_numeric_dtype(s) else s
    values = values.astype(float).to_numpy()
    bad = ~np.isfinite(values)
    if bad.any():
        row = int(np.flatnonzero(bad)[0])
        raw = _py(s.iloc[row])
        what = "missing" if pd.isna(raw) else f"{raw!r} is not a finite number"
        raise file_error(path, f"column {col!r} row {row + 1}: score {what} "
                               f"({int(bad.sum())} bad scores in all); scores must be finite numbers")
    return values


def load_scores(path, spec: ScoreSpec) -> ScoreTable:
    """Read truth and scores for a sweep.

    Parameters
    ----------
    path : str or path-like
        A CSV, TSV, Parquet or JSON Lines table.
    spec : ScoreSpec

    Returns
    -------
    ScoreTable

    Raises
    ------
    InvalidInputError
        On a missing column, a truth column with more than two values and no
        ``positive``, or scores that are NaN, infinite or not numbers.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "s.csv"
    >>> _ = p.write_text("actual,score\\nowl,0.9\\nwren,0.2\\n")
    >>> load_scores(p, ScoreSpec(positive="owl")).truth.tolist()
    [True, False]
    """
    path = local_or_bytes(path)
    multi = _layout(spec)
    if multi == "sets":  # pragma: no cover - ScoreSpec has no sep
        raise OptionError("label sets are not supported for sweeps")
    df = read_table(path)
    columns = list(df.columns)
    fold = _fold(path, df, spec.fold)
    if multi:
        t_cols, s_cols, labels = _pair_columns(path, columns, spec.truth_cols, spec.score_cols,
                                               spec.truth_prefix, spec.score_prefix, "score")
        truth = np.column_stack([_binary_truth(path, df[c], c, spec.positive) for c in t_cols])
        scores = np.column_stack([_score_column(path, df[c], c) for c in s_cols])
    else:
        _require(path, columns, [spec.truth, spec.score])
        truth = _binary_truth(path, df[spec.truth], spec.truth, spec.positive)
        scores = _score_column(path, df[spec.score], spec.score)
        labels = None
    return ScoreTable(truth=truth, scores=scores, labels=labels,
                      folds=None if fold is None else df[fold].to_numpy(), source=path.name)


def read_prevalence(value: str):
    """Parse a target prevalence: ``uniform``, ``a=0.2,b=0.8`` or a CSV file.

    The CSV has a header and two columns, class and share (the first two
    columns are used).

    Parameters
    ----------
    value : str

    Returns
    -------
    str or dict
        ``"uniform"`` or a mapping of class name (text) to share.

    Raises
    ------
    InvalidInputError
        On a malformed pair, a repeated class, a share that is not a number,
        or an unreadable file.

    Examples
    --------
    >>> read_prevalence("cod=0.25, hake=0.75")
    {'cod': 0.25, 'hake': 0.75}
    """
    text = value.strip()
    if text == "uniform":
        return "uniform"
    if text.lower().endswith((".csv", ".tsv")):
        path = Path(text)
        df = read_table(path)
        if df.shape[1] < 2:
            raise file_error(path, f"a prevalence file needs two columns (class, share); got "
                                   f"{list(df.columns)!r}")
        pairs = [(str(c).strip(), v) for c, v in zip(df.iloc[:, 0], df.iloc[:, 1])]
    else:
        pairs = []
        for item in text.split(","):
            name, eq, share = item.partition("=")
            if not eq or not name.strip():
                raise InvalidInputError(
                    f"--prevalence: expected 'uniform', CLASS=SHARE pairs separated by commas, "
                    f"or a .csv file; got {value!r}")
            pairs.append((name.strip(), share.strip()))
    out: dict = {}
    for name, share in pairs:
        if name in out:
            raise InvalidInputError(f"--prevalence names the class {name!r} twice")
        try:
            out[name] = float(share)
        except (TypeError, ValueError):
            raise InvalidInputError(
                f"--prevalence: share of class {name!r} must be a number; got {share!r}") from None
    return out


def _py(value):
    return value.item() if isinstance(value, np.generic) else value
