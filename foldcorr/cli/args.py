"""Argument parsing of the command line: one subcommand per verb.

Options of the score pipeline (:class:`foldcorr.pipeline.ScoreOptions`) and of
the sources have no default here: an option the user did not give is absent
from the parsed namespace, and the pipeline applies its own defaults.
"""

from __future__ import annotations

import argparse

from foldcorr._version import __version__
from foldcorr.errors import MAX_RESAMPLES, MIN_RESAMPLES
from foldcorr.pipeline import ScoreOptions
from foldcorr.report.formats import FORMATS

__all__ = ["get_parser", "OPTION_OF_DEST", "flag_names", "Parser", "MAX_DEMO_SAMPLES"]

#: Not given: absent from the namespace (the pipeline holds the defaults).
UNSET = argparse.SUPPRESS
#: Destinations whose option of the pipeline has another name.
OPTION_OF_DEST = {"ci": "level", "resamples": "n_resamples", "ci_method": "method"}


#: Most demo samples accepted (``demo --samples``).
MAX_DEMO_SAMPLES = 10**9


class Parser(argparse.ArgumentParser):
    """An argument parser whose usage errors are one line with a hint to ``--help``.

    Examples
    --------
    >>> import contextlib, io
    >>> err = io.StringIO()
    >>> with contextlib.redirect_stderr(err):
    ...     try:
    ...         Parser(prog="foldcorr demo").parse_args(["--nope"])
    ...     except SystemExit as exc:
    ...         print(exc.code)
    2
    >>> err.getvalue()
    "foldcorr demo: error: unrecognized arguments: --nope (see 'foldcorr demo --help')\\n"
    """

    def error(self, message: str):
        flat = " ".join(message.split())
        self.exit(2, f"{self.prog}: error: {flat} (see '{self.prog} --help')\n")


def _count(low: int, high: int):
    """An argparse type: a whole number from ``low`` to ``high``."""

    def parse(value: str) -> int:
        try:
            number = int(value)
        except ValueError:
            number = None
        if number is None or not low <= number <= high:
            raise argparse.ArgumentTypeError(
                f"expected a whole number from {low} to {high:_}; got {value!r}".replace("_", ","))
        return number

    parse.__name__ = "whole number"
    return parse


def _limit(low: float, high: float, figure: str):
    """An argparse type: a finite number from ``low`` to ``high`` (the range of ``figure``)."""

    def parse(value: str) -> float:
        number = _number(value)
        if not low <= number <= high:
            raise argparse.ArgumentTypeError(
                f"{figure} lies in [{low:g}, {high:g}], so a limit of {value} is outside it")
        return number

    parse.__name__ = "limit"
    return parse


RK_LIMIT = _limit(-1.0, 1.0, "R_K")
MCC_LIMIT = _limit(-1.0, 1.0, "MCC")
DROP_LIMIT = _limit(-2.0, 2.0, "a difference of two R_K values")
MISMATCH_LIMIT = _limit(0.0, 1.0, "the marginal mismatch term")


def group_limits(value: str) -> dict:
    """``X`` (every level of groups) or ``LEVEL=X[,LEVEL=X...]``: level (None: every) -> bound.

    Examples
    --------
    >>> group_limits("0.8"), group_limits("genus=0.7, family=0.9")
    ({None: 0.8}, {'genus': 0.7, 'family': 0.9})
    """
    out = {}
    for part in value.split(","):
        level, _, bound = part.strip().rpartition("=")
        out[level.strip() or None] = RK_LIMIT(bound.strip())
    return out
RESAMPLES = _count(1, MAX_RESAMPLES)
SEED = _count(0, 2**63 - 1)


def flag_names() -> dict:
    """Each pipeline and table option, mapped to its command-line flag (for messages).

    Examples
    --------
    >>> flag_names()["n_resamples"], flag_names()["skip_bad_files"]
    ('--resamples', '--skip-bad-files')
    """
    from dataclasses import fields

    from foldcorr.pipeline import TABLE_OPTIONS

    dest_of = {option: dest for dest, option in OPTION_OF_DEST.items()}
    options = [f.name for f in fields(ScoreOptions)] + list(TABLE_OPTIONS)
    return {o: "--" + dest_of.get(o, o).replace("_", "-") for o in options}


def _top(value: str):
    if value == "all":
        return None
    try:
        number = int(value)
    except ValueError:
        number = -1
    if number < 0:
        raise argparse.ArgumentTypeError(f"expected a whole number (0: the summary only) or "
                                         f"'all'; got {value!r}")
    return number


def _number(value: str) -> float:
    import math

    try:
        number = float(value)
    except ValueError:
        number = math.nan
    if not math.isfinite(number):
        raise argparse.ArgumentTypeError(f"expected a number; got {value!r}")
    return number


def _class_list(value: str) -> tuple:
    labels = tuple(v.strip() for v in value.split(","))
    if not all(labels):
        raise argparse.ArgumentTypeError(f"expected comma-separated class names; got {value!r}")
    return labels


def _text_list(value: str) -> tuple:
    """Comma-separated texts, kept as written (whitespace included)."""
    return tuple(v for v in value.split(",") if v)


def _add_input_format(p: argparse.ArgumentParser) -> None:
    p.add_argument("--input-format", choices=("csv", "tsv", "jsonl", "parquet"),
                   help="format of a table on standard input (PATH -); default: read from its "
                        "first bytes")


def _add_output_options(p: argparse.ArgumentParser, formats=FORMATS) -> None:
    p.add_argument("--format", choices=formats, default="text",
                   help="output format (default: text)")
    p.add_argument("--output", metavar="FILE",
                   help="write the report to FILE (replaced whole, never half-written)")


def _add_report_options(p: argparse.ArgumentParser) -> None:
    """Output options with ``--top`` and ``--undefined`` (unset unless given)."""
    _add_output_options(p)
    top, undefined = ScoreOptions.default("top"), ScoreOptions.default("undefined")
    p.add_argument("--top", type=_top, default=UNSET, metavar="N|all",
                   help=f"per-class rows shown in text and Markdown (default: {top}; 0: the summary only)")
    p.add_argument("--undefined", choices=("zero", "nan"), default=UNSET,
                   help=f"value of 0/0 metrics: zero or nan (null in JSON; default: {undefined})")


def _add_table_options(p: argparse.ArgumentParser,
                       matrix_help: str = "PATH is a counts matrix: actual labels down, "
                                          "predicted across") -> None:
    p.add_argument("--truth", default=UNSET, metavar="COL",
                   help="column of actual labels (default: actual)")
    p.add_argument("--pred", default=UNSET, metavar="COL",
                   help="column of predicted labels (default: predicted)")
    p.add_argument("--fold", default=UNSET, metavar="COL",
                   help="column of fold labels (default: 'fold' when present)")
    p.add_argument("--weight", default=UNSET, metavar="COL", help="column of sample weights")
    p.add_argument("--count", default=UNSET, metavar="COL", help="column of whole counts (rows already aggregated)")
    p.add_argument("--classes", type=_class_list, default=UNSET, metavar="A,B,...",
                   help="fixed class order; labels outside it are an error")
    p.add_argument("--matrix", action="store_true", default=UNSET, help=matrix_help)
    p.add_argument("--na-values", type=_text_list, default=UNSET, metavar="A,B,...",
                   help="label texts that count as missing, beside the empty cell (default: the "
                        "empty cell only, so NA, None and null are classes)")


def _add_save_options(p: argparse.ArgumentParser) -> None:
    p.add_argument("--save", metavar="FILE.nc",
                   help="also save the confusion tensor with provenance as NetCDF-4 "
                        "(read back by show, score and gate)")
    p.add_argument("--id", metavar="COL", dest="id_column",
                   help="with --save: column of unique sample ids; per-sample labels are "
                        "saved too, so that a later gate can pair the samples")


def _add_source_options(p: argparse.ArgumentParser) -> None:
    p.add_argument("--where", default=UNSET, metavar="EXPR",
                   help='row filter, e.g. \'split == "test" and fold != 3\' '
                        "(comparisons joined by and/or/not; see docs/streaming.md)")
    p.add_argument("--engine", choices=("local", "dask"), default=UNSET,
                   help="local: stream in this process (default); dask: tally on a Dask cluster")
    p.add_argument("--scheduler", default=UNSET, metavar="ADDRESS",
                   help="Dask scheduler to use, e.g. tcp://scheduler.example:8786 (default: a local "
                        "cluster on 127.0.0.1, one worker per core)")
    _add_input_format(p)
    p.add_argument("--skip-bad-files", action="store_true", default=UNSET,
                   help="skip unreadable files of a dataset and report them, instead of stopping")
    p.add_argument("--quiet", action="store_true",
                   help="no progress bar (it is shown only when stderr is a terminal)")


def _add_analysis_options(p: argparse.ArgumentParser) -> None:
    """Options of the score pipeline's analyses (see :class:`foldcorr.pipeline.ScoreOptions`).

    Shared by ``score`` and ``demo``.
    """
    p.add_argument("--plot", metavar="DIR",
                   help="also draw the loss budget, confusion heatmap, fold plot and class by "
                        "fold heatmap into DIR as PNG and SVG (needs the 'plot' extra)")
    p.add_argument("--ci", type=_number, default=UNSET, metavar="LEVEL",
                   help="add bootstrap intervals at this level, e.g. 0.95")
    p.add_argument("--resamples", type=RESAMPLES, default=UNSET, metavar="B",
                   help=f"bootstrap resamples for --ci (default: {ScoreOptions.DEFAULT_RESAMPLES}, "
                        f"at least {MIN_RESAMPLES}, at most {MAX_RESAMPLES:,})")
    p.add_argument("--ci-method", choices=("percentile", "bca"), default=UNSET,
                   help=f"interval method for --ci: percentile or bca (default: "
                        f"{ScoreOptions.DEFAULT_METHOD})")
    if "--seed" not in p._option_string_actions:  # demo's --seed seeds its data and this too
        p.add_argument("--seed", type=SEED, default=UNSET, metavar="S",
                       help="seed of the resamples (default: a fixed seed, so the same input gives the same intervals)")
    p.add_argument("--prevalence", default=UNSET, metavar="uniform|A=0.2,B=0.8|FILE.csv",
                   help="also show every pooled figure at this target class prevalence, "
                        "assuming label shift; 'uniform' shares it equally among the "
                        "classes that have samples (see docs/shift.md)")
    p.add_argument("--rank-by", choices=("share", "mcc", "recall", "precision", "gain"),
                   default=UNSET, help="order of the class table: share of 1 - R_K (default), "
                                       "lowest MCC, recall or precision, or largest repair gain")
    p.add_argument("--groups", default=UNSET, metavar="FILE.csv",
                   help="class groups, CSV class,group[,more levels]: R_K and the class table "
                        "at each level, and 1 - R_K split inside/between groups")
    p.add_argument("--groups-other", default=UNSET, metavar="NAME",
                   help="put classes missing from --groups in this group (else an error)")


def _column_list(value: str) -> tuple:
    names = tuple(v.strip() for v in value.split(","))
    if not all(names):
        raise argparse.ArgumentTypeError(f"expected comma-separated column names; got {value!r}")
    return names


def _add_multilabel_options(p: argparse.ArgumentParser) -> None:
    group = p.add_argument_group(
        "multilabel mode", "chosen only by these flags: indicator columns by name or by prefix, "
                           "or --sep for delimited label sets in --truth and --pred")
    group.add_argument("--truth-cols", type=_column_list, default=UNSET, metavar="A,B,...",
                       help="0/1 truth columns, one per label")
    group.add_argument("--pred-cols", type=_column_list, default=UNSET, metavar="A,B,...",
                       help="0/1 prediction columns, paired in order with --truth-cols")
    group.add_argument("--truth-prefix", default=UNSET, metavar="PREFIX",
                       help="0/1 truth columns named PREFIX + label")
    group.add_argument("--pred-prefix", default=UNSET, metavar="PREFIX",
                       help="0/1 prediction columns named PREFIX + label, paired by label")
    group.add_argument("--sep", default=UNSET, metavar="CHAR",
                       help="--truth and --pred hold label sets joined by CHAR (empty = no label)")


def get_parser() -> argparse.ArgumentParser:
    """Build the argument parser with one subcommand per verb.

    Examples
    --------
    >>> get_parser().parse_args(["score", "p.csv", "--top", "all"]).top is None
    True
    """
    parser = Parser(
        prog="foldcorr",
        description="Matthews correlation and R_K for multiclass and multilabel "
                    "classifiers, fold by fold.",
    )
    parser.add_argument("--version", action="version", version=f"foldcorr {__version__}")
    verbs = parser.add_subparsers(dest="verb", metavar="VERB")
    verbs.required = True

    score = verbs.add_parser("score", help="score a prediction table or a counts matrix",
                             description="Score a prediction table (CSV, Parquet, JSON Lines) "
                                         "or a counts matrix CSV (--matrix).")
    score.add_argument("path", metavar="PATH",
                       help="prediction table, a folder or a quoted glob of them, "
                            "or a counts matrix")
    _add_table_options(score)
    score.add_argument("--cluster", default=UNSET, metavar="COL",
                       help="column of cluster ids (specimen, site, patient): intervals resample "
                            "whole clusters, within folds; the table is read whole")
    _add_source_options(score)
    _add_report_options(score)
    _add_save_options(score)
    _add_analysis_options(score)
    _add_multilabel_options(score)

    show = verbs.add_parser("show", help="render a saved evaluation as score showed it",
                            description="Render a saved evaluation (.nc, written by --save) "
                                        "with the options it was saved with.")
    show.add_argument("path", metavar="FILE.nc", help="saved evaluation")
    _add_output_options(show)
    show.add_argument("--top", type=_top, default=UNSET, metavar="N|all",
                      help="per-class rows shown (default: as saved)")

    gate = verbs.add_parser(
        "gate", help="fail (exit 1) when an evaluation breaks a rule",
        description="Check a prediction table or saved evaluation against rules; exit 0 "
                    "when all hold, 1 when any fails, 2 on bad input.")
    gate.add_argument("path", metavar="SOURCE", help="prediction table, counts matrix or .nc")
    _add_table_options(gate, matrix_help="SOURCE is a counts matrix CSV")
    _add_input_format(gate)
    gate.add_argument("--id", metavar="COL", dest="id_column",
                      help="column of unique sample ids in prediction tables (for a paired "
                           "baseline comparison)")
    gate.add_argument("--cluster", metavar="COL",
                      help="column of cluster ids (specimen, site, patient) in both prediction "
                           "tables: the interval of --confidence resamples whole clusters; "
                           "needs --id")
    rules = gate.add_argument_group("rules")
    rules.add_argument("--min-rk", type=RK_LIMIT, metavar="X",
                       help="pooled R_K must be >= X (multiclass; X in [-1, 1])")
    rules.add_argument("--min-micro-mcc", type=MCC_LIMIT, metavar="X",
                       help="pooled micro MCC must be >= X (multilabel; X in [-1, 1])")
    rules.add_argument("--min-macro-mcc", type=MCC_LIMIT, metavar="X",
                       help="pooled macro MCC must be >= X")
    rules.add_argument("--min-fold-rk", type=RK_LIMIT, metavar="X",
                       help="R_K of every fold must be >= X (multiclass)")
    rules.add_argument("--min-class-mcc", type=MCC_LIMIT, metavar="X",
                       help="MCC of every class (one-vs-rest) or label must be >= X")
    rules.add_argument("--class-floors", metavar="FILE",
                       help="CSV class,floor (or label,floor): each listed class's MCC must be "
                            ">= its floor")
    rules.add_argument("--max-marginal-mismatch", type=MISMATCH_LIMIT, metavar="X",
                       help="marginal mismatch term must be <= X (X in [0, 1])")
    rules.add_argument("--min-group-rk", type=group_limits, metavar="X|LEVEL=X,...",
                       help="R_K of the classes merged by --groups must be >= X at every level, "
                            "or at the levels named (multiclass)")
    gate.add_argument("--groups", metavar="FILE.csv",
                      help="class groups for --min-group-rk: CSV class,group[,more levels]")
    gate.add_argument("--groups-other", metavar="NAME",
                      help="put classes missing from --groups in this group (else an error)")
    rules.add_argument("--baseline", metavar="FILE",
                       help="baseline to compare with (a saved .nc, or a prediction table)")
    rules.add_argument("--max-drop", type=DROP_LIMIT, metavar="D",
                       help="pooled R_K may fall below the baseline's by at most D "
                            "(default with --baseline: 0)")
    rules.add_argument("--allow-new-classes", action="store_true",
                       help="compare with a baseline of other classes on the shared ones")
    rules.add_argument("--confidence", type=_number, metavar="LEVEL",
                       help="with --baseline: a drop counts as a regression only when the whole "
                            "bootstrap interval of the drop at this level (e.g. 0.95) lies "
                            "above D; paired when both sides carry the same sample ids")
    gate.add_argument("--resamples", type=RESAMPLES, default=UNSET, metavar="B",
                      help=f"bootstrap resamples for --confidence (default: 2000, at most "
                           f"{MAX_RESAMPLES:,})")
    gate.add_argument("--seed", type=SEED, default=UNSET, metavar="S",
                      help="seed of the bootstrap for --confidence (default: a fixed seed, so the verdict never changes between runs)")
    gate.add_argument("--undefined", choices=("zero", "nan"), default=UNSET,
                      help="value of 0/0 metrics (default: as saved, else zero); "
                           "an undefined figure fails its rule")
    _add_multilabel_options(gate)
    _add_output_options(gate)
    gate.add_argument("--junit", metavar="FILE", help="also write a JUnit XML report")
    gate.add_argument("--markdown", metavar="FILE",
                      help="also write a Markdown summary (job summary, pull-request comment)")

    sweep = verbs.add_parser(
        "sweep", help="MCC at every threshold of a score, with a cross-fold threshold choice",
        description="Sweep the threshold of a score (higher means positive): MCC, accuracy, F1, "
                    "recall and precision at every distinct threshold; the best threshold "
                    "in-sample and, with folds, the threshold chosen on the other folds and "
                    "scored on each held-out fold.")
    sweep.add_argument("path", metavar="PATH", help="table of truth and scores")
    sweep.add_argument("--truth", default=UNSET, metavar="COL",
                       help="binary truth column (default: actual)")
    sweep.add_argument("--score", default=UNSET, metavar="COL",
                       help="score column (default: score)")
    sweep.add_argument("--fold", default=UNSET, metavar="COL",
                       help="column of fold labels (default: 'fold' when present)")
    sweep.add_argument("--positive", metavar="VALUE",
                       help="truth value meaning positive (needed unless truth is 0/1 or "
                            "true/false)")
    _add_input_format(sweep)
    sweep.add_argument("--at", type=_number, metavar="THRESHOLD",
                       help="also report the MCC at this threshold")
    sweep.add_argument("--truth-cols", type=_column_list, metavar="A,B,...",
                       help="multilabel: 0/1 truth columns, one per label")
    sweep.add_argument("--score-cols", type=_column_list, metavar="A,B,...",
                       help="multilabel: score columns, paired in order with --truth-cols")
    sweep.add_argument("--truth-prefix", metavar="PREFIX",
                       help="multilabel: truth columns named PREFIX + label")
    sweep.add_argument("--score-prefix", metavar="PREFIX",
                       help="multilabel: score columns named PREFIX + label, paired by label")
    sweep.add_argument("--curve", metavar="FILE",
                       help="write the full curve of every label to FILE (.csv or .parquet)")
    sweep.add_argument("--plot", metavar="DIR",
                       help="draw one PNG per label into DIR (needs the extra 'plot')")
    _add_report_options(sweep)

    demo = verbs.add_parser("demo", help="write the invented plankton demo and score it",
                            description="Write an invented plankton-imaging demo (36 taxa, "
                                        "5 folds) to a folder and score it.")
    demo.add_argument("--out", metavar="DIR",
                      help="folder for the demo files (default: a new temporary folder)")
    demo.add_argument("--samples", type=_count(100, MAX_DEMO_SAMPLES), default=UNSET,
                      metavar="N",
                      help=f"number of images (default: 24000, from 100 to {MAX_DEMO_SAMPLES:,})")
    demo.add_argument("--seed", type=SEED, default=UNSET, metavar="S",
                      help="seed of the generator (default gives the bundled demo)")
    _add_report_options(demo)
    _add_save_options(demo)
    _add_analysis_options(demo)

    compare = verbs.add_parser(
        "compare", help="compare models scored on the same samples",
        description="Paired comparison of models on the same samples: one table with two "
                    "prediction columns (--pred-a COL --pred-b COL) or more (--models A,B,C), "
                    "or one table per model, joined on an id column (--id COL). With three or "
                    "more models: ranked by R_K, each against the best (Holm-adjusted).")
    compare.add_argument("path", metavar="PATH", help="table with truth (and the predictions)")
    compare.add_argument("path_b", metavar="PATH_B", nargs="?",
                         help="second table with model B's predictions, joined on --id")
    compare.add_argument("more", metavar="PATH_C", nargs="*",
                         help="more tables, one per model, joined on --id")
    compare.add_argument("--models", type=_column_list, metavar="A,B,...",
                         help="prediction columns of one table, one per model (2 to 50)")
    compare.add_argument("--truth", default=UNSET, metavar="COL",
                         help="column of actual labels (default: actual)")
    compare.add_argument("--pred-a", metavar="COL", help="prediction column of model A")
    compare.add_argument("--pred-b", metavar="COL", help="prediction column of model B")
    compare.add_argument("--pred", default=UNSET, metavar="COL",
                         help="prediction column of each of two tables (default: predicted)")
    compare.add_argument("--id", metavar="COL", help="id column joining two tables")
    compare.add_argument("--cluster", metavar="COL",
                         help="column of cluster ids (specimen, site, patient) of the first "
                              "table: intervals and tests resample whole clusters, within folds")
    compare.add_argument("--fold", default=UNSET, metavar="COL",
                         help="column of fold labels (default: 'fold' when present)")
    _add_input_format(compare)
    compare.add_argument("--classes", type=_class_list, metavar="A,B,...",
                         help="fixed class order; labels outside it are an error")
    compare.add_argument("--ci", type=_number, default=UNSET, metavar="LEVEL",
                         help="level of the intervals (default: 0.95)")
    compare.add_argument("--resamples", type=RESAMPLES, default=UNSET, metavar="B",
                         help=f"paired bootstrap resamples (default: 2000, at least {MIN_RESAMPLES}, at "
                              f"most {MAX_RESAMPLES:,})")
    compare.add_argument("--permutations", type=RESAMPLES, metavar="P",
                         help="sign-flip permutations (default: as many as --resamples, at most "
                              f"{MAX_RESAMPLES:,})")
    compare.add_argument("--seed", type=SEED, metavar="S",
                         help="seed of resamples and permutations (default: a fixed seed)")
    compare.add_argument("--plot", metavar="DIR",
                         help="also draw R_K per model (three or more models) or B - A per "
                              "class (two) into DIR as PNG and SVG (needs the 'plot' extra)")
    _add_report_options(compare)
    return parser


