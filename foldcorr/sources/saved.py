"""Saved evaluations: confusion tensors with provenance in NetCDF-4 files.

A saved evaluation is a NetCDF-4 (HDF5-based) file written through xarray's
``h5netcdf`` engine. It holds

* the variable ``count`` with dims ``([fold,] actual, predicted)``, int64
  (or float64 for weighted counts), whose attributes are the tensor's own
  provenance (source file, columns used, row count, tool version);
* optionally, one row per sample along the dim ``sample``: ``sample_id``
  (the ids), ``sample_actual`` and ``sample_predicted`` (indices into the
  class coordinate) and ``sample_fold`` (index into the fold coordinate),
  which a paired comparison needs;
* global attributes: ``schema`` (``foldcorr.saved/1``), ``created`` (UTC,
  ISO 8601), ``foldcorr_version``, ``source``, ``source_sha256``, ``seed``
  where one was used, ``id_column`` when samples are stored, and ``options``,
  a JSON object with the options that shaped the report, by their Python
  names and with their ``options_schema`` version (as
  ``foldcorr.pipeline.saved_options`` writes them), so that the file renders
  exactly as the run that wrote it.

Files are written to a temporary file beside the target and renamed onto it,
so a reader never sees half a file. A file that is truncated, foreign, or of
another schema version is refused with one clear message, and so is one whose
attributes or variables are not as described above (``options`` not a JSON
object, dims or dtypes other than written, sample indices out of range).
"""

from __future__ import annotations

import datetime as _dt
import hashlib
import json
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np
import pandas as pd
import xarray as xr

from foldcorr._files import same_path
from foldcorr._files import atomic_target
from foldcorr._version import __version__
from foldcorr.errors import InvalidInputError, OptionError
from foldcorr.tensor.samples import Samples
from foldcorr.tensor import ACTUAL, COUNT, FOLD, PREDICTED, validate_tensor

if TYPE_CHECKING:
    import os

__all__ = [
    "SAVED_SCHEMA",
    "SAVED_SUFFIXES",
    "SavedEvaluation",
    "save_evaluation",
    "load_saved",
    "is_saved_path",
    "file_sha256",
    "check_save_target",
    "check_saved_options",
    "label_codes",
]

#: Schema name and version written into every saved evaluation.
SAVED_SCHEMA = "foldcorr.saved/1"
#: File endings read as saved evaluations wherever a prediction file is accepted.
SAVED_SUFFIXES = (".nc", ".nc4")
#: The xarray engine used for reading and writing (NetCDF-4 on HDF5, int64 exact).
ENGINE = "h5netcdf"

SAMPLE = "sample"
_SAMPLE_VARS = ("sample_id", "sample_actual", "sample_predicted", "sample_fold")


@dataclass(frozen=True)
class SavedEvaluation:
    """What a saved evaluation file holds.

    Attributes
    ----------
    tensor : xarray.DataArray
        The confusion tensor, with its own provenance in ``attrs``.
    samples : Samples or None
        Per-sample ids and labels, when they were saved.
    options : dict
        Options that shaped the report, as written (read them with
        ``foldcorr.pipeline.ScoreOptions.from_saved``).
    provenance : dict
        The file's global attributes other than ``options`` (schema, creation
        time, tool version, source file and its SHA-256, seed).
    """

    tensor: xr.DataArray
    samples: Samples | None = None
    options: dict = field(default_factory=dict)
    provenance: dict = field(default_factory=dict)


def is_saved_path(path) -> bool:
    """Whether ``path`` names a saved evaluation by its file ending.

    Examples
    --------
    >>> is_saved_path("run.nc"), is_saved_path("run.csv")
    (True, False)
    """
    return Path(str(path)).suffix.lower() in SAVED_SUFFIXES


def check_save_target(target, source=None, *, name: str = "--save") -> Path:
    """Refuse a save target that is not a NetCDF path or that is the input itself.

    A saved evaluation is NetCDF-4, so the target must end in one of
    :data:`SAVED_SUFFIXES`; and it must not name the file the evaluation is
    read from (by path, or by being the same file through a link), which the
    write would replace.

    Parameters
    ----------
    target : str or path-like
        The file to save to.
    source : str or path-like, optional
        The input read (a table, a counts matrix, a saved evaluation, a
        folder or a glob).
    name : str, default "--save"
        Option name used in messages.

    Returns
    -------
    pathlib.Path
        ``target`` as a path.

    Raises
    ------
    OptionError
        When ``target`` does not end in ``.nc`` or ``.nc4``, or is ``source``.

    Examples
    --------
    >>> check_save_target("run.nc", "predictions.csv").name
    'run.nc'
    >>> check_save_target("run.csv", "predictions.csv")
    Traceback (most recent call last):
    ...
    foldcorr.errors.OptionError: `--save` writes a NetCDF-4 file; expected a path ending in .nc or .nc4, got 'run.csv'
    """
    path = Path(target)
    if not is_saved_path(path):
        raise OptionError(f"`{name}` writes a NetCDF-4 file; expected a path ending in "
                          f"{' or '.join(SAVED_SUFFIXES)}, got {str(target)!r}")
    if source is not None and same_path(path, Path(source)):
        raise OptionError(f"`{name}` {str(target)!r} is the input file {str(source)!r}; "
                          "saving there would replace it, choose another path")
    return path


def check_saved_options(path, spec=None, *, matrix: bool = False, where=None,
                        skip_bad_files: bool = False, engine: str = "local", scheduler=None,
                        id_column: str | None = None, count: str | None = None) -> None:
    """Refuse options that describe a prediction table, given with a saved evaluation.

    A saved evaluation holds counts already tallied: which columns they came
    from, which rows were kept and how they were weighted cannot be changed
    afterwards. Only ``spec.classes`` applies, as a new class order.

    Parameters
    ----------
    path : str or path-like
        The saved evaluation (named in the message).
    spec : foldcorr.sources.tables.TableSpec, optional
        Column roles; any but ``classes`` differing from the defaults is refused.
    matrix, where, skip_bad_files, engine, scheduler, id_column, count
        Options of :func:`foldcorr.sources.load` (and the sample-id column); any
        set is refused.

    Raises
    ------
    OptionError
        Naming the first option that does not apply (with its command-line
        flag).

    Examples
    --------
    >>> from foldcorr.sources.tables import TableSpec
    >>> check_saved_options("run.nc", TableSpec(classes=("a", "b")))
    >>> check_saved_options("run.nc", where="fold == 1")
    Traceback (most recent call last):
    ...
    foldcorr.errors.OptionError: run.nc is a saved evaluation: its counts are already tallied, so `where` (--where) cannot apply; 'fold == 1' was given. Only `classes` (--classes) applies to a saved file
    """
    truth, pred, fold, weight = (ACTUAL, PREDICTED, "auto", None) if spec is None else (
        spec.truth, spec.pred, spec.fold, spec.weight)
    given = [("truth", truth != ACTUAL, truth),
             ("pred", pred != PREDICTED, pred),
             ("fold", fold != "auto", fold),
             ("weight", weight is not None, weight),
             ("matrix", bool(matrix), matrix),
             ("where", where is not None, getattr(where, "text", where)),
             ("skip_bad_files", bool(skip_bad_files), skip_bad_files),
             ("engine", engine != "local", engine),
             ("scheduler", scheduler is not None, scheduler),
             ("id", id_column is not None, id_column),
             ("count", count is not None, count)]
    for name, is_set, value in given:
        if is_set:
            flag = "--" + name.replace("_", "-")
            raise OptionError(f"{Path(path).name} is a saved evaluation: its counts are already "
                              f"tallied, so `{name}` ({flag}) cannot apply; {value!r} was given. "
                              "Only `classes` (--classes) applies to a saved file")


def file_sha256(path) -> str:
    """SHA-256 of a file's bytes, as hex (read in 1 MiB blocks).

    Examples
    --------
    >>> import tempfile, pathlib
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "x.txt"
    >>> _ = p.write_bytes(b"abc")
    >>> file_sha256(p)[:16]
    'ba7816bf8f01cfea'
    """
    digest = hashlib.sha256()
    with open(path, "rb") as fh:
        for block in iter(lambda: fh.read(1 << 20), b""):
            digest.update(block)
    return digest.hexdigest()


def _attr_value(value):
    """A NetCDF-storable attribute value, or None to leave it out."""
    if value is None:
        return None
    if isinstance(value, np.generic):
        value = value.item()
    if isinstance(value, bool):
        return int(value)
    if isinstance(value, (int, float, str)):
        return value
    return str(value)


def _clean_attrs(attrs: dict) -> dict:
    out = {}
    for key, value in attrs.items():
        stored = _attr_value(value)
        if stored is not None:
            out[str(key)] = stored
    return out


def _storable_labels(values) -> tuple[np.ndarray, bool]:
    """Class or fold labels as an array NetCDF can hold; True when turned to text."""
    arr = np.asarray(values)
    if arr.dtype != object:
        return arr, False
    kinds = {type(v) for v in arr.tolist()}
    if kinds <= {str}:
        return arr.astype(str), False
    if kinds <= {int} or kinds <= {float} or kinds <= {bool}:
        return np.asarray(arr.tolist()), False
    return np.asarray([str(v) for v in arr.tolist()]), True


def label_codes(labels, classes, what: str) -> np.ndarray:
    """Positions of ``labels`` among ``classes`` (compared as text when not found as they are).

    Raises
    ------
    InvalidInputError
        Naming ``what`` and the first row whose label is not among ``classes``.

    Examples
    --------
    >>> label_codes([1, 2, 1], ["1", "2"], "actual").tolist()
    [0, 1, 0]
    """
    index = pd.Index(np.asarray(classes).tolist())
    values = np.asarray(labels)
    codes = index.get_indexer(pd.Index(values.tolist()))
    if (codes < 0).any():
        text_index = pd.Index([str(c) for c in index])
        codes = text_index.get_indexer(pd.Index([str(v) for v in values.tolist()]))
    if (codes < 0).any():
        row = int(np.flatnonzero(codes < 0)[0])
        raise InvalidInputError(
            f"{what} row {row + 1}: label {values[row]!r} is not among the tensor's labels"
        )
    return codes.astype(np.int32)


def save_evaluation(path: str | os.PathLike[str], tensor: xr.DataArray, *,
                    samples: Samples | None = None, options: dict | None = None,
                    provenance: dict | None = None) -> Path:
    """Write a confusion tensor (and optionally per-sample labels) to a NetCDF-4 file.

    Parameters
    ----------
    path : str or path-like
        Target file, conventionally ending in ``.nc``. Written atomically.
    tensor : xarray.DataArray
        Confusion tensor with dims ``([fold,] actual, predicted)``.
    samples : Samples, optional
        Per-sample ids and labels; their labels must be among the tensor's.
    options : dict, optional
        Options that shaped the report; stored as JSON in the ``options``
        attribute (values that are not JSON types are stored as text).
    provenance : dict, optional
        More global attributes (``source_sha256``, ``seed``, ...).

    Returns
    -------
    pathlib.Path
        The path written.

    Raises
    ------
    InvalidInputError
        When the folder does not exist or is not writable, or a sample label
        is not among the tensor's classes.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> from foldcorr.tensor import tally
    >>> t = tally(["a", "b", "b"], ["a", "a", "b"], folds=[1, 1, 2])
    >>> out = save_evaluation(pathlib.Path(tempfile.mkdtemp()) / "run.nc", t)
    >>> load_saved(out).tensor.values.tolist()
    [[[1, 0], [1, 0]], [[0, 0], [0, 1]]]
    """
    t = validate_tensor(tensor)
    classes, as_text = _storable_labels(t.coords[ACTUAL].values)
    coords = {ACTUAL: classes, PREDICTED: classes}
    lead = [d for d in t.dims if d not in (ACTUAL, PREDICTED)]
    for dim in lead:
        coords[dim] = _storable_labels(t.coords[dim].values)[0] if dim in t.coords \
            else np.arange(t.sizes[dim])
    count = xr.Variable(t.dims, np.asarray(t.values), attrs=_clean_attrs(t.attrs))
    data = {COUNT: count}
    if samples is not None:
        data.update(_sample_vars(samples, t))
    ds = xr.Dataset(data, coords=coords)
    attrs = {
        "schema": SAVED_SCHEMA,
        "created": _dt.datetime.now(_dt.timezone.utc).replace(microsecond=0).isoformat(),
        "foldcorr_version": __version__,
        "source": t.attrs.get("source"),
        **(provenance or {}),
        "options": json.dumps(options or {}, sort_keys=True, default=str),
    }
    if as_text:
        attrs["class_labels_as_text"] = 1
    if samples is not None:
        attrs["id_column"] = samples.id_column
    ds.attrs.update(_clean_attrs(attrs))
    target = Path(path)
    with atomic_target(target, suffix=".nc") as tmp:
        try:
            ds.to_netcdf(tmp, engine=ENGINE, format="NETCDF4", encoding=_encoding(data))
        except OSError as exc:
            raise InvalidInputError(f"cannot write {str(target)!r}: {exc}") from None
    return target


def _encoding(data: dict) -> dict:
    """Compress every variable; text ids as compressible fixed-width UTF-8 characters."""
    out = {}
    for name, var in data.items():
        out[name] = {"zlib": True, "complevel": 4}
        if var.dtype.kind == "U":
            out[name].update(dtype="S1", _Encoding="utf-8")
    return out


def _sample_vars(samples: Samples, t: xr.DataArray) -> dict:
    classes = t.coords[ACTUAL].values
    ids, _ = _storable_labels(samples.ids)
    out = {
        "sample_id": xr.Variable(SAMPLE, ids),
        "sample_actual": xr.Variable(SAMPLE, label_codes(samples.actual, classes, "actual")),
        "sample_predicted": xr.Variable(SAMPLE, label_codes(samples.predicted, classes,
                                                             "predicted")),
    }
    if samples.fold is not None and FOLD in t.dims:
        out["sample_fold"] = xr.Variable(SAMPLE, label_codes(samples.fold, t.coords[FOLD].values,
                                                              "fold"))
    return out


def load_saved(path: str | os.PathLike[str]) -> SavedEvaluation:
    """Read a saved evaluation written by :func:`save_evaluation`.

    Parameters
    ----------
    path : str or path-like
        A ``.nc`` file.

    Returns
    -------
    SavedEvaluation

    Raises
    ------
    InvalidInputError
        When the file is missing, truncated or not NetCDF-4, is a NetCDF file
        that foldcorr did not write, or was written with another schema
        version.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> from foldcorr.tensor import confusion_tensor
    >>> out = pathlib.Path(tempfile.mkdtemp()) / "m.nc"
    >>> _ = save_evaluation(out, confusion_tensor([[5, 1], [2, 7]], ["cat", "dog"]),
    ...                     options={"undefined": "nan"})
    >>> saved = load_saved(out)
    >>> saved.tensor.dtype, saved.options, saved.provenance["schema"]
    (dtype('int64'), {'undefined': 'nan'}, 'foldcorr.saved/1')
    """
    path = Path(path)
    name = path.name
    if not path.is_file():
        raise InvalidInputError(f"{name}: file not found")
    try:
        with xr.open_dataset(path, engine=ENGINE) as opened:
            ds = opened.load()
    except Exception as exc:  # h5py and xarray raise OSError, ValueError and their own types
        raise InvalidInputError(
            f"{name}: cannot read as a saved evaluation (NetCDF-4); the file is truncated, "
            f"damaged or of another kind ({_first_line(exc)})"
        ) from None
    schema = ds.attrs.get("schema")
    if schema is None or COUNT not in ds.variables:
        raise InvalidInputError(
            f"{name}: a NetCDF file but not a saved foldcorr evaluation (no 'schema' attribute "
            f"or no 'count' variable); expected schema {SAVED_SCHEMA!r}"
        )
    if schema != SAVED_SCHEMA:
        raise InvalidInputError(
            f"{name}: saved with schema {schema!r}, which this version ({__version__}) cannot "
            f"read; expected {SAVED_SCHEMA!r}"
        )
    options = _read_options(ds, name)
    _check_layout(ds, name)
    count = ds[COUNT]
    attrs = {k: _attr_value(v) for k, v in count.attrs.items()}
    try:
        tensor = validate_tensor(xr.DataArray(count.values, dims=count.dims,
                                              coords={d: ds.coords[d].values for d in count.dims
                                                      if d in ds.coords},
                                              name=COUNT, attrs=attrs))
    except Exception as exc:
        raise InvalidInputError(f"{name}: the stored counts are not a valid tensor: {exc}") from None
    provenance = {k: _attr_value(v) for k, v in ds.attrs.items() if k != "options"}
    return SavedEvaluation(tensor=tensor, samples=_read_sample_vars(ds, tensor, name),
                           options=options, provenance=provenance)


def _read_options(ds: xr.Dataset, name: str) -> dict:
    text = ds.attrs.get("options", "{}")
    if not isinstance(text, str):
        raise InvalidInputError(f"{name}: attribute 'options' must be JSON text; got "
                                f"{type(text).__name__} {_attr_value(text)!r}")
    try:
        options = json.loads(text)
    except (json.JSONDecodeError, RecursionError):
        raise InvalidInputError(f"{name}: attribute 'options' is not valid JSON") from None
    if not isinstance(options, dict):
        kind = {list: "an array", str: "a string", bool: "true or false", type(None): "null"}
        raise InvalidInputError(f"{name}: attribute 'options' must be a JSON object; got "
                                f"{kind.get(type(options), 'a number')}")
    return options


#: Dims the stored counts may have (leading dims first, then the two class dims).
COUNT_DIMS = (FOLD, "label", ACTUAL, PREDICTED)


def _check_layout(ds: xr.Dataset, name: str) -> None:
    """Refuse dims, dtypes and coordinates that :func:`save_evaluation` never writes."""
    count = ds[COUNT]
    dims = tuple(count.dims)
    if not set(dims) <= set(COUNT_DIMS) or dims[-2:] != (ACTUAL, PREDICTED):
        raise InvalidInputError(f"{name}: variable 'count' has dims {dims!r}; expected "
                                f"([fold,] [label,] actual, predicted)")
    if count.dtype.kind not in "iuf":
        raise InvalidInputError(f"{name}: variable 'count' has dtype {str(count.dtype)!r}; "
                                "expected int64 counts (float64 when weighted)")
    for dim in (d for d in dims if d in ds.coords and d != PREDICTED):
        labels = pd.Index(np.asarray(ds.coords[dim].values).tolist())
        if labels.has_duplicates:
            raise InvalidInputError(f"{name}: coordinate {dim!r} repeats "
                                    f"{labels[labels.duplicated()][0]!r}; labels must be unique")
    present = [v for v in _SAMPLE_VARS if v in ds.variables]
    if present and not {"sample_id", "sample_actual", "sample_predicted"} <= set(present):
        missing = sorted({"sample_id", "sample_actual", "sample_predicted"} - set(present))
        raise InvalidInputError(f"{name}: per-sample variables are incomplete: missing "
                                f"{missing!r}")
    for var in present:
        if tuple(ds[var].dims) != (SAMPLE,):
            raise InvalidInputError(f"{name}: variable {var!r} has dims {tuple(ds[var].dims)!r}; "
                                    f"expected ({SAMPLE!r},)")
        if var != "sample_id" and ds[var].dtype.kind not in "iu":
            raise InvalidInputError(f"{name}: variable {var!r} has dtype "
                                    f"{str(ds[var].dtype)!r}; expected whole-number indices")
    if "sample_fold" in present and FOLD not in dims:
        raise InvalidInputError(f"{name}: variable 'sample_fold' is stored but the counts have "
                                "no fold dim")


def _codes(ds: xr.Dataset, var: str, size: int, into: str, name: str) -> np.ndarray:
    """The indices of ``var``, each checked to lie in ``range(size)``."""
    values = np.asarray(ds[var].values, dtype=np.int64)
    bad = (values < 0) | (values >= size)
    if bad.any():
        row = int(np.flatnonzero(bad)[0])
        raise InvalidInputError(f"{name}: variable {var!r} row {row + 1}: index "
                                f"{int(values[row])} is out of range; {into} has {size} "
                                f"entries (0 to {size - 1})")
    return values


def _read_sample_vars(ds: xr.Dataset, tensor: xr.DataArray, name: str) -> Samples | None:
    if "sample_id" not in ds.variables:
        return None
    classes = tensor.coords[ACTUAL].values
    codes = {var: _codes(ds, var, len(classes), "the class coordinate", name)
             for var in ("sample_actual", "sample_predicted")}
    fold = None
    if "sample_fold" in ds.variables and FOLD in tensor.dims:
        folds = tensor.coords[FOLD].values
        fold = folds[_codes(ds, "sample_fold", len(folds), "the fold coordinate", name)]
    return Samples.of(ds["sample_id"].values, classes[codes["sample_actual"]],
                      classes[codes["sample_predicted"]], fold,
                      id_column=str(ds.attrs.get("id_column", "id")))


def _first_line(exc: Exception) -> str:
    text = str(exc).strip().splitlines()
    return text[0] if text else type(exc).__name__
