"""The fast paths of the streaming tally give the same tensor as the slow ones.

Parquet text labels read as dictionaries, uint32 batch counts added into the
int64 tally, the int32 cell index and the final remap of codes into class
order. Outside reference: ``sklearn.metrics.confusion_matrix`` (Pedregosa et
al. 2011) on the concatenated rows, per fold; the in-memory tally
(``foldcorr.sources._load_in_memory``, pandas as the reader) for attrs and
error messages.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pyarrow as pa
import pyarrow.parquet as pq
import pytest
from sklearn.metrics import confusion_matrix

import foldcorr.tensor.accumulator as accumulator
from foldcorr.errors import InvalidInputError
from foldcorr.sources.formats import ParquetFormat
from foldcorr.sources.reading import prefetch
from foldcorr.sources.stream import stream_tensor
from foldcorr.sources.tables import TableSpec, _load_in_memory
from foldcorr.tensor.accumulator import StreamTally
from foldcorr.tensor import count_codes


def _sklearn(df, labels, folds):
    """Per-fold confusion matrices of the reference library."""
    return np.stack([confusion_matrix(df.loc[df["fold"] == f, "actual"],
                                      df.loc[df["fold"] == f, "predicted"], labels=labels)
                     for f in folds])


def _growing(seed=4, n_files=3, rows=500):
    """Text labels, new ones in later files and late in each file."""
    rng = np.random.default_rng(seed)
    parts = []
    for i in range(n_files):
        k = 4 + 4 * i
        names = np.array([f"diatom{j:02d}" for j in range(k)])
        late = np.arange(rows) > rows * 0.8          # the last fifth may use every name
        a = np.where(late, names[rng.integers(0, k, rows)], names[rng.integers(0, 3, rows)])
        parts.append(pd.DataFrame({"actual": a, "predicted": names[rng.integers(0, k, rows)],
                                   "fold": rng.integers(1, 4, rows),
                                   "station": rng.choice(["north", "south"], rows)}))
    return parts


@pytest.mark.parametrize("stored", ["text", "categorical"])
def test_parquet_text_read_as_dictionary_equals_sklearn(tmp_path, stored):
    parts = _growing()
    for i, df in enumerate(parts):
        out = df.astype({"actual": "category", "predicted": "category"}) \
            if stored == "categorical" else df
        out.to_parquet(tmp_path / f"part-{i}.parquet", index=False, row_group_size=120)
    whole = pd.concat(parts, ignore_index=True)
    labels = sorted(set(whole["actual"]) | set(whole["predicted"]))
    # The reader hands out dictionary arrays for the label columns.
    batch = next(ParquetFormat().batches(tmp_path / "part-0.parquet",
                                         ["actual", "predicted", "fold"],
                                         ["actual", "predicted", "fold"], None, 50))
    assert pa.types.is_dictionary(batch.schema.field("actual").type)
    for batch_rows in (37, 1 << 20):
        r = stream_tensor(tmp_path, batch_rows=batch_rows)
        assert r.tensor.coords["actual"].values.tolist() == labels
        # sklearn.metrics.confusion_matrix, per fold, on the concatenated rows
        np.testing.assert_array_equal(r.tensor.values, _sklearn(whole, labels, [1, 2, 3]))
    # A filter on another column, and one on a label column (read as text then).
    south = whole[whole["station"] == "south"]
    t = stream_tensor(tmp_path, where='station == "south"', batch_rows=37).tensor
    used = sorted(set(south["actual"]) | set(south["predicted"]))
    assert t.coords["actual"].values.tolist() == used
    np.testing.assert_array_equal(t.values, _sklearn(south, used, [1, 2, 3]))
    some = whole[whole["actual"].isin(["diatom01", "diatom05"])]
    t = stream_tensor(tmp_path, where='actual in ("diatom01", "diatom05")').tensor
    used = sorted(set(some["actual"]) | set(some["predicted"]))
    np.testing.assert_array_equal(t.values, _sklearn(some, used, [1, 2, 3]))


def test_parquet_dictionary_labels_missing_and_outside_classes(tmp_path):
    p = tmp_path / "p.parquet"
    pq.write_table(pa.table({"actual": ["a", "b", None, "c", None],
                             "predicted": ["a", "a", "b", "z", "b"]}), p, row_group_size=2)
    for spec, message in [
            (TableSpec(), "p.parquet: column 'actual' row 3: missing label (2 missing in all)"),
            (TableSpec(classes=("a", "b", "c")),
             "p.parquet: column 'actual' row 3: label nan is not among the classes "
             "['a', 'b', 'c'] (2 rows outside them)")]:
        with pytest.raises(InvalidInputError) as whole:
            _load_in_memory(p, spec)
        with pytest.raises(InvalidInputError) as streamed:
            stream_tensor(p, classes=spec.classes, batch_rows=2)
        assert str(streamed.value) == str(whole.value) == message


def test_uint32_batch_counts_flush_into_the_tally(monkeypatch):
    rng = np.random.default_rng(12)
    tables = [pa.table({"actual": rng.integers(0, 7, 300), "predicted": rng.integers(0, 7, 300),
                        "fold": rng.integers(1, 3, 300)}) for _ in range(5)]
    whole = pa.concat_tables(tables).to_pandas()
    labels = list(range(7))
    expected = _sklearn(whole, labels, [1, 2])
    # Batches of 300 rows: a limit of 700 flushes every few batches, 250 counts
    # each batch straight into the int64 array.
    for limit in (700, 250):
        monkeypatch.setattr(accumulator, "PENDING_MAX", limit)
        acc = StreamTally(fold="fold")
        for i, t in enumerate(tables):
            acc.add(t)
            assert acc._pending is None or acc._pending_rows <= limit
            if i == 2:                       # reading the counts mid-way changes nothing
                assert int(acc.counts.sum()) == 900
        # sklearn.metrics.confusion_matrix, per fold
        np.testing.assert_array_equal(acc.tensor().values, expected)


def test_tensor_is_a_copy_and_remaps_every_way():
    acc = StreamTally(fold="fold")
    acc.add(pa.table({"actual": [0, 1, 2], "predicted": [0, 2, 2], "fold": [1, 1, 2]}))
    t = acc.tensor()                                          # codes are the classes already
    acc.add(pa.table({"actual": [0], "predicted": [0], "fold": [1]}))
    # sklearn.metrics.confusion_matrix of the first three rows, fold 1 and fold 2
    np.testing.assert_array_equal(t.values, [confusion_matrix([0, 1], [0, 2], labels=[0, 1, 2]),
                                             confusion_matrix([2], [2], labels=[0, 1, 2])])
    text = StreamTally(fold="fold")                           # codes in order of appearance
    rows = {"actual": ["wren", "owl", "kite", "owl"], "predicted": ["owl", "owl", "wren", "kite"],
            "fold": ["r2", "r10", "r1", "r2"]}
    text.add(pa.table(rows))
    df = pd.DataFrame(rows)
    for classes in (None, ["wren", "kite", "owl"], ["tern", "owl", "wren", "kite"]):
        got = text.tensor(classes=classes)
        labels = classes or ["kite", "owl", "wren"]
        assert got.coords["actual"].values.tolist() == labels
        assert got.coords["fold"].values.tolist() == ["r1", "r10", "r2"]
        # sklearn.metrics.confusion_matrix with the same label order
        np.testing.assert_array_equal(got.values, _sklearn(df, labels, ["r1", "r10", "r2"]))


def test_count_codes_into_uint32_and_mixed_code_types():
    rng = np.random.default_rng(2)
    a, p = rng.integers(0, 9, 1000), rng.integers(0, 9, 1000).astype(np.int32)
    f = rng.integers(0, 3, 1000).astype(np.int16)
    fresh = count_codes([f, a, p], [3, 9, 9])
    into = np.zeros((3, 9, 9), dtype=np.uint32)
    count_codes([f, a, p], [3, 9, 9], out=into)
    np.testing.assert_array_equal(fresh, into)
    # sklearn.metrics.confusion_matrix per group
    np.testing.assert_array_equal(fresh, np.stack([confusion_matrix(a[f == g], p[f == g],
                                                                    labels=range(9))
                                                   for g in range(3)]))


def test_read_ahead_keeps_order_raises_in_turn_and_stops_when_closed():
    import threading

    def items():
        yield from range(5)
        raise ValueError("damaged block")

    got = []
    with pytest.raises(ValueError, match="damaged block"):
        for x in prefetch(items(), 2):
            got.append(x)
    assert got == [0, 1, 2, 3, 4]          # every item before the error, in order

    endless = prefetch(iter(lambda: 1, None), 2)
    assert next(endless) == 1
    endless.close()                        # the caller stops early: the thread ends too
    assert not any(t.name == "foldcorr-read-ahead" for t in threading.enumerate())
    assert list(prefetch(iter(range(3)), 0)) == [0, 1, 2]


def test_read_ahead_thread_stops_when_a_batch_is_refused(tmp_path):
    import threading

    p = tmp_path / "p.parquet"
    pq.write_table(pa.table({"actual": ["a"] * 400, "predicted": ["b"] * 400,
                             "w": ["heavy"] * 400}), p, row_group_size=50)
    with pytest.raises(InvalidInputError) as whole:
        _load_in_memory(p, TableSpec(weight="w"))
    with pytest.raises(InvalidInputError) as streamed:
        stream_tensor(p, weight="w", batch_rows=50)
    # Refused while batches were still being read ahead; worded as the in-memory path words it.
    assert str(streamed.value) == str(whole.value) == "p.parquet: weights must be numbers"
    assert not any(t.name == "foldcorr-read-ahead" for t in threading.enumerate())
