"""Saved evaluations: NetCDF-4 round trips, second readers, bad files, show == score."""

import json

import h5py
import numpy as np
import pandas as pd
import pytest
import xarray as xr

from foldcorr.cli import main
from foldcorr.errors import InvalidInputError
from foldcorr.tensor.samples import Samples
from foldcorr.sources.saved import SAVED_SCHEMA, file_sha256, load_saved, save_evaluation
from foldcorr.sources import load_tensor
from foldcorr.tensor import confusion_tensor, tally
from foldcorr.testing import assert_tensor_equal

netCDF4 = pytest.importorskip("netCDF4")


def run(capsys, *argv):
    code = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    return code, out, err


@pytest.fixture
def table(tmp_path):
    rng = np.random.default_rng(11)
    names = ["kelp", "urchin", "sea star", "anemone", "crab"]
    y = rng.choice(names, 400, p=[0.4, 0.25, 0.15, 0.15, 0.05])
    p = np.where(rng.random(400) < 0.75, y, rng.choice(names, 400))
    df = pd.DataFrame({"frame": [f"f{i:04d}" for i in range(400)], "actual": y,
                       "predicted": p, "fold": rng.permutation(400) % 4 + 1})
    path = tmp_path / "reef.csv"
    df.to_csv(path, index=False)
    return path, df


def test_int64_counts_round_trip_exactly(tmp_path):
    # Counts above 2**53 are not representable in float64; they must come back exact.
    big = np.array([[2**62 + 1, 3], [2**53 + 1, 7]], dtype=np.int64)
    t = confusion_tensor(np.stack([big, big // 3]), ["pos", "neg"], leading={"fold": [1, 2]})
    back = load_saved(save_evaluation(tmp_path / "big.nc", t)).tensor
    assert back.dtype == np.int64
    assert_tensor_equal(back, t)
    assert back.values[0, 0, 0] == 2**62 + 1


@pytest.mark.parametrize("classes", [["cat", "dog", "émeu"], [3, 7, 11], [False, True, None]])
def test_labels_and_weights_round_trip(tmp_path, classes):
    if classes[-1] is None:
        classes = [False, True]
        counts = np.array([[1.5, 0.25], [2.0, 4.75]])
    else:
        counts = np.arange(9, dtype=float).reshape(3, 3) + 0.5
    t = confusion_tensor(counts, classes, attrs={"source": "x.csv", "weight_column": "w"})
    back = load_saved(save_evaluation(tmp_path / "w.nc", t)).tensor
    assert back.dtype == np.float64
    assert_tensor_equal(back, t, check_attrs=True)
    assert back.coords["actual"].values.tolist() == classes


def test_second_readers_give_identical_counts(tmp_path, table, capsys):
    # Cross-check with two general-purpose readers: the netCDF-C library (netCDF4) and HDF5 (h5py).
    path, df = table
    out = tmp_path / "run.nc"
    assert run(capsys, "score", path, "--save", out)[0] == 0
    mine = load_saved(out).tensor
    with netCDF4.Dataset(out) as nc:
        assert nc.file_format == "NETCDF4"
        counts = np.asarray(nc["count"][:])
        assert nc["count"].dtype == np.int64
        assert nc.getncattr("schema") == SAVED_SCHEMA
        assert list(nc["count"].dimensions) == ["fold", "actual", "predicted"]
        assert [str(c) for c in nc["actual"][:]] == mine.coords["actual"].values.tolist()
    with h5py.File(out, "r") as h5:
        assert h5["count"].dtype == np.int64
        np.testing.assert_array_equal(h5["count"][()], counts)
    np.testing.assert_array_equal(mine.values, counts)
    # And the counts are those of the reference library's confusion matrix, fold by fold.
    from sklearn.metrics import confusion_matrix

    labels = mine.coords["actual"].values.tolist()
    for i, fold in enumerate(mine.coords["fold"].values):
        keep = df.fold == fold
        ref = confusion_matrix(df.actual[keep], df.predicted[keep], labels=labels)
        np.testing.assert_array_equal(counts[i], ref)


def test_provenance_attrs(tmp_path, table, capsys):
    path, _ = table
    out = tmp_path / "run.nc"
    run(capsys, "score", path, "--save", out, "--undefined", "nan", "--top", "3")
    saved = load_saved(out)
    prov = saved.provenance
    assert prov["source"] == "reef.csv"
    assert prov["source_sha256"] == file_sha256(path)
    assert prov["schema"] == SAVED_SCHEMA and prov["foldcorr_version"]
    assert prov["created"].endswith("+00:00")
    assert saved.tensor.attrs["truth_column"] == "actual"
    assert saved.tensor.attrs["fold_column"] == "fold"
    assert saved.options["undefined"] == "nan" and saved.options["top"] == 3


@pytest.mark.parametrize("fmt", ["text", "json", "markdown", "html"])
def test_show_renders_exactly_what_score_printed(tmp_path, table, capsys, fmt):
    path, _ = table
    out = tmp_path / "run.nc"
    code, printed, _ = run(capsys, "score", path, "--format", fmt, "--top", "3",
                           "--undefined", "nan", "--save", out)
    assert code == 0
    code, shown, _ = run(capsys, "show", out, "--format", fmt)
    assert code == 0
    assert shown == printed


def test_saved_file_stands_for_the_table(tmp_path, table, capsys):
    path, _ = table
    out = tmp_path / "run.nc"
    run(capsys, "score", path, "--save", out)
    a = json.loads(run(capsys, "score", path, "--format", "json")[1])
    b = json.loads(run(capsys, "score", out, "--format", "json")[1])
    assert a == b
    assert_tensor_equal(load_tensor(out), load_tensor(path))


def test_samples_round_trip(tmp_path, table, capsys):
    path, df = table
    out = tmp_path / "run.nc"
    assert run(capsys, "score", path, "--save", out, "--id", "frame")[0] == 0
    s = load_saved(out).samples
    assert s.id_column == "frame"
    assert s.ids.tolist() == df.frame.tolist()
    assert s.actual.tolist() == df.actual.tolist()
    assert s.predicted.tolist() == df.predicted.tolist()
    assert s.fold.tolist() == df.fold.tolist()
    # The stored samples tally to the stored tensor (common practice: a tensor is its samples' counts).
    assert_tensor_equal(tally(s.actual, s.predicted, folds=s.fold), load_saved(out).tensor)


def test_duplicate_ids_are_refused(tmp_path, table, capsys):
    path, df = table
    df.loc[5, "frame"] = df.loc[2, "frame"]
    df.to_csv(path, index=False)
    code, _, err = run(capsys, "score", path, "--save", tmp_path / "r.nc", "--id", "frame")
    assert code == 2
    assert "id column 'frame' must hold unique ids; 'f0002' appears 2 times" in err
    assert not (tmp_path / "r.nc").exists()


def test_id_without_save_is_refused(table, capsys):
    path, _ = table
    code, _, err = run(capsys, "score", path, "--id", "frame")
    assert code == 2 and "`--id` stores sample ids with --save" in err


def test_truncated_file(tmp_path, table, capsys):
    path, _ = table
    out = tmp_path / "run.nc"
    run(capsys, "score", path, "--save", out)
    data = out.read_bytes()
    cut = tmp_path / "cut.nc"
    cut.write_bytes(data[: len(data) // 2])
    with pytest.raises(InvalidInputError, match=r"cut.nc: cannot read as a saved evaluation"):
        load_saved(cut)
    code, _, err = run(capsys, "show", cut)
    assert code == 2 and err.count("\n") == 1 and "Traceback" not in err


def test_foreign_and_future_files(tmp_path):
    foreign = tmp_path / "sst.nc"
    xr.Dataset({"sst": ("x", np.arange(3.0))}).to_netcdf(foreign, engine="h5netcdf")
    with pytest.raises(InvalidInputError, match="not a saved foldcorr evaluation"):
        load_saved(foreign)
    text = tmp_path / "notes.nc"
    text.write_text("not a netcdf file\n")
    with pytest.raises(InvalidInputError, match="notes.nc: cannot read"):
        load_saved(text)
    future = tmp_path / "future.nc"
    save_evaluation(future, confusion_tensor([[1, 0], [0, 1]], ["a", "b"]))
    with h5py.File(future, "a") as h5:
        h5.attrs["schema"] = "foldcorr.saved/9"
    with pytest.raises(InvalidInputError,
                       match=r"future.nc: saved with schema 'foldcorr.saved/9'.*expected "
                             r"'foldcorr.saved/1'"):
        load_saved(future)


def test_write_is_atomic(tmp_path, monkeypatch):
    out = tmp_path / "run.nc"
    t = confusion_tensor([[3, 1], [0, 4]], ["a", "b"])
    save_evaluation(out, t)
    before = out.read_bytes()

    def broken(self, *args, **kwargs):
        raise RuntimeError("disk full")

    monkeypatch.setattr(xr.Dataset, "to_netcdf", broken)
    with pytest.raises(RuntimeError):
        save_evaluation(out, confusion_tensor([[9, 9], [9, 9]], ["a", "b"]))
    assert out.read_bytes() == before
    assert sorted(p.name for p in tmp_path.iterdir()) == ["run.nc"]


def test_unwritable_save_path(tmp_path, table, capsys):
    path, _ = table
    code, out, err = run(capsys, "score", path, "--save", tmp_path / "missing" / "r.nc")
    assert code == 2 and "does not exist" in err and out == ""


def test_samples_validation():
    with pytest.raises(InvalidInputError, match="`actual` must be one-dimensional with 2 values"):
        Samples.of(["a", "b"], ["x"], ["x", "y"])


def test_benchmark_quick_run():
    import importlib.util
    import pathlib

    path = pathlib.Path(__file__).parent / "bench" / "bench_saved.py"
    spec = importlib.util.spec_from_file_location("bench_saved", path)
    bench = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(bench)
    figures = bench.run(quick=True)
    assert figures["nc_bytes"] < figures["csv_bytes"]
    assert {"ours_s", "reference_s", "speedup_vs_reference"} <= set(figures)


def test_show_repeats_the_analyses_with_their_options(tmp_path, table, capsys):
    # Intervals depend on --ci, --resamples and --seed: show must rerun them with the saved ones.
    pytest.importorskip("foldcorr.analysis.uncertainty")
    path, _ = table
    out = tmp_path / "run.nc"
    argv = ["--ci", "0.9", "--resamples", "300", "--seed", "5", "--ci-method", "bca"]
    code, printed, _ = run(capsys, "score", path, "--format", "json", *argv, "--save", out)
    assert code == 0
    doc = json.loads(printed)
    assert doc["ci"]["level"] == 0.9 and doc["ci"]["resamples"] == 300
    assert load_saved(out).options["method"] == "bca"  # stored by option name (schema 2)
    assert load_saved(out).provenance["seed"] == 5
    code, shown, _ = run(capsys, "show", out, "--format", "json")
    assert code == 0 and shown == printed
    code, text_score, _ = run(capsys, "score", path, *argv)
    assert run(capsys, "show", out)[1] == text_score
