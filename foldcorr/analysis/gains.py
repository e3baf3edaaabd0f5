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
and all K² pair repairs cost O(K²) together. ``docs/repair.md`` has the
derivations.

Undefined values: where :math:`R_K` before or after a repair is 0/0, it takes
the value of the ``undefined`` convention (``"zero"``: 0.0, ``"nan"``: NaN),
the gain is computed from those values, and an
:class:`~foldcorr.errors.UndefinedMetricWarning` says where.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass

import numpy as np
import xarray as xr

from foldcorr.errors import OptionError, UndefinedMetricWarning, check_choice
from foldcorr.metrics import UNDEFINED_CHOICES, Sums, correlation, rk_parts
from foldcorr.tensor import ACTUAL, CLASS, PREDICTED, py_value

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
    """The margins of :class:`foldcorr.metrics.Sums`, with labels for the repair results."""

    @property
    def k(self) -> int:
        return self.cells.shape[-1]

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


def _warn(m: _Margins, bad: np.ndarray, what: str, undefined: str, tail=()) -> None:
    """One UndefinedMetricWarning listing the first few places of ``bad``."""
    if not bad.any():
        return
    dims, _ = m.lead()
    names = [*dims, *tail]
    spots = np.argwhere(bad)
    shown = []
    for index in spots[:_MAX_PLACES]:
        parts = [f"{d}={py_value(m.labels(d, bad.shape[a])[i])!r}" for a, (d, i) in
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
    _warn(m, bad, "R_K before repair", undefined)
    return n, dp, dt, before


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

    an O(1) update per cell, so all K² gains cost O(K²).

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
    n, dp, dt, before = _base(m, undefined)
    eye = np.eye(m.k, dtype=bool)
    moved = np.where(eye, 0.0, m.cells)
    s = m.total[..., None, None]
    t_i, t_j = m.actual[..., :, None], m.actual[..., None, :]
    p_i, p_j = m.predicted[..., :, None], m.predicted[..., None, :]
    n2 = n[..., None, None] + moved * (s - t_i + t_j)
    dp2 = dp[..., None, None] - 2.0 * moved * (p_i - p_j + moved)
    after, bad = correlation(n2, dp2, dt[..., None, None], undefined)
    bad &= ~np.broadcast_to(_undefined_mask(dp, dt)[..., None, None], bad.shape)
    _warn(m, bad, "R_K after moving a confusion cell to the diagonal", undefined,
          (ACTUAL, PREDICTED))
    gain = after - before[..., None, None]
    gain = np.where(eye, before[..., None, None] - before[..., None, None], gain)
    return m.wrap(gain, "gain", (ACTUAL, PREDICTED))


def _undefined_mask(dp, dt):
    return (np.maximum(dp, 0) * np.maximum(dt, 0)) == 0


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
    :math:`t_k + p_k - 2C_{kk}`. The K new margin vectors form a K x K array,
    so all classes together cost O(K²).

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
    s = m.total[..., None]
    c, d = m.trace[..., None], m.diag
    t_, p = m.actual, m.predicted
    eye = np.eye(m.k)
    rows = m.cells  # rows[..., k, :] is r_k
    cols = np.swapaxes(m.cells, -1, -2)  # cols[..., k, :] is q_k
    new_p = {
        "gain_fix_fn": (p[..., None, :] - rows + t_[..., :, None] * eye, c + t_ - d),
        "gain_fix_fp": (p[..., None, :] + cols - p[..., :, None] * eye, c + p - d),
        "gain_fix_both": (p[..., None, :] - rows + cols + (t_ - p)[..., :, None] * eye,
                          c + t_ + p - 2 * d),
    }
    what = {"gain_fix_fn": "R_K after fixing every false negative of a class",
            "gain_fix_fp": "R_K after fixing every false positive of a class",
            "gain_fix_both": "R_K after fixing every error of a class"}
    out = {}
    was_bad = _undefined_mask(dp, dt)[..., None]
    for name, (margins, trace) in new_p.items():
        n2, dp2, _ = rk_parts(trace, s, t_[..., None, :], margins)
        after, bad = correlation(n2, dp2, dt[..., None], undefined)
        _warn(m, bad & ~was_bad, what[name], undefined, (CLASS,))
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
    :math:`t'_j = t_j - C_{jk}` and :math:`p'_j = p_j - C_{kj}`; R_K is then
    recomputed from these K x K arrays of margins in O(K²) for all classes.

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
    keep = ~np.eye(m.k, dtype=bool)
    s2 = m.total[..., None] - m.actual - m.predicted + m.diag
    c2 = m.trace[..., None] - m.diag
    # row k of each array: the margins left after dropping class k (zero at k)
    t2 = np.where(keep, m.actual[..., None, :] - np.swapaxes(m.cells, -1, -2), 0.0)
    p2 = np.where(keep, m.predicted[..., None, :] - m.cells, 0.0)
    after, bad = correlation(*rk_parts(c2, s2, t2, p2), undefined)
    _warn(m, bad, "R_K without a class", undefined, (CLASS,))
    return m.wrap(after - before[..., None], "leave_out_delta", (CLASS,))


def costliest_confusions(t: xr.DataArray, *, top: int | None = 20,
                         undefined: str = "zero") -> xr.Dataset:
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
    gains = pair_gains(t, undefined=undefined)
    m = _Margins.of(t)
    k = m.k
    lead_shape = m.cells.shape[:-2]
    flat_gain = gains.values.reshape(-1, k * k)
    flat_count = np.asarray(m.tensor.values).reshape(-1, k * k)
    valid = (flat_count > 0) & ~np.eye(k, dtype=bool).reshape(-1)
    picks = [_rank_cells(g, c, v, top) for g, c, v in zip(flat_gain, flat_count, valid)]
    size = max((len(p) for p in picks), default=0)
    labels = np.asarray(m.tensor.coords[ACTUAL].values, dtype=object)
    actual = np.full((len(picks), size), None, dtype=object)
    predicted = np.full((len(picks), size), None, dtype=object)
    count = np.zeros((len(picks), size), dtype=flat_count.dtype)
    gain = np.full((len(picks), size), np.nan)
    for row, cells in enumerate(picks):
        n = len(cells)
        actual[row, :n] = labels[cells // k]
        predicted[row, :n] = labels[cells % k]
        count[row, :n] = flat_count[row, cells]
        gain[row, :n] = flat_gain[row, cells]
    dims, coords = m.lead()
    shape = (*lead_shape, size)
    rank = np.arange(1, size + 1)

    def wrap(values, name):
        return xr.DataArray(values.reshape(shape), dims=[*dims, RANK],
                            coords={**coords, RANK: rank}, name=name)

    return xr.Dataset({"actual": wrap(actual, "actual"), "predicted": wrap(predicted, "predicted"),
                       "count": wrap(count, "count"), "gain": wrap(gain, "gain")})


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


def _rank_cells(gain, count, valid, top):
    """Flat indices of the valid cells, best first (gain, then count, then cell order)."""
    cells = np.flatnonzero(valid)
    key = np.nan_to_num(gain[cells], nan=-np.inf)
    if top is not None and len(cells) > top:
        # keep every cell tied with the top-th best, then sort exactly
        edge = np.partition(key, len(key) - top)[len(key) - top]
        keep = key >= edge
        cells, key = cells[keep], key[keep]
    order = np.lexsort((cells, -count[cells].astype(np.float64), -key))
    cells = cells[order]
    return cells if top is None else cells[:top]
