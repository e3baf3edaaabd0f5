"""Reports of a score sweep: tables, JSON and the full curve as a file.

``foldcorr.sweep/1`` keys: ``schema``, ``source``, ``n``, ``folds``,
``undefined``, ``labels`` (one entry per label, one for a binary sweep: ``label``,
``n_thresholds``, ``best_threshold``, ``best_mcc``, ``at_threshold``,
``mcc_at``, ``crossfold_threshold``, ``crossfold_mcc``, ``optimism``) and
``warnings`` (see ``docs/json.md``).
"""

from __future__ import annotations

from pathlib import Path

import pandas as pd

from foldcorr.report.tables import Column, Report, Table, format_threshold
from foldcorr.analysis.thresholds import THRESHOLD, SweepResult

__all__ = ["SWEEP_SCHEMA", "sweep_report", "sweep_dict", "curve_frame", "write_curve",
           "CURVE_SUFFIXES"]

SWEEP_SCHEMA = "foldcorr.sweep/1"

#: File endings accepted by :func:`write_curve`.
CURVE_SUFFIXES = (".csv", ".parquet", ".pq")

CURVE_COLUMNS = ("threshold", "tp", "fp", "fn", "tn", "mcc", "accuracy", "f1", "recall",
                 "precision")


def _name(label) -> str:
    return "(binary)" if label is None else str(label)


def sweep_report(result: SweepResult, *, top: int | None = 20, source: str | None = None) -> Report:
    """The tables of a sweep.

    Examples
    --------
    >>> from foldcorr.analysis.thresholds import sweep
    >>> r = sweep([0, 1, 1, 0], [0.1, 0.8, 0.6, 0.3], folds=[1, 1, 2, 2], at=0.5)
    >>> [t.title for t in sweep_report(r).tables]
    ['Thresholds', 'Cross-fold choice']
    """
    facts = (("source", source or "(in memory)"), ("samples", str(result.n)),
             ("labels", str(len(result.labels))),
             ("folds", "none" if result.folds is None else str(len(result.folds))))
    at = result.labels[0].at_threshold if result.labels else None
    columns = [Column("label", "label"), Column("thresholds", "count"),
               Column("best threshold", "text"), Column("best MCC (in-sample)", "correlation")]
    if at is not None:
        columns.append(Column(f"MCC at {format_threshold(at)}", "correlation"))
    if result.folds is not None:
        columns += [Column("mean held-out MCC (cross-fold)", "correlation"), Column("optimism")]
    shown = result.labels if top is None else result.labels[:top]
    rows = []
    for s in shown:
        row = [_name(s.label), s.n_thresholds, format_threshold(s.best_threshold), s.best_mcc]
        if at is not None:
            row.append(s.mcc_at)
        if result.folds is not None:
            row += [s.crossfold_mcc, s.optimism]
        rows.append(tuple(row))
    note = ("a threshold admits every sample with score >= it; the in-sample best is chosen and "
            "scored on the same samples")
    if result.folds is not None:
        note += ("; the cross-fold figure scores each fold with the threshold chosen on the other "
                 "folds, and optimism is the difference")
    if len(shown) < len(result.labels):
        note += (f"; {len(result.labels) - len(shown)} more labels not shown here; every one is "
                 "in the JSON and HTML reports")
    tables = [Table("Thresholds", tuple(columns), tuple(rows), note)]
    if result.folds is not None:
        fold_rows = []
        for s in shown:
            c = s.crossfold
            for i, fold in enumerate(c.coords["fold"].values.tolist()):
                fold_rows.append((_name(s.label), fold, int(c["n"].values[i]),
                                  format_threshold(c['threshold'].values[i]),
                                  float(c["mcc"].values[i])))
        tables.append(Table(
            "Cross-fold choice",
            (Column("label", "label"), Column("held-out fold", "label"), Column("samples", "count"),
             Column("threshold from other folds", "text"), Column("held-out MCC", "correlation")),
            tuple(fold_rows)))
    return Report("foldcorr sweep", facts, tuple(tables), result.warnings)


def sweep_dict(result: SweepResult, *, source: str | None = None) -> dict:
    """The ``foldcorr.sweep/1`` document.

    Examples
    --------
    >>> from foldcorr.analysis.thresholds import sweep
    >>> doc = sweep_dict(sweep([0, 1, 1, 0], [0.1, 0.8, 0.6, 0.3]))
    >>> doc["schema"], doc["labels"][0]["best_threshold"], doc["labels"][0]["best_mcc"]
    ('foldcorr.sweep/1', 0.6, 1.0)
    """
    from foldcorr.report.json import plain

    entries = []
    for s in result.labels:
        cross = None
        if s.crossfold is not None:
            c = s.crossfold
            cross = [{"fold": fold, "threshold": c["threshold"].values[i],
                      "mcc": c["mcc"].values[i], "n": c["n"].values[i]}
                     for i, fold in enumerate(c.coords["fold"].values.tolist())]
        entries.append({
            "label": s.label, "n_thresholds": s.n_thresholds,
            "best_threshold": s.best_threshold, "best_mcc": s.best_mcc,
            "at_threshold": s.at_threshold, "mcc_at": s.mcc_at,
            "crossfold_threshold": cross, "crossfold_mcc": s.crossfold_mcc,
            "optimism": s.optimism,
        })
    return plain({"schema": SWEEP_SCHEMA, "source": source, "n": result.n,
                  "folds": result.folds, "undefined": result.undefined, "labels": entries,
                  "warnings": list(result.warnings)})


def curve_frame(result: SweepResult) -> pd.DataFrame:
    """Every label's full curve as one long table (a ``label`` column first).

    Examples
    --------
    >>> from foldcorr.analysis.thresholds import sweep
    >>> curve_frame(sweep([0, 1, 1], [0.2, 0.5, 0.9])).columns.tolist()[:4]
    ['label', 'threshold', 'tp', 'fp']
    """
    frames = []
    for s in result.labels:
        c = s.figures()
        f = pd.DataFrame({"threshold": c[THRESHOLD].values,
                          **{k: c[k].values for k in CURVE_COLUMNS[1:]}})
        f.insert(0, "label", "" if s.label is None else str(s.label))
        frames.append(f)
    return pd.concat(frames, ignore_index=True)


def write_curve(result: SweepResult, path) -> None:
    """Write :func:`curve_frame` to a CSV or Parquet file, whole or not at all.

    Raises
    ------
    OptionError
        When the file ending is not one of :data:`CURVE_SUFFIXES`.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> from foldcorr.analysis.thresholds import sweep
    >>> out = pathlib.Path(tempfile.mkdtemp()) / "curve.csv"
    >>> write_curve(sweep([0, 1, 1], [0.2, 0.5, 0.9]), out)
    >>> out.read_text().splitlines()[0]
    'label,threshold,tp,fp,fn,tn,mcc,accuracy,f1,recall,precision'
    """
    from foldcorr._files import atomic_target
    from foldcorr.errors import OptionError

    path = Path(path)
    suffix = path.suffix.lower()
    if suffix not in CURVE_SUFFIXES:
        raise OptionError(f"--curve must end in {', '.join(CURVE_SUFFIXES)}; got {str(path)!r}")
    frame = curve_frame(result)
    with atomic_target(path, suffix=suffix) as tmp:
        if suffix == ".csv":
            frame.to_csv(tmp, index=False, float_format="%.10g")
        else:
            frame.to_parquet(tmp, index=False)


def sweep_document(result: SweepResult, *, top: int | None = 20, source: str | None = None):
    """The :class:`~foldcorr.report.documents.Document` of a threshold sweep.

    Examples
    --------
    >>> from foldcorr.analysis.thresholds import sweep
    >>> from foldcorr.report import render
    >>> render(sweep([0, 1, 1, 0], [0.1, 0.8, 0.6, 0.3]), "markdown").splitlines()[0]
    '## foldcorr sweep'
    """
    from foldcorr.report.documents import Document

    return Document(sweep_report(result, top=top, source=source),
                    lambda: sweep_dict(result, source=source))
