"""foldcorr: Matthews correlation and R_K for multiclass and multilabel classifiers.

The public API is re-exported here lazily, so that ``import foldcorr`` (and
the command line's ``--help``) stays fast and does not load pandas or xarray
until a function that needs them is used.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

from foldcorr._lazy import lazy_exports

from foldcorr._version import __version__

_EXPORTS = {
    "foldcorr.tensor": [
        "tally", "tally_frame", "confusion_tensor", "validate_tensor", "pool",
        "ACTUAL", "PREDICTED", "FOLD", "CLASS", "LABEL",
        "joint_tally", "model_tensors", "multilabel_tally", "indicators_from_sets",
    ],
    "foldcorr.metrics": [
        "rk", "mcc", "ovr_mcc", "accuracy", "balanced_accuracy",
        "cohen_kappa", "recall", "precision", "f1", "macro_f1", "macro_mcc",
        "support", "predicted_count", "top_confusion",
    ],
    "foldcorr.decomposition": ["decompose", "mismatch_shares"],
    "foldcorr.analysis.gains": [
        "pair_gains", "class_gains", "leave_class_out", "costliest_confusions",
    ],
    "foldcorr.analysis.repair": ["fold_stability", "repair_analysis", "RepairAnalysis"],
    "foldcorr.analysis.resampling": ["resample_cells"],
    "foldcorr.analysis.uncertainty": [
        "bootstrap", "bootstrap_difference",
        "summarise_uncertainty", "drag", "BootstrapResult", "Uncertainty",
    ],
    "foldcorr.analysis.folds": ["fold_statistics", "FoldStatistics"],
    "foldcorr.analysis.compare": ["compare_models", "Comparison"],
    "foldcorr.analysis.many": ["compare_many", "ManyComparison", "holm"],
    "foldcorr.tensor.cells": ["cluster_tally", "ClusterCells"],
    "foldcorr.analysis.crossval": ["cross_tally", "compare_estimators", "rk_score", "rk_scorer"],
    "foldcorr.analysis.groups": ["merge_classes", "group_split", "group_shares"],
    "foldcorr.analysis.classfold": ["class_by_fold"],
    "foldcorr.pipeline.groups": ["evaluate_groups", "ClassGroups", "GroupLevel"],
    "foldcorr.sources.groups": ["read_groups"],
    "foldcorr.evaluation": ["Evaluation", "evaluate"],
    "foldcorr.pipeline": ["score", "evaluate_with", "replay", "load_evaluation", "ScoreOptions"],
    "foldcorr.figures": ["Figure", "FIGURES"],
    "foldcorr.tensor.samples": ["Samples"],
    "foldcorr.gate": ["GateRules", "GateResult", "check_gate"],
    "foldcorr.sources.saved": ["SavedEvaluation", "save_evaluation", "load_saved"],
    "foldcorr.report": ["render"],
    "foldcorr.report.plots": [
        "loss_budget_plot", "confusion_plot", "fold_plot", "class_fold_plot", "models_plot",
        "difference_plot", "threshold_plot", "figure_svg", "save_plots",
    ],
    "foldcorr.sources.dispatch": ["load", "load_tensor", "tally_dataset"],
    "foldcorr.sources.stream": ["stream_tensor", "StreamResult"],
    "foldcorr.sources.where": ["parse_where"],
    "foldcorr.analysis.thresholds": ["sweep", "threshold_curve", "SweepResult", "LabelSweep"],
    "foldcorr.analysis.shift": ["shift_prevalence", "target_prevalence", "shifted_figures", "ShiftResult"],
    "foldcorr.errors": [
        "FoldcorrError", "InvalidTensorError", "InvalidInputError", "OptionError",
        "MissingDependencyError", "EngineError", "UndefinedMetricWarning",
    ],
}
if TYPE_CHECKING:  # the names for type checkers; at run time they load on first use
    from foldcorr.tensor import (
        tally, tally_frame, confusion_tensor, validate_tensor, pool, ACTUAL, PREDICTED, FOLD, CLASS,
        LABEL, joint_tally, model_tensors, multilabel_tally, indicators_from_sets,
    )
    from foldcorr.metrics import (
        rk, mcc, ovr_mcc, accuracy, balanced_accuracy, cohen_kappa, recall, precision, f1, macro_f1,
        macro_mcc, support, predicted_count, top_confusion,
    )
    from foldcorr.decomposition import decompose, mismatch_shares
    from foldcorr.analysis.gains import (
        pair_gains, class_gains, leave_class_out, costliest_confusions,
    )
    from foldcorr.analysis.repair import fold_stability, repair_analysis, RepairAnalysis
    from foldcorr.analysis.resampling import resample_cells
    from foldcorr.analysis.uncertainty import (
        bootstrap, bootstrap_difference, summarise_uncertainty, drag, BootstrapResult, Uncertainty,
    )
    from foldcorr.analysis.folds import fold_statistics, FoldStatistics
    from foldcorr.analysis.compare import compare_models, Comparison
    from foldcorr.analysis.many import compare_many, ManyComparison, holm
    from foldcorr.tensor.cells import cluster_tally, ClusterCells
    from foldcorr.analysis.crossval import cross_tally, compare_estimators, rk_score, rk_scorer
    from foldcorr.analysis.groups import merge_classes, group_split, group_shares
    from foldcorr.analysis.classfold import class_by_fold
    from foldcorr.pipeline.groups import evaluate_groups, ClassGroups, GroupLevel
    from foldcorr.sources.groups import read_groups
    from foldcorr.evaluation import Evaluation, evaluate
    from foldcorr.pipeline import score, evaluate_with, replay, load_evaluation, ScoreOptions
    from foldcorr.figures import Figure, FIGURES
    from foldcorr.tensor.samples import Samples
    from foldcorr.gate import GateRules, GateResult, check_gate
    from foldcorr.sources.saved import SavedEvaluation, save_evaluation, load_saved
    from foldcorr.report import render
    from foldcorr.report.plots import (
        loss_budget_plot, confusion_plot, fold_plot, class_fold_plot, models_plot, difference_plot,
        threshold_plot, figure_svg, save_plots,
    )
    from foldcorr.sources.dispatch import load, load_tensor, tally_dataset
    from foldcorr.sources.stream import stream_tensor, StreamResult
    from foldcorr.sources.where import parse_where
    from foldcorr.analysis.thresholds import sweep, threshold_curve, SweepResult, LabelSweep
    from foldcorr.analysis.shift import (
        shift_prevalence, target_prevalence, shifted_figures, ShiftResult,
    )
    from foldcorr.errors import (
        FoldcorrError, InvalidTensorError, InvalidInputError, OptionError, MissingDependencyError,
        EngineError, UndefinedMetricWarning,
    )

_WHERE, __getattr__, __dir__ = lazy_exports("foldcorr", _EXPORTS, globals())

__all__ = ["__version__", *_WHERE]
