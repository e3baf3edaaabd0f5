"""Running the score pipeline: load a source, evaluate it by its kind, run the analyses.

:func:`score` loads a source (a table, a counts matrix, a saved evaluation, a
dataset folder or glob, or a tensor in memory), tallies it, evaluates it and
runs the analyses that :class:`~foldcorr.pipeline.options.ScoreOptions` asks
for; the command line's ``score``, ``demo``, ``show`` and ``gate`` call it and
only render what it returns.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import fields
from pathlib import Path
from typing import TYPE_CHECKING, Any

from foldcorr.errors import OptionError
from foldcorr.pipeline.options import ScoreOptions, given_text, option_namer

if TYPE_CHECKING:
    import os

    import xarray as xr

    from foldcorr.evaluation import Evaluation
    from foldcorr.tensor import ClusterCells
    from foldcorr.tensor.samples import Samples

__all__ = ["TABLE_OPTIONS", "MULTILABEL_OPTIONS", "KINDS", "score", "evaluate_with",
           "load_source", "replay", "load_evaluation", "load_gate_inputs"]

#: Options naming the multilabel layout of a table; any of them makes a source multilabel.
MULTILABEL_OPTIONS = ("truth_cols", "pred_cols", "truth_prefix", "pred_prefix", "sep")
#: Options describing how a source is read (see :func:`load_source`).
TABLE_OPTIONS = ("truth", "pred", "fold", "weight", "classes", "cluster", "where", "matrix",
                 "engine", "scheduler", "skip_bad_files", "progress", "count", "na_values",
                 *MULTILABEL_OPTIONS)
_SPEC_KEYS = ("truth", "pred", "fold", "weight", "classes")


# ----------------------------------------------------------------------------
# analyses: each is (evaluation, options, samples) -> evaluation, unchanged when not
# asked for; samples holds per-sample data beside the tensor (``cluster``: ClusterCells).
# Repair, shift and intervals work from the nonzero cells, so a sparse tensor stays sparse;
# only intervals over clusters take dense cells (refused with a TensorTooLargeError when
# they would not fit in memory).

#: Arrays of the tensor's size the clustered intervals hold at once (the tensor and
#: one block of resampled tensors, with room for the statistics' sums).
ANALYSIS_COPIES = 3


def _dense(ev):
    from foldcorr.tensor import as_dense

    return as_dense(ev.tensor, copies=ANALYSIS_COPIES,
                    what="intervals over clusters on a tensor")


def _skipped_files(ev, options, samples):
    if not ev.tensor.attrs.get("skipped_files"):
        return ev
    from foldcorr.sources.stream import SkippedFiles

    return ev.with_extra("skipped_files", SkippedFiles.of(ev.tensor))


def _shift(ev, options, samples):
    if options.prevalence is None:
        return ev
    from foldcorr.analysis.shift import shifted_figures

    return ev.with_extra("shifted", shifted_figures(ev.tensor, options.prevalence,
                                                    undefined=ev.undefined))


def _repair(ev, options, samples):
    from foldcorr.analysis.repair import repair_analysis

    # complete: every confusion is ranked and kept (JSON carries them all); reports cut to --top
    return ev.with_extra("repair", repair_analysis(ev.tensor, top=None,
                                                   undefined=options.undefined))


#: Per tensor kind: the interval analysis, as (extras key, module, function).
_INTERVALS = {
    "multiclass": ("uncertainty", "foldcorr.analysis.uncertainty", "summarise_uncertainty"),
    "multilabel": ("intervals", "foldcorr.analysis.multilabel", "multilabel_intervals"),
}


def _intervals(ev, options, samples):
    settings = options.interval_settings()
    if settings is None:
        return ev
    import importlib

    key, module, name = _INTERVALS[ev.kind]
    compute = getattr(importlib.import_module(module), name)
    if samples.get("cluster") is None:
        return ev.with_extra(key, compute(ev.tensor, **settings, undefined=ev.undefined))
    return ev.with_extra(key, compute(_dense(ev), **settings, cluster=samples["cluster"],
                                      undefined=ev.undefined))


def _groups(ev, options, samples):
    if options.groups is None:
        return ev
    if ev.kind != "multiclass":
        raise OptionError("class groups merge the classes of a multiclass evaluation; this one "
                          f"is {ev.kind} (each label its own 2 x 2 table): drop the groups")
    from foldcorr.pipeline.groups import evaluate_groups

    return ev.with_extra("groups", evaluate_groups(ev, options.groups, other=options.groups_other,
                                                   intervals=options.interval_settings()))


#: Per tensor kind: its analyses, in the order they run (one evaluation serves every kind).
KINDS = {
    "multiclass": (("skipped_files", _skipped_files), ("shift", _shift), ("repair", _repair),
                   ("intervals", _intervals), ("groups", _groups)),
    "multilabel": (("intervals", _intervals), ("groups", _groups)),
}


def evaluate_with(tensor: xr.DataArray, options: ScoreOptions | None = None, *,
                  cluster: ClusterCells | None = None) -> Evaluation:
    """Evaluate a tensor in memory and run the analyses of ``options`` on it.

    Parameters
    ----------
    tensor : xarray.DataArray
        Confusion tensor: dims ``([fold,] actual, predicted)``, or
        ``([fold,] label, actual, predicted)`` for multilabel.
    options : ScoreOptions, optional
        Default: ``ScoreOptions()``.
    cluster : foldcorr.tensor.ClusterCells, optional
        The same samples counted by cluster: intervals resample whole clusters.

    Returns
    -------
    Evaluation
        With the analyses in ``extras`` and every warning.

    Examples
    --------
    >>> from foldcorr.tensor import confusion_tensor
    >>> ev = evaluate_with(confusion_tensor([[6, 2], [1, 3]], ["p", "n"]))
    >>> round(ev.rk, 4), sorted(ev.extras)
    (0.4781, ['repair'])
    """
    options = ScoreOptions() if options is None else options
    from foldcorr.evaluation import evaluate

    ev = evaluate(tensor, undefined=options.undefined, rank_by=options.rank_by)
    for name, step in KINDS[ev.kind]:
        if name in options.analyses:
            ev = step(ev, options, {"cluster": cluster})
    return ev


def load_source(source, *, names: Mapping | None = None, **table):
    """Read a source into a confusion tensor: the one place where sources are read.

    Parameters
    ----------
    source : str or path-like
        Prediction table, dataset folder or glob, counts matrix (``matrix``)
        or saved evaluation (``.nc``).
    names : mapping, optional
        How options are named in messages.
    **table
        Any of :data:`TABLE_OPTIONS`; those not given take the defaults of
        the readers. Any of :data:`MULTILABEL_OPTIONS` reads a multilabel
        tensor (``classes`` is then the label list).

    Returns
    -------
    xarray.DataArray

    Raises
    ------
    OptionError
        On an unknown option or options that do not combine.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "p.csv"
    >>> _ = p.write_text("actual,predicted\\na,a\\nb,a\\n")
    >>> load_source(p).dims
    ('actual', 'predicted')
    """
    name = option_namer(names)
    unknown = sorted(set(table) - set(TABLE_OPTIONS))
    if unknown:
        raise OptionError(f"unknown option {unknown[0]!r}; expected one of {list(TABLE_OPTIONS)!r}")
    _check_multilabel(table, {}, name)
    if any(table.get(key) is not None for key in MULTILABEL_OPTIONS):
        from foldcorr.sources.multilabel import MultilabelSpec, load_multilabel

        spec = {k: table[k] for k in (*MULTILABEL_OPTIONS, *_SPEC_KEYS) if table.get(k) is not None}
        return load_multilabel(source, MultilabelSpec(labels=spec.pop("classes", None), **spec))
    engine = table.get("engine")
    if table.get("scheduler") is not None and engine != "dask":
        raise OptionError(f"`{name('scheduler')}` needs `{name('engine')} dask`; got "
                          f"{given_text(name('engine'), engine or 'local')}")
    if table.get("matrix") and (table.get("where") is not None or engine not in (None, "local")):
        raise OptionError(f"`{name('where')}` and `{name('engine')}` apply to prediction tables, "
                          f"not to `{name('matrix')}`")
    if table.get("matrix") and table.get("na_values"):
        raise OptionError(f"`{name('na_values')}` applies to prediction tables, not to "
                          f"`{name('matrix')}`")
    from foldcorr.sources import load

    return load(source, **table)


def _check_multilabel(table: dict, given: dict, name) -> None:
    """Refuse options of multiclass scoring given with a multilabel layout."""
    if not any(table.get(key) is not None for key in MULTILABEL_OPTIONS):
        return
    if table.get("matrix"):
        raise OptionError(f"`{name('matrix')}` reads a multiclass counts matrix; it does not "
                          "combine with the multilabel options")
    for key in ("prevalence", "where", "scheduler", "na_values"):
        if given.get(key, table.get(key)) is not None:
            raise OptionError(f"`{name(key)}` applies to multiclass scoring; it does not combine "
                              "with the multilabel options")
    if table.get("engine") not in (None, "local") or table.get("skip_bad_files"):
        raise OptionError(f"`{name('engine')}` and `{name('skip_bad_files')}` apply to multiclass "
                          "scoring; multilabel tables are read whole, in this process")


def score(source: str | os.PathLike[str] | xr.DataArray, *,
          names: Mapping[str, str] | None = None, **options: Any) -> Evaluation:
    """Load, tally, evaluate and analyse: what ``foldcorr score`` runs.

    Parameters
    ----------
    source : str, path-like or xarray.DataArray
        A prediction table (CSV, Parquet, JSON Lines), a dataset folder or a
        glob of them, a counts matrix (with ``matrix=True``), a saved
        evaluation (``.nc``), or a confusion tensor in memory.
    names : mapping, optional
        How options are named in messages (the command line passes its flags).
    **options
        Table options (:data:`TABLE_OPTIONS`, see :func:`load_source`; not
        with a tensor) and the fields of :class:`ScoreOptions`.

    Returns
    -------
    Evaluation
        With the analyses in ``extras`` and every warning.

    Raises
    ------
    OptionError
        On an option that does not check, is unknown or does not combine.
    InvalidInputError
        On a source that cannot be read.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "p.csv"
    >>> _ = p.write_text("actual,predicted,fold\\na,a,1\\nb,a,1\\nb,b,2\\na,a,2\\n")
    >>> ev = score(p, undefined="nan")
    >>> ev.fold_summary.count, ev.undefined
    (2, 'nan')
    """
    keys = [f.name for f in fields(ScoreOptions)]
    unknown = sorted(set(options) - set(keys) - set(TABLE_OPTIONS))
    if unknown:
        raise OptionError(f"unknown option {unknown[0]!r}; expected table options "
                          f"{list(TABLE_OPTIONS)!r} or options of ScoreOptions {keys!r}")
    given = {k: v for k, v in options.items() if k in keys}
    table = {k: v for k, v in options.items() if k not in keys}
    _check_multilabel(table, given, option_namer(names))
    chosen = ScoreOptions(**given, names=names)
    if hasattr(source, "dims"):
        if table:
            raise OptionError(f"table options {sorted(table)!r} describe a file; a tensor in "
                              "memory takes only the options of ScoreOptions")
        return evaluate_with(source, chosen)
    if table.get("cluster") is not None:
        cells = _load_clustered(source, table, option_namer(names))
        tensor = cells.tensor().assign_attrs(source=Path(source).name,
                                              cluster_column=table["cluster"])
        return evaluate_with(tensor, chosen, cluster=cells)
    table.pop("cluster", None)
    return evaluate_with(load_source(source, names=names, **table), chosen)


#: Table options that do not combine with ``cluster`` (the table is read whole, unweighted).
_NOT_WITH_CLUSTER = ("weight", "count", "where", "matrix", "engine", "scheduler",
                     "skip_bad_files", "na_values", *MULTILABEL_OPTIONS)


def _load_clustered(source, table: dict, name):
    """The samples of a prediction table by cluster (``cluster`` option)."""
    wrong = [k for k in _NOT_WITH_CLUSTER if table.get(k) not in (None, False, "local", ())]
    if wrong:
        raise OptionError(f"`{name('cluster')}` reads a prediction table whole and unweighted; "
                          f"it does not combine with `{name(wrong[0])}`")
    from foldcorr.sources.saved import is_saved_path

    if is_saved_path(source):
        raise OptionError(f"`{name('cluster')}` needs the prediction table; a saved evaluation "
                          "holds counts, not the samples' clusters")
    from foldcorr.sources.paired import load_clustered

    return load_clustered(source, **{k: table[k] for k in (*_SPEC_KEYS, "cluster")
                                     if k in table and k != "weight"})


def replay(path: str | os.PathLike[str], *, names: Mapping[str, str] | None = None,
           **overrides: Any) -> tuple[Evaluation, ScoreOptions]:
    """Evaluate a saved evaluation again, through :func:`score`, with the options it was saved with.

    Parameters
    ----------
    path : str or path-like
        A ``.nc`` file written with the options of :func:`saved_options`.
    names : mapping, optional
        How options are named in messages.
    **overrides
        Fields of :class:`ScoreOptions` to change (e.g. ``top``).

    Returns
    -------
    tuple
        ``(evaluation, options)``: what :func:`score` returned and the
        :class:`ScoreOptions` it ran with.

    Raises
    ------
    InvalidInputError
        When the file cannot be read or its options are of an unknown version.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> from foldcorr.pipeline.options import saved_options
    >>> from foldcorr.sources.saved import save_evaluation
    >>> from foldcorr.tensor import confusion_tensor
    >>> out = pathlib.Path(tempfile.mkdtemp()) / "m.nc"
    >>> t = confusion_tensor([[5, 1], [2, 7]], ["cat", "dog"])
    >>> _ = save_evaluation(out, t, options=saved_options(ScoreOptions(undefined="nan")))
    >>> ev, options = replay(out, top=5)
    >>> ev.undefined, options.top
    ('nan', 5)
    """
    from foldcorr.sources.saved import load_saved

    saved = load_saved(path)
    stored = ScoreOptions.from_saved(saved.options, source=Path(path).name)
    options = ScoreOptions(**{**stored.to_dict(), **overrides}, names=names)
    return score(saved.tensor, **options.to_dict()), options


def load_evaluation(path: str | os.PathLike[str], *, undefined: str | None = None,
                    id_column: str | None = None, check_table: bool = True,
                    cluster: str | None = None,
                    **table: Any) -> tuple[Evaluation, Samples | None]:
    """Evaluation (no analyses) and per-sample records of a table or a saved evaluation.

    Parameters
    ----------
    path : str or path-like
        A prediction table, a counts matrix (``matrix=True``) or a saved
        evaluation (``.nc``).
    undefined : {"zero", "nan"}, optional
        Default: as saved, else ``"zero"``.
    id_column : str, optional
        Column of unique sample ids of a table (per-sample records are read).
    check_table : bool, default True
        With a saved evaluation: refuse table options (they describe no table).
    cluster : str, optional
        Column of cluster ids of a table, kept in the per-sample records
        (needs ``id_column``; a saved evaluation holds no clusters).
    **table
        Table options (see :func:`load_source`); with a saved evaluation only
        ``classes`` applies, as a new class order.

    Returns
    -------
    tuple
        ``(evaluation, samples)``; ``samples`` is None without per-sample records.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "p.csv"
    >>> _ = p.write_text("actual,predicted\\na,a\\nb,a\\nb,b\\n")
    >>> ev, samples = load_evaluation(p)
    >>> ev.n, samples is None
    (3, True)
    """
    from foldcorr.sources.saved import is_saved_path, load_saved
    from foldcorr.sources.saving import read_samples

    no_analyses = {"analyses": ()}
    if cluster is not None:
        _check_sample_clusters(path, id_column, table)
    if is_saved_path(path):
        if check_table:
            from foldcorr.sources import TableSpec
            from foldcorr.sources.saved import check_saved_options

            spec = TableSpec(**{k: table[k] for k in _SPEC_KEYS if k in table})
            check_saved_options(path, spec, matrix=table.get("matrix", False), id_column=id_column,
                                count=table.get("count"))
        saved = load_saved(path)
        stored = ScoreOptions.from_saved(saved.options, source=Path(path).name)
        classes = table.get("classes")
        tensor = saved.tensor if classes is None else load_source(path, classes=classes)
        return score(tensor, undefined=undefined or stored.undefined, **no_analyses), saved.samples
    tensor = load_source(path, **table)
    samples = None
    if id_column and not table.get("matrix"):
        samples = read_samples(path, tensor, id_column, cluster=cluster)
    return score(tensor, **({} if undefined is None else {"undefined": undefined}),
                 **no_analyses), samples


def _check_sample_clusters(path, id_column, table: dict) -> None:
    """Refuse, in one line, a ``cluster`` column that per-sample records cannot carry."""
    from foldcorr.sources.saved import is_saved_path

    if is_saved_path(path):
        raise OptionError(f"`--cluster` needs prediction tables; the saved evaluation "
                          f"{Path(path).name!r} holds counts and ids, not the samples' clusters")
    wrong = [k for k in _NOT_WITH_CLUSTER if table.get(k) not in (None, False, "local")]
    if wrong:
        raise OptionError("`--cluster` reads the samples of a prediction table one by one; it "
                          f"does not combine with `--{wrong[0].replace('_', '-')}`")
    if not id_column:
        raise OptionError("`--cluster` pairs the samples of both runs, cluster by cluster, by "
                          "their ids; give --id COL too")


def load_gate_inputs(source, baseline=None, *, undefined: str | None = None,
                     id_column: str | None = None, cluster: str | None = None,
                     **table) -> tuple:
    """Evaluations and per-sample records of a gate's source and baseline.

    Table options describe the table among ``source`` and ``baseline``; they
    are refused when both are saved evaluations, and ``classes`` reorders a
    saved ``source`` only. The baseline takes the undefined convention of the
    source unless ``undefined`` is given. ``cluster`` names a column of
    cluster ids kept in both runs' per-sample records (prediction tables with
    ``id_column`` only), so that the interval of the drop resamples clusters.

    Returns
    -------
    tuple
        ``(evaluation, samples, baseline_evaluation, baseline_samples)``;
        the last two are None without a baseline.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "p.csv"
    >>> _ = p.write_text("actual,predicted\\na,a\\nb,a\\nb,b\\n")
    >>> ev, _, base, _ = load_gate_inputs(p, p)
    >>> ev.rk == base.rk
    True
    """
    from foldcorr.sources.saved import is_saved_path

    all_saved = not any(p is not None and not is_saved_path(p) for p in (source, baseline))
    ev, samples = load_evaluation(source, undefined=undefined, id_column=id_column,
                                  check_table=all_saved, cluster=cluster, **table)
    if baseline is None:
        return ev, samples, None, None
    base_table = {k: v for k, v in table.items() if k != "classes" or not is_saved_path(baseline)}
    base, base_samples = load_evaluation(baseline, undefined=undefined or ev.undefined,
                                         id_column=id_column, check_table=all_saved,
                                         cluster=cluster, **base_table)
    return ev, samples, base, base_samples
