"""Saving a run: a ``--save`` request checked before the run and written after it.

:func:`prepare_save` checks the target and gathers what the saved evaluation
will hold (the tensor, the options that shaped the report, the provenance and,
with an id column, the per-sample labels read back from the prediction table
by :func:`read_samples`); :meth:`SaveRequest.write` writes it once the run
succeeded. The file format itself is :mod:`foldcorr.sources.saved`.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path

import xarray as xr

from foldcorr.errors import InvalidInputError, OptionError
from foldcorr.sources.saved import (
    check_save_target,
    check_saved_options,
    file_sha256,
    is_saved_path,
    label_codes,
    load_saved,
    save_evaluation,
)
from foldcorr.sources.tables import read_table
from foldcorr.tensor import ACTUAL, FOLD, PREDICTED
from foldcorr.tensor.samples import Samples

__all__ = ["SaveRequest", "prepare_save", "read_samples"]


@dataclass(frozen=True)
class SaveRequest:
    """A saved evaluation checked and gathered, to be written once the run succeeded.

    Attributes
    ----------
    target : pathlib.Path
        The ``.nc`` file to write.
    tensor : xarray.DataArray
        The confusion tensor.
    samples : Samples or None
        Per-sample ids and labels (with an id column).
    options : dict
        Options that shaped the report.
    provenance : dict
        Global attributes: source file name, its SHA-256 when it is one file,
        seed when one was used.
    """

    target: Path
    tensor: xr.DataArray
    samples: Samples | None = None
    options: dict = field(default_factory=dict)
    provenance: dict = field(default_factory=dict)

    def write(self) -> Path:
        """Write the file (atomically, see :func:`save_evaluation`); return its path."""
        return save_evaluation(self.target, self.tensor, samples=self.samples,
                               options=self.options, provenance=self.provenance)


def prepare_save(target, tensor, source, *, id_column: str | None = None,
                 options: dict | None = None, where=None, matrix: bool = False,
                 weight: str | None = None) -> SaveRequest | None:
    """Check a request to save an evaluation and gather what the file will hold.

    Nothing is written: the caller writes :meth:`SaveRequest.write` only after
    the whole run succeeded, so that a failing run leaves no saved file.

    Parameters
    ----------
    target : str, path-like or None
        The ``.nc`` file (see :func:`check_save_target`); None saves nothing.
    tensor : xarray.DataArray
        The confusion tensor read from ``source``.
    source : str or path-like
        What the tensor was read from: a table, a folder or glob of them, a
        counts matrix or a saved evaluation (whose samples and source
        provenance are carried over).
    id_column : str, optional
        Column of unique sample ids in the single table ``source``; the
        per-sample labels are saved too.
    options : dict, optional
        Options that shaped the report; a ``"seed"`` among them is also
        recorded in the provenance.
    where, matrix, weight
        The row filter, counts-matrix flag and weight column the tensor was
        read with; each rules out ``id_column`` (the saved samples would not
        be those counted).

    Returns
    -------
    SaveRequest or None
        None when ``target`` is None.

    Raises
    ------
    OptionError
        When ``id_column`` is given without ``target`` or with ``where``,
        ``matrix``, ``weight`` or a ``source`` that is not one file; or
        ``target`` is refused by :func:`check_save_target`.
    InvalidInputError
        When the ids are missing or repeated (see :func:`read_samples`).

    Examples
    --------
    >>> import tempfile, pathlib
    >>> from foldcorr.sources import load_tensor
    >>> d = pathlib.Path(tempfile.mkdtemp())
    >>> _ = (d / "p.csv").write_text("id,actual,predicted\\nu1,a,a\\nu2,b,a\\n")
    >>> t = load_tensor(d / "p.csv")
    >>> request = prepare_save(d / "run.nc", t, d / "p.csv", id_column="id", options={"seed": 7})
    >>> (d / "run.nc").exists(), request.provenance["seed"]
    (False, 7)
    >>> load_saved(request.write()).samples.ids.tolist()
    ['u1', 'u2']
    """
    if not target:
        if id_column:
            raise OptionError("`--id` stores sample ids with --save; give --save FILE.nc too")
        return None
    target = check_save_target(target, source)
    source = Path(source)
    samples = None
    provenance = {"source": source.name}
    if is_saved_path(source):
        if id_column:
            check_saved_options(source, id_column=id_column)
        saved = load_saved(source)
        samples = saved.samples
        provenance.update({k: v for k, v in saved.provenance.items()
                           if k in ("source", "source_sha256")})
    else:
        if source.is_file():  # a folder or glob of tables has no single hash
            provenance["source_sha256"] = file_sha256(source)
        if id_column:
            if where:
                raise OptionError("`--id` cannot be combined with `--where`: the saved samples "
                                  "would not be those counted")
            if not source.is_file():
                raise OptionError(f"`--id` needs one prediction table file; got {str(source)!r}")
            if matrix:
                raise OptionError("`--id` needs a prediction table; a counts matrix has no "
                                  "samples")
            if weight:
                raise OptionError("`--id` cannot be combined with `--weight`: a paired "
                                  "comparison counts each sample once")
            samples = read_samples(source, tensor, id_column)
    options = dict(options or {})
    if options.get("seed") is not None:
        provenance["seed"] = options["seed"]
    return SaveRequest(target=target, tensor=tensor, samples=samples, options=options,
                       provenance=provenance)



def read_samples(path, tensor: xr.DataArray, id_column: str, *,
                 cluster: str | None = None) -> Samples:
    """Read per-sample ids and labels from the prediction table a tensor came from.

    Parameters
    ----------
    path : str or path-like
        The prediction table.
    tensor : xarray.DataArray
        Its confusion tensor; the columns used are taken from its ``attrs``
        (``truth_column``, ``pred_column``, ``fold_column``).
    id_column : str
        Column of unique sample ids.
    cluster : str, optional
        Column of cluster ids, kept as ``Samples.cluster``.

    Returns
    -------
    Samples

    Raises
    ------
    InvalidInputError
        When the id column is missing, an id is missing or repeated.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> from foldcorr.sources import load_tensor
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "p.csv"
    >>> _ = p.write_text("id,actual,predicted\\nu1,a,a\\nu2,b,a\\n")
    >>> read_samples(p, load_tensor(p), "id").predicted.tolist()
    ['a', 'a']
    """
    path = Path(path)
    truth = tensor.attrs.get("truth_column", ACTUAL)
    pred = tensor.attrs.get("pred_column", PREDICTED)
    fold = tensor.attrs.get("fold_column")
    wanted = [c for c in (id_column, truth, pred, fold, cluster) if c]
    df = read_table(path, columns=wanted, labels=[truth, pred])
    for role, name in (("id", id_column), ("cluster", cluster)):
        if name and name not in df.columns:
            raise InvalidInputError(f"{path.name}: {role} column {name!r} not found; the table "
                                    f"has columns {list(df.columns)!r}")
    try:
        samples = Samples.of(df[id_column], df[truth], df[pred],
                             None if fold is None else df[fold], id_column=id_column)
        classes = tensor.coords[ACTUAL].values
        actual = classes[label_codes(samples.actual, classes, f"column {truth!r}")]
        predicted = classes[label_codes(samples.predicted, classes, f"column {pred!r}")]
        folds = None if fold is None else tensor.coords[FOLD].values[
            label_codes(samples.fold, tensor.coords[FOLD].values, f"column {fold!r}")]
    except InvalidInputError as exc:
        raise InvalidInputError(f"{path.name}: {exc}") from None
    return Samples.of(samples.ids, actual, predicted, folds, id_column=id_column,
                      cluster=None if cluster is None else df[cluster])
