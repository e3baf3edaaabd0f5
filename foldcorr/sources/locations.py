"""Where tables live: local paths, URLs, hive partitions and standard input.

A location is a local path (a file, a folder or a glob) or a URL (``s3://``,
``gs://``, ``file://``, ``memory://``, any protocol fsspec knows; credentials
come from the usual environment of that protocol, never from our options).
:func:`list_url` finds the files behind a URL as :class:`RemoteFile` objects,
which the formats read through :func:`input_of` and :func:`dataset_args`.
Partition folders are read in :mod:`foldcorr.sources.partitions`.
"""

from __future__ import annotations

import glob as _glob
import re
from pathlib import Path

from foldcorr.errors import InvalidInputError, require

__all__ = ["RemoteFile", "BytesFile", "is_url", "list_url", "input_of", "open_dataset", "size_of",
           "read_stdin", "STDIN", "local_or_bytes"]

_URL = re.compile(r"^[A-Za-z][A-Za-z0-9+.-]*://")
#: The source name that stands for standard input.
STDIN = "-"


def is_url(source) -> bool:
    """Whether ``source`` is a URL (``scheme://...``).

    Examples
    --------
    >>> is_url("s3://bucket/runs/"), is_url("runs/p.csv"), is_url(Path("p.csv"))
    (True, False, False)
    """
    return isinstance(source, str) and bool(_URL.match(source))


class RemoteFile:
    """One file behind a URL, read through an fsspec file system.

    Parameters
    ----------
    fs : fsspec.AbstractFileSystem
        The file system.
    path : str
        The file's path on ``fs`` (no protocol).
    url : str
        The file's full URL, as messages and provenance show it.
    root : str, optional
        The dataset's root folder on ``fs``, below which ``key=value``
        folders are partitions.
    """

    def __init__(self, fs, path: str, url: str, root: str | None = None):
        self.fs, self.path, self.url, self.root = fs, path, url, root

    @property
    def relative(self) -> str:
        """The file's path below the dataset's root ("" without a root)."""
        if self.root is None or not self.path.startswith(self.root):
            return ""
        return self.path[len(self.root):].strip("/")

    @property
    def name(self) -> str:
        """The file's name (its last path part)."""
        return self.path.rstrip("/").rsplit("/", 1)[-1]

    @property
    def suffix(self) -> str:
        """The file's ending, e.g. ``".parquet"``."""
        return Path(self.name).suffix

    def open(self):
        """The file opened for binary reading."""
        return self.fs.open(self.path, "rb")

    def size(self) -> int:
        """The file's size in bytes."""
        return int(self.fs.size(self.path) or 0)

    def __str__(self) -> str:
        return self.url

    def __repr__(self) -> str:
        return f"RemoteFile({self.url!r})"

    def __eq__(self, other) -> bool:
        return isinstance(other, RemoteFile) and other.url == self.url

    def __hash__(self) -> int:
        return hash(self.url)

    def __lt__(self, other) -> bool:
        return str(self) < str(other)


def list_url(url: str, suffixes) -> list[RemoteFile]:
    """The files of a dataset behind a URL: one file, a folder's table files, or a glob.

    Parameters
    ----------
    url : str
        E.g. ``"s3://bucket/runs/"``, ``"memory://runs/*.csv"``.
    suffixes : collection of str
        File endings of tables, for a folder.

    Returns
    -------
    list of RemoteFile
        Sorted; in a folder, names starting with ``.`` or ``_`` are left out.

    Raises
    ------
    InvalidInputError
        When nothing is found there, or the protocol's fsspec package is missing.

    Examples
    --------
    >>> import fsspec
    >>> with fsspec.open("memory://doc/runs/fold=1/a.csv", "w") as fh:
    ...     _ = fh.write("actual,predicted\\nx,x\\n")
    >>> [(f.url, f.relative) for f in list_url("memory://doc/runs", {".csv"})]
    [('memory:///doc/runs/fold=1/a.csv', 'fold=1/a.csv')]
    """
    fsspec = require("fsspec", extra="url", purpose="reading URLs")
    try:
        fs, path = fsspec.core.url_to_fs(url)
    except (ImportError, ValueError) as exc:
        raise InvalidInputError(f"{url}: cannot open this URL: {exc}") from None
    def remote(p: str, root: str | None = None) -> RemoteFile:
        p = fs._strip_protocol(p) if hasattr(fs, "_strip_protocol") else p
        return RemoteFile(fs, p, fs.unstrip_protocol(p), root)

    try:
        if _glob.has_magic(path):
            cut = min(path.find(ch) for ch in "*?[" if ch in path)
            root = path[:cut].rsplit("/", 1)[0] if "/" in path[:cut] else ""
            found = sorted(p for p in fs.glob(path) if fs.isfile(p))
            if not found:
                raise InvalidInputError(f"the pattern {url!r} matches no file")
            return [remote(p, root) for p in found]
        if fs.isfile(path):
            return [remote(path)]
        if fs.isdir(path):
            base = path.rstrip("/")
            found = sorted(p for p in fs.find(path) if Path(p).suffix.lower() in suffixes
                           and not any(part.startswith((".", "_"))
                                       for part in p[len(base):].strip("/").split("/")))
            if found:
                return [remote(p, base) for p in found]
            raise InvalidInputError(f"{url}: the folder holds no table file (endings "
                                    f"{', '.join(sorted(suffixes))})")
    except InvalidInputError:
        raise
    except Exception as exc:  # the file system's own errors: no credentials, no bucket
        first = (str(exc).strip().splitlines() or [type(exc).__name__])[0]
        raise InvalidInputError(f"{url}: cannot list: {first}") from None
    raise InvalidInputError(f"{url}: file not found")


def input_of(f):
    """What pyarrow's readers take for a file: a local path, or a remote or in-memory one opened.

    Examples
    --------
    >>> input_of(Path("p.csv"))
    'p.csv'
    """
    return f.open() if isinstance(f, (RemoteFile, BytesFile)) else str(f)


def open_dataset(f, file_format):
    """A ``pyarrow.dataset.Dataset`` of one file, local, remote or in memory.

    Examples
    --------
    >>> import tempfile, pyarrow as pa, pyarrow.parquet as pq
    >>> p = Path(tempfile.mkdtemp()) / "p.parquet"
    >>> pq.write_table(pa.table({"a": [1, 2]}), p)
    >>> open_dataset(p, "parquet").count_rows()
    2
    """
    import pyarrow as pa
    import pyarrow.dataset as ds

    if isinstance(f, BytesFile):
        fmt = ds.ParquetFileFormat() if file_format == "parquet" else file_format
        fragment = fmt.make_fragment(pa.py_buffer(f.data))  # a reader would close after one scan
        return ds.FileSystemDataset([fragment], fragment.physical_schema, fmt)
    if isinstance(f, RemoteFile):
        import pyarrow.fs as pafs

        return ds.dataset(f.path, format=file_format,
                          filesystem=pafs.PyFileSystem(pafs.FSSpecHandler(f.fs)))
    return ds.dataset(str(f), format=file_format)


class BytesFile:
    """A table read whole into memory, e.g. from standard input.

    Parameters
    ----------
    data : bytes
        The file's bytes.
    name : str
        Its name in messages.
    suffix : str
        Its ending, which says its format.
    """

    def __init__(self, data: bytes, name: str, suffix: str):
        self.data, self.name, self.suffix = data, name, suffix

    def open(self):
        """The bytes as a binary file."""
        import io

        return io.BytesIO(self.data)

    def size(self) -> int:
        """The number of bytes."""
        return len(self.data)

    @property
    def stem(self) -> str:
        """Its name without the ending (as :attr:`pathlib.Path.stem`)."""
        return self.name

    def is_file(self) -> bool:
        """Always true: the bytes are there (as :meth:`pathlib.Path.is_file`)."""
        return True

    def __str__(self) -> str:
        return self.name + self.suffix

    def __lt__(self, other) -> bool:
        return str(self) < str(other)


def local_or_bytes(path):
    """A table file as the whole-table readers take it: a :class:`BytesFile` as it is (standard
    input), anything else as a :class:`pathlib.Path`.

    Examples
    --------
    >>> local_or_bytes("runs/p.csv").name, local_or_bytes(BytesFile(b"", "stdin", ".csv")).name
    ('p.csv', 'stdin')
    """
    from pathlib import Path

    return path if isinstance(path, BytesFile) else Path(path)


def read_stdin(stream=None, input_format: str | None = None) -> BytesFile:
    """Standard input, read whole, as a table file.

    Its format is ``input_format`` (``"csv"``, ``"tsv"``, ``"jsonl"``,
    ``"parquet"``) when given, else Parquet when the bytes start with
    Parquet's magic number, JSON Lines when the first character is ``{``,
    else CSV.

    Examples
    --------
    >>> import io
    >>> f = read_stdin(io.BytesIO(b'{"actual": "a", "predicted": "a"}\\n'))
    >>> str(f), f.size()
    ('stdin.jsonl', 34)
    """
    import sys

    data = (stream if stream is not None else sys.stdin.buffer).read()
    if input_format is None:
        stripped = data.lstrip()
        input_format = ("parquet" if data[:4] == b"PAR1"
                        else "jsonl" if stripped[:1] == b"{" else "csv")
    return BytesFile(data, "stdin", "." + input_format)


def size_of(f) -> int:
    """A file's size in bytes, local or remote (1 for a table in memory).

    Examples
    --------
    >>> import tempfile
    >>> p = Path(tempfile.mkdtemp()) / "p.csv"
    >>> _ = p.write_text("a\\n")
    >>> size_of(p)
    2
    """
    if isinstance(f, (RemoteFile, BytesFile)):
        return f.size()
    return Path(f).stat().st_size if isinstance(f, (str, Path)) else 1
