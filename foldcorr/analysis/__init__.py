"""The analysis layer: inference and what-if analyses on confusion tensors.

One resampling engine (:mod:`foldcorr.analysis.resampling`, with whole
clusters from sparse cells in :mod:`~foldcorr.analysis.clustered`) serves every
interval and test (:mod:`~foldcorr.analysis.uncertainty`,
:mod:`~foldcorr.analysis.compare`, :mod:`~foldcorr.analysis.many`, the
multilabel intervals); :mod:`~foldcorr.analysis.support` says when a class is
too thin for an interval and :mod:`~foldcorr.analysis.folds` gives fold
statistics. Beside them are the repair gains (:mod:`~foldcorr.analysis.gains`,
:mod:`~foldcorr.analysis.repair`), score sweeps
(:mod:`~foldcorr.analysis.score_counts`, :mod:`~foldcorr.analysis.thresholds`),
prevalence shift and cross-validation. Nothing here reads files or prints.
"""
