"""The interval of a drop in R_K from a baseline run to the current one.

What the gate's baseline rule (``--max-drop`` with ``--confidence``) tests:
paired when both runs carry the same samples (their joint tensor resampled
together, whole clusters when the samples carry them), else each tensor
resampled on its own. Nothing here reads files or prints.
"""

from __future__ import annotations

import warnings

import numpy as np
import xarray as xr

from foldcorr.analysis.compare import compare_models
from foldcorr.analysis.uncertainty import bootstrap_difference
from foldcorr.errors import DEFAULT_SEED, InvalidInputError, UndefinedMetricWarning
from foldcorr.metrics import rk
from foldcorr.tensor import ACTUAL, PREDICTED, cluster_tally, joint_tally
from foldcorr.tensor.samples import Samples, align_samples

__all__ = ["drop_interval"]


def drop_interval(baseline: xr.DataArray, current: xr.DataArray, shared: list, *,
                  baseline_samples: Samples | None = None, samples: Samples | None = None,
                  n_resamples: int = 2000, level: float = 0.95,
                  seed: int | None = DEFAULT_SEED) -> tuple[float, float, str, list[str]]:
    """Bootstrap interval of the drop in R_K from ``baseline`` to ``current``, on ``shared`` classes.

    Returns ``(low, high, how, notes)``: the interval's ends, how it was made
    (words for the report) and notes (why the runs were not paired, warnings).

    Paired (the joint tensor of both runs' predictions on the same samples,
    resampled together) when both sides carry the same samples; otherwise
    each tensor is resampled on its own. With sample clusters, whole
    clusters are resampled.

    Examples
    --------
    >>> from foldcorr.tensor import confusion_tensor
    >>> base = confusion_tensor([[40, 10], [5, 45]], ["a", "b"])
    >>> now = confusion_tensor([[30, 20], [10, 40]], ["a", "b"])
    >>> low, high, how, notes = drop_interval(base, now, ["a", "b"], n_resamples=500, seed=1)
    >>> bool(low < 0.7 - 0.4 < high), how
    (True, 'unpaired bootstrap of both tensors, 500 resamples')
    """
    notes: list[str] = []
    if samples is not None and baseline_samples is not None:
        order, reason = align_samples(baseline_samples, samples)
        clustered = samples.cluster is not None or baseline_samples.cluster is not None
        if order is None and clustered:
            raise InvalidInputError("clusters are resampled over the samples both runs share, "
                                    f"but the runs cannot be paired: {reason}")
        if order is None:
            notes.append(f"unpaired comparison: {reason}")
        else:
            return _paired_drop(baseline_samples, samples, order, shared, notes,
                               n_resamples=n_resamples, level=level, seed=seed)
    elif samples is not None or baseline_samples is not None:
        notes.append("unpaired comparison: only one side carries sample ids")
    def cut(t):
        return t.sel({ACTUAL: shared, PREDICTED: shared})

    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UndefinedMetricWarning)
        res = bootstrap_difference(cut(baseline), cut(current), rk,
                                   n_resamples=n_resamples, level=level, seed=seed)
    low, high = -float(res.high), -float(res.low)
    how = f"unpaired bootstrap of both tensors, {n_resamples} resamples"
    return low, high, how, notes + list(res.warnings)


def _paired_drop(baseline_samples: Samples, samples: Samples, order, shared, notes: list, *,
                 n_resamples: int, level: float, seed):
    """The paired interval of the drop (whole clusters resampled when the samples carry them)."""
    truth = baseline_samples.actual
    pred_a, pred_b = baseline_samples.predicted, samples.predicted[order]
    known = set(shared)
    keep = np.array([a in known and x in known and y in known
                     for a, x, y in zip(truth.tolist(), pred_a.tolist(), pred_b.tolist())],
                    dtype=bool)
    folds = None if baseline_samples.fold is None else baseline_samples.fold[keep]
    clusters = (samples.cluster[order] if samples.cluster is not None
                else baseline_samples.cluster)
    columns = (truth[keep], pred_a[keep], pred_b[keep])
    cells = None if clusters is None else cluster_tally(*columns, cluster=clusters[keep],
                                                        folds=folds, classes=shared)
    joint = joint_tally(*columns, folds=folds, classes=shared) if cells is None \
        else cells.tensor()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UndefinedMetricWarning)
        comp = compare_models(joint, n_resamples=n_resamples, level=level, seed=seed,
                              cluster=cells)
    low, high = -float(comp.ci[1]), -float(comp.ci[0])
    how = (f"paired bootstrap on {int(keep.sum())} shared samples, "
           f"{n_resamples} resamples")
    if clusters is not None:
        how += (f", {comp.n_clusters} clusters resampled whole, design effect "
                f"{comp.design_effect:.2f}")
    return low, high, how, notes + list(comp.warnings)
