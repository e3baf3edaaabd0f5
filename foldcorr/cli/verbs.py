"""The verbs of the command line: each reads its arguments, calls the library and hands the
result to :func:`emit`, the one way out.

Exit codes: 0 success; 1 a gate or test condition failed; 2 bad input or
usage, with one line on stderr and no traceback. Heavy libraries are imported
only inside the verbs, so ``foldcorr --help`` starts fast.
"""

from __future__ import annotations

import os
import sys
from dataclasses import replace

from foldcorr._files import same_path
from foldcorr.cli.args import OPTION_OF_DEST, flag_names

__all__ = ["VERBS", "EXIT_OK", "EXIT_FAILED", "EXIT_USAGE", "check_targets", "given_options",
           "present", "emit", "emit_evaluation", "write_plots", "write_out", "available_memory",
           "DEMO_BYTES_PER_SAMPLE"]

EXIT_OK, EXIT_FAILED, EXIT_USAGE = 0, 1, 2


def given_options(args, keys=None) -> dict:
    """The options of :func:`foldcorr.pipeline.score` that the user gave, by option name.

    Options not given are absent from the namespace (see
    :mod:`foldcorr.cli.args`), so nothing here is a default.

    Examples
    --------
    >>> from foldcorr.cli.args import get_parser
    >>> given_options(get_parser().parse_args(["score", "p.csv", "--ci", "0.9"]))
    {'level': 0.9}
    """
    from dataclasses import fields

    from foldcorr.pipeline import TABLE_OPTIONS, ScoreOptions

    keys = set(keys if keys is not None else
               [f.name for f in fields(ScoreOptions)] + list(TABLE_OPTIONS))
    given = {OPTION_OF_DEST.get(dest, dest): value for dest, value in vars(args).items()}
    return {k: v for k, v in given.items() if k in keys}


def _split(given: dict) -> tuple:
    """``given`` as (ScoreOptions checked with the command-line names, table options)."""
    from dataclasses import fields

    from foldcorr.pipeline import ScoreOptions

    keys = {f.name for f in fields(ScoreOptions)}
    options = ScoreOptions(**{k: v for k, v in given.items() if k in keys}, names=flag_names())
    return options, {k: v for k, v in given.items() if k not in keys}


def table_source(args, path):
    """``path``, or standard input read whole when it is ``-`` (see
    :func:`foldcorr.sources.locations.read_stdin`; ``--input-format`` says its format)."""
    if path != "-":
        return path
    from foldcorr.sources.locations import read_stdin

    return read_stdin(input_format=getattr(args, "input_format", None))


def run_score(args, staging) -> int:
    from foldcorr.pipeline import score

    given = given_options(args)
    if given.get("cluster") is not None and getattr(args, "save", None):
        from foldcorr.errors import OptionError

        raise OptionError("`--save` keeps counts, not the samples' clusters, so a saved run "
                          "could not show its clustered intervals again; drop --save or --cluster")
    options, table = _split(given)
    _check_save(args, args.path)
    source = table_source(args, args.path)
    ev = score(source, names=flag_names(), progress=False if args.quiet else None, **table,
               **options.to_dict())
    request = _prepare_save(args, ev, options)
    for line in getattr(ev.extras.get("skipped_files"), "warnings", ()):
        print(f"foldcorr: {line}", file=sys.stderr)
    emit_evaluation(args, staging, ev, options.top)
    _write_save(staging, request)
    return EXIT_OK


def run_demo(args, staging) -> int:
    import tempfile

    from foldcorr.pipeline import score
    from foldcorr.sources.demo import DEMO_SAMPLES, DEMO_SEED, write_demo

    data = {"n": getattr(args, "samples", DEMO_SAMPLES), "seed": getattr(args, "seed", DEMO_SEED)}
    _check_memory(data["n"] * DEMO_BYTES_PER_SAMPLE, f"`--samples` {data['n']:,}")
    # the demo's seed also seeds the resamples
    options, _ = _split({**given_options(args), "seed": data["seed"]})
    _check_save(args, None)
    folder = args.out or tempfile.mkdtemp(prefix="foldcorr-demo-")
    path = write_demo(folder, **data)
    staging.note(f"demo data written to {path}")
    ev = score(path, **options.to_dict())
    request = _prepare_save(args, ev, options, source=path)
    emit_evaluation(args, staging, ev, options.top)
    _write_save(staging, request)
    return EXIT_OK


#: Peak memory of ``demo`` per sample, measured (about 370 bytes at 10^6 samples), rounded up.
DEMO_BYTES_PER_SAMPLE = 400


def available_memory() -> int | None:
    """Bytes of memory available to a new allocation (Linux ``MemAvailable``); None if unknown.

    Examples
    --------
    >>> available_memory() is None or available_memory() > 0
    True
    """
    try:
        with open("/proc/meminfo", encoding="ascii") as fh:
            for line in fh:
                if line.startswith("MemAvailable:"):
                    return int(line.split()[1]) * 1024
    except (OSError, ValueError, IndexError):
        pass
    return None


def _check_memory(needed: int, what: str) -> None:
    """Refuse, before allocating, a run that needs more memory than is available."""
    from foldcorr.errors import OptionError

    free = available_memory()
    if free is not None and needed > free:
        raise OptionError(f"{what} needs about {needed / 2**30:,.1f} GiB of memory, but only "
                          f"{free / 2**30:,.1f} GiB is available; ask for less")


def run_show(args, staging) -> int:
    from foldcorr.pipeline import replay

    ev, options = replay(args.path, names=flag_names(), **given_options(args, ["top"]))
    emit_evaluation(args, staging, ev, options.top)
    return EXIT_OK


def _check_save(args, source) -> None:
    """Refuse a ``--save`` target that is not NetCDF or is the input."""
    if getattr(args, "save", None):
        from foldcorr.sources.saved import check_save_target

        check_save_target(args.save, source)


def _prepare_save(args, ev, options, source=None):
    """The ``--save`` request (None without it), checked; written by :func:`_write_save`."""
    from foldcorr.pipeline import saved_options
    from foldcorr.sources.saving import prepare_save

    return prepare_save(getattr(args, "save", None), ev.tensor, source or args.path,
                        id_column=getattr(args, "id_column", None),
                        options=saved_options(options), where=getattr(args, "where", None),
                        matrix=getattr(args, "matrix", False),
                        weight=getattr(args, "weight", None))


def _write_save(staging, request) -> None:
    """Stage a prepared ``--save``, committed with the run's other outputs."""
    if request is not None:
        from dataclasses import replace

        with staging.writing(request.target) as tmp:
            replace(request, target=tmp).write()
        staging.note(f"evaluation saved to {request.target}")


def run_gate(args, staging) -> int:
    from foldcorr.errors import OptionError
    from foldcorr.gate import GateRules, check_gate
    from foldcorr.pipeline import load_gate_inputs
    from foldcorr.report import render
    from foldcorr.report.gate import junit_xml
    from foldcorr.sources.floors import read_class_floors

    given = present(args, ("resamples", "seed"))
    for flag, dest, does in (("--max-drop", "max_drop", "compares with"),
                             ("--confidence", "confidence", "applies to"),
                             ("--allow-new-classes", "allow_new_classes", "applies to")):
        if getattr(args, dest) not in (None, False) and not args.baseline:
            raise OptionError(f"`{flag}` {does} a baseline; give --baseline FILE too")
    if args.cluster is not None and (args.confidence is None or not args.baseline):
        raise OptionError("`--cluster` applies to the interval of the drop from a baseline, the "
                          "gate's only interval; give --baseline FILE --confidence LEVEL too")
    if args.confidence is not None:
        from foldcorr.analysis.resampling import check_level, check_resamples

        check_level(args.confidence, name="--confidence")
        if "resamples" in given:
            check_resamples(given["resamples"], name="--resamples")
    from foldcorr.pipeline import MULTILABEL_OPTIONS

    table = given_options(args, ["truth", "pred", "fold", "weight", "count", "classes", "matrix",
                                 "na_values", *MULTILABEL_OPTIONS])
    ev, samples, baseline, base_samples = load_gate_inputs(
        table_source(args, args.path), args.baseline, undefined=getattr(args, "undefined", None),
        id_column=args.id_column, cluster=args.cluster, **table)
    floors = read_class_floors(args.class_floors, ev.row_names) if args.class_floors else None
    if (args.groups or args.groups_other) and args.min_group_rk is None:
        raise OptionError("`--groups` and `--groups-other` of gate serve `--min-group-rk`; "
                          "give it too")
    from foldcorr.sources.groups import read_groups

    rules = GateRules(
        min_rk=args.min_rk, min_micro_mcc=args.min_micro_mcc, min_macro_mcc=args.min_macro_mcc,
        min_fold_rk=args.min_fold_rk, min_class_mcc=args.min_class_mcc,
        class_floors=floors, max_marginal_mismatch=args.max_marginal_mismatch,
        max_drop=(args.max_drop if args.max_drop is not None else 0.0) if args.baseline else None,
        allow_new_classes=args.allow_new_classes, confidence=args.confidence,
        min_group_rk=args.min_group_rk, groups=read_groups(args.groups) if args.groups else None,
        groups_other=args.groups_other,
        **{"n_resamples" if k == "resamples" else k: v for k, v in given.items()},
    )
    result = check_gate(ev, rules, baseline=baseline, samples=samples,
                        baseline_samples=base_samples)
    if args.junit:
        staging.write_text(args.junit, junit_xml(result))
    if args.markdown:
        staging.write_text(args.markdown, render(result, "markdown"))
    emit(args, staging, result)
    return EXIT_OK if result.passed else EXIT_FAILED


#: Options naming a file a verb writes (each verb has some of them).
TARGET_OPTIONS = ("output", "save", "junit", "markdown", "curve")
#: Options naming a file a verb reads.
INPUT_OPTIONS = ("path", "path_b", "baseline", "class_floors", "groups")


def check_targets(args) -> None:
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
        if not path or path == "-":  # standard output
            continue
        target = Path(path)
        folder = target.parent if str(target.parent) else Path(".")
        if target.is_dir():
            raise InvalidInputError(f"cannot write {path!r}: it is a folder")
        if not folder.is_dir():
            raise InvalidInputError(f"cannot write {path!r}: folder {str(folder)!r} does not exist")
        device = target.exists() and not target.is_file()  # written in place, folder unused
        if (not device and not os.access(folder, os.W_OK | os.X_OK)) or (
                target.exists() and not os.access(target, os.W_OK)):
            raise InvalidInputError(f"cannot write {path!r}: permission denied")
        for other, other_path in inputs:
            if same_path(target, Path(other_path)):
                raise OptionError(f"`--{name}` {path!r} is the input file {other_path!r} "
                                  f"({_flag(other)}); writing there would replace it, choose "
                                  "another path")
        for other, other_path in seen.items():
            if same_path(target, Path(other_path)):
                raise OptionError(f"`--{name}` {path!r} is also given to `--{other}`; give "
                                  "each output its own path")
        seen[name] = path
    plot = getattr(args, "plot", None)
    if plot and Path(plot).exists() and not Path(plot).is_dir():
        raise InvalidInputError(f"cannot draw plots into {plot!r}: it is a file; `--plot` takes a "
                                "folder")


def _flag(name: str) -> str:
    return {"path": "PATH", "path_b": "PATH_B"}.get(name, "--" + name.replace("_", "-"))


def run_sweep(args, staging) -> int:
    from foldcorr.analysis.thresholds import sweep
    from foldcorr.sources.multilabel import ScoreSpec, load_scores

    spec = ScoreSpec(**present(args, ("truth", "score", "truth_cols", "score_cols", "truth_prefix",
                                      "score_prefix", "fold", "positive")))
    table = load_scores(table_source(args, args.path), spec)
    result = sweep(table.truth, table.scores, labels=table.labels, folds=table.folds,
                   at=args.at, **present(args, ("undefined",)))
    if args.curve:
        from foldcorr.report.sweep import write_curve

        with staging.writing(args.curve) as tmp:
            write_curve(result, tmp)
    write_plots(args, staging, result, formats=("png",))
    emit(args, staging, result, **present(args, ("top",)), source=table.source)
    return EXIT_OK


#: Options of ``compare`` given to :func:`foldcorr.analysis.compare.compare_models`, by flag.
COMPARE_SETTINGS = {"ci": "level", "resamples": "n_resamples", "permutations": "n_permutations",
                    "seed": "seed", "undefined": "undefined"}


def run_compare(args, staging) -> int:
    from foldcorr.analysis.compare import compare_models
    from foldcorr.analysis.resampling import check_level, check_resamples
    from foldcorr.sources.paired import PairSpec

    spec = PairSpec(**present(args, ("truth", "pred_a", "pred_b", "pred", "id", "fold", "classes",
                                     "cluster")))
    settings = {key: value for dest, key in COMPARE_SETTINGS.items()
                if (value := getattr(args, dest, None)) is not None}
    if "level" in settings:
        check_level(settings["level"], name="--ci")
    for dest in ("resamples", "permutations"):
        if COMPARE_SETTINGS[dest] in settings:
            check_resamples(settings[COMPARE_SETTINGS[dest]], name=f"--{dest}")
    paths = [p for p in (args.path, args.path_b, *args.more) if p is not None]
    if paths.count("-") > 1:
        from foldcorr.errors import OptionError

        raise OptionError("standard input (-) can be read once; name it for one table only")
    paths = [table_source(args, p) for p in paths]
    path, path_b = paths[0], (paths[1] if args.path_b is not None else None)
    if args.models is not None and len(args.models) == 2 and len(paths) == 1:
        spec = replace(spec, pred_a=args.models[0], pred_b=args.models[1])
    elif args.models is not None or len(paths) > 2:
        return _compare_many(args, staging, paths, spec, settings)
    joint, cells = _load_pair(path, path_b, spec)
    result = compare_models(joint, cluster=cells, **settings)
    if args.path_b is None:
        names = (f"column {spec.pred_a!r}", f"column {spec.pred_b!r}")
    else:
        from pathlib import Path

        names = (f"{Path(str(path)).name}, column {spec.pred_a or spec.pred!r}",
                 f"{Path(str(path_b)).name}, column {spec.pred_b or spec.pred!r}")
    source = joint.attrs.get("source")
    write_plots(args, staging, result)
    emit(args, staging, result, **present(args, ("top",)), names=names, source=source)
    return EXIT_OK


def _load_pair(path, path_b, spec) -> tuple:
    """The joint tensor of two models and, with ``--cluster``, its cells by cluster."""
    from foldcorr.sources.paired import load_joint, load_joint_cells

    if spec.cluster is None:
        return load_joint(path, spec, path_b=path_b), None
    cells = load_joint_cells(path, spec, path_b=path_b)
    sources = [os.path.basename(str(getattr(p, "name", p))) for p in (path, path_b)
               if p is not None]
    return cells.tensor().assign_attrs(source=" + ".join(sources)), cells


#: The most models one comparison takes.
MAX_MODELS = 50


def _compare_many(args, staging, paths, spec, settings) -> int:
    """``compare`` with three or more models: rank them and compare each with the best."""
    from foldcorr.analysis.many import compare_many
    from foldcorr.errors import OptionError
    from foldcorr.sources.paired import load_models

    for flag, value in (("--pred-a", spec.pred_a), ("--pred-b", spec.pred_b),
                        ("--classes", spec.classes)):
        if value is not None:
            raise OptionError(f"`{flag}` applies to two models; with more, name them with "
                              "--models (one table) or give one table per model")
    table = load_models(paths, spec, models=args.models)
    if len(table.predictions) > MAX_MODELS:
        raise OptionError(f"`--models` takes at most {MAX_MODELS} models; got "
                          f"{len(table.predictions)}")
    result = compare_many(table.truth.to_numpy(), {k: v.to_numpy() for k, v in
                                                   table.predictions.items()},
                          folds=None if table.folds is None else table.folds.to_numpy(),
                          cluster=None if table.clusters is None else table.clusters.to_numpy(),
                          **settings)
    write_plots(args, staging, result)
    emit(args, staging, result, **present(args, ("top",)), source=table.source)
    return EXIT_OK


def present(args, names) -> dict:
    """The arguments among ``names`` that are in the namespace (given, or defaulting to None).

    Examples
    --------
    >>> import argparse
    >>> present(argparse.Namespace(truth="y"), ("truth", "fold"))
    {'truth': 'y'}
    """
    return {name: getattr(args, name) for name in names if hasattr(args, name)}


def _console():
    from rich.console import Console

    from foldcorr.report.text import text_width

    return Console(file=sys.stdout, width=text_width(sys.stdout),
                   no_color="NO_COLOR" in os.environ or None, highlight=False)




def emit_evaluation(args, staging, ev, top) -> None:
    """:func:`emit` of what :func:`foldcorr.pipeline.score` returned (and its ``--plot`` files)."""
    write_plots(args, staging, ev)
    emit(args, staging, ev, top=top)


def write_plots(args, staging, result, *, formats=("png", "svg")) -> None:
    """``--plot DIR``: every plot of ``result`` into DIR, staged with the run's other outputs."""
    if not getattr(args, "plot", None):
        return
    from foldcorr.report.plots import save_plots

    with staging.folder(args.plot) as tmp:
        written = save_plots(result, tmp, formats=formats)
    staging.note(f"{len(written)} plot files written to {args.plot}")


def emit(args, staging, result, **context) -> None:
    """The one way out: any result, in ``--format``, to ``--output`` or stdout.

    Plain text without ``--output`` goes through a rich console (colour only on
    a terminal, never with ``NO_COLOR``); everything else is the text of
    :func:`foldcorr.report.render`, written by
    :func:`foldcorr.report.documents.write_to` (JSON piece by piece). A file is
    staged in ``staging`` (a :class:`foldcorr._files.Staging`) and appears
    only when the whole run succeeded. ``context`` is what the result's
    document takes (``top``, ``names``, ``source``).
    """
    from foldcorr.report import document
    from foldcorr.report.documents import write_to

    doc = document(result, fmt=args.format, **context)
    if args.output or args.format != "text":
        # JSON goes out piece by piece: no string of the whole document at many classes
        if args.output and args.output != "-":
            with staging.writing(args.output) as tmp, open(tmp, "w", encoding="utf-8") as fh:
                write_to(doc, args.format, fh)
        else:
            write_to(doc, args.format, sys.stdout)
    else:
        from foldcorr.report.text import render_rich

        _console().print(render_rich(doc.report))


def write_out(staging, target, text: str) -> None:
    """Stage ``text`` for the file ``target`` (replaced whole), or write it to stdout (None or -)."""
    if target and target != "-":
        staging.write_text(target, text)
    else:
        sys.stdout.write(text)


#: The function of each verb.
VERBS = {"score": run_score, "show": run_show, "gate": run_gate, "sweep": run_sweep,
         "demo": run_demo, "compare": run_compare}
