"""Writing output files whole or not at all, and every output of a run together.

:func:`atomic_target` writes one file under a temporary name beside it and
renames it on success. :class:`Staging` holds every output of one run (files,
devices, folders of plots) under temporary names until :meth:`Staging.commit`
renames them all onto their targets; on any failure :meth:`Staging.discard`
removes them. Temporary names begin with :data:`TEMP_PREFIX`, so that those
left by a killed run are recognised and removed by the next run that writes
into the same folder (:func:`remove_stale`, only when older than
:data:`STALE_SECONDS`).
"""

from __future__ import annotations

import contextlib
import os
import secrets
import shutil
import stat
import tempfile
import time
from pathlib import Path

from foldcorr.errors import FoldcorrError, InvalidInputError

__all__ = ["atomic_target", "write_text", "same_path", "Staging", "remove_stale", "TEMP_PREFIX",
           "STALE_SECONDS"]

#: Beginning of every temporary name foldcorr writes beside a target.
TEMP_PREFIX = ".foldcorr-tmp-"
#: Age (seconds) after which a temporary left beside a target counts as stray.
STALE_SECONDS = 3600


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
        fd, tmp = tempfile.mkstemp(prefix=f"{TEMP_PREFIX}{target.name}.", suffix=suffix or ".tmp",
                                   dir=folder)
    except OSError as exc:
        raise InvalidInputError(f"cannot write {str(target)!r}: {exc.strerror}") from None
    os.close(fd)
    try:
        yield Path(tmp)
        _replace(Path(tmp), target)
    except BaseException:
        with contextlib.suppress(OSError):
            os.unlink(tmp)
        raise


def _replace(tmp: Path, target: Path) -> None:
    """Rename ``tmp`` onto ``target`` with the target's mode (or the umask's for a new file)."""
    mode = target.stat().st_mode & 0o777 if target.exists() else 0o666 & ~_umask()
    os.chmod(tmp, mode)
    os.replace(tmp, target)


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


def remove_stale(folder, *, older_than: float = STALE_SECONDS) -> list[Path]:
    """Remove temporaries named :data:`TEMP_PREFIX`... in ``folder`` older than ``older_than`` s.

    They are what a killed run left; younger ones may belong to a run still
    going and are kept. Anything that cannot be removed is left alone.

    Returns
    -------
    list of pathlib.Path
        What was removed.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp())
    >>> stray = d / (TEMP_PREFIX + "1a2b-report.md")
    >>> _ = stray.write_text("half")
    >>> os.utime(stray, (0, 0))  # as old as can be
    >>> [p.name for p in remove_stale(d)], stray.exists()
    (['.foldcorr-tmp-1a2b-report.md'], False)
    """
    removed = []
    cutoff = time.time() - older_than
    with contextlib.suppress(OSError):
        for entry in Path(folder).iterdir():
            with contextlib.suppress(OSError):
                if entry.name.startswith(TEMP_PREFIX) and entry.lstat().st_mtime < cutoff:
                    if entry.is_dir() and not entry.is_symlink():
                        shutil.rmtree(entry)
                    else:
                        entry.unlink()
                    removed.append(entry)
    return removed


def _existing_ancestor(path: Path) -> Path:
    path = path.absolute()
    while not path.exists():
        path = path.parent
    return path


class Staging:
    """Every output of one run, staged under temporary names and committed together.

    :meth:`writing` yields a temporary path beside a target file;
    :meth:`folder` a temporary folder for files going into a target folder.
    :meth:`commit` renames everything onto its target (devices such as
    ``/dev/stdout`` are copied to, first); :meth:`discard` removes everything
    staged. Used as a context manager it commits on success and discards on
    any exception (interrupts included). Each folder written into is first
    cleared of stray temporaries (:func:`remove_stale`).

    Examples
    --------
    >>> import tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp())
    >>> with Staging() as staging:
    ...     staging.write_text(d / "a.md", "# a")
    ...     (d / "a.md").exists()
    False
    >>> (d / "a.md").read_text()
    '# a'
    >>> try:
    ...     with Staging() as staging:
    ...         staging.write_text(d / "b.md", "# b")
    ...         raise KeyError("later failure")
    ... except KeyError:
    ...     pass
    >>> sorted(p.name for p in d.iterdir())
    ['a.md']
    """

    def __init__(self):
        self.staged: list[tuple[Path, Path]] = []   # (temporary, target file)
        self.devices: list[tuple[Path, Path]] = []  # (temporary, device written at commit)
        self.folders: list[tuple[Path, Path]] = []  # (temporary folder, target folder)
        self.notes: list[str] = []
        self._swept: set = set()

    def __enter__(self):
        return self

    def __exit__(self, kind, exc, tb) -> None:
        if kind is None:
            try:
                self.commit()
            except BaseException:
                self.discard()
                raise
        else:
            self.discard()

    def _sweep(self, folder: Path) -> None:
        if folder not in self._swept:
            self._swept.add(folder)
            remove_stale(folder)

    def _temporary(self, target: Path) -> tuple[Path, bool]:
        """A new empty temporary for ``target``; True when the target is a device."""
        if target.is_dir():
            raise InvalidInputError(f"cannot write {str(target)!r}: it is a folder; give a file "
                                    "path (or a device or pipe), e.g. a name inside that folder")
        device = target.exists() and not stat.S_ISREG(target.stat().st_mode)
        folder = Path(tempfile.gettempdir()) if device else (target.parent if str(target.parent)
                                                               else Path("."))
        if not folder.is_dir():
            raise InvalidInputError(f"cannot write {str(target)!r}: folder {str(folder)!r} "
                                    "does not exist")
        if not device:
            self._sweep(folder)
        try:
            fd, tmp = tempfile.mkstemp(prefix=f"{TEMP_PREFIX}{secrets.token_hex(4)}-",
                                       suffix="-" + target.name, dir=folder)
        except OSError as exc:
            raise InvalidInputError(f"cannot write {str(target)!r}: {exc.strerror}") from None
        os.close(fd)
        return Path(tmp), device

    @contextlib.contextmanager
    def writing(self, path):
        """Yield the temporary path to write instead of the file ``path``, staged for commit.

        Errors while writing name ``path``, never the temporary: an
        :class:`OSError` (a full disk, say) becomes :class:`InvalidInputError`.
        """
        target = Path(path)
        tmp, device = self._temporary(target)
        (self.devices if device else self.staged).append((tmp, target))
        with self._naming(tmp, target):
            yield tmp

    @contextlib.contextmanager
    def folder(self, path):
        """Yield a temporary folder whose files go into the folder ``path`` on commit.

        ``path`` need not exist; it is made (with its parents) only on commit.
        """
        target = Path(path)
        if target.exists() and not target.is_dir():
            raise InvalidInputError(f"cannot create the folder {str(target)!r}: a file of that "
                                    "name exists")
        home = target if target.is_dir() else _existing_ancestor(target)
        if not home.is_dir():
            raise InvalidInputError(f"cannot create the folder {str(target)!r}: "
                                    f"{str(home)!r} is not a folder")
        self._sweep(home)
        try:
            tmp = Path(tempfile.mkdtemp(prefix=f"{TEMP_PREFIX}{secrets.token_hex(4)}-",
                                        dir=home))
        except OSError as exc:
            raise InvalidInputError(f"cannot write into {str(target)!r}: {exc.strerror}") from None
        self.folders.append((tmp, target))
        with self._naming(tmp, target):
            yield tmp

    @staticmethod
    @contextlib.contextmanager
    def _naming(tmp: Path, target: Path):
        try:
            yield
        except FoldcorrError as exc:
            if str(tmp) not in str(exc):
                raise
            raise type(exc)(str(exc).replace(str(tmp), str(target))) from None
        except OSError as exc:
            raise InvalidInputError(f"cannot write {str(target)!r}: "
                                    f"{exc.strerror or exc}") from None

    def write_text(self, path, text: str) -> None:
        """Stage ``text`` as the whole content of the file ``path``."""
        with self.writing(path) as tmp:
            with open(tmp, "w", encoding="utf-8") as fh:
                fh.write(text)

    def note(self, line: str) -> None:
        """Keep a line to tell the user once everything is committed (see :attr:`notes`)."""
        self.notes.append(line)

    def commit(self) -> None:
        """Write the devices, then rename every staged file and folder onto its target."""
        for tmp, device in self.devices:
            with self._naming(tmp, device), open(tmp, "rb") as src, open(device, "wb") as dst:
                shutil.copyfileobj(src, dst)
        for tmp, target in self.staged:
            with self._naming(tmp, target):
                _replace(tmp, target)
        for tmp, target in self.folders:
            with self._naming(tmp, target):
                target.mkdir(parents=True, exist_ok=True)
                for entry in sorted(tmp.iterdir()):
                    os.replace(entry, target / entry.name)
        self.discard()

    def discard(self) -> None:
        """Remove whatever is still staged (nothing remains after :meth:`commit`)."""
        for tmp, _ in self.staged + self.devices:
            with contextlib.suppress(OSError):
                tmp.unlink()
        for tmp, _ in self.folders:
            shutil.rmtree(tmp, ignore_errors=True)
        self.staged, self.devices, self.folders = [], [], []
