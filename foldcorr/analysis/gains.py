r"""Counterfactual repair gains: what fixing a confusion or a class would buy.

The gains of every confusion cell and every class, what leaving a class out
changes, and the costliest confusions ranked; :mod:`foldcorr.analysis.repair`
gathers them, with the fold stability of the drag, into one result.

Every function here takes a confusion tensor (see :mod:`foldcorr.tensor`),
works on its two class dims and broadcasts over every leading dim (``fold``,
``split``, ``model``, ...). Nothing reads files, prints or draws randoms.

Notation for one K x K matrix C (rows actual, columns predicted): :math:`s`
is the total, :math:`c` the trace, :math:`t_k` the row sums and :math:`p_k`
the column sums. Write

.. math:: N = c\,s - \sum_k t_k p_k, \quad
          D_p = s^2 - \sum_k p_k^2, \quad D_t = s^2 - \sum_k t_k^2,
          \quad R_K = N / \sqrt{D_p D_t}.

A repair moves counts within a row, from an off-diagonal cell onto that row's
diagonal cell, so it never changes :math:`s` or the row sums :math:`t` (hence
:math:`D_t`); it changes only the trace and the column sums. Each repaired
:math:`R_K` is therefore an update of :math:`N` and :math:`D_p` from the sums,
and all pair repairs cost O(nonzero cells) together: only a nonzero
off-diagonal cell moves anything. Class repairs and leaving a class out shift
the margins at the nonzero cells of one row and column, O(nonzero cells + K)
for all classes; no K x K array is made, so a sparse tensor stays sparse. ``docs/repair.md`` has the
derivations.

Undefined values: where :math:`R_K` before or after a repair is 0/0, it takes
the value of the ``undefined`` convention (``"zero"``: 0.0, ``"nan"``: NaN),
the gain is computed from those values, and an
:class:`~foldcorr.errors.UndefinedMetricWarning` says where.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass
from functools import cached_property

import numpy as np
import xarray as xr

from foldcorr.errors import OptionError, UndefinedMetricWarning, check_choice
from foldcorr.metrics import UNDEFINED_CHOICES, Sums, correlation
from foldcorr.tensor import ACTUAL, CLASS, PREDICTED, is_sparse, nonzero_cells, py_value

__all__ = [
    "RANK",
    "pair_gains",
    "class_gains",
    "leave_class_out",
    "costliest_confusions",
    "check_top",
]

#: Dim of ranked confusions (1 = costliest).
RANK = "rank"

#: Places listed in one warning before "and N more".
_MAX_PLACES = 5


# --------------------------------------------------------------------------
# margins and the one correlation formula every repair goes through


@dataclass(frozen=True)
class _Margins(Sums):
    """The margins of :class:`foldcorr.metrics.Sums`, with the nonzero cells and labels."""

    @property
    def k(self) -> int:
        return self.tensor.shape[-1]

    @property
    def lead_shape(self) -> tuple[int, ...]:
        return tuple(self.tensor.shape[:-2])

    @property
    def slices(self) -> int:
        return int(np.prod(self.lead_shape, dtype=np.int64))

    def flat(self, values) -> np.ndarray:
        """A per-slice (``(...)``) or per-class (``(..., K)``) array, leading dims flattened."""
        values = np.asarray(values)
        return values.reshape(self.slices, -1) if values.ndim > len(self.lead_shape) else \
            values.reshape(self.slices)

    @cached_property
    def nonzero(self):
        """Slice, row, column and count of every nonzero cell (C order)."""
        return nonzero_cells(self.tensor)

    def parts(self):
        """N, D_p and D_t of the matrix itself, over the leading dims."""
        return self.rk_parts()

    def lead(self):
        dims = [d for d in self.tensor.dims if d not in (ACTUAL, PREDICTED)]
        coords = {d: self.tensor.coords[d] for d in dims if d in self.tensor.coords}
        return dims, coords

    def labels(self, dim: str, size: int):
        if dim in (ACTUAL, PREDICTED, CLASS):
            return self.tensor.coords[ACTUAL].values
        if dim in self.tensor.coords:
            return self.tensor.coords[dim].values
        return np.arange(size)

    def wrap(self, values, name: str, tail: tuple[str, ...] = ()) -> xr.DataArray:
        dims, coords = self.lead()
        coords = dict(coords)
        for d in tail:
            coords[d] = self.tensor.coords[ACTUAL].values
        return xr.DataArray(values, dims=[*dims, *tail], coords=coords, name=name)


def _warn(m: _Margins, spots: np.ndarray, what: str, undefined: str, tail=()) -> None:
    """One UndefinedMetricWarning listing the first few ``spots`` (rows of indices)."""
    if not len(spots):
        return
    dims, _ = m.lead()
    names = [*dims, *tail]
    sizes = [*m.lead_shape, *([m.k] * len(tail))]
    shown = []
    for index in spots[:_MAX_PLACES]:
        parts = [f"{d}={py_value(m.labels(d, sizes[a])[i])!r}" for a, (d, i) in
                 enumerate(zip(names, index))]
        shown.append(" ".join(parts) or "the whole tensor")
    more = len(spots) - len(shown)
    where = "; ".join(shown) + (f"; and {more} more" if more else "")
    value = "0.0" if undefined == "zero" else "NaN"
    warnings.warn(f"{what} is undefined (0/0) at {where}; taken as {value} "
                  f"(undefined={undefined!r})", UndefinedMetricWarning, stacklevel=3)


def _base(m: _Margins, undefined: str):
    n, dp, dt = m.parts()
    before, bad = correlation(n, dp, dt, undefined)
    _warn(m, np.argwhere(bad), "R_K before repair", undefined)
    return n, dp, dt, before


def _unravel(flat, shape):
    """Indices over the leading dims of flat slice numbers (none without leading dims)."""
    return np.unravel_index(flat, shape) if shape else ()


def _undefined_mask(dp, dt):
    return (np.maximum(dp, 0) * np.maximum(dt, 0)) == 0


def _cell_gains(m: _Margins, undefined: str):
    """Gain of every nonzero off-diagonal cell: (slice, row, column, count, gain), O(nnz)."""
    n, dp, dt, before = _base(m, undefined)
    lead, i, j, count = m.nonzero
    off = i != j
    lead, i, j, count = lead[off], i[off], j[off], count[off]
    moved = count.astype(np.float64) / m.scale
    t, p = m.flat(m.actual), m.flat(m.predicted)
    s = m.flat(m.total)[lead]
    n2 = m.flat(n)[lead] + moved * (s - t[lead, i] + t[lead, j])
    dp2 = m.flat(dp)[lead] - 2.0 * moved * (p[lead, i] - p[lead, j] + moved)
    after, bad = correlation(n2, dp2, m.flat(dt)[lead], undefined)
    bad &= ~m.flat(_undefined_mask(dp, dt))[lead]
    spots = np.column_stack([*_unravel(lead[bad], m.lead_shape), i[bad], j[bad]])
    _warn(m, spots.astype(np.intp), "R_K after moving a confusion cell to the diagonal",
          undefined, (ACTUAL, PREDICTED))
    return lead, i, j, count, after - m.flat(before)[lead], before


def _shifted_parts(m: _Margins, trace, total, shift_t, shift_p):
    """N, D_p and D_t of K counterfactual margins per slice, each a sparse shift of the margins.

    ``trace`` and ``total`` are the new c and s, shape ``(..., K)``; ``shift_t`` and
    ``shift_p`` are ``(class, position, value)`` triples: the row sums (column sums) of
    counterfactual k of slice l are t + sum of the values at (l K + k, position). Repeated
    places add up. With d the shift, sum t'p' = sum tp + t.d_p + p.d_t + d_t.d_p and
    sum p'^2 = sum p^2 + 2 p.d_p + d_p.d_p: O(shift entries), never a K x K array.
    """
    k, slices = m.k, m.slices
    groups = slices * k
    t, p = m.flat(m.actual), m.flat(m.predicted)
    owner = np.repeat(np.arange(slices), k)
    ends = []
    for group, pos, value in (shift_t, shift_p):
        key, inverse = np.unique(group.astype(np.int64) * k + pos, return_inverse=True)
        ends.append((key, np.bincount(inverse.reshape(-1), weights=value, minlength=len(key))))
    (key_t, d_t), (key_p, d_p) = ends

    def per_group(key, values):
        return np.bincount(key // k, weights=values, minlength=groups)

    def at(margins, key):
        return margins[owner[key // k], key % k]

    _, in_t, in_p = np.intersect1d(key_t, key_p, assume_unique=True, return_indices=True)
    tp = ((t * p).sum(-1)[owner] + per_group(key_p, at(t, key_p) * d_p)
          + per_group(key_t, at(p, key_t) * d_t) + per_group(key_t[in_t], d_t[in_t] * d_p[in_p]))
    tt = (t * t).sum(-1)[owner] + per_group(key_t, (2.0 * at(t, key_t) + d_t) * d_t)
    pp = (p * p).sum(-1)[owner] + per_group(key_p, (2.0 * at(p, key_p) + d_p) * d_p)
    shape = (*m.lead_shape, k)
    s = np.asarray(total, dtype=np.float64)
    return (np.asarray(trace) * s - tp.reshape(shape), s * s - pp.reshape(shape),
            s * s - tt.reshape(shape))


_NO_SHIFT = (np.zeros(0, np.int64), np.zeros(0, np.int64), np.zeros(0))


# --------------------------------------------------------------------------
# the analyses


def pair_gains(t: xr.DataArray, *, undefined: str = "zero") -> xr.DataArray:
    r"""Gain in R_K from moving each confusion cell's counts onto the diagonal.

    Parameters
    ----------
    t : xarray.DataArray
        Confusion tensor, dims ``(..., "actual", "predicted")``.
    undefined : {"zero", "nan"}, default "zero"
        Value of R_K where it is 0/0, before or after a repair.

    Returns
    -------
    xarray.DataArray
        Dims ``(..., "actual", "predicted")``, named ``gain``: at (i, j) the
        R_K after moving the m = C_ij counts of cell (i, j) to (i, i), minus
        R_K. The diagonal holds the gain of moving nothing: 0 (NaN where R_K
        is undefined under ``undefined="nan"``). So does every empty cell.
        A sparse tensor gives a sparse result: only its nonzero off-diagonal
        cells are stored, every other cell reads as the fill value 0.0 (NaN
        when R_K is undefined in every slice under ``undefined="nan"``).

    Raises
    ------
    InvalidTensorError
        When ``t`` is not a valid confusion tensor.
    OptionError
        When ``undefined`` is not one of the choices.

    Warns
    -----
    UndefinedMetricWarning
        Where R_K is 0/0 before the repair, or after it (for example when a
        repair leaves every prediction in one class).

    Notes
    -----
    Moving m counts from (i, j) to (i, i) keeps s and every t_k, adds m to
    the trace and to p_i, and takes m from p_j. Hence, with the notation of
    the module,

    .. math:: N' = N + m\,(s - t_i + t_j), \qquad
              D_p' = D_p - 2m\,(p_i - p_j + m), \qquad D_t' = D_t,

    an O(1) update per cell. Only nonzero off-diagonal cells move anything,
    so all gains cost O(nonzero cells) after the margins.

    References
    ----------
    .. [1] J. Gorodkin, "Comparing two K-category assignments by a K-category
       correlation coefficient", Comput. Biol. Chem. 28 (2004) 367-374.

    Examples
    --------
    >>> from foldcorr.tensor import confusion_tensor
    >>> t = confusion_tensor([[5, 1, 0], [2, 6, 0], [0, 3, 3]], ["a", "b", "c"])
    >>> pair_gains(t).round(4).values.tolist()
    [[0.0, 0.0818, 0.0], [0.1731, 0.0, 0.0], [0.0, 0.2235, 0.0]]
    """
    check_choice("undefined", undefined, UNDEFINED_CHOICES)
    m = _Margins.of(t)
    lead, i, j, _, gain, before = _cell_gains(m, undefined)
    if is_sparse(m.tensor):
        import sparse

        fill = np.nan if before.size and np.isnan(before).all() else 0.0
        coords = np.stack([*_unravel(lead, m.lead_shape), i, j])
        data = sparse.COO(coords, gain, shape=m.tensor.shape, fill_value=fill,
                          has_duplicates=False, sorted=True)
    else:
        data = np.zeros((m.slices, m.k, m.k)) + (before - before).reshape(-1, 1, 1)
        data[lead, i, j] = gain
        data = data.reshape(m.tensor.shape)
    return m.wrap(data, "gain", (ACTUAL, PREDICTED))


def class_gains(t: xr.DataArray, *, undefined: str = "zero") -> xr.Dataset:
    r"""Gain in R_K from fixing a class's false negatives, false positives, or both.

    Parameters
    ----------
    t : xarray.DataArray
        Confusion tensor, dims ``(..., "actual", "predicted")``.
    undefined : {"zero", "nan"}, default "zero"
        Value of R_K where it is 0/0, before or after a repair.

    Returns
    -------
    xarray.Dataset
        Dims ``(..., "class")``:

        ``gain_fix_fn``
            Row k's off-diagonal counts moved to (k, k) (every sample of
            class k predicted right), R_K after minus R_K.
        ``gain_fix_fp``
            Column k's off-diagonal counts (i, k) moved to their own diagonal
            cells (i, i) (nothing else taken for class k).
        ``gain_fix_both``
            Both repairs at once.

    Raises
    ------
    InvalidTensorError, OptionError
        On an invalid tensor or ``undefined`` value.

    Warns
    -----
    UndefinedMetricWarning
        Where R_K is 0/0 before or after a repair.

    Notes
    -----
    None of these repairs changes s or the row sums t. With :math:`r_k` row k
    and :math:`q_k` column k of C, and :math:`e_k` the k-th unit vector, the
    new column sums are

    .. math:: p^{FN} = p - r_k + t_k e_k, \quad
              p^{FP} = p + q_k - p_k e_k, \quad
              p^{both} = p - r_k + q_k + (t_k - p_k) e_k

    and the trace grows by :math:`t_k - C_{kk}`, :math:`p_k - C_{kk}` and
    :math:`t_k + p_k - 2C_{kk}`. Each shift touches only the nonzero cells of
    row or column k, so all classes together cost O(nonzero cells + K):
    :math:`\sum_j t_j p'_j` and :math:`\sum_j p_j'^2` are updated from the
    shifted entries alone.

    Examples
    --------
    >>> from foldcorr.tensor import confusion_tensor
    >>> t = confusion_tensor([[5, 1, 0], [2, 6, 0], [0, 3, 3]], ["a", "b", "c"])
    >>> g = class_gains(t)
    >>> g.gain_fix_fn.round(4).values.tolist()
    [0.0818, 0.1731, 0.2235]
    >>> g.gain_fix_both.round(4).values.tolist()
    [0.2427, 0.4461, 0.2235]
    """
    check_choice("undefined", undefined, UNDEFINED_CHOICES)
    m = _Margins.of(t)
    n, dp, dt, before = _base(m, undefined)
    c, d = m.trace[..., None], m.diag
    t_, p = m.actual, m.predicted
    lead, i, j, count = m.nonzero
    value = count.astype(np.float64) / m.scale
    k = m.k
    classes = np.arange(m.slices * k)
    row, col = lead * k + i, lead * k + j  # the class whose row / column holds the cell
    fn = (np.r_[row, classes], np.r_[j, classes % k], np.r_[-value, m.flat(t_).ravel()])
    fp = (np.r_[col, classes], np.r_[i, classes % k], np.r_[value, -m.flat(p).ravel()])
    both = tuple(np.r_[a, b] for a, b in zip(fn, fp))
    new = {"gain_fix_fn": (fn, c + t_ - d), "gain_fix_fp": (fp, c + p - d),
           "gain_fix_both": (both, c + t_ + p - 2 * d)}
    what = {"gain_fix_fn": "R_K after fixing every false negative of a class",
            "gain_fix_fp": "R_K after fixing every false positive of a class",
            "gain_fix_both": "R_K after fixing every error of a class"}
    out = {}
    was_bad = _undefined_mask(dp, dt)[..., None]
    total = np.broadcast_to(m.total[..., None], t_.shape)
    for name, (shift, trace) in new.items():
        n2, dp2, _ = _shifted_parts(m, trace, total, _NO_SHIFT, shift)
        after, bad = correlation(n2, dp2, dt[..., None], undefined)
        _warn(m, np.argwhere(bad & ~was_bad), what[name], undefined, (CLASS,))
        out[name] = m.wrap(after - before[..., None], name, (CLASS,))
    return xr.Dataset(out)


def leave_class_out(t: xr.DataArray, *, undefined: str = "zero") -> xr.DataArray:
    r"""R_K of the tensor without class k's row and column, minus R_K.

    Parameters
    ----------
    t : xarray.DataArray
        Confusion tensor, dims ``(..., "actual", "predicted")``.
    undefined : {"zero", "nan"}, default "zero"
        Value of R_K where it is 0/0, with or without the class.

    Returns
    -------
    xarray.DataArray
        Dims ``(..., "class")``, named ``leave_out_delta``: what the rest of
        the model scores on the samples that are neither of nor taken for
        class k, relative to R_K on all samples. Positive means the class
        pulls R_K down.

    Raises
    ------
    InvalidTensorError, OptionError
        On an invalid tensor or ``undefined`` value.

    Warns
    -----
    UndefinedMetricWarning
        Where R_K is 0/0 with or without a class (always the case without a
        class of a 2-class tensor: one class is left).

    Notes
    -----
    Dropping row and column k leaves :math:`s' = s - t_k - p_k + C_{kk}`,
    :math:`c' = c - C_{kk}`, and for :math:`j \ne k` the margins
    :math:`t'_j = t_j - C_{jk}` and :math:`p'_j = p_j - C_{kj}` (and
    :math:`t'_k = p'_k = 0`). Each class shifts the margins at the nonzero
    cells of its row and column only, so all classes cost O(nonzero cells + K).

    Examples
    --------
    >>> from foldcorr.tensor import confusion_tensor
    >>> t = confusion_tensor([[5, 1, 0], [2, 6, 0], [0, 3, 3]], ["a", "b", "c"])
    >>> leave_class_out(t).round(4).values.tolist()
    [0.0235, 0.4461, 0.0235]
    """
    check_choice("undefined", undefined, UNDEFINED_CHOICES)
    m = _Margins.of(t)
    _, _, _, before = _base(m, undefined)
    s2 = m.total[..., None] - m.actual - m.predicted + m.diag
    c2 = m.trace[..., None] - m.diag
    lead, i, j, count = m.nonzero
    off = i != j
    lead, i, j = lead[off], i[off], j[off]
    value = count[off].astype(np.float64) / m.scale
    k = m.k
    classes = np.arange(m.slices * k)
    # dropping class j takes C_ij from t_i; dropping class i takes C_ij from p_j
    shift_t = (np.r_[lead * k + j, classes], np.r_[i, classes % k],
               np.r_[-value, -m.flat(m.actual).ravel()])
    shift_p = (np.r_[lead * k + i, classes], np.r_[j, classes % k],
               np.r_[-value, -m.flat(m.predicted).ravel()])
    after, bad = correlation(*_shifted_parts(m, c2, s2, shift_t, shift_p), undefined)
    _warn(m, np.argwhere(bad), "R_K without a class", undefined, (CLASS,))
    return m.wrap(after - before[..., None], "leave_out_delta", (CLASS,))


def costliest_confusions(t: xr.DataArray, *, top: int | None = 20, undefined: str = "zero",
                         gains: xr.DataArray | None = None) -> xr.Dataset:
    """The confusion cells whose repair would gain the most R_K, ranked.

    Parameters
    ----------
    t : xarray.DataArray
        Confusion tensor, dims ``(..., "actual", "predicted")``.
    top : int or None, default 20
        How many confusions to keep; None keeps every non-empty off-diagonal
        cell.
    undefined : {"zero", "nan"}, default "zero"
        As in :func:`pair_gains`.
    gains : xarray.DataArray, optional
        :func:`pair_gains` of ``t`` already computed (with the same
        ``undefined``): read at the nonzero cells instead of computed again.

    Returns
    -------
    xarray.Dataset
        Dims ``(..., "rank")`` (rank 1 is the costliest): ``actual`` and
        ``predicted`` (class labels), ``count`` and ``gain``. Only non-empty
        off-diagonal cells are ranked, by gain (largest first; NaN gains
        last), then by count, then by cell order. With leading dims, slices
        with fewer confusions are padded with missing labels (xarray stores
        them as NaN in object arrays), ``count`` 0 and ``gain`` NaN.

    Raises
    ------
    OptionError
        When ``top`` is not a positive whole number or None.

    Notes
    -----
    The gains are those of :func:`pair_gains`, computed for the nonzero
    off-diagonal cells only: O(nonzero cells) plus the sort of the ranking.

    Examples
    --------
    >>> from foldcorr.tensor import confusion_tensor
    >>> t = confusion_tensor([[5, 1, 0], [2, 6, 0], [0, 3, 3]], ["a", "b", "c"])
    >>> c = costliest_confusions(t, top=2)
    >>> c.actual.values.tolist(), c.predicted.values.tolist(), c["count"].values.tolist()
    (['c', 'b'], ['b', 'a'], [3, 2])
    >>> c.gain.round(4).values.tolist()
    [0.2235, 0.1731]
    """
    top = check_top(top)
    check_choice("undefined", undefined, UNDEFINED_CHOICES)
    m = _Margins.of(t)
    if gains is None:
        lead, i, j, count, gain, _ = _cell_gains(m, undefined)
    else:
        lead, i, j, count = m.nonzero
        off = i != j
        lead, i, j, count = lead[off], i[off], j[off], count[off]
        gain = _read_cells(gains.transpose(*m.tensor.dims).data, m.lead_shape, lead, i, j)
    bounds = np.searchsorted(lead, np.arange(m.slices + 1))
    picks = [np.arange(a, b)[_rank_cells(gain[a:b], count[a:b], top)]
             for a, b in zip(bounds[:-1], bounds[1:])]
    size = max((len(p) for p in picks), default=0)
    labels = np.asarray(m.tensor.coords[ACTUAL].values, dtype=object)
    actual = np.full((len(picks), size), None, dtype=object)
    predicted = np.full((len(picks), size), None, dtype=object)
    counts = np.zeros((len(picks), size), dtype=m.tensor.dtype)
    gains = np.full((len(picks), size), np.nan)
    for row, cells in enumerate(picks):
        n = len(cells)
        actual[row, :n] = labels[i[cells]]
        predicted[row, :n] = labels[j[cells]]
        counts[row, :n] = count[cells]
        gains[row, :n] = gain[cells]
    dims, coords = m.lead()
    shape = (*m.lead_shape, size)
    rank = np.arange(1, size + 1)

    def wrap(values, name):
        return xr.DataArray(values.reshape(shape), dims=[*dims, RANK],
                            coords={**coords, RANK: rank}, name=name)

    return xr.Dataset({"actual": wrap(actual, "actual"), "predicted": wrap(predicted, "predicted"),
                       "count": wrap(counts, "count"), "gain": wrap(gains, "gain")})


def check_top(top):
    """``top`` as an int, or None; refused unless a positive whole number or None.

    Examples
    --------
    >>> check_top(3), check_top(None)
    (3, None)
    >>> check_top(0)
    Traceback (most recent call last):
    ...
    foldcorr.errors.OptionError: `top` must be a positive whole number or None; got 0
    """
    if top is None:
        return None
    if isinstance(top, (bool, np.bool_)) or not isinstance(top, (int, np.integer)) or top < 1:
        raise OptionError(f"`top` must be a positive whole number or None; got {top!r}")
    return int(top)


def _read_cells(data, lead_shape, lead, i, j):
    """Values of a dense or sparse array at cells given as (flat slice, row, column)."""
    k = data.shape[-1]
    want = (lead.astype(np.int64) * k + i) * k + j
    if not is_sparse(data):
        return np.asarray(data).reshape(-1)[want]
    stored = np.ravel_multi_index(tuple(data.coords), data.shape)
    pos = np.minimum(np.searchsorted(stored, want), max(len(stored) - 1, 0))
    found = stored[pos] == want if len(stored) else np.zeros(len(want), bool)
    return np.where(found, data.data[pos] if len(stored) else 0.0, data.fill_value)


def _rank_cells(gain, count, top):
    """Positions of the cells, best first (gain, then count, then cell order)."""
    cells = np.arange(len(gain))
    key = np.nan_to_num(gain, nan=-np.inf)
    if top is not None and len(cells) > top:
        # keep every cell tied with the top-th best, then sort exactly
        edge = np.partition(key, len(key) - top)[len(key) - top]
        keep = key >= edge
        cells, key = cells[keep], key[keep]
    order = np.lexsort((cells, -count[cells].astype(np.float64), -key))
    cells = cells[order]
    return cells if top is None else cells[:top]
