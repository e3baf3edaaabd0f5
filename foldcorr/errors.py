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
    "undefined_places",
    "places_text",
    "Recorder",
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


def undefined_places(caught, *, skip=("resample",)) -> dict:
    """Where recorded undefined-value warnings happened: dim -> labels, in order of first report.

    Reads the ``places`` that the metrics attach to each
    :class:`UndefinedMetricWarning` (dims in ``skip`` left out).

    Examples
    --------
    >>> w = UndefinedMetricWarning("one-vs-rest MCC is undefined")
    >>> w.places = {"resample": [0, 4], "class": ["cod", "hake"]}
    >>> with warnings.catch_warnings(record=True) as caught:
    ...     warnings.simplefilter("always")
    ...     warnings.warn(w)
    >>> undefined_places(caught)
    {'class': ['cod', 'hake']}
    """
    out: dict = {}
    for w in caught:
        for dim, labels in getattr(w.message, "places", {}).items():
            if dim not in skip:
                out.setdefault(dim, {}).update(dict.fromkeys(labels))
    return {dim: list(labels) for dim, labels in out.items()}


def places_text(places: dict, *, most: int = 5) -> str:
    """Places of :func:`undefined_places` in words, e.g. ``"class 'cod', 'hake'; fold 2"``.

    Examples
    --------
    >>> places_text({"class": ["cod", "hake"], "fold": [2]})
    "class 'cod', 'hake'; fold 2"
    >>> places_text({"class": list(range(8))}, most=3)
    'class 0, 1, 2 and 5 more'
    """
    parts = []
    for dim, labels in places.items():
        shown = ", ".join(repr(v) for v in labels[:most])
        more = f" and {len(labels) - most} more" if len(labels) > most else ""
        parts.append(f"{dim} {shown}{more}")
    return "; ".join(parts)


class Recorder:
    """A statistic that records its own undefined-value warnings, apart from other statistics.

    Several statistics computed on the same resamples each get a recorder, so
    that a warning of one (a per-class MCC) is never attributed to another (R_K).

    Examples
    --------
    >>> def stat(x):
    ...     warnings.warn("undefined", UndefinedMetricWarning)
    ...     return x
    >>> rec = Recorder(stat)
    >>> rec(3), len(rec.caught)
    (3, 1)
    """

    def __init__(self, statistic):
        self.statistic = statistic
        self.caught: list = []

    def __call__(self, *args, **kwargs):
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always", UndefinedMetricWarning)
            out = self.statistic(*args, **kwargs)
        self.caught.extend(w for w in caught if issubclass(w.category, UndefinedMetricWarning))
        for w in caught:
            if not issubclass(w.category, UndefinedMetricWarning):
                warnings.warn_explicit(w.message, w.category, w.filename, w.lineno)
        return out


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
