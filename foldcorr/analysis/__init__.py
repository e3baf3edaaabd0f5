"""The analysis layer: inference and what-if analyses on confusion tensors.

One resampling engine (:mod:`foldcorr.analysis.resampling`) serves every
interval and test (:mod:`~foldcorr.analysis.uncertainty`,
:mod:`~foldcorr.analysis.compare`, the multilabel intervals); beside it are the
repair gains (:mod:`~foldcorr.analysis.gains`, :mod:`~foldcorr.analysis.repair`),
score sweeps (:mod:`~foldcorr.analysis.score_counts`,
:mod:`~foldcorr.analysis.thresholds`), prevalence shift and cross-validation.
Nothing here reads files or prints.
"""
