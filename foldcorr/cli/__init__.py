"""The command line: argument parsing, exit codes and one way out, over the public API.

Exit codes: 0 success; 1 a gate or test condition failed; 2 bad input or
usage, with one line on stderr and no traceback; 130 interrupted (Ctrl-C or
SIGTERM). Every output file of a run is staged and appears only when the
whole run succeeded (:class:`foldcorr._files.Staging`). :mod:`foldcorr.cli.args`
builds the parser, :mod:`foldcorr.cli.verbs` runs each verb.
"""

from __future__ import annotations

import contextlib
import os
import sys
import warnings

from foldcorr.cli.args import get_parser

__all__ = ["main", "get_parser", "run", "EXIT_INTERRUPTED", "OUT_OF_MEMORY"]

#: Exit code of an interrupted run (128 + SIGINT, as shells report it).
EXIT_INTERRUPTED = 130
#: What to say when memory runs out.
OUT_OF_MEMORY = ("out of memory: the run needs more memory than is free; use fewer --samples, "
                 "--resamples or --permutations, fewer classes, or --engine dask")


def _fail(message: str) -> int:
    print(f"foldcorr: error: {message}", file=sys.stderr)
    return 2


@contextlib.contextmanager
def label_warnings_as_lines():
    """Within the block, each distinct :class:`~foldcorr.errors.LabelTypeWarning` is one
    line on stderr, ``foldcorr: warning: ...`` (other warnings as Python shows them).

    Examples
    --------
    >>> import warnings
    >>> from foldcorr.errors import LabelTypeWarning
    >>> with label_warnings_as_lines():
    ...     warnings.warn("labels compared as text", LabelTypeWarning)
    """
    from foldcorr.errors import LabelTypeWarning

    shown = set()
    with warnings.catch_warnings():
        before = warnings.showwarning

        def show(message, category, filename, lineno, file=None, line=None):
            if not issubclass(category, LabelTypeWarning):
                return before(message, category, filename, lineno, file, line)
            if str(message) not in shown:
                shown.add(str(message))
                print(f"foldcorr: warning: {message}", file=sys.stderr)

        warnings.simplefilter("always", LabelTypeWarning)
        warnings.showwarning = show
        yield


def main(argv=None) -> int:
    """Run the command line; return the exit code instead of exiting.

    Examples
    --------
    >>> main(["--version"])
    foldcorr ...
    0
    """
    try:
        return _main(argv)
    except KeyboardInterrupt:
        print("foldcorr: interrupted; no output was written", file=sys.stderr)
        return EXIT_INTERRUPTED


def _main(argv) -> int:
    parser = get_parser()
    try:
        args = parser.parse_args(None if argv is None else [str(a) for a in argv])
    except SystemExit as exc:
        return int(exc.code or 0)
    from foldcorr._files import Staging
    from foldcorr.cli.startup import defer_array_lookups
    from foldcorr.cli.verbs import EXIT_OK, VERBS, check_targets
    from foldcorr.errors import FoldcorrError

    defer_array_lookups()  # a run imports Dask or sparse only when it makes such arrays
    staging = Staging()
    try:
        with staging, label_warnings_as_lines():
            check_targets(args)
            code = VERBS[args.verb](args, staging)
            sys.stdout.flush()
    except FoldcorrError as exc:
        return _fail(str(exc))
    except MemoryError:
        return _fail(OUT_OF_MEMORY)
    except BrokenPipeError:
        sys.stderr.close()
        return EXIT_OK
    except OSError as exc:
        where = f" {exc.filename!r}" if exc.filename else " standard output"
        return _fail(f"cannot read or write{where}: {exc.strerror or exc}")
    except RecursionError:
        return _fail("input nested too deeply to read")
    except Exception as exc:  # a bug: still one line, the traceback only on request
        if os.environ.get("FOLDCORR_TRACEBACK"):
            raise
        text = (str(exc).strip().splitlines() or [""])[0]
        return _fail(f"unexpected {type(exc).__name__}: {text} (this is a bug in foldcorr; "
                     "set FOLDCORR_TRACEBACK=1 to see where)")
    for line in staging.notes:
        print(line, file=sys.stderr)
    return code


def _terminate(signum, frame):
    raise KeyboardInterrupt


def run() -> None:
    """Console-script entry point: :func:`main` with ``sys.exit``.

    SIGTERM is handled as an interrupt (staged outputs removed, exit 130).
    Standard output is flushed here, so that a full disk or closed pipe there
    is one line too, never a message at interpreter exit.
    """
    import signal

    signal.signal(signal.SIGTERM, _terminate)
    code = main()
    try:
        sys.stdout.flush()
    except BrokenPipeError:
        pass
    except OSError as exc:
        if code in (0, 1):  # else the failure was told already
            code = _fail(f"cannot write standard output: {exc.strerror or exc}")
    except KeyboardInterrupt:
        code = EXIT_INTERRUPTED
    # nothing more can reach stdout: later flushes at exit must not fail loudly
    try:
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
    except (OSError, ValueError):
        pass
    sys.exit(code)
