"""Problems with input files, as every reader of the sources layer reports them.

Messages start with the file's name (never its folder), so that they read the
same wherever the data lives; a file a dataset may leave out raises
:class:`UnreadableFile`, which carries that message.
"""

from __future__ import annotations

from pathlib import Path

from foldcorr.errors import FoldcorrError, InvalidInputError

__all__ = ["file_error", "first_line", "UnreadableFile"]


def file_error(path, message: str) -> InvalidInputError:
    """An input error whose message starts with the file's name.

    Examples
    --------
    >>> str(file_error("runs/p.csv", "the file is empty"))
    'p.csv: the file is empty'
    """
    return InvalidInputError(f"{Path(str(path)).name}: {message}")


def first_line(exc: BaseException) -> str:
    """The first line of an exception's message (its type's name when it has none).

    Examples
    --------
    >>> first_line(ValueError("bad value\\nmore detail")), first_line(KeyError())
    ('bad value', 'KeyError')
    """
    text = str(exc).strip().splitlines()
    return text[0] if text else type(exc).__name__


class UnreadableFile(FoldcorrError):
    """A file that cannot be read or whose columns disagree (a dataset may skip it)."""
