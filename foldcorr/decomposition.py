r"""The exact class decomposition of R_K and what each class does wrong.

:func:`decompose` splits R_K into one contribution per class and 1 - R_K into
one *drag* per class plus a *marginal mismatch*, and splits that mismatch again
into one non-negative share per class, so that every class carries an exact
*shortfall share* of 1 - R_K. :func:`class_flags` says in words what a class
does wrong (never predicted, never predicted right, swallowing other classes,
absent from truth). Both work from the margins of :class:`foldcorr.metrics.Sums`,
dense or sparse, and broadcast over every leading dim. ``docs/decomposition.md``
holds the proofs.
"""

from __future__ import annotations

import numpy as np
import xarray as xr

from foldcorr.errors import check_choice
from foldcorr.metrics import UNDEFINED_CHOICES, Sums, ovr_mcc, rk
from foldcorr.tensor import ACTUAL, CLASS, PREDICTED

__all__ = ["decompose", "mismatch_shares", "class_flags", "flag_words", "FLAGS", "SWALLOW_SHARE"]

#: What a class can do wrong, in the order a report lists it; flag i is bit 2**i
#: of :func:`class_flags`.
FLAGS = ("never predicted", "never predicted right", "swallows other classes",
         "absent from truth")

#: A class swallows other classes when at least this share of the samples of
#: every other class together is predicted as it.
SWALLOW_SHARE = 0.5

def _unit_roots(spread: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """sqrt(x_k / sum x) per class and whether the sum is positive."""
    total = spread.sum(axis=-1, keepdims=True)
    positive = total > 0
    return np.sqrt(spread / np.where(positive, total, 1.0)), positive[..., 0]


def mismatch_shares(actual: np.ndarray, predicted: np.ndarray, total: np.ndarray,
                    shortfall: np.ndarray) -> np.ndarray:
    r"""Each class's exact share of the marginal mismatch, from margins.

    With :math:`a_k = p_k(s - p_k)`, :math:`b_k = t_k(s - t_k)`,
    :math:`u_k = \sqrt{a_k / \sum a}` and :math:`v_k = \sqrt{b_k / \sum b}`
    (two unit vectors whose dot product is :math:`\sum_k w_k`), the mismatch
    :math:`1 - \sum_k w_k = \tfrac12 \lVert u - v \rVert^2` splits into
    :math:`m_k = \tfrac12 (u_k - v_k)^2 \ge 0`.

    Where R_K is undefined (all truths or all predictions in one class) there
    is no unit vector to compare; the whole shortfall ``1 - R_K`` is then spread
    over the classes in proportion to :math:`|p_k - t_k|` (evenly over the
    classes present when the margins agree).

    Parameters
    ----------
    actual, predicted : numpy.ndarray
        Row sums t_k and column sums p_k, class axis last.
    total : numpy.ndarray
        s over the leading dims.
    shortfall : numpy.ndarray
        ``1 - R_K`` over the leading dims (used only where R_K is undefined).

    Returns
    -------
    numpy.ndarray
        m_k, the shape of ``actual``.

    Examples
    --------
    >>> import numpy as np
    >>> t, p = np.array([50.0, 50.0, 0.0]), np.array([90.0, 5.0, 5.0])
    >>> m = mismatch_shares(t, p, np.array(100.0), np.array(0.0))
    >>> [round(float(x), 4) for x in m]
    [0.0, 0.0201, 0.1284]
    """
    s = np.asarray(total, dtype=np.float64)[..., None]
    u, has_u = _unit_roots(predicted * (s - predicted))
    v, has_v = _unit_roots(actual * (s - actual))
    split = 0.5 * (u - v) ** 2
    gap = np.abs(predicted - actual)
    present = ((predicted + actual) > 0).astype(np.float64)
    gap = np.where(gap.sum(axis=-1, keepdims=True) > 0, gap, present)
    spread = gap / np.where(gap.sum(axis=-1, keepdims=True) > 0,
                            gap.sum(axis=-1, keepdims=True), 1.0)
    fallback = np.asarray(shortfall, dtype=np.float64)[..., None] * spread
    return np.where((has_u & has_v)[..., None], split, fallback)


def decompose(t: xr.DataArray, *, undefined: str = "zero") -> xr.Dataset:
    r"""Exact additive decomposition of R_K and of 1 - R_K into per-class terms.

    Parameters
    ----------
    t : xarray.DataArray
        Confusion tensor.
    undefined : {"zero", "nan"}, default "zero"
        Convention for R_K and one-vs-rest MCC where they are 0/0.

    Returns
    -------
    xarray.Dataset
        ``weight``, ``mcc``, ``contribution``, ``drag``, ``mismatch_share`` and
        ``shortfall_share`` with dims ``(..., "class")``; ``rk`` and
        ``marginal_mismatch`` over the leading dims.
        ``contribution.sum("class") == rk``,
        ``drag.sum("class") + marginal_mismatch == 1 - rk``,
        ``mismatch_share.sum("class") == marginal_mismatch`` and
        ``shortfall_share == drag + mismatch_share`` (so the shortfall shares
        add up to ``1 - rk``).

    Notes
    -----
    With :math:`a_k = p_k(s-p_k)`, :math:`b_k = t_k(s-t_k)` and
    :math:`w_k = \sqrt{a_k b_k} / \sqrt{\sum a \sum b}`,

    .. math:: R_K = \sum_k w_k \mathrm{MCC}_k, \qquad
              1 - R_K = \sum_k w_k (1 - \mathrm{MCC}_k) + \Big(1 - \sum_k w_k\Big)

    and the last term is :math:`\tfrac12 \lVert u - v \rVert^2 = \sum_k m_k`
    (see :func:`mismatch_shares`). ``docs/decomposition.md`` has the proofs.
    Where R_K itself is undefined all weights are 0 and the mismatch term
    carries ``1 - rk``.

    Examples
    --------
    >>> from foldcorr.tensor import confusion_tensor
    >>> t = confusion_tensor([[4, 1, 0], [0, 3, 1], [1, 0, 5]], ["a", "b", "c"])
    >>> d = decompose(t)
    >>> round(float(d.contribution.sum("class")), 12) == round(float(d.rk), 12)
    True
    >>> round(float(d.shortfall_share.sum("class") + d.rk), 12)
    1.0
    """
    check_choice("undefined", undefined, UNDEFINED_CHOICES)
    s = Sums.of(t)
    a, b = s.spread_predicted(), s.spread_actual()
    scale = np.sqrt(a.sum(axis=-1)) * np.sqrt(b.sum(axis=-1))
    defined = (scale > 0)[..., None]
    safe = np.where(scale > 0, scale, 1.0)[..., None]
    weight = np.where(defined, np.sqrt(a) * np.sqrt(b) / safe, 0.0)
    num = s.total[..., None] * s.diag - s.actual * s.predicted
    contribution = np.where(defined, num / safe, 0.0)
    drag = np.maximum(weight - contribution, 0.0)  # w (1 - MCC) >= 0; clip rounding
    pooled = rk(s.tensor, undefined=undefined)
    total_rk = pooled.values
    shares = mismatch_shares(s.actual, s.predicted, s.total, 1.0 - total_rk)
    mismatch = np.where(scale > 0, 1.0 - weight.sum(axis=-1), 1.0 - total_rk)
    per_class = ovr_mcc(s.tensor, undefined=undefined)

    def of_class(values, name):
        return per_class.copy(data=values).rename(name)

    return xr.Dataset(
        {
            "weight": of_class(weight, "weight"),
            "mcc": per_class,
            "contribution": of_class(contribution, "contribution"),
            "drag": of_class(drag, "drag"),
            "mismatch_share": of_class(shares, "mismatch_share"),
            "shortfall_share": of_class(drag + shares, "shortfall_share"),
            "rk": pooled,
            "marginal_mismatch": pooled.copy(data=np.maximum(mismatch, 0.0))
                                       .rename("marginal_mismatch"),
        }
    )


def class_flags(t, *, undefined: str = "zero") -> xr.DataArray:
    """What each class does wrong, as bits of :data:`FLAGS` (0: nothing flagged).

    - *never predicted*: the class occurs in truth (t_k > 0) but no sample is
      predicted as it (p_k = 0);
    - *never predicted right*: it occurs in truth and is predicted, but never
      for one of its own samples (C_kk = 0 < t_k, p_k);
    - *swallows other classes*: at least :data:`SWALLOW_SHARE` of the samples
      of all other classes together are predicted as it
      (p_k - C_kk >= SWALLOW_SHARE (s - t_k) > 0);
    - *absent from truth*: it is predicted (p_k > 0) but no sample is of it.

    Parameters
    ----------
    t : xarray.DataArray
        Confusion tensor.
    undefined : str, default "zero"
        Accepted for a uniform signature; not used.

    Returns
    -------
    xarray.DataArray
        Integer bit masks with dims ``(..., "class")``, named ``flags``; read
        them with :func:`flag_words`.

    Examples
    --------
    >>> from foldcorr.tensor import confusion_tensor
    >>> t = confusion_tensor([[5, 0, 0], [0, 5, 0], [0, 4, 0]], ["a", "b", "c"])
    >>> [flag_words(int(x)) for x in class_flags(t)]
    [[], [], ['never predicted']]
    """
    s = Sums.of(t)
    truth, said, right = s.actual > 0, s.predicted > 0, s.diag > 0
    others = s.total[..., None] - s.actual
    taken = s.predicted - s.diag
    raised = (truth & ~said, truth & said & ~right,
              (others > 0) & (taken >= SWALLOW_SHARE * others), said & ~truth)
    bits = sum(flag.astype(np.int64) << i for i, flag in enumerate(raised))
    return _per_class(s.tensor, bits, "flags")


def _per_class(t: xr.DataArray, values: np.ndarray, name: str) -> xr.DataArray:
    """Per-class values labelled like the leading dims of ``t`` plus ``class``."""
    dims = [d for d in t.dims if d not in (ACTUAL, PREDICTED)]
    coords = {d: t.coords[d] for d in dims if d in t.coords}
    return xr.DataArray(values, dims=[*dims, CLASS],
                        coords={**coords, CLASS: t.coords[ACTUAL].values}, name=name)


def flag_words(bits: int) -> list[str]:
    """The words of a :func:`class_flags` bit mask, in :data:`FLAGS` order.

    Examples
    --------
    >>> flag_words(5)
    ['never predicted', 'swallows other classes']
    """
    return [word for i, word in enumerate(FLAGS) if int(bits) >> i & 1]
