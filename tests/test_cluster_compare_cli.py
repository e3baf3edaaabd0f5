"""`foldcorr compare --cluster COL` and `foldcorr gate --cluster COL`: whole clusters resampled.

The reference is a per-cluster resampling loop (draw clusters with replacement within each fold,
gather their samples) scored with `sklearn.metrics.matthews_corrcoef` (the reference library):
the cluster bootstrap of a difference of R_K must agree with the loop's mean and spread within
Monte Carlo error.
"""

import json

import numpy as np
import pandas as pd
import pytest
from sklearn.metrics import matthews_corrcoef

from foldcorr.cli import main

CLASSES = ["song", "call", "insect", "noise"]


@pytest.fixture(scope="module")
def recordings(tmp_path_factory):
    """An invented field-recording tagger: clips of one site share their fate.

    Two taggers, A and B, label the same clips; each site suits one tagger better than the
    other (its habitat, its microphone), so the difference between them varies by site.
    """
    rng = np.random.default_rng(7)
    rows = []
    for site in range(36):
        err_a, err_b = (0.1, 0.5) if rng.random() < 0.5 else (0.45, 0.05)
        for clip in range(15):
            y = rng.choice(CLASSES)
            a = rng.choice(CLASSES) if rng.random() < err_a else y
            b = rng.choice(CLASSES) if rng.random() < err_b else y
            c = rng.choice(CLASSES) if rng.random() < 0.3 else y
            rows.append((f"s{site:02d}-{clip:02d}", f"site{site:02d}", site % 3, y, a, b, c))
    frame = pd.DataFrame(rows, columns=["clip", "site", "fold", "actual", "a", "b", "c"])
    folder = tmp_path_factory.mktemp("recordings")
    frame.to_csv(folder / "both.csv", index=False)
    for model in ("a", "b"):
        frame[["clip", "site", "fold", "actual", model]].rename(columns={model: "predicted"}) \
            .to_csv(folder / f"{model}.csv", index=False)
    return folder, frame


def _run(capsys, argv):
    code = main(argv)
    captured = capsys.readouterr()
    return code, captured


@pytest.fixture(scope="module")
def loop(recordings):
    """R_K(B) - R_K(A) over per-cluster resamples within folds, each scored with sklearn."""
    return _loop_differences(recordings[1])


def _loop_differences(frame, draws=400, seed=0):
    rng = np.random.default_rng(seed)
    groups = [list(part.groupby("site").indices.values()) for _, part in
              frame.reset_index(drop=True).groupby("fold")]
    offsets = [part.index.to_numpy() for _, part in frame.reset_index(drop=True).groupby("fold")]
    truth, a, b = (frame[c].to_numpy() for c in ("actual", "a", "b"))
    out = []
    for _ in range(draws):
        rows = np.concatenate([off[gs[i]] for gs, off in zip(groups, offsets)
                               for i in rng.integers(0, len(gs), len(gs))])
        out.append(matthews_corrcoef(truth[rows], b[rows])
                   - matthews_corrcoef(truth[rows], a[rows]))
    return np.asarray(out)


def test_compare_cluster_bootstrap_matches_a_per_cluster_loop(recordings, loop, capsys):
    folder, frame = recordings
    code, out = _run(capsys, ["compare", str(folder / "both.csv"), "--pred-a", "a", "--pred-b",
                              "b", "--cluster", "site", "--resamples", "2000", "--seed", "3",
                              "--format", "json"])
    doc = json.loads(out.out)
    diff = doc["difference"]
    reference = (matthews_corrcoef(frame.actual, frame.b)
                 - matthews_corrcoef(frame.actual, frame.a))
    assert code == 0 and diff["estimate"] == pytest.approx(reference, abs=1e-12)
    assert diff["clusters"] == 36 and diff["design_effect"] > 0
    low, high = np.percentile(loop, [2.5, 97.5])
    width, loop_width = diff["ci"][1] - diff["ci"][0], high - low
    # Monte Carlo tolerance: 400 loop draws and 2000 resamples
    assert width == pytest.approx(loop_width, rel=0.25)
    assert (diff["ci"][0] + diff["ci"][1]) / 2 == pytest.approx((low + high) / 2,
                                                                 abs=0.25 * loop_width)


def test_compare_cluster_is_wider_than_sample_by_sample(recordings, capsys):
    folder, _ = recordings
    argv = ["compare", str(folder / "both.csv"), "--pred-a", "a", "--pred-b", "b",
            "--resamples", "1000", "--seed", "1", "--format", "json"]
    iid = json.loads(_run(capsys, argv)[1].out)["difference"]
    clu = json.loads(_run(capsys, [*argv, "--cluster", "site"])[1].out)["difference"]
    assert iid["clusters"] is None and iid["design_effect"] is None
    assert clu["ci"][1] - clu["ci"][0] > 1.2 * (iid["ci"][1] - iid["ci"][0])


def test_compare_two_tables_take_the_cluster_column_of_the_first(recordings, capsys):
    folder, _ = recordings
    argv = ["--resamples", "300", "--seed", "2", "--format", "json"]
    one = json.loads(_run(capsys, ["compare", str(folder / "both.csv"), "--pred-a", "a",
                                   "--pred-b", "b", "--cluster", "site", *argv])[1].out)
    two = json.loads(_run(capsys, ["compare", str(folder / "a.csv"), str(folder / "b.csv"),
                                   "--id", "clip", "--cluster", "site", *argv])[1].out)
    assert two["difference"]["clusters"] == 36
    assert two["difference"]["ci"] == pytest.approx(one["difference"]["ci"])


def test_compare_text_report_names_clusters_and_design_effect(recordings, capsys):
    folder, _ = recordings
    code, out = _run(capsys, ["compare", str(folder / "both.csv"), "--pred-a", "a", "--pred-b",
                              "b", "--cluster", "site", "--resamples", "200", "--seed", "1"])
    assert code == 0 and "clusters: 36 (design effect" in " ".join(out.out.split())
    assert "whole clusters of samples" in " ".join(out.out.split())


def test_compare_many_models_with_clusters(recordings, capsys):
    folder, _ = recordings
    code, out = _run(capsys, ["compare", str(folder / "both.csv"), "--models", "a,b,c",
                              "--cluster", "site", "--resamples", "200", "--permutations",
                              "199", "--seed", "1", "--format", "json"])
    doc = json.loads(out.out)
    assert code == 0 and doc["n_clusters"] == 36
    assert all(m["design_effect"] > 0 for m in doc["models"])


def test_gate_drop_interval_resamples_clusters(recordings, loop, capsys):
    folder, _ = recordings
    argv = ["gate", str(folder / "b.csv"), "--baseline", str(folder / "a.csv"), "--id", "clip",
            "--confidence", "0.95", "--max-drop", "0.0", "--resamples", "1000", "--seed", "4",
            "--format", "json"]
    code, out = _run(capsys, [*argv, "--cluster", "site"])
    rule = json.loads(out.out)["rules"][0]
    plain = json.loads(_run(capsys, argv)[1].out)["rules"][0]
    assert code in (0, 1) and "36 clusters resampled whole, design effect" in rule["detail"]
    assert rule["value"] == pytest.approx(plain["value"])
    width = rule["interval"][1] - rule["interval"][0]
    assert width > 1.2 * (plain["interval"][1] - plain["interval"][0])
    # the drop is baseline minus current: the negative of compare's B - A
    assert width == pytest.approx(np.subtract(*np.percentile(-loop, [97.5, 2.5])), rel=0.25)


@pytest.mark.parametrize("argv, message", [
    (["gate", "{b}", "--min-rk", "0.1", "--cluster", "site"],
     "`--cluster` applies to the interval of the drop"),
    (["gate", "{b}", "--baseline", "{a}", "--confidence", "0.9", "--cluster", "site"],
     "give --id COL too"),
    (["gate", "{b}", "--baseline", "{a}", "--id", "clip", "--confidence", "0.9",
      "--cluster", "site", "--weight", "fold"], "does not combine with `--weight`"),
    (["gate", "{b}", "--baseline", "{a}", "--id", "clip", "--confidence", "0.9",
      "--cluster", "nope"], "cluster column 'nope' not found"),
    (["compare", "{both}", "--pred-a", "a", "--pred-b", "b", "--cluster", "nope"],
     "column 'nope' not found"),
])
def test_cluster_refusals_are_one_line(recordings, capsys, argv, message):
    folder, _ = recordings
    paths = {k: str(folder / f"{k}.csv") for k in ("a", "b", "both")}
    code, out = _run(capsys, [arg.format(**paths) for arg in argv])
    assert code == 2 and out.out == "" and out.err.count("\n") == 1
    assert message in out.err


def test_gate_refuses_clusters_with_a_saved_baseline(recordings, capsys, tmp_path):
    folder, _ = recordings
    saved = tmp_path / "base.nc"
    assert main(["score", str(folder / "a.csv"), "--id", "clip", "--save", str(saved)]) == 0
    capsys.readouterr()
    code, out = _run(capsys, ["gate", str(folder / "b.csv"), "--baseline", str(saved), "--id",
                              "clip", "--confidence", "0.9", "--cluster", "site"])
    assert code == 2 and "holds counts and ids, not the samples' clusters" in out.err
    assert out.err.count("\n") == 1
