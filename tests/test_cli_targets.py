"""Every verb that writes files: folders, clashes and bad counts matrices give one line, exit 2."""

import numpy as np
import pandas as pd
import pytest

from foldcorr.cli import main


def run(capsys, *argv):
    code = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    return code, out, err


def one_line_error(code, out, err):
    return code == 2 and out == "" and len(err.strip().splitlines()) == 1 \
        and err.startswith("foldcorr: error:")


@pytest.fixture
def files(tmp_path):
    # Invented field-recording sound tagger: truth, two models, a score and 0/1 label columns.
    rng = np.random.default_rng(2)
    n = 90
    y = rng.choice(["frog", "cricket", "owl"], n)
    df = pd.DataFrame({
        "clip": [f"c{i}" for i in range(n)], "actual": y,
        "predicted": np.where(rng.random(n) < 0.7, y, "frog"),
        "a": np.where(rng.random(n) < 0.6, y, "owl"), "b": np.where(rng.random(n) < 0.8, y, "owl"),
        "truth_bin": (y == "frog").astype(int), "score": rng.random(n),
        "t_frog": (y == "frog").astype(int), "t_owl": (y == "owl").astype(int),
        "p_frog": rng.integers(0, 2, n), "p_owl": rng.integers(0, 2, n),
        "fold": np.arange(n) % 3,
    })
    path = tmp_path / "clips.csv"
    df.to_csv(path, index=False)
    folder = tmp_path / "existing"
    folder.mkdir()
    return path, folder


VERBS = {
    "score": lambda p: ["score", p],
    "multilabel score": lambda p: ["score", p, "--truth-prefix", "t_", "--pred-prefix", "p_"],
    "compare": lambda p: ["compare", p, "--pred-a", "a", "--pred-b", "b", "--resamples", 100],
    "sweep": lambda p: ["sweep", p, "--truth", "truth_bin"],
    "gate": lambda p: ["gate", p, "--min-rk", 0],
}


@pytest.mark.parametrize("verb", sorted(VERBS))
def test_output_to_a_folder_is_one_line(files, capsys, verb):
    path, folder = files
    code, out, err = run(capsys, *VERBS[verb](path), "--output", folder)
    assert one_line_error(code, out, err), err
    assert "it is a folder" in err


@pytest.mark.parametrize("verb", sorted(VERBS))
def test_output_over_the_input_is_refused(files, capsys, verb):
    path, _ = files
    before = path.read_bytes()
    code, out, err = run(capsys, *VERBS[verb](path), "--output", path)
    assert one_line_error(code, out, err), err
    assert "is the input file" in err and path.read_bytes() == before


@pytest.mark.parametrize("argv", [
    ["--junit", "{folder}"], ["--markdown", "{folder}"],
    ["--output", "{tmp}/r.md", "--markdown", "{tmp}/r.md"],
])
def test_gate_targets(files, capsys, argv, tmp_path):
    path, folder = files
    argv = [a.format(folder=folder, tmp=tmp_path) for a in argv]
    code, out, err = run(capsys, "gate", path, "--min-rk", 0, *argv)
    assert one_line_error(code, out, err), err
    assert not (tmp_path / "r.md").exists()


def test_sweep_curve_and_show_and_demo_targets(files, capsys, tmp_path):
    path, folder = files
    code, out, err = run(capsys, "sweep", path, "--truth", "truth_bin", "--curve", folder)
    assert one_line_error(code, out, err) and "it is a folder" in err
    code, out, err = run(capsys, "demo", "--out", tmp_path / "d", "--samples", 100,
                         "--output", folder)
    assert one_line_error(code, out, err) and not (tmp_path / "d").exists()
    nc = tmp_path / "run.nc"
    assert run(capsys, "score", path, "--save", nc)[0] == 0
    code, out, err = run(capsys, "show", nc, "--output", folder)
    assert one_line_error(code, out, err) and "it is a folder" in err
    code, out, err = run(capsys, "score", path, "--save", nc, "--output", nc)
    assert one_line_error(code, out, err) and "also given to `--output`" in err


@pytest.mark.parametrize("cell", ["9223372036854775808", "+00099999999999999999999"])
def test_matrix_cell_above_int64(tmp_path, capsys, cell):
    # int64 holds at most 2**63 - 1 = 9223372036854775807 (numpy.iinfo).
    path = tmp_path / "m.csv"
    path.write_text(f",frog,owl\nfrog,5,1\nowl,{cell},7\n")
    code, out, err = run(capsys, "score", path, "--matrix")
    assert one_line_error(code, out, err), err
    assert f"m.csv: row 'owl' column 'frog' (line 3): count {cell!r} is above" in err
    assert str(np.iinfo(np.int64).max) in err


def test_matrix_total_above_int64(tmp_path, capsys):
    big = np.iinfo(np.int64).max
    path = tmp_path / "m.csv"
    path.write_text(f",frog,owl\nfrog,{big},1\nowl,0,7\n")
    code, out, err = run(capsys, "score", path, "--matrix")
    assert one_line_error(code, out, err) and f"add up to {big + 8}" in err
    path.write_text(f",frog,owl\nfrog,{big - 8},1\nowl,0,7\n")   # exactly the largest total
    assert run(capsys, "score", path, "--matrix", "--format", "json")[0] == 0


def test_all_zero_matrix_is_refused_like_an_empty_table(tmp_path, capsys):
    matrix = tmp_path / "m.csv"
    matrix.write_text(",frog,owl\nfrog,0,0\nowl,0,+0\n")
    code, out, err = run(capsys, "score", matrix, "--matrix")
    assert one_line_error(code, out, err)
    assert "m.csv: the counts matrix holds no samples: every cell is 0" in err
    empty = tmp_path / "t.csv"
    empty.write_text("actual,predicted\n")
    code, out, err = run(capsys, "score", empty)
    assert one_line_error(code, out, err)
    code, out, err = run(capsys, "gate", matrix, "--matrix", "--min-rk", 0)
    assert one_line_error(code, out, err) and "holds no samples" in err
