"""The pipeline layer: what ``foldcorr score`` runs, as one public call.

:func:`score` loads a source, tallies it, evaluates it by its kind
(multiclass or multilabel) and runs the analyses its options ask for, returning
one result object with its warnings; :func:`evaluate_with` does the same for a
tensor in memory. Options are checked once, by :class:`ScoreOptions`, whose
defaults are the only ones: the command line passes only what its user gave.
"""

from foldcorr.pipeline.options import *  # noqa: F401,F403
from foldcorr.pipeline.options import __all__ as _options_all
from foldcorr.pipeline.run import *  # noqa: F401,F403
from foldcorr.pipeline.run import __all__ as _run_all

__all__ = [*_options_all, *_run_all]
