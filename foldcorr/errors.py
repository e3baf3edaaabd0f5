"""One exception family and one warning class, with user-facing messages.

Every error the package raises on purpose derives from :class:`FoldcorrError`;
each subclass also derives from the matching builtin so that callers who catch
``ValueError`` or ``ImportError`` keep working.
"""

from __future__ import annotations

import importlib
import importlib.util
import warnings

__all__ = [
    "FoldcorrError",
    "InvalidTensorError",
    "InvalidInputError",
    "OptionError",
    "MissingDependencyError",
    "EngineError",
    "TensorTooLargeError",
    "UndefinedMetricWarning",
    "LabelTypeWarning",
    "require",
    "collect_undefined",
    "MIN_RESAMPLES",
    "MAX_RESAMPLES",
    "DEFAULT_SEED",
]

#: Fewest and most bootstrap resamples or permutations accepted, by the library
#: (:func:`foldcorr.analysis.resampling.check_resamples`) and the command line alike.
MIN_RESAMPLES, MAX_RESAMPLES = 100, 10**6

#: Seed of every bootstrap and permutation when none is given (``score``, ``compare``,
#: ``gate``): the same inputs give the same intervals and the same verdict on every run.
#: Every holder of options (``ScoreOptions``, ``GateRules``, the comparison settings)
#: takes its default from here; ``--seed`` (``seed=``) replaces it.
DEFAULT_SEED = 14


class FoldcorrError(Exception):
    """Root of every error raised by foldcorr."""


class InvalidTensorError(FoldcorrError, ValueError):
    """A confusion tensor has the wrong dims, coordinates or counts."""


class InvalidInputError(FoldcorrError, ValueError):
    """An input file or array cannot be read as predictions or counts."""


class OptionError(FoldcorrError, ValueError):
    """A keyword or command-line option has a value outside what is accepted."""


class MissingDependencyError(FoldcorrError, ImportError):
    """An optional dependency is needed for the requested feature."""


class EngineError(FoldcorrError, RuntimeError):
    """A distributed run failed (a worker lost, a scheduler unreachable); nothing was produced."""


class TensorTooLargeError(FoldcorrError, MemoryError):
    """A dense array would need more memory than the machine has free; refused before allocating."""


class UndefinedMetricWarning(RuntimeWarning):
    """A metric is 0/0 somewhere; the message says where and what was returned."""


class LabelTypeWarning(UserWarning):
    """Labels of a numeric column are compared as text with a text column that reads as numbers."""


def require(module: str, *, extra: str, purpose: str):
    """Import an optional dependency or raise a message naming the extra.

    Parameters
    ----------
    module : str
        Importable module name, e.g. ``"matplotlib.pyplot"``.
    extra : str
        The pyproject extra that installs it, e.g. ``"plot"``.
    purpose : str
        What the module is needed for, shown in the message.

    Returns
    -------
    module
        The imported module.

    Raises
    ------
    MissingDependencyError
        When the top-level package is not installed.

    Examples
    --------
    >>> require("json", extra="none", purpose="an example").__name__
    'json'
    """
    top = module.split(".")[0]
    if importlib.util.find_spec(top) is None:
        raise MissingDependencyError(
            f"{purpose} needs the package {top!r}; install it with "
            f"pip install 'foldcorr[{extra}]'"
        )
    return importlib.import_module(module)


def check_choice(name: str, value, allowed) -> None:
    """Raise :class:`OptionError` unless ``value`` is one of ``allowed``.

    Examples
    --------
    >>> check_choice("undefined", "zero", ("zero", "nan"))
    >>> check_choice("undefined", "one", ("zero", "nan"))
    Traceback (most recent call last):
    ...
    foldcorr.errors.OptionError: `undefined` must be one of 'zero', 'nan'; got 'one'
    """
    if value not in allowed:
        listed = ", ".join(repr(a) for a in allowed)
        raise OptionError(f"`{name}` must be one of {listed}; got {value!r}")


def collect_undefined(notes: list, context: str, compute):
    """Run ``compute()``, turning its undefined-value warnings into report notes.

    Each :class:`UndefinedMetricWarning` raised inside becomes the line
    ``"{context}: {message}"`` appended to ``notes``; other warnings pass on.

    Parameters
    ----------
    notes : list of str
        Where the notes go (appended in place).
    context : str
        Prefix naming what was computed, e.g. ``"per fold"``.
    compute : callable
        A function of no arguments.

    Returns
    -------
    object
        Whatever ``compute()`` returns.

    Examples
    --------
    >>> notes = []
    >>> def undefined():
    ...     warnings.warn("R_K is undefined at fold=1", UndefinedMetricWarning)
    ...     return 0.0
    >>> collect_undefined(notes, "per fold", undefined), notes
    (0.0, ['per fold: R_K is undefined at fold=1'])
    """
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", UndefinedMetricWarning)
        result = compute()
    for w in caught:
        if issubclass(w.category, UndefinedMetricWarning):
            notes.append(f"{context}: {w.message}")
        else:
            warnings.warn_explicit(w.message, w.category, w.filename, w.lineno)
    return result
