"""--save targets, the moment of saving, and table options given with a saved file."""

import numpy as np
import pandas as pd
import pytest

from foldcorr.cli import main
from foldcorr.errors import OptionError
from foldcorr.sources.saved import check_save_target

pytest.importorskip("h5netcdf")


def run(capsys, *argv):
    code = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    return code, out, err


@pytest.fixture
def table(tmp_path):
    # An invented bird-call tagger: 120 calls in 3 folds.
    rng = np.random.default_rng(3)
    names = ["owl", "wren", "kite"]
    y = rng.choice(names, 120)
    p = np.where(rng.random(120) < 0.7, y, rng.choice(names, 120))
    df = pd.DataFrame({"actual": y, "predicted": p, "fold": np.arange(120) % 3 + 1,
                       "w": rng.uniform(0.5, 2.0, 120)})
    path = tmp_path / "calls.csv"
    df.to_csv(path, index=False)
    return path, df


def test_save_refuses_the_input_table(tmp_path, table, capsys):
    path, _ = table
    before = path.read_bytes()
    code, out, err = run(capsys, "score", path, "--save", path)
    assert code == 2 and out == "" and len(err.strip().splitlines()) == 1
    assert "is the input file" in err
    assert path.read_bytes() == before


def test_save_refuses_a_non_netcdf_path(tmp_path, table, capsys):
    path, _ = table
    code, out, err = run(capsys, "score", path, "--save", tmp_path / "s.csv")
    assert code == 2 and len(err.strip().splitlines()) == 1 and "s.csv" in err
    assert not (tmp_path / "s.csv").exists()
    code, _, err = run(capsys, "demo", "--out", tmp_path / "demo", "--samples", 100,
                       "--save", tmp_path / "d.parquet")
    assert code == 2 and len(err.strip().splitlines()) == 1
    assert not (tmp_path / "d.parquet").exists() and not (tmp_path / "demo").exists()


def test_save_refuses_the_saved_input_itself(tmp_path, table, capsys):
    path, _ = table
    saved = tmp_path / "run.nc"
    assert run(capsys, "score", path, "--save", saved)[0] == 0
    before = saved.read_bytes()
    link = tmp_path / "link.nc"
    link.symlink_to(saved)
    for target in (saved, tmp_path / "." / "run.nc", link):
        code, out, err = run(capsys, "score", saved, "--save", target)
        assert code == 2 and out == "" and len(err.strip().splitlines()) == 1
        assert "is the input file" in err
    assert saved.read_bytes() == before


def test_check_save_target():
    assert check_save_target("a/run.NC4", "a/p.csv").name == "run.NC4"
    with pytest.raises(OptionError, match=r"`--save` writes a NetCDF-4 file; expected a path "
                                          r"ending in \.nc or \.nc4, got 'p\.csv'"):
        check_save_target("p.csv", "p.csv")
    with pytest.raises(OptionError, match=r"`--save` 'x/../run.nc' is the input file 'run.nc'"):
        check_save_target("x/../run.nc", "run.nc")


@pytest.mark.parametrize("argv", [
    ["--weight", "w", "--ci", "0.9"],          # intervals refuse weighted counts
    ["--resamples", "500"],                     # --resamples without --ci
    ["--prevalence", "owl=2"],                  # not a prevalence
])
def test_failing_score_leaves_no_saved_file(tmp_path, table, capsys, argv):
    path, _ = table
    out = tmp_path / "run.nc"
    code, _, err = run(capsys, "score", path, *argv, "--save", out)
    assert code == 2 and len(err.strip().splitlines()) == 1
    assert not out.exists()
    assert sorted(p.name for p in tmp_path.iterdir()) == ["calls.csv"]


def test_failing_demo_leaves_no_saved_file(tmp_path, capsys):
    out = tmp_path / "demo.nc"
    code, _, err = run(capsys, "demo", "--out", tmp_path / "d", "--samples", 200,
                       "--resamples", "500", "--save", out)
    assert code == 2 and err.count("foldcorr: error:") == 1   # after the data-written note
    assert not out.exists()


def test_successful_save_matches_the_report(tmp_path, table, capsys):
    # The saved counts are those of the table: sklearn.metrics.confusion_matrix as reference.
    from sklearn.metrics import confusion_matrix

    from foldcorr.sources.saved import file_sha256, load_saved

    path, df = table
    out = tmp_path / "run.nc"
    code, _, err = run(capsys, "score", path, "--save", out, "--seed", 4)
    assert code == 0 and f"evaluation saved to {out}" in err
    saved = load_saved(out)
    pooled = saved.tensor.sum("fold")
    labels = pooled.coords["actual"].values.tolist()
    assert (pooled.values == confusion_matrix(df.actual, df.predicted, labels=labels)).all()
    assert saved.provenance["source_sha256"] == file_sha256(path)
    assert saved.provenance["seed"] == 4


@pytest.fixture
def saved(tmp_path, table, capsys):
    path, df = table
    out = tmp_path / "run.nc"
    assert run(capsys, "score", path, "--save", out)[0] == 0
    return out, df


@pytest.mark.parametrize("argv, flag", [
    (["--where", "fold == 1"], "--where"),
    (["--weight", "w"], "--weight"),
    (["--truth", "predicted", "--pred", "actual"], "--truth"),
    (["--pred", "actual"], "--pred"),
    (["--fold", "none"], "--fold"),
    (["--engine", "dask"], "--engine"),
    (["--skip-bad-files"], "--skip-bad-files"),
    (["--matrix"], "--matrix"),
])
def test_table_options_are_refused_with_a_saved_file(saved, capsys, argv, flag):
    out, _ = saved
    code, printed, err = run(capsys, "score", out, *argv)
    assert code == 2 and printed == "" and len(err.strip().splitlines()) == 1
    assert "run.nc is a saved evaluation" in err and f"({flag}) cannot apply" in err
    code, _, err = run(capsys, "gate", out, "--min-rk", "0", *argv[:2])
    if flag in ("--where", "--engine", "--skip-bad-files"):   # not gate options
        assert code == 2
    else:
        assert code == 2 and f"({flag}) cannot apply" in err


def test_id_with_a_saved_source_is_refused(saved, tmp_path, capsys):
    out, _ = saved
    code, _, err = run(capsys, "score", out, "--save", tmp_path / "b.nc", "--id", "frame")
    assert code == 2 and "(--id) cannot apply" in err and not (tmp_path / "b.nc").exists()


def test_classes_reorder_a_saved_file(saved, capsys):
    # Reordering classes permutes rows and columns of the matrix alike; R_K is invariant
    # under that (Gorodkin 2004), and the pooled counts match sklearn's confusion_matrix.
    import json

    from sklearn.metrics import confusion_matrix, matthews_corrcoef

    out, df = saved
    order = ["wren", "kite", "owl"]
    code, printed, _ = run(capsys, "score", out, "--classes", ",".join(order), "--format", "json")
    assert code == 0
    doc = json.loads(printed)
    assert doc["classes"] == order
    assert abs(doc["pooled"]["rk"] - matthews_corrcoef(df.actual, df.predicted)) < 1e-12
    from foldcorr.sources import TableSpec, load_tensor

    t = load_tensor(out, TableSpec(classes=tuple(order))).sum("fold")
    assert (t.values == confusion_matrix(df.actual, df.predicted, labels=order)).all()
    code, _, err = run(capsys, "score", out, "--classes", "owl,wren")
    assert code == 2 and "`classes` does not match" in err and "'kite'" in err


def test_gate_table_options_apply_to_the_table_beside_a_saved_baseline(saved, table, capsys):
    path, _ = table
    out, _ = saved
    code, _, err = run(capsys, "gate", path, "--baseline", out, "--truth", "actual",
                       "--fold", "fold")
    assert code == 0, err
