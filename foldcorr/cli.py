"""The command line: argument parsing and exit codes over the public API.

Exit codes: 0 success; 1 a gate or test condition failed; 2 bad input or
usage, with one line on stderr and no traceback. Heavy libraries are imported
only inside the verbs, so ``foldcorr --help`` starts fast.
"""

from __future__ import annotations

import argparse
import os
import sys

from foldcorr._version import __version__

__all__ = ["main", "get_parser", "run"]

EXIT_OK, EXIT_FAILED, EXIT_USAGE = 0, 1, 2
FORMATS = ("text", "json", "markdown", "html")
GATE_FORMATS = ("text", "json", "markdown")


def _top(value: str):
    if value == "all":
        return None
    try:
        number = int(value)
    except ValueError:
        number = -1
    if number < 1:
        raise argparse.ArgumentTypeError(f"expected a positive whole number or 'all'; got {value!r}")
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


def _add_report_options(p: argparse.ArgumentParser) -> None:
    p.add_argument("--format", choices=FORMATS, default="text",
                   help="output format (default: text)")
    p.add_argument("--output", metavar="FILE",
                   help="write the report to FILE (replaced whole, never half-written)")
    p.add_argument("--top", type=_top, default=20, metavar="N|all",
                   help="per-class rows shown in text and Markdown (default: 20)")
    p.add_argument("--undefined", choices=("zero", "nan"), default="zero",
                   help="value of 0/0 metrics: zero (default) or nan (null in JSON)")


def _add_table_options(p: argparse.ArgumentParser) -> None:
    p.add_argument("--truth", default="actual", metavar="COL",
                   help="column of actual labels (default: actual)")
    p.add_argument("--pred", default="predicted", metavar="COL",
                   help="column of predicted labels (default: predicted)")
    p.add_argument("--fold", default="auto", metavar="COL",
                   help="column of fold labels (default: 'fold' when present)")
    p.add_argument("--weight", metavar="COL", help="column of sample weights")
    p.add_argument("--classes", type=_class_list, metavar="A,B,...",
                   help="fixed class order; labels outside it are an error")


def _add_save_options(p: argparse.ArgumentParser) -> None:
    p.add_argument("--save", metavar="FILE.nc",
                   help="also save the confusion tensor with provenance as NetCDF-4 "
                        "(read back by show, score and gate)")
    p.add_argument("--id", metavar="COL", dest="id_column",
                   help="with --save: column of unique sample ids; per-sample labels are "
                        "saved too, so that a later gate can pair the samples")


def _add_source_options(p: argparse.ArgumentParser) -> None:
    p.add_argument("--where", metavar="EXPR",
                   help='row filter, e.g. \'split == "test" and fold != 3\' '
                        "(comparisons joined by and/or/not; see docs/streaming.md)")
    p.add_argument("--engine", choices=("local", "dask"), default="local",
                   help="local: stream in this process (default); dask: tally on a Dask cluster")
    p.add_argument("--scheduler", metavar="ADDRESS",
                   help="Dask scheduler to use, e.g. tcp://scheduler.example:8786 (default: a local "
                        "cluster on 127.0.0.1, one worker per core)")
    p.add_argument("--skip-bad-files", action="store_true",
                   help="skip unreadable files of a dataset and report them, instead of stopping")
    p.add_argument("--quiet", action="store_true",
                   help="no progress bar (it is shown only when stderr is a terminal)")


def _add_analysis_options(p: argparse.ArgumentParser) -> None:
    """Options of the analyses in :data:`ANALYSES`, shared by ``score`` and ``demo``."""
    p.add_argument("--plot", metavar="DIR",
                   help="also draw the loss budget, confusion heatmap and fold plot "
                        "into DIR as PNG and SVG (needs the 'plot' extra)")
    p.add_argument("--ci", type=float, metavar="LEVEL",
                   help="add bootstrap intervals at this level, e.g. 0.95")
    p.add_argument("--resamples", type=int, metavar="B",
                   help="bootstrap resamples for --ci (default: 2000, at least 100)")
    p.add_argument("--ci-method", choices=("percentile", "bca"),
                   help="interval method for --ci: percentile (default) or bca")
    if "--seed" not in p._option_string_actions:  # demo's --seed seeds its data and this too
        p.add_argument("--seed", type=int, metavar="S",
                       help="seed of the resamples, for reproducible intervals")
    p.add_argument("--prevalence", metavar="uniform|A=0.2,B=0.8|FILE.csv",
                   help="also show every pooled figure at this target class prevalence, "
                        "assuming label shift; 'uniform' shares it equally among the "
                        "classes that have samples (see docs/shift.md)")


def _column_list(value: str) -> tuple:
    names = tuple(v.strip() for v in value.split(","))
    if not all(names):
        raise argparse.ArgumentTypeError(f"expected comma-separated column names; got {value!r}")
    return names


def _add_multilabel_options(p: argparse.ArgumentParser) -> None:
    group = p.add_argument_group(
        "multilabel mode", "chosen only by these flags: indicator columns by name or by prefix, "
                           "or --sep for delimited label sets in --truth and --pred")
    group.add_argument("--truth-cols", type=_column_list, metavar="A,B,...",
                       help="0/1 truth columns, one per label")
    group.add_argument("--pred-cols", type=_column_list, metavar="A,B,...",
                       help="0/1 prediction columns, paired in order with --truth-cols")
    group.add_argument("--truth-prefix", metavar="PREFIX",
                       help="0/1 truth columns named PREFIX + label")
    group.add_argument("--pred-prefix", metavar="PREFIX",
                       help="0/1 prediction columns named PREFIX + label, paired by label")
    group.add_argument("--sep", metavar="CHAR",
                       help="--truth and --pred hold label sets joined by CHAR (empty = no label)")


def _multilabel_requested(args) -> bool:
    return any(getattr(args, name, None) is not None
               for name in ("truth_cols", "pred_cols", "truth_prefix", "pred_prefix", "sep"))


def get_parser() -> argparse.ArgumentParser:
    """Build the argument parser with one subcommand per verb.

    Examples
    --------
    >>> get_parser().parse_args(["score", "p.csv", "--top", "all"]).top is None
    True
    """
    parser = argparse.ArgumentParser(
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
    score.add_argument("--matrix", action="store_true",
                       help="PATH is a counts matrix: actual labels down, predicted across")
    _add_source_options(score)
    _add_report_options(score)
    _add_save_options(score)
    _add_analysis_options(score)
    _add_multilabel_options(score)
    score.set_defaults(func=_run_score)

    show = verbs.add_parser("show", help="render a saved evaluation as score showed it",
                            description="Render a saved evaluation (.nc, written by --save) "
                                        "with the options it was saved with.")
    show.add_argument("path", metavar="FILE.nc", help="saved evaluation")
    show.add_argument("--format", choices=FORMATS, default="text",
                      help="output format (default: text)")
    show.add_argument("--output", metavar="FILE",
                      help="write the report to FILE (replaced whole, never half-written)")
    show.add_argument("--top", type=_top, default=argparse.SUPPRESS, metavar="N|all",
                      help="per-class rows shown (default: as saved)")
    show.set_defaults(func=_run_show)

    gate = verbs.add_parser(
        "gate", help="fail (exit 1) when an evaluation breaks a rule",
        description="Check a prediction table or saved evaluation against rules; exit 0 "
                    "when all hold, 1 when any fails, 2 on bad input.")
    gate.add_argument("path", metavar="SOURCE", help="prediction table, counts matrix or .nc")
    _add_table_options(gate)
    gate.add_argument("--matrix", action="store_true", help="SOURCE is a counts matrix CSV")
    gate.add_argument("--id", metavar="COL", dest="id_column",
                      help="column of unique sample ids in prediction tables (for a paired "
                           "baseline comparison)")
    rules = gate.add_argument_group("rules")
    rules.add_argument("--min-rk", type=_number, metavar="X", help="pooled R_K must be >= X")
    rules.add_argument("--min-fold-rk", type=_number, metavar="X",
                       help="R_K of every fold must be >= X")
    rules.add_argument("--min-class-mcc", type=_number, metavar="X",
                       help="one-vs-rest MCC of every class must be >= X")
    rules.add_argument("--class-floors", metavar="FILE",
                       help="CSV class,floor: each listed class's MCC must be >= its floor")
    rules.add_argument("--max-marginal-mismatch", type=_number, metavar="X",
                       help="marginal mismatch term must be <= X")
    rules.add_argument("--baseline", metavar="FILE",
                       help="baseline to compare with (a saved .nc, or a prediction table)")
    rules.add_argument("--max-drop", type=_number, metavar="D",
                       help="pooled R_K may fall below the baseline's by at most D "
                            "(default with --baseline: 0)")
    rules.add_argument("--allow-new-classes", action="store_true",
                       help="compare with a baseline of other classes on the shared ones")
    rules.add_argument("--confidence", type=_number, metavar="LEVEL",
                       help="with --baseline: a drop counts as a regression only when the whole "
                            "bootstrap interval of the drop at this level (e.g. 0.95) lies "
                            "above D; paired when both sides carry the same sample ids")
    gate.add_argument("--resamples", type=int, default=2000, metavar="B",
                      help="bootstrap resamples for --confidence (default: 2000)")
    gate.add_argument("--seed", type=int, default=None, metavar="S",
                      help="seed of the bootstrap for --confidence")
    gate.add_argument("--undefined", choices=("zero", "nan"), default=None,
                      help="value of 0/0 metrics (default: as saved, else zero); "
                           "an undefined figure fails its rule")
    gate.add_argument("--format", choices=GATE_FORMATS, default="text",
                      help="output format (default: text)")
    gate.add_argument("--output", metavar="FILE", help="write the result to FILE")
    gate.add_argument("--junit", metavar="FILE", help="also write a JUnit XML report")
    gate.add_argument("--markdown", metavar="FILE",
                      help="also write a Markdown summary (job summary, pull-request comment)")
    gate.set_defaults(func=_run_gate)

    sweep = verbs.add_parser(
        "sweep", help="MCC at every threshold of a score, with a cross-fold threshold choice",
        description="Sweep the threshold of a score (higher means positive): MCC, accuracy, F1, "
                    "recall and precision at every distinct threshold; the best threshold "
                    "in-sample and, with folds, the threshold chosen on the other folds and "
                    "scored on each held-out fold.")
    sweep.add_argument("path", metavar="PATH", help="table of truth and scores")
    sweep.add_argument("--truth", default="actual", metavar="COL",
                       help="binary truth column (default: actual)")
    sweep.add_argument("--score", default="score", metavar="COL",
                       help="score column (default: score)")
    sweep.add_argument("--fold", default="auto", metavar="COL",
                       help="column of fold labels (default: 'fold' when present)")
    sweep.add_argument("--positive", metavar="VALUE",
                       help="truth value meaning positive (needed unless truth is 0/1 or "
                            "true/false)")
    sweep.add_argument("--at", type=float, metavar="THRESHOLD",
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
    sweep.set_defaults(func=_run_sweep)

    demo = verbs.add_parser("demo", help="write the invented plankton demo and score it",
                            description="Write an invented plankton-imaging demo (36 taxa, "
                                        "5 folds) to a folder and score it.")
    demo.add_argument("--out", metavar="DIR",
                      help="folder for the demo files (default: a new temporary folder)")
    demo.add_argument("--samples", type=int, default=24_000, metavar="N",
                      help="number of images (default: 24000)")
    demo.add_argument("--seed", type=int, default=20261201, metavar="S",
                      help="seed of the generator (default gives the bundled demo)")
    _add_report_options(demo)
    _add_save_options(demo)
    _add_analysis_options(demo)
    demo.set_defaults(func=_run_demo)

    compare = verbs.add_parser(
        "compare", help="compare two models scored on the same samples",
        description="Paired comparison of two models on the same samples: either one table "
                    "with two prediction columns (--pred-a COL --pred-b COL), or two tables, "
                    "one per model, joined on an id column (--id COL).")
    compare.add_argument("path", metavar="PATH", help="table with truth (and both predictions)")
    compare.add_argument("path_b", metavar="PATH_B", nargs="?",
                         help="second table with model B's predictions, joined on --id")
    compare.add_argument("--truth", default="actual", metavar="COL",
                         help="column of actual labels (default: actual)")
    compare.add_argument("--pred-a", metavar="COL", help="prediction column of model A")
    compare.add_argument("--pred-b", metavar="COL", help="prediction column of model B")
    compare.add_argument("--pred", default="predicted", metavar="COL",
                         help="prediction column of each of two tables (default: predicted)")
    compare.add_argument("--id", metavar="COL", help="id column joining two tables")
    compare.add_argument("--fold", default="auto", metavar="COL",
                         help="column of fold labels (default: 'fold' when present)")
    compare.add_argument("--classes", type=_class_list, metavar="A,B,...",
                         help="fixed class order; labels outside it are an error")
    compare.add_argument("--ci", type=float, default=0.95, metavar="LEVEL",
                         help="level of the intervals (default: 0.95)")
    compare.add_argument("--resamples", type=int, default=2000, metavar="B",
                         help="paired bootstrap resamples (default: 2000, at least 100)")
    compare.add_argument("--permutations", type=int, metavar="P",
                         help="sign-flip permutations (default: as many as --resamples)")
    compare.add_argument("--seed", type=int, metavar="S",
                         help="seed of resamples and permutations")
    _add_report_options(compare)
    compare.set_defaults(func=_run_compare)
    return parser


def main(argv=None) -> int:
    """Run the command line; return the exit code instead of exiting.

    Examples
    --------
    >>> main(["--version"])
    foldcorr ...
    0
    """
    parser = get_parser()
    try:
        args = parser.parse_args(argv)
    except SystemExit as exc:
        return int(exc.code or 0)
    from foldcorr.errors import FoldcorrError

    try:
        _check_targets(args)
        return args.func(args)
    except FoldcorrError as exc:
        print(f"foldcorr: error: {exc}", file=sys.stderr)
        return EXIT_USAGE
    except KeyboardInterrupt:
        print("foldcorr: interrupted", file=sys.stderr)
        return 130
    except BrokenPipeError:
        sys.stderr.close()
        return EXIT_OK


def _spec(args):
    from foldcorr.sources.tables import TableSpec

    return TableSpec(truth=args.truth, pred=args.pred, fold=args.fold,
                     weight=args.weight, classes=args.classes)


def _run_score(args) -> int:
    from foldcorr.evaluation import evaluate
    from foldcorr.sources.tables import load_tensor

    if _multilabel_requested(args):
        return _run_score_multilabel(args)

    if args.scheduler and args.engine != "dask":
        from foldcorr.errors import OptionError

        raise OptionError(f"`--scheduler` needs `--engine dask`; got --engine {args.engine!r}")
    if args.matrix and (args.where or args.engine != "local"):
        from foldcorr.errors import OptionError

        raise OptionError("`--where` and `--engine` apply to prediction tables, not to --matrix")
    _check_save(args, args.path)
    tensor = load_tensor(args.path, _spec(args), matrix=args.matrix, where=args.where,
                         skip_bad_files=args.skip_bad_files,
                         progress=False if args.quiet else None,
                         engine=args.engine, scheduler=args.scheduler)
    request = _prepare_save(args, tensor, args.path)
    ev = evaluate(tensor, undefined=args.undefined)
    if tensor.attrs.get("skipped_files"):
        from foldcorr.sources.stream import SkippedFiles

        skipped = SkippedFiles.of(tensor)
        for line in skipped.warnings:
            print(f"foldcorr: {line}", file=sys.stderr)
        ev = ev.with_extra("skipped_files", skipped)
    _emit(args, _analyse(args, ev))
    _write_save(request)
    return EXIT_OK


#: Options naming a file a verb writes (each verb has some of them).
TARGET_OPTIONS = ("output", "save", "junit", "markdown", "curve")
#: Options naming a file a verb reads.
INPUT_OPTIONS = ("path", "path_b", "baseline", "class_floors")


def _check_targets(args) -> None:
    """Refuse unwritable output files before any work or any output is done.

    One check for every verb: each file option of :data:`TARGET_OPTIONS` must
    name a file (not a folder) in an existing, writable folder, differ from
    the other targets and from the inputs of :data:`INPUT_OPTIONS`.
    """
    from pathlib import Path

    from foldcorr.errors import InvalidInputError, OptionError

    seen: dict = {}
    inputs = [(name, getattr(args, name)) for name in INPUT_OPTIONS
              if isinstance(getattr(args, name, None), str)]
    for name in TARGET_OPTIONS:
        path = getattr(args, name, None)
        if not path:
            continue
        target = Path(path)
        folder = target.parent if str(target.parent) else Path(".")
        if target.is_dir():
            raise InvalidInputError(f"cannot write {path!r}: it is a folder")
        if not folder.is_dir():
            raise InvalidInputError(f"cannot write {path!r}: folder {str(folder)!r} does not exist")
        if not os.access(folder, os.W_OK | os.X_OK) or (target.exists()
                                                        and not os.access(target, os.W_OK)):
            raise InvalidInputError(f"cannot write {path!r}: permission denied")
        for other, other_path in inputs:
            if _same_path(target, Path(other_path)):
                raise OptionError(f"`--{name}` {path!r} is the input file {other_path!r} "
                                  f"({_flag(other)}); writing there would replace it, choose "
                                  "another path")
        for other, other_path in seen.items():
            if _same_path(target, Path(other_path)):
                raise OptionError(f"`--{name}` {path!r} is also given to `--{other}`; give "
                                  "each output its own path")
        seen[name] = path


def _flag(name: str) -> str:
    return {"path": "PATH", "path_b": "PATH_B"}.get(name, "--" + name.replace("_", "-"))


def _same_path(a, b) -> bool:
    try:
        if a.exists() and b.exists():
            return a.samefile(b)
        return a.resolve() == b.resolve()
    except OSError:
        return False


def _check_save(args, source) -> None:
    """Refuse a ``--save`` target that is not NetCDF or is the input."""
    if getattr(args, "save", None):
        from foldcorr.sources.saved import check_save_target

        check_save_target(args.save, source)


def _analysis_parser() -> argparse.ArgumentParser:
    p = argparse.ArgumentParser(add_help=False)
    _add_analysis_options(p)
    return p


def _report_options(args) -> dict:
    """The options that shaped a report, to store with a saved evaluation."""
    names = [a.dest for a in _analysis_parser()._actions if a.dest != "help"]
    options = {"undefined": args.undefined, "top": args.top}
    options.update({name: getattr(args, name, None) for name in names})
    return options


def _analysis_args(options: dict):
    """A namespace for :data:`ANALYSES` from stored options (defaults for the rest)."""
    ns = _analysis_parser().parse_args([])
    for name, value in options.items():
        setattr(ns, name, value)
    return ns


def _prepare_save(args, tensor, source):
    """The ``--save`` request (None without it), checked; written by :func:`_write_save`."""
    from foldcorr.sources.saved import prepare_save

    return prepare_save(getattr(args, "save", None), tensor, source,
                        id_column=getattr(args, "id_column", None),
                        options=_report_options(args), where=getattr(args, "where", None),
                        matrix=getattr(args, "matrix", False),
                        weight=getattr(args, "weight", None))


def _write_save(request) -> None:
    """Write a prepared ``--save`` once everything else succeeded."""
    if request is not None:
        print(f"evaluation saved to {request.write()}", file=sys.stderr)


def _run_show(args) -> int:
    from foldcorr.evaluation import evaluate
    from foldcorr.sources.saved import load_saved

    saved = load_saved(args.path)
    options = dict(saved.options)
    undefined = options.get("undefined", "zero")
    ev = _analyse(_analysis_args(options), evaluate(saved.tensor, undefined=undefined))
    top = getattr(args, "top", options.get("top", 20))
    _emit(argparse.Namespace(output=args.output, format=args.format, top=top), ev)
    return EXIT_OK


def _gate_source(path, args, undefined, *, baseline=False):
    """Evaluation and samples (or None) of a gate source or baseline.

    Table options describe the table among SOURCE and --baseline; they are
    refused when both are saved, and --classes reorders a saved SOURCE.
    """
    from foldcorr.evaluation import evaluate
    from foldcorr.sources.saved import is_saved_path, load_saved, read_samples
    from foldcorr.sources.tables import TableSpec, check_saved_options, load_tensor

    if is_saved_path(path):
        if not any(p and not is_saved_path(p) for p in (args.path, args.baseline)):
            check_saved_options(path, _spec(args), matrix=args.matrix,
                                id_column=args.id_column)
        saved = load_saved(path)
        tensor = saved.tensor
        if args.classes and not baseline:
            tensor = load_tensor(path, TableSpec(classes=args.classes))
        chosen = undefined or saved.options.get("undefined", "zero")
        return evaluate(tensor, undefined=chosen), saved.samples
    tensor = load_tensor(path, _spec(args), matrix=args.matrix)
    samples = None
    if args.id_column and not args.matrix:
        samples = read_samples(path, tensor, args.id_column)
    return evaluate(tensor, undefined=undefined or "zero"), samples


def _run_gate(args) -> int:
    from foldcorr.errors import OptionError
    from foldcorr.sources.floors import read_class_floors
    from foldcorr.gate import GateRules, check_gate
    from foldcorr.report.gate import gate_report, junit_xml, render_gate

    if args.max_drop is not None and not args.baseline:
        raise OptionError("`--max-drop` compares with a baseline; give --baseline FILE too")
    if args.confidence is not None and not args.baseline:
        raise OptionError("`--confidence` applies to a baseline; give --baseline FILE too")
    if args.confidence is not None:
        from foldcorr.analysis.uncertainty import check_level, check_resamples

        check_level(args.confidence, name="--confidence")
        check_resamples(args.resamples, name="--resamples")
    if args.allow_new_classes and not args.baseline:
        raise OptionError("`--allow-new-classes` applies to a baseline; give --baseline FILE too")
    ev, samples = _gate_source(args.path, args, args.undefined)
    baseline = base_samples = None
    if args.baseline:
        baseline, base_samples = _gate_source(args.baseline, args, args.undefined or ev.undefined,
                                              baseline=True)
    floors = read_class_floors(args.class_floors, ev.classes) if args.class_floors else None
    rules = GateRules(
        min_rk=args.min_rk, min_fold_rk=args.min_fold_rk, min_class_mcc=args.min_class_mcc,
        class_floors=floors, max_marginal_mismatch=args.max_marginal_mismatch,
        max_drop=(args.max_drop if args.max_drop is not None else 0.0) if args.baseline else None,
        allow_new_classes=args.allow_new_classes, confidence=args.confidence,
        n_resamples=args.resamples, seed=args.seed,
    )
    result = check_gate(ev, rules, baseline=baseline, samples=samples,
                        baseline_samples=base_samples)
    from foldcorr._files import write_text

    if args.junit:
        write_text(args.junit, junit_xml(result))
    if args.markdown:
        write_text(args.markdown, render_gate(result, "markdown"))
    if args.output or args.format != "text":
        text = render_gate(result, args.format)
        if args.output:
            write_text(args.output, text)
        else:
            sys.stdout.write(text)
    else:
        _console().print(_rich(gate_report(result)))
    return EXIT_OK if result.passed else EXIT_FAILED

def _run_score_multilabel(args) -> int:
    from foldcorr.errors import OptionError
    from foldcorr.evaluation import evaluate
    from foldcorr.sources.multilabel import MultilabelSpec, load_multilabel

    if args.matrix:
        raise OptionError("--matrix reads a multiclass counts matrix; it does not combine with "
                          "the multilabel flags")
    for flag in ("prevalence", "plot", "where", "scheduler", "save"):
        if getattr(args, flag, None) is not None:
            raise OptionError(f"--{flag} applies to multiclass scoring; it does not combine with "
                              "the multilabel flags")
    if getattr(args, "engine", "local") != "local" or getattr(args, "skip_bad_files", False):
        raise OptionError("--engine and --skip-bad-files apply to multiclass scoring; multilabel "
                          "tables are read whole, in this process")
    spec = MultilabelSpec(truth_cols=args.truth_cols, pred_cols=args.pred_cols,
                          truth_prefix=args.truth_prefix, pred_prefix=args.pred_prefix,
                          truth=args.truth, pred=args.pred, sep=args.sep, fold=args.fold,
                          weight=args.weight, labels=args.classes)
    ev = evaluate(load_multilabel(args.path, spec), undefined=args.undefined)
    for step in MULTILABEL_ANALYSES:
        ev = step(args, ev)
    from foldcorr.report.json import score_dict as multilabel_dict
    from foldcorr.report.tables import score_report as multilabel_report

    _emit_report(args, multilabel_report(ev, top=args.top), lambda: multilabel_dict(ev))
    return EXIT_OK


def _run_sweep(args) -> int:
    from foldcorr.sources.multilabel import ScoreSpec, load_scores
    from foldcorr.analysis.thresholds import sweep

    spec = ScoreSpec(truth=args.truth, score=args.score, truth_cols=args.truth_cols,
                     score_cols=args.score_cols, truth_prefix=args.truth_prefix,
                     score_prefix=args.score_prefix, fold=args.fold, positive=args.positive)
    table = load_scores(args.path, spec)
    result = sweep(table.truth, table.scores, labels=table.labels, folds=table.folds,
                   at=args.at, undefined=args.undefined)
    if args.curve:
        from foldcorr.report.sweep import write_curve

        write_curve(result, args.curve)
    if args.plot:
        from foldcorr.report.sweep_plots import plot_sweep

        paths = plot_sweep(result, args.plot)
        print(f"{len(paths)} figure(s) written to {args.plot}", file=sys.stderr)
    from foldcorr.report.sweep import sweep_dict, sweep_report

    _emit_report(args, sweep_report(result, top=args.top, source=table.source),
                 lambda: sweep_dict(result, source=table.source))
    return EXIT_OK


def _shift_step(args, ev):
    value = getattr(args, "prevalence", None)
    if value is None:
        return ev
    from foldcorr.analysis.shift import shifted_figures
    from foldcorr.sources.multilabel import read_prevalence

    return ev.with_extra("shifted", shifted_figures(ev.tensor, read_prevalence(value),
                                                    undefined=ev.undefined))


#: Steps that attach analysis sections to an evaluation, from the parsed
#: arguments: each is ``(args, evaluation) -> evaluation`` and returns the
#: evaluation unchanged when its options are not set.
ANALYSES: list = [_shift_step]


def _interval_settings(args) -> dict | None:
    """Bootstrap settings from ``--ci``/``--resamples``/``--ci-method``/``--seed``, checked.

    None when ``--ci`` is not given (then the other two must not be either).
    """
    level = getattr(args, "ci", None)
    resamples = getattr(args, "resamples", None)
    method = getattr(args, "ci_method", None)
    if level is None:
        for flag, value in (("--resamples", resamples), ("--ci-method", method)):
            if value is not None:
                from foldcorr.errors import OptionError

                raise OptionError(f"`{flag}` needs `--ci LEVEL` (e.g. --ci 0.95); got {flag} "
                                  f"{value!r} without it")
        return None
    from foldcorr.analysis.uncertainty import check_level, check_resamples

    check_level(level, name="--ci")
    if resamples is not None:
        check_resamples(resamples, name="--resamples")
    return {"level": level, "n_resamples": 2000 if resamples is None else resamples,
            "method": method or "percentile", "seed": getattr(args, "seed", None)}


def _multilabel_intervals_step(args, ev):
    """Bootstrap intervals per label and of micro/macro/weighted MCC when ``--ci`` is given."""
    settings = _interval_settings(args)
    if settings is None:
        return ev
    from foldcorr.analysis.multilabel import multilabel_intervals

    return ev.with_extra("intervals", multilabel_intervals(ev.tensor, **settings,
                                                           undefined=ev.undefined))


#: The same for multilabel evaluations (``score`` with the multilabel flags).
MULTILABEL_ANALYSES: list = [_multilabel_intervals_step]


def _repair_step(args, ev):
    """Always on: repair gains, costliest confusions, leave-class-out, fold stability."""
    from foldcorr.analysis.repair import repair_analysis

    result = repair_analysis(ev.tensor, top=getattr(args, "top", 20),
                             undefined=getattr(args, "undefined", "zero"))
    return ev.with_extra("repair", result)


ANALYSES.append(_repair_step)


def _uncertainty_step(args, ev):
    """Attach bootstrap intervals and fold statistics when ``--ci`` is given."""
    settings = _interval_settings(args)
    if settings is None:
        return ev
    from foldcorr.analysis.uncertainty import summarise_uncertainty

    return ev.with_extra("uncertainty", summarise_uncertainty(ev.tensor, **settings,
                                                              undefined=ev.undefined))


ANALYSES.append(_uncertainty_step)


def _analyse(args, ev):
    for step in ANALYSES:
        ev = step(args, ev)
    return ev


def _run_demo(args) -> int:
    import tempfile

    from foldcorr.sources.demo import write_demo
    from foldcorr.errors import OptionError
    from foldcorr.evaluation import evaluate
    from foldcorr.sources.tables import TableSpec, load_tensor

    if args.samples < 100:
        raise OptionError(f"`--samples` must be at least 100; got {args.samples!r}")
    _check_save(args, None)
    folder = args.out or tempfile.mkdtemp(prefix="foldcorr-demo-")
    path = write_demo(folder, n=args.samples, seed=args.seed)
    print(f"demo data written to {path}", file=sys.stderr)
    tensor = load_tensor(path, TableSpec())
    request = _prepare_save(args, tensor, path)
    _emit(args, _analyse(args, evaluate(tensor, undefined=args.undefined)))
    _write_save(request)
    return EXIT_OK


def _run_compare(args) -> int:
    from foldcorr.analysis.compare import compare_models
    from foldcorr.sources.paired import PairSpec, load_joint
    from foldcorr.report.compare import compare_report, render_compare

    spec = PairSpec(truth=args.truth, pred_a=args.pred_a, pred_b=args.pred_b, pred=args.pred,
                    id=args.id, fold=args.fold, classes=args.classes)
    from foldcorr.analysis.uncertainty import check_level, check_resamples

    check_level(args.ci, name="--ci")
    check_resamples(args.resamples, name="--resamples")
    if args.permutations is not None:
        check_resamples(args.permutations, name="--permutations")
    joint = load_joint(args.path, spec, path_b=args.path_b)
    result = compare_models(joint, n_resamples=args.resamples, level=args.ci, seed=args.seed,
                            n_permutations=args.permutations, undefined=args.undefined)
    if args.path_b is None:
        names = (f"column {args.pred_a!r}", f"column {args.pred_b!r}")
    else:
        from pathlib import Path

        names = (f"{Path(args.path).name}, column {args.pred_a or args.pred!r}",
                 f"{Path(args.path_b).name}, column {args.pred_b or args.pred!r}")
    source = joint.attrs.get("source")
    if args.output or args.format != "text":
        text = render_compare(result, args.format, names=names, top=args.top, source=source)
        if args.output:
            from foldcorr._files import write_text

            write_text(args.output, text)
        else:
            sys.stdout.write(text)
        return EXIT_OK
    _console().print(_rich(compare_report(result, names=names, top=args.top, source=source)))
    return EXIT_OK


def _rich(report):
    from foldcorr.report.text import render_rich

    return render_rich(report)


def _console():
    from rich.console import Console

    from foldcorr.report.text import PLAIN_WIDTH

    terminal = sys.stdout.isatty()
    return Console(file=sys.stdout, width=None if terminal else PLAIN_WIDTH,
                   no_color="NO_COLOR" in os.environ or None, highlight=False)


def _emit_report(args, report, make_json) -> None:
    """Write a Report (text, Markdown) or its JSON document to --output or stdout."""
    if args.output or args.format != "text":
        from foldcorr.report.documents import render_report

        text = render_report(report, make_json, args.format)
        if args.output:
            from foldcorr._files import write_text

            write_text(args.output, text)
        else:
            sys.stdout.write(text)
        return
    _console().print(_rich(report))


def _emit(args, ev) -> None:
    """Write an evaluation to --output or stdout in the chosen format (and --plot files)."""
    if getattr(args, "plot", None):
        from foldcorr.report.plots import save_plots

        written = save_plots(ev, args.plot)
        print(f"{len(written)} plot files written to {args.plot}", file=sys.stderr)
    if args.output:
        from foldcorr._files import write_text
        from foldcorr.report import render_score

        write_text(args.output, render_score(ev, args.format, top=args.top))
        return
    if args.format != "text":
        from foldcorr.report import render_score

        sys.stdout.write(render_score(ev, args.format, top=args.top))
        return
    from foldcorr.report.text import render_rich

    _console().print(render_rich(ev, top=args.top))


def run() -> None:
    """Console-script entry point: :func:`main` with ``sys.exit``."""
    sys.exit(main())
