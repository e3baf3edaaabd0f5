"""Options of the score pipeline: checked once, with the only defaults, saved by name.

:class:`ScoreOptions` holds every option of :func:`foldcorr.pipeline.score`
other than how a source is read; :func:`saved_options` is what a saved
evaluation stores of them, with a version that
:meth:`ScoreOptions.from_saved` reads back (older versions too).
"""

from __future__ import annotations

import numbers
from collections.abc import Mapping
from dataclasses import InitVar, dataclass, fields
from typing import ClassVar

from foldcorr.errors import DEFAULT_SEED, InvalidInputError, OptionError, check_choice

__all__ = ["ScoreOptions", "OPTIONS_SCHEMA", "V1_KEYS", "ANALYSIS_NAMES", "saved_options",
           "option_namer", "given_text"]

#: Version of the options stored in saved evaluations (files without one hold version 1).
OPTIONS_SCHEMA = 3
#: Versions of stored options read as they are (3 added ``rank_by``, ``groups``, ``groups_other``).
SAME_KEYS = (2, 3)
#: Version-1 keys (command-line names) of stored options, mapped to option names;
#: the others (``plot``: a drawing, not a figure) are dropped.
V1_KEYS = {"undefined": "undefined", "top": "top", "ci": "level", "resamples": "n_resamples",
           "ci_method": "method", "seed": "seed", "prevalence": "prevalence"}
#: Analyses that :func:`foldcorr.pipeline.evaluate_with` can run, in the order they run.
ANALYSIS_NAMES = ("skipped_files", "shift", "repair", "intervals", "groups")


def option_namer(names: Mapping | None):
    """How options are named in messages: their own names, or what ``names`` maps them to.

    Examples
    --------
    >>> option_namer({"level": "--ci"})("level"), option_namer(None)("level")
    ('--ci', 'level')
    """
    return lambda key: (names or {}).get(key, key)


def given_text(name: str, value) -> str:
    """An option as given, for messages: ``--flag 'value'`` or ``name='value'``.

    Examples
    --------
    >>> given_text("--engine", "local"), given_text("engine", "local")
    ("--engine 'local'", "engine='local'")
    """
    return f"{name} {value!r}" if name.startswith("-") else f"{name}={value!r}"


@dataclass(frozen=True)
class ScoreOptions:
    """Every option of the score pipeline, checked and normalised once.

    Attributes
    ----------
    undefined : {"zero", "nan"}
        Value of undefined (0/0) figures.
    top : int or None
        Class rows shown (None: all; 0: the short summary only).
    level : float or None
        Level of bootstrap intervals, strictly between 0 and 1; None: no intervals.
    n_resamples : int or None
        Bootstrap resamples (at least 100); :attr:`DEFAULT_RESAMPLES` when
        ``level`` is given, None without it.
    method : {"percentile", "bca"} or None
        Interval method; :attr:`DEFAULT_METHOD` when ``level`` is given.
    seed : int or None
        Seed of the resamples: :data:`foldcorr.errors.DEFAULT_SEED` unless given, so
        that the same inputs give the same intervals; None draws fresh entropy.
    prevalence : "uniform", mapping or None
        Target class prevalence of the shifted figures (a text such as
        ``"a=0.2,b=0.8"`` or a CSV file name is read into a mapping).
    rank_by : {"share", "mcc", "recall", "precision", "gain"}
        Order of the class table (:data:`foldcorr.evaluation.RANK_BY`).
    groups : str, mapping or None
        Class groups: a CSV file (``class,group[,more levels]``), a mapping
        class -> group, or a mapping level -> (class -> group); normalised to
        the last form.
    groups_other : str or None
        The group of classes the groups leave out (without it they are an error).
    analyses : tuple of str
        Analyses to run, among :data:`ANALYSIS_NAMES` (each runs only when its
        options ask for it: intervals need ``level``, the shift needs
        ``prevalence``).
    names : mapping, optional (init only)
        How options are named in messages (the command line passes its flags).

    Examples
    --------
    >>> ScoreOptions(level=0.9).n_resamples
    2000
    >>> ScoreOptions(n_resamples=500)
    Traceback (most recent call last):
    ...
    foldcorr.errors.OptionError: `n_resamples` needs `level` (e.g. level=0.95); got n_resamples=500 without it
    """

    undefined: str = "zero"
    top: int | None = 20
    level: float | None = None
    n_resamples: int | None = None
    method: str | None = None
    seed: int | None = DEFAULT_SEED
    prevalence: str | dict | None = None
    rank_by: str = "share"
    groups: str | dict | None = None
    groups_other: str | None = None
    analyses: tuple = ANALYSIS_NAMES
    names: InitVar[Mapping | None] = None

    DEFAULT_RESAMPLES: ClassVar[int] = 2000
    DEFAULT_METHOD: ClassVar[str] = "percentile"

    def __post_init__(self, names):
        from foldcorr.metrics import UNDEFINED_CHOICES

        name = option_namer(names)
        check_choice(name("undefined"), self.undefined, UNDEFINED_CHOICES)
        check_choice(name("rank_by"), self.rank_by, ("share", "mcc", "recall", "precision", "gain"))
        if self.groups_other is not None and self.groups is None:
            raise OptionError(f"`{name('groups_other')}` needs `{name('groups')}`; got "
                              f"{given_text(name('groups_other'), self.groups_other)} without it")
        if self.top is not None and not (isinstance(self.top, numbers.Integral)
                                         and not isinstance(self.top, bool) and self.top >= 0):
            raise OptionError(f"`{name('top')}` must be a whole number (0: the summary only) or None; "
                              f"got {self.top!r}")
        if self.seed is not None and not (isinstance(self.seed, numbers.Integral)
                                          and not isinstance(self.seed, bool)):
            raise OptionError(f"`{name('seed')}` must be a whole number or None; got {self.seed!r}")
        analyses = (self.analyses,) if isinstance(self.analyses, str) else tuple(self.analyses)
        for analysis in analyses:
            check_choice(name("analyses"), analysis, ANALYSIS_NAMES)
        normal = {"analyses": tuple(a for a in ANALYSIS_NAMES if a in analyses),
                  "prevalence": _prevalence(self.prevalence, name("prevalence")),
                  "groups": _groups(self.groups, name("groups")),
                  **self._intervals(name)}
        for key, value in normal.items():
            object.__setattr__(self, key, value)

    def _intervals(self, name) -> dict:
        from foldcorr.analysis.resampling import check_level, check_resamples

        if self.level is None:
            for key in ("n_resamples", "method"):
                value = getattr(self, key)
                if value is not None:
                    level = name("level")
                    hint, example = ((f"{level} LEVEL", f"{level} 0.95") if level.startswith("-")
                                     else (level, f"{level}=0.95"))
                    raise OptionError(f"`{name(key)}` needs `{hint}` (e.g. {example}); got "
                                      f"{given_text(name(key), value)} without it")
            return {}
        resamples = self.DEFAULT_RESAMPLES if self.n_resamples is None else self.n_resamples
        method = self.DEFAULT_METHOD if self.method is None else self.method
        check_choice(name("method"), method, ("percentile", "bca"))
        return {"level": check_level(self.level, name=name("level")),
                "n_resamples": check_resamples(resamples, name=name("n_resamples")),
                "method": method}

    @classmethod
    def default(cls, name: str):
        """The default of one option, read without building (or checking) any options.

        Examples
        --------
        >>> ScoreOptions.default("top"), ScoreOptions.default("undefined")
        (20, 'zero')
        """
        return {f.name: f.default for f in fields(cls)}[name]

    def interval_settings(self) -> dict | None:
        """Keyword arguments of the bootstrap (level, resamples, method, seed); None without a level.

        Examples
        --------
        >>> ScoreOptions(level=0.9, seed=3).interval_settings()
        {'level': 0.9, 'n_resamples': 2000, 'method': 'percentile', 'seed': 3}
        """
        if self.level is None:
            return None
        return {"level": self.level, "n_resamples": self.n_resamples, "method": self.method,
                "seed": self.seed}

    def to_dict(self) -> dict:
        """The options by name: the keyword arguments of :func:`foldcorr.pipeline.score` that give them back.

        Examples
        --------
        >>> ScoreOptions(undefined="nan").to_dict()["undefined"]
        'nan'
        >>> ScoreOptions(**ScoreOptions(top=3).to_dict()) == ScoreOptions(top=3)
        True
        """
        return {f.name: getattr(self, f.name) for f in fields(self)}

    @classmethod
    def from_saved(cls, stored: Mapping, *, source: str = "saved evaluation") -> ScoreOptions:
        """The options stored in a saved evaluation by :func:`saved_options`, of any version.

        Version 1 (no ``options_schema`` key) stored command-line names; they
        are mapped to option names. A later version than :data:`OPTIONS_SCHEMA`
        is refused.

        Raises
        ------
        InvalidInputError
            When the options are of an unknown version or do not check.

        Examples
        --------
        >>> ScoreOptions.from_saved({"undefined": "nan", "top": 3, "ci": None, "plot": None}).top
        3
        >>> ScoreOptions.from_saved({"options_schema": 9})
        Traceback (most recent call last):
        ...
        foldcorr.errors.InvalidInputError: saved evaluation: its options are of options schema 9, which this version of foldcorr reads only up to 3; read it with a newer foldcorr
        """
        stored = dict(stored)
        version = stored.pop("options_schema", 1)
        if version == 1:
            stored = {V1_KEYS[k]: v for k, v in stored.items() if k in V1_KEYS}
        elif version not in SAME_KEYS:
            raise InvalidInputError(
                f"{source}: its options are of options schema {version!r}, which this version of "
                f"foldcorr reads only up to {OPTIONS_SCHEMA}; read it with a newer foldcorr")
        known = {f.name for f in fields(cls)}
        unknown = sorted(set(stored) - known)
        if unknown:
            raise InvalidInputError(f"{source}: unknown stored options {unknown!r}; expected some "
                                    f"of {sorted(known)!r}")
        try:
            return cls(**stored)
        except OptionError as exc:
            raise InvalidInputError(f"{source}: stored options do not check: {exc}") from None


def _prevalence(value, name: str):
    if value is None or isinstance(value, Mapping):
        return None if value is None else dict(value)
    if not isinstance(value, str):
        raise OptionError(f"`{name}` must be 'uniform', CLASS=SHARE pairs, a .csv file or a "
                          f"mapping of class to share; got {value!r}")
    from foldcorr.sources.multilabel import read_prevalence

    return read_prevalence(value)


def _groups(value, name: str):
    """Class groups as level -> (class -> group), read from a CSV file when given a name."""
    if value is None:
        return None
    if isinstance(value, (str, bytes)) or hasattr(value, "__fspath__"):
        from foldcorr.sources.groups import read_groups

        return read_groups(value)
    if not isinstance(value, Mapping) or not value:
        raise OptionError(f"`{name}` must be a CSV file, a mapping of class to group or of "
                          f"level to such a mapping; got {value!r}")
    if all(isinstance(v, Mapping) for v in value.values()):
        return {str(level): dict(groups) for level, groups in value.items()}
    return {"group": dict(value)}


def saved_options(options: ScoreOptions) -> dict:
    """What a saved evaluation stores of its options: :meth:`ScoreOptions.to_dict` and a version.

    Examples
    --------
    >>> saved_options(ScoreOptions())["options_schema"]
    3
    """
    return {"options_schema": OPTIONS_SCHEMA, **options.to_dict()}
