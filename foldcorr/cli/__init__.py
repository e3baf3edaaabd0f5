"""The command line: argument parsing, exit codes and one way out, over the public API.

Exit codes: 0 success; 1 a gate or test condition failed; 2 bad input or
usage, with one line on stderr and no traceback. :mod:`foldcorr.cli.args`
builds the parser, :mod:`foldcorr.cli.verbs` runs each verb.
"""

from __future__ import annotations

import sys

from foldcorr.cli.args import get_parser

__all__ = ["main", "get_parser", "run"]


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
    from foldcorr.cli.verbs import EXIT_OK, EXIT_USAGE, VERBS, check_targets
    from foldcorr.errors import FoldcorrError

    from foldcorr.cli.startup import defer_array_lookups

    defer_array_lookups()  # a run imports Dask or sparse only when it makes such arrays

    try:
        check_targets(args)
        return VERBS[args.verb](args)
    except FoldcorrError as exc:
        print(f"foldcorr: error: {exc}", file=sys.stderr)
        return EXIT_USAGE
    except KeyboardInterrupt:
        print("foldcorr: interrupted", file=sys.stderr)
        return 130
    except BrokenPipeError:
        sys.stderr.close()
        return EXIT_OK


def run() -> None:
    """Console-script entry point: :func:`main` with ``sys.exit``."""
    sys.exit(main())
