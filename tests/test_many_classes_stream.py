"""Files read batch by batch at many classes: the accumulator counts distinct cells."""

import numpy as np
import pyarrow as pa
import pyarrow.parquet as pq
import pytest

import foldcorr as fc
from foldcorr.tensor import backing, is_sparse
from foldcorr.tensor.accumulator import StreamTally

FOLDS = 5


def _codes(n, k, seed=0):
    rng = np.random.default_rng(seed)
    truth = rng.integers(0, k, n)
    pred = np.where(rng.random(n) < 0.6, truth, rng.integers(0, k, n))
    return truth, pred, rng.integers(0, FOLDS, n)


def _gorodkin_rk(truth, pred, k):
    """R_K of Gorodkin (2004), eq. 8 written with the margins: N / sqrt(D_p D_t), where
    N = c s - sum_k t_k p_k, D_p = s^2 - sum_k p_k^2, D_t = s^2 - sum_k t_k^2
    (c the correct predictions, s the samples, t_k and p_k the true and predicted counts)."""
    s = float(len(truth))
    c = float(np.sum(truth == pred))
    t = np.bincount(truth, minlength=k).astype(float)
    p = np.bincount(pred, minlength=k).astype(float)
    return (c * s - t @ p) / np.sqrt((s * s - p @ p) * (s * s - t @ t))


def _parquet(path, truth, pred, fold, k):
    width = len(str(k))
    names = np.array([f"class-{i:0{width}d}" for i in range(k)], dtype=object)
    pq.write_table(pa.table({"actual": names[truth], "predicted": names[pred],
                             "fold": fold}), path, row_group_size=250_000)
    return path


def _check_score(path, truth, pred, fold, k):
    ev = fc.score(str(path))
    assert is_sparse(ev.tensor)
    assert ev.tensor.sizes["actual"] == k
    expected = [_gorodkin_rk(truth[fold == f], pred[fold == f], k) for f in range(FOLDS)]
    np.testing.assert_allclose(ev.folds["rk"].values, expected, rtol=1e-12)


def test_score_k3000_counts_sparse_from_parquet(tmp_path, monkeypatch):
    # the limit lowered so that K = 3,000 is counted as at K = 20,000
    monkeypatch.setattr(backing, "DENSE_CELL_LIMIT", 1 << 20)
    k = 3_000
    truth, pred, fold = _codes(300_000, k)
    _check_score(_parquet(tmp_path / "p.parquet", truth, pred, fold, k), truth, pred, fold, k)


@pytest.mark.slow
def test_score_k20000_two_million_text_labels(tmp_path):
    k = 20_000
    truth, pred, fold = _codes(2_000_000, k, seed=1)
    _check_score(_parquet(tmp_path / "p.parquet", truth, pred, fold, k), truth, pred, fold, k)


def _batches(truth, pred, fold, weights, size):
    for lo in range(0, len(truth), size):
        cols = {"actual": pa.array([f"c{v}" for v in truth[lo:lo + size]]),
                "predicted": pa.array([f"c{v}" for v in pred[lo:lo + size]]),
                "fold": pa.array(fold[lo:lo + size])}
        if weights is not None:
            cols["w"] = pa.array(weights[lo:lo + size])
        yield pa.record_batch(cols)


@pytest.mark.parametrize("weighted", [False, True])
@pytest.mark.parametrize("limit", [0, 200])
def test_sparse_accumulator_equals_dense(monkeypatch, weighted, limit):
    truth, pred, fold = _codes(4_000, 40, seed=2)
    weights = np.random.default_rng(3).random(len(truth)) if weighted else None

    def tally(cell_limit):
        monkeypatch.setattr(backing, "DENSE_CELL_LIMIT", cell_limit)
        parts = []
        for batch in _batches(truth, pred, fold, weights, 700):
            acc = StreamTally("actual", "predicted", "fold", "w" if weighted else None)
            acc.add(batch)
            parts.append(acc)
        first = parts[0]
        for other in parts[1:]:   # partial tallies coded on their own, merged
            first.merge(other)
        return first.tensor()

    dense, sparse_ = tally(1 << 27), tally(limit)
    assert is_sparse(sparse_) and not is_sparse(dense)
    assert sparse_.coords["actual"].values.tolist() == dense.coords["actual"].values.tolist()
    assert sparse_.coords["fold"].values.tolist() == dense.coords["fold"].values.tolist()
    assert sparse_.dtype == dense.dtype
    np.testing.assert_allclose(sparse_.data.todense(), dense.values)


def test_sparse_accumulator_pickles(monkeypatch):
    import pickle

    monkeypatch.setattr(backing, "DENSE_CELL_LIMIT", 0)
    acc = StreamTally("actual", "predicted")
    acc.add(pa.record_batch({"actual": ["a", "b", "b"], "predicted": ["b", "b", "a"]}))
    t = pickle.loads(pickle.dumps(acc)).tensor()
    assert t.data.todense().tolist() == [[0, 1], [1, 1]]


def test_sparse_whole_counts_column(tmp_path, monkeypatch):
    monkeypatch.setattr(backing, "DENSE_CELL_LIMIT", 0)
    path = tmp_path / "p.parquet"
    pq.write_table(pa.table({"actual": ["a", "b", "b"], "predicted": ["a", "a", "b"],
                             "n": [3, 1, 2]}), path)
    t = fc.load(str(path), count="n")
    assert is_sparse(t) and t.dtype == np.int64 and t.attrs["count_column"] == "n"
    assert t.data.todense().tolist() == [[3, 0], [1, 2]]
