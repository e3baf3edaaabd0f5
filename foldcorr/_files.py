"""Writing output files whole or not at all."""

from __future__ import annotations

import contextlib
import os
import stat
import tempfile
from pathlib import Path

from foldcorr.errors import InvalidInputError

__all__ = ["atomic_target", "write_text", "same_path"]


@contextlib.contextmanager
def atomic_target(path, *, suffix: str = ""):
    """Yield a temporary path beside ``path``; rename it onto ``path`` on success.

    A non-regular existing target (a device, a pipe) is yielded as is: it is
    written directly and never replaced. An existing folder is refused. On any
    error the temporary file is removed and the target is left as it was.

    Raises
    ------
    InvalidInputError
        When ``path`` is an existing folder, its folder does not exist, or no
        temporary file can be made there.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> out = pathlib.Path(tempfile.mkdtemp()) / "x.txt"
    >>> with atomic_target(out) as tmp:
    ...     _ = pathlib.Path(tmp).write_text("done")
    >>> out.read_text()
    'done'
    """
    target = Path(path)
    if target.is_dir():
        raise InvalidInputError(
            f"cannot write {str(target)!r}: it is a folder; give a file path (or a device "
            "or pipe), e.g. a name inside that folder")
    if target.exists() and not stat.S_ISREG(target.stat().st_mode):
        yield target
        return
    folder = target.parent if str(target.parent) else Path(".")
    if not folder.is_dir():
        raise InvalidInputError(f"cannot write {str(target)!r}: folder {str(folder)!r} does not exist")
    try:
        fd, tmp = tempfile.mkstemp(prefix=f".{target.name}.", suffix=suffix or ".tmp", dir=folder)
    except OSError as exc:
        raise InvalidInputError(f"cannot write {str(target)!r}: {exc.strerror}") from None
    os.close(fd)
    try:
        yield Path(tmp)
        mode = target.stat().st_mode & 0o777 if target.exists() else 0o666 & ~_umask()
        os.chmod(tmp, mode)
        os.replace(tmp, target)
    except BaseException:
        with contextlib.suppress(OSError):
            os.unlink(tmp)
        raise


def _umask() -> int:
    current = os.umask(0)
    os.umask(current)
    return current


def write_text(path, text: str) -> None:
    """Write ``text`` to ``path`` atomically (see :func:`atomic_target`).

    Examples
    --------
    >>> import tempfile, pathlib
    >>> out = pathlib.Path(tempfile.mkdtemp()) / "report.md"
    >>> write_text(out, "# hi\\n")
    >>> out.read_text()
    '# hi\\n'
    """
    with atomic_target(path) as tmp:
        with open(tmp, "w", encoding="utf-8") as fh:
            fh.write(text)


def same_path(a, b) -> bool:
    """Whether two paths name the same file (the same inode when both exist).

    Examples
    --------
    >>> same_path("runs/../p.csv", "p.csv"), same_path("a.csv", "b.csv")
    (True, False)
    """
    a, b = Path(a), Path(b)
    try:
        if a.exists() and b.exists():
            return a.samefile(b)
        return a.resolve() == b.resolve()
    except OSError:
        return False
