r"""Class groups: merge a tensor's classes into groups, and split 1 - R_K by where confusions fall.

:func:`merge_classes` sums the rows and columns of the classes of each group
(dense or sparse, every leading dim kept), so that R_K and every figure can be
read at the level of groups. :func:`group_split` splits the shortfall 1 - R_K
of the class-level tensor exactly into a part from confusions *inside* groups
(an actual class taken for another class of its own group) and a part from
confusions *between* groups, as the two-player Shapley split of the gain from
repairing them (``docs/decomposition.md``, "Class groups").
"""

from __future__ import annotations

from collections.abc import Mapping

import numpy as np
import xarray as xr

from foldcorr.errors import InvalidInputError, check_choice
from foldcorr.metrics import UNDEFINED_CHOICES, Sums, correlation, rk_parts
from foldcorr.tensor import ACTUAL, PREDICTED, is_sparse, py_value, validate_tensor

__all__ = ["group_index", "merge_classes", "group_split", "group_shares", "GROUP"]

#: Name of the dim of per-group values.
GROUP = "group"


def group_index(classes, mapping: Mapping, *, other=None) -> tuple[np.ndarray, list]:
    """Each class's group as an index into the list of groups, in order of first appearance.

    Parameters
    ----------
    classes : sequence
        Class labels, in tensor order.
    mapping : mapping
        Class -> group.
    other : hashable, optional
        The group of classes missing from ``mapping``; without it they are an error.

    Returns
    -------
    tuple
        ``(index, groups)``: an integer array, one entry per class, and the groups.

    Raises
    ------
    InvalidInputError
        When classes are missing from ``mapping`` and no ``other`` is given
        (the message names them).

    Examples
    --------
    >>> group_index(["a", "b", "c"], {"a": "x", "b": "y", "c": "x"})
    (array([0, 1, 0]), ['x', 'y'])
    >>> group_index(["a", "b"], {"a": "x"}, other="rest")
    (array([0, 1]), ['x', 'rest'])
    """
    classes = [_key(py_value(c), mapping) for c in classes]
    missing = [c for c in classes if c not in mapping]
    if missing and other is None:
        shown = ", ".join(repr(c) for c in missing[:5])
        more = f" and {len(missing) - 5} more" if len(missing) > 5 else ""
        raise InvalidInputError(f"classes missing from the groups: {shown}{more}; add them or "
                                "name a group for them (--groups-other NAME)")
    labels = [mapping.get(c, other) for c in classes]
    groups = list(dict.fromkeys(labels))
    where = {g: i for i, g in enumerate(groups)}
    return np.array([where[g] for g in labels], dtype=np.intp), groups


def _key(label, mapping: Mapping):
    """The label as the mapping holds it: itself, or its text (groups read from a file)."""
    return label if label in mapping or str(label) not in mapping else str(label)


def merge_classes(t: xr.DataArray, mapping: Mapping, *,
                  other: str | None = None) -> xr.DataArray:
    """The confusion tensor of groups: rows and columns of the classes of each group summed.

    Parameters
    ----------
    t : xarray.DataArray
        Confusion tensor, dense or sparse, dims ``(..., actual, predicted)``;
        every leading dim (``fold``) is kept.
    mapping : mapping
        Class -> group.
    other : hashable, optional
        The group of classes missing from ``mapping``; without it they are an error.

    Returns
    -------
    xarray.DataArray
        Class coordinates are the groups, in order of first appearance along
        the tensor's classes; same backing and dtype as ``t``.

    Raises
    ------
    InvalidInputError
        When classes are missing from ``mapping`` and no ``other`` is given.

    Examples
    --------
    >>> from foldcorr.tensor import confusion_tensor
    >>> t = confusion_tensor([[5, 1, 0], [2, 4, 1], [0, 1, 6]], ["cat", "lynx", "dog"])
    >>> g = merge_classes(t, {"cat": "felid", "lynx": "felid", "dog": "canid"})
    >>> g.coords["actual"].values.tolist(), g.values.tolist()
    (['felid', 'canid'], [[12, 1], [1, 6]])
    """
    t = validate_tensor(t)
    index, groups = group_index(t.coords[ACTUAL].values, mapping, other=other)
    lead = [d for d in t.dims if d not in (ACTUAL, PREDICTED)]
    t = t.transpose(*lead, ACTUAL, PREDICTED)
    shape = (*t.shape[:-2], len(groups), len(groups))
    if is_sparse(t):
        import sparse

        coords = t.data.coords.copy()
        coords[-2], coords[-1] = index[coords[-2]], index[coords[-1]]
        data = sparse.COO(coords, t.data.data, shape=shape, has_duplicates=True)
    else:
        data = np.zeros(shape, dtype=t.dtype)
        flat = data.reshape(-1, *shape[-2:])
        values = t.values.reshape(-1, *t.shape[-2:])
        rows, cols = np.meshgrid(index, index, indexing="ij")
        for i in range(flat.shape[0]):
            np.add.at(flat[i], (rows, cols), values[i])
    coords = {d: t.coords[d] for d in lead if d in t.coords}
    return xr.DataArray(data, dims=t.dims, name=t.name,
                        coords={**coords, ACTUAL: groups, PREDICTED: groups}, attrs=t.attrs)


def _cells(t: xr.DataArray):
    """The nonzero cells: flat leading index, actual index, predicted index, count."""
    lead = int(np.prod(t.shape[:-2], dtype=np.int64))
    if is_sparse(t):
        coords, counts = t.data.coords, t.data.data
        flat = (np.ravel_multi_index(tuple(coords[:-2]), t.shape[:-2]) if t.ndim > 2
                else np.zeros(coords.shape[1], np.intp))
        return lead, flat, coords[-2], coords[-1], counts.astype(np.float64)
    values = t.values.reshape(lead, *t.shape[-2:])
    f, i, j = np.nonzero(values)
    return lead, f, i, j, values[f, i, j].astype(np.float64)


def _repaired_rk(sums: Sums, moved_rows, moved_cols, undefined: str) -> np.ndarray:
    """R_K after moving the given counts of each row onto its diagonal cell."""
    moved = moved_rows.sum(axis=-1)
    predicted = sums.predicted - moved_cols + moved_rows
    num, dp, dt = rk_parts(sums.trace + moved, sums.total, sums.actual, predicted)
    return correlation(num, dp, dt, undefined)[0]


def group_split(t: xr.DataArray, mapping: Mapping, *, other: str | None = None,
                undefined: str = "zero") -> xr.Dataset:
    r"""The exact split of 1 - R_K into confusions inside groups and confusions between groups.

    Parameters
    ----------
    t : xarray.DataArray
        Class-level confusion tensor, dense or sparse; leading dims broadcast.
    mapping : mapping
        Class -> group.
    other : hashable, optional
        The group of classes missing from ``mapping``.
    undefined : {"zero", "nan"}, default "zero"
        Convention for R_K where it is 0/0.

    Returns
    -------
    xarray.Dataset
        Over the leading dims: ``rk``; ``rk_fix_inside`` and
        ``rk_fix_between``, R_K after moving every confusion inside groups
        (between groups) onto the diagonal of its row; ``inside`` and
        ``between``, the two parts of ``1 - rk``.

    Notes
    -----
    With :math:`R_\emptyset = R_K`, :math:`R_I` and :math:`R_B` R_K after
    repairing the confusions inside (between) groups, and
    :math:`R_{IB} = 1` (every confusion repaired leaves a diagonal matrix),
    the two-player Shapley split of the gain :math:`1 - R_K` is

    .. math:: \text{inside} = \tfrac12\big[(R_I - R_\emptyset) + (1 - R_B)\big], \qquad
              \text{between} = \tfrac12\big[(R_B - R_\emptyset) + (1 - R_I)\big],

    which add up to :math:`1 - R_K` exactly (should repairing one kind of
    confusion alone ever lower R_K, its part is negative).

    Examples
    --------
    >>> from foldcorr.tensor import confusion_tensor
    >>> t = confusion_tensor([[5, 1, 0], [2, 4, 1], [0, 1, 6]], ["cat", "lynx", "dog"])
    >>> s = group_split(t, {"cat": "felid", "lynx": "felid", "dog": "canid"})
    >>> round(float(s.inside), 4), round(float(s.between), 4)
    (0.2218, 0.1504)
    >>> bool(abs(float(s.inside + s.between + s.rk) - 1) < 1e-12)
    True
    """
    check_choice("undefined", undefined, UNDEFINED_CHOICES)
    t = validate_tensor(t)
    index, _ = group_index(t.coords[ACTUAL].values, mapping, other=other)
    lead_dims = [d for d in t.dims if d not in (ACTUAL, PREDICTED)]
    t = t.transpose(*lead_dims, ACTUAL, PREDICTED)
    sums = Sums.of(t)
    k = t.shape[-1]
    lead, f, i, j, counts = _cells(t)
    off = i != j
    inside = off & (index[i] == index[j])
    parts = {}
    for name, mask in (("inside", inside), ("between", off & ~inside)):
        rows, cols = np.zeros((lead, k)), np.zeros((lead, k))
        np.add.at(rows, (f[mask], i[mask]), counts[mask])
        np.add.at(cols, (f[mask], j[mask]), counts[mask])
        shape = (*t.shape[:-2], k)
        parts[name] = _repaired_rk(sums, rows.reshape(shape), cols.reshape(shape), undefined)
    base = np.asarray(correlation(*sums.rk_parts(), undefined)[0], dtype=np.float64)
    fix_in, fix_bt = parts["inside"], parts["between"]
    share_in = 0.5 * ((fix_in - base) + (1.0 - fix_bt))
    share_bt = (1.0 - base) - share_in

    coords = {d: t.coords[d] for d in lead_dims if d in t.coords}

    def wrap(values, name):
        return xr.DataArray(np.asarray(values, dtype=np.float64).reshape(t.shape[:-2]),
                            dims=lead_dims, coords=coords, name=name)

    return xr.Dataset({"rk": wrap(base, "rk"), "rk_fix_inside": wrap(fix_in, "rk_fix_inside"),
                       "rk_fix_between": wrap(fix_bt, "rk_fix_between"),
                       "inside": wrap(share_in, "inside"), "between": wrap(share_bt, "between")})


def group_shares(shortfall_share: xr.DataArray, mapping: Mapping, *,
                 other: str | None = None) -> xr.DataArray:
    """Each group's share of 1 - R_K: the shortfall shares of its classes added up.

    Parameters
    ----------
    shortfall_share : xarray.DataArray
        Per-class shortfall shares (``decompose(t)["shortfall_share"]``), dim ``class``.
    mapping : mapping
        Class -> group.
    other : hashable, optional
        The group of classes missing from ``mapping``.

    Returns
    -------
    xarray.DataArray
        Dim ``group`` (groups in order of first appearance), leading dims kept;
        the shares add up to 1 - R_K like the class shares.

    Examples
    --------
    >>> from foldcorr.decomposition import decompose
    >>> from foldcorr.tensor import confusion_tensor
    >>> t = confusion_tensor([[5, 1, 0], [2, 4, 1], [0, 1, 6]], ["cat", "lynx", "dog"])
    >>> share = group_shares(decompose(t).shortfall_share, {"cat": "f", "lynx": "f", "dog": "c"})
    >>> share["group"].values.tolist(), bool(abs(float(share.sum()) - (1 - decompose(t).rk)) < 1e-12)
    (['f', 'c'], True)
    """
    index, groups = group_index(shortfall_share.coords["class"].values, mapping, other=other)
    values = shortfall_share.transpose(..., "class").values
    out = np.zeros((*values.shape[:-1], len(groups)))
    for g in range(len(groups)):
        out[..., g] = values[..., index == g].sum(axis=-1)
    dims = [*(d for d in shortfall_share.dims if d != "class"), GROUP]
    coords = {d: shortfall_share.coords[d] for d in dims[:-1] if d in shortfall_share.coords}
    return xr.DataArray(out, dims=dims, coords={**coords, GROUP: groups}, name="group_share")
