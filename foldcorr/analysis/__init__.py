"""The analysis layer: inference and what-if analyses on confusion tensors.

One resampling engine (:mod:`foldcorr.analysis.resampling`) serves every
interval and test; the other modules are what uses it. Nothing here reads
files or prints.
"""
