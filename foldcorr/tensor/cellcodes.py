"""Distinct (fold, actual, predicted) cells counted batch by batch, for many classes.

When folds x K^2 outgrows :data:`foldcorr.tensor.DENSE_CELL_LIMIT`, the batch
accumulator keeps :class:`CellCodes` instead of a dense array: each batch's
cells become one int64 code each (fold, truth and prediction codes in fixed
21-bit fields, so the codes stay valid while new labels appear), are made
distinct with ``numpy.unique`` and wait in a list; the list is merged (one
concatenation and one ``unique``) when it grows past :data:`MERGE_AT` entries and
at the end. Memory grows with the distinct cells, never with K^2.
"""

from __future__ import annotations

import numpy as np

from foldcorr.errors import InvalidInputError

__all__ = ["CellCodes", "encode_cells", "FIELD_BITS", "MERGE_AT"]

#: Bits of each of the three codes in a cell code: up to 2,097,152 labels per column.
FIELD_BITS = 21
#: Pending distinct cells that trigger a merge of the pending list.
MERGE_AT = 1 << 24

_FIELD = np.int64(1 << FIELD_BITS)


class CellCodes:
    """Counts of distinct (fold, truth, prediction) code triples.

    Parameters
    ----------
    weighted : bool, default False
        Counts are float64 sums of weights instead of int64 row counts.

    Examples
    --------
    >>> cells = CellCodes()
    >>> cells.add([np.array([0, 0, 1]), np.array([2, 2, 0]), np.array([1, 1, 0])])
    >>> cells.add([np.array([0]), np.array([2]), np.array([1])])
    >>> [c.tolist() for c in cells.triples()]
    [[0, 1], [2, 0], [1, 0], [3, 1]]
    """

    def __init__(self, *, weighted: bool = False):
        self.dtype = np.dtype(np.float64 if weighted else np.int64)
        self._keys = [np.zeros(0, np.int64)]
        self._counts = [np.zeros(0, self.dtype)]
        self._pending = 0

    def add(self, codes, weights=None) -> None:
        """Count rows given as (fold, truth, prediction) code arrays, with optional weights."""
        self.add_keys(encode_cells(codes), weights)

    def add_keys(self, keys: np.ndarray, counts=None, *, distinct: bool = False) -> None:
        """Count cell codes; ``counts`` are per-key weights (or counts when ``distinct``)."""
        if not distinct:
            keys, counts = _distinct(keys, counts, self.dtype)
        self._keys.append(keys)
        self._counts.append(np.asarray(counts, self.dtype))
        self._pending += len(keys)
        if self._pending > MERGE_AT:
            self.merged()

    def merged(self) -> tuple[np.ndarray, np.ndarray]:
        """The distinct cell codes (sorted) and their counts, after merging the pending list."""
        if len(self._keys) > 1:
            keys, inverse = np.unique(np.concatenate(self._keys), return_inverse=True)
            counts = np.bincount(inverse.reshape(-1), weights=np.concatenate(self._counts),
                                 minlength=len(keys))
            self._keys, self._counts = [keys], [counts.astype(self.dtype)]
            self._pending = len(keys)
        return self._keys[0], self._counts[0]

    def triples(self) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
        """Fold, truth and prediction codes of every distinct cell, and its count."""
        keys, counts = self.merged()
        return (keys >> (2 * FIELD_BITS), (keys >> FIELD_BITS) % _FIELD, keys % _FIELD,
                counts)


def encode_cells(codes) -> np.ndarray:
    """One int64 code per row from its (fold, truth, prediction) codes, in fixed 21-bit fields.

    Raises
    ------
    InvalidInputError
        When a column has more labels than a field holds.

    Examples
    --------
    >>> key = encode_cells([np.array([1]), np.array([2]), np.array([3])])
    >>> int(key[0]) == (1 << 42) + (2 << 21) + 3
    True
    """
    key = np.zeros(len(codes[0]), np.int64)
    for c in codes:
        if len(c) and int(c.max()) >= _FIELD:
            raise InvalidInputError(f"more than {int(_FIELD):,} distinct labels in one "
                                    f"column; counting many classes holds at most that many")
        key <<= FIELD_BITS
        key |= c
    return key


def _distinct(keys, weights, dtype):
    if weights is None:
        keys, counts = np.unique(keys, return_counts=True)
        return keys, counts.astype(dtype, copy=False)
    keys, inverse = np.unique(keys, return_inverse=True)
    return keys, np.bincount(inverse.reshape(-1), weights=weights, minlength=len(keys))
