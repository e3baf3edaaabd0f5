r"""Counterfactual repair gains: what fixing a confusion or a class would buy.

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

from foldcorr.errors import (
    InvalidTensorError,
    OptionError,
    UndefinedMetricWarning,
    check_choice,
)
from foldcorr.metrics import UNDEFINED_CHOICES, _correlation, _rk_parts, _Sums, decompose
from foldcorr.tensor import ACTUAL, CLASS, FOLD, PREDICTED, pool, validate_tensor

__all__ = [
    "RANK",
    "pair_gains",
    "class_gains",
    "leave_class_out",
    "costliest_confusions",
    "fold_stability",
    "repair_analysis",
    "RepairAnalysis",
]

#: Dim of ranked confusions (1 = costliest).
RANK = "rank"

#: Drags are compared after rounding to this many decimals (float noise is ~1e-16).
_DRAG_DECIMALS = 12

#: Places listed in one warning before "and N more".
_MAX_PLACES = 5


# --------------------------------------------------------------------------
# margins and the one correlation formula every repair goes through


@dataclass(frozen=True)
class _Margins(_Sums):
    """The margins of :class:`foldcorr.metrics._Sums`, with labels for the repair results."""

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
        parts = [f"{d}={_py(m.labels(d, bad.shape[a])[i])!r}" for a, (d, i) in
                 enumerate(zip(names, index))]
        shown.append(" ".join(parts) or "the whole tensor")
    more = len(spots) - len(shown)
    where = "; ".join(shown) + (f"; and {more} more" if more else "")
    value = "0.0" if undefined == "zero" else "NaN"
    warnings.warn(f"{what} is undefined (0/0) at {where}; taken as {value} "
                  f"(undefined={undefined!r})", UndefinedMetricWarning, stacklevel=3)


def _base(m: _Margins, undefined: str):
    n, dp, dt = m.parts()
    before, bad = _correlation(n, dp, dt, undefined)
    _warn(m, bad, "R_K before repair", undefined)
    return n, dp, dt, before


# --------------------------------------------------------------------------
# the analyses


def pair_gains(t, *, undefined: str = "zero") -> xr.DataArray:
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
    after, bad = _correlation(n2, dp2, dt[..., None, None], undefined)
    bad &= ~np.broadcast_to(_undefined_mask(dp, dt)[..., None, None], bad.shape)
    _warn(m, bad, "R_K after moving a confusion cell to the diagonal", undefined,
          (ACTUAL, PREDICTED))
    gain = after - before[..., None, None]
    gain = np.where(eye, before[..., None, None] - before[..., None, None], gain)
    return m.wrap(gain, "gain", (ACTUAL, PREDICTED))


def _undefined_mask(dp, dt):
    return (np.maximum(dp, 0) * np.maximum(dt, 0)) == 0


def class_gains(t, *, undefined: str = "zero") -> xr.Dataset:
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
        n2, dp2, _ = _rk_parts(trace, s, t_[..., None, :], margins)
        after, bad = _correlation(n2, dp2, dt[..., None], undefined)
        _warn(m, bad & ~was_bad, what[name], undefined, (CLASS,))
        out[name] = m.wrap(after - before[..., None], name, (CLASS,))
    return xr.Dataset(out)


def leave_class_out(t, *, undefined: str = "zero") -> xr.DataArray:
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
    after, bad = _correlation(*_rk_parts(c2, s2, t2, p2), undefined)
    _warn(m, bad, "R_K without a class", undefined, (CLASS,))
    return m.wrap(after - before[..., None], "leave_out_delta", (CLASS,))


def costliest_confusions(t, *, top: int | None = 20, undefined: str = "zero") -> xr.Dataset:
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
    top = _check_top(top)
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


def _check_top(top):
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


def fold_stability(t, *, top: int = 5, dim: str = FOLD) -> xr.Dataset:
    """How steady each class's drag is from fold to fold.

    Parameters
    ----------
    t : xarray.DataArray
        Confusion tensor with a fold dim, dims ``(..., fold, actual, predicted)``.
    top : int, default 5
        A class counts as a top drag class of a fold when its drag rank is at
        most ``top`` and its drag is positive.
    dim : str, default "fold"
        The fold dim.

    Returns
    -------
    xarray.Dataset
        ``drag`` and ``rank`` with dims ``(..., fold, class)``: each class's
        drag per fold (see :func:`foldcorr.metrics.decompose`) and its rank,
        1 for the largest (ties share the best rank: 1 plus the number of
        classes with a strictly larger drag); ``in_top`` (rank <= top and
        drag > 0); and over the folds, dims ``(..., class)``: ``top_folds``
        (folds where the class is a top drag class), ``drag_mean``,
        ``drag_sd`` (ddof = 1; NaN for one fold), ``drag_min`` and
        ``drag_max``. ``attrs["top"]`` records ``top``.

    Raises
    ------
    InvalidTensorError
        When ``t`` has no dim ``dim``.
    OptionError
        When ``top`` is not a positive whole number.

    Notes
    -----
    A drag does not depend on the undefined convention (classes absent from
    a fold's truth or predictions have weight and drag 0), so none is taken.
    Drags are rounded to 12 decimals before ranking, so that float noise
    (a perfect class can show a drag of 1e-16) neither breaks ties nor makes
    a perfect class a top drag class.

    Examples
    --------
    >>> from foldcorr.tensor import tally
    >>> t = tally(list("aabbcc") * 2, list("abbbca") + list("aabcbc"),
    ...           folds=[1] * 6 + [2] * 6)
    >>> st = fold_stability(t, top=1)
    >>> st["rank"].values.tolist(), st.top_folds.values.tolist()
    ([[1, 2, 3], [3, 1, 1]], [1, 1, 1])
    """
    top = _check_top(top)
    if top is None:
        raise OptionError("`top` must be a positive whole number; got None")
    t = validate_tensor(t)
    if dim not in t.dims:
        raise InvalidTensorError(f"fold stability needs a {dim!r} dim; the tensor has dims "
                                 f"{t.dims!r}")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UndefinedMetricWarning)
        drag = decompose(t)["drag"]
    drag = drag.transpose(..., dim, CLASS)
    # round off float noise (a perfect class can show a drag of 1e-16) before ranking
    values = np.round(drag.values, _DRAG_DECIMALS)
    drag = drag.copy(data=values)
    rows = values.reshape(-1, values.shape[-1])
    ranks = np.empty(rows.shape, dtype=np.int64)
    for i, row in enumerate(rows):
        ordered = np.sort(-row)
        ranks[i] = 1 + np.searchsorted(ordered, -row, side="left")
    rank = drag.copy(data=ranks.reshape(values.shape)).rename("rank")
    in_top = ((rank <= top) & (drag > 0)).rename("in_top")
    folds = drag.sizes[dim]
    sd = drag.std(dim, ddof=1) if folds > 1 else xr.full_like(drag.isel({dim: 0}), np.nan)
    out = xr.Dataset({
        "drag": drag,
        "rank": rank,
        "in_top": in_top,
        "top_folds": in_top.sum(dim).rename("top_folds"),
        "drag_mean": drag.mean(dim),
        "drag_sd": sd.drop_vars(dim, errors="ignore"),
        "drag_min": drag.min(dim),
        "drag_max": drag.max(dim),
    })
    out.attrs["top"] = top
    return out


# --------------------------------------------------------------------------
# the gathered result


@dataclass(frozen=True)
class RepairAnalysis:
    """Repair gains, leave-class-out deltas, costliest confusions and fold stability.

    Attributes
    ----------
    rk : float
        Pooled R_K the gains are measured from (under ``undefined``).
    pair_gain : xarray.DataArray
        Pooled :func:`pair_gains`, dims ``(actual, predicted)``.
    per_class : xarray.Dataset
        Dim ``class``: ``gain_fix_fn``, ``gain_fix_fp``, ``gain_fix_both``,
        ``leave_out_delta`` (pooled), and with folds ``top_folds``,
        ``drag_sd``, ``drag_min`` and ``drag_max`` from :attr:`stability`.
    confusions : xarray.Dataset
        Pooled :func:`costliest_confusions`, dim ``rank``.
    stability : xarray.Dataset or None
        :func:`fold_stability` of the per-fold tensor; None without folds.
    top : int or None
        How many confusions were kept (None: all).
    stability_top : int
        The ``top`` of the fold stability count (5 by default).
    undefined : str
        The convention for undefined values.
    warnings : tuple of str
        Undefined values met, in plain language.
    """

    rk: float
    pair_gain: xr.DataArray
    per_class: xr.Dataset
    confusions: xr.Dataset
    stability: xr.Dataset | None
    top: int | None
    stability_top: int
    undefined: str
    warnings: tuple[str, ...]

    def confusion_rows(self) -> list[tuple]:
        """The ranked confusions as ``(actual, predicted, count, gain)`` tuples.

        Examples
        --------
        >>> from foldcorr.tensor import confusion_tensor
        >>> t = confusion_tensor([[5, 1], [2, 6]], ["a", "b"])
        >>> [row[:3] for row in repair_analysis(t).confusion_rows()]
        [('b', 'a', 2), ('a', 'b', 1)]
        """
        c = self.confusions
        return [(_py(a), _py(p), _py(n), float(g)) for a, p, n, g in
                zip(c["actual"].values, c["predicted"].values, c["count"].values,
                    c["gain"].values)]

    def __rich__(self):
        from foldcorr.report.repair import render_rich  # rendering lives in the report layer

        return render_rich(self)


def _py(value):
    return value.item() if isinstance(value, np.generic) else value


def repair_analysis(t, *, top: int | None = 20, stability_top: int = 5,
                    undefined: str = "zero") -> RepairAnalysis:
    """Every repair figure of a confusion tensor, pooled over folds.

    Parameters
    ----------
    t : xarray.DataArray
        Confusion tensor with dims ``([fold,] actual, predicted)``.
    top : int or None, default 20
        Confusions to keep in :attr:`RepairAnalysis.confusions` (None: all).
    stability_top : int, default 5
        See :func:`fold_stability`.
    undefined : {"zero", "nan"}, default "zero"
        Convention for undefined R_K.

    Returns
    -------
    RepairAnalysis

    Raises
    ------
    InvalidTensorError
        When the tensor has a leading dim other than ``fold``.
    OptionError
        On a bad ``top``, ``stability_top`` or ``undefined``.

    Notes
    -----
    Undefined values are not raised as warnings but gathered into
    ``warnings``; a tensor with one class gets a note that there is nothing
    to repair.

    Examples
    --------
    >>> from foldcorr.tensor import tally
    >>> ra = repair_analysis(tally(list("aabbcc"), list("abbbca"), folds=[1, 2] * 3))
    >>> ra.per_class.gain_fix_fn.round(3).values.tolist(), ra.stability.sizes["fold"]
    ([0.261, 0.0, 0.261], 2)
    """
    check_choice("undefined", undefined, UNDEFINED_CHOICES)
    top = _check_top(top)
    t = validate_tensor(t)
    other = [d for d in t.dims if d not in (FOLD, ACTUAL, PREDICTED)]
    if other:
        raise InvalidTensorError(
            f"repair_analysis takes dims (fold, actual, predicted); select or pool {other!r} first")
    pooled = pool(t)
    notes: list[str] = []
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", UndefinedMetricWarning)
        gains = pair_gains(pooled, undefined=undefined)
        per_class = class_gains(pooled, undefined=undefined)
        per_class["leave_out_delta"] = leave_class_out(pooled, undefined=undefined)
        confusions = costliest_confusions(pooled, top=top, undefined=undefined)
    for w in caught:
        if issubclass(w.category, UndefinedMetricWarning):
            notes.append(f"repair: {w.message}")
        else:  # pragma: no cover - passes on anything unexpected
            warnings.warn_explicit(w.message, w.category, w.filename, w.lineno)
    if pooled.sizes[ACTUAL] < 2:
        notes.append("repair: the tensor has one class, so there is no confusion to repair")
    stability = None
    if FOLD in t.dims:
        stability = fold_stability(t, top=stability_top)
        for name in ("top_folds", "drag_sd", "drag_min", "drag_max"):
            per_class[name] = stability[name]
    m = _Margins.of(pooled)
    n, dp, dt = m.parts()
    rk_value, _ = _correlation(n, dp, dt, undefined)
    return RepairAnalysis(
        rk=float(rk_value),
        pair_gain=gains,
        per_class=per_class,
        confusions=confusions,
        stability=stability,
        top=top,
        stability_top=int(stability_top),
        undefined=undefined,
        warnings=tuple(dict.fromkeys(notes)),
    )
