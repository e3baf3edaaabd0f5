"""`foldcorr score --cluster COL`: intervals that resample whole clusters.

The reference is a per-cluster resampling loop scored with `sklearn.metrics.matthews_corrcoef`
(the reference library): the cluster bootstrap of the pipeline must give an interval of about the
same width, and a cluster of one sample each must give the ordinary interval within Monte Carlo
error.
"""

import json

import numpy as np
import pandas as pd
import pytest
from sklearn.metrics import matthews_corrcoef

import foldcorr
from foldcorr.cli import main
from foldcorr.errors import OptionError

CLASSES = ["copepod", "diatom", "detritus", "larva"]


@pytest.fixture(scope="module")
def stations(tmp_path_factory):
    """An invented plankton survey: images of one sampling station share their fate."""
    rng = np.random.default_rng(3)
    rows = []
    for station in range(40):
        hard = rng.random() < 0.3
        for _ in range(25):
            y = rng.choice(CLASSES)
            wrong = rng.random() < (0.5 if hard else 0.08)
            rows.append((f"st{station:02d}", y, rng.choice(CLASSES) if wrong else y,
                         station % 4))
    frame = pd.DataFrame(rows, columns=["station", "actual", "predicted", "fold"])
    path = tmp_path_factory.mktemp("stations") / "stations.csv"
    frame.to_csv(path, index=False)
    return path, frame


def _width(ev):
    u = ev.extras["uncertainty"].rk
    return float(u.high) - float(u.low)


def test_cluster_interval_is_wider_and_matches_a_per_cluster_loop(stations):
    path, frame = stations
    iid = foldcorr.score(path, level=0.95, n_resamples=1000, seed=2)
    clustered = foldcorr.score(path, cluster="station", level=0.95, n_resamples=1000, seed=2)
    assert clustered.rk == pytest.approx(matthews_corrcoef(frame.actual, frame.predicted))
    u = clustered.extras["uncertainty"]
    assert u.n_clusters == 40 and u.design_effect > 1.5
    assert _width(clustered) > 1.2 * _width(iid)
    # per-cluster loop, within folds, scored with sklearn
    rng = np.random.default_rng(0)
    groups = {f: [g for _, g in part.groupby("station")] for f, part in frame.groupby("fold")}
    draws = []
    for _ in range(400):
        picked = [g for gs in groups.values() for g in (gs[i] for i in
                                                        rng.integers(0, len(gs), len(gs)))]
        sample = pd.concat(picked)
        draws.append(matthews_corrcoef(sample.actual, sample.predicted))
    loop_width = np.subtract(*np.percentile(draws, [97.5, 2.5]))
    assert _width(clustered) == pytest.approx(loop_width, rel=0.25)  # Monte Carlo tolerance


def test_one_sample_per_cluster_gives_the_ordinary_interval(stations, tmp_path):
    path, frame = stations
    single = frame.assign(station=np.arange(len(frame)))
    single_path = tmp_path / "single.csv"
    single.to_csv(single_path, index=False)
    iid = foldcorr.score(path, level=0.95, n_resamples=1000, seed=5)
    each = foldcorr.score(single_path, cluster="station", level=0.95, n_resamples=1000, seed=5)
    assert _width(each) == pytest.approx(_width(iid), rel=0.15)  # Monte Carlo tolerance


def test_cli_reports_clusters_and_design_effect(stations, capsys):
    path, _ = stations
    code = main(["score", str(path), "--cluster", "station", "--ci", "0.9", "--resamples",
                 "300", "--seed", "1", "--format", "json"])
    doc = json.loads(capsys.readouterr().out)
    assert code == 0 and doc["ci"]["clusters"] == 40 and doc["ci"]["design_effect"] > 1


@pytest.mark.parametrize("argv, message", [
    (["--weight", "fold"], "does not combine with `--weight`"),
    (["--where", "fold == 1"], "does not combine with `--where`"),
    (["--save", "x.nc"], "`--save` keeps counts, not the samples' clusters"),
    (["--ci", "0.9", "--ci-method", "bca"], "only method='percentile'"),
    (["--cluster", "nope"], "column 'nope' not found"),
])
def test_cluster_refusals_are_one_line(stations, tmp_path, capsys, argv, message, monkeypatch):
    path, _ = stations
    monkeypatch.chdir(tmp_path)
    code = main(["score", str(path), "--cluster", "station", *argv])
    captured = capsys.readouterr()
    assert code == 2 and captured.out == "" and captured.err.count("\n") == 1
    assert message in captured.err


def test_a_tensor_in_memory_takes_no_cluster_column():
    t = foldcorr.tally(["a", "b"], ["a", "a"])
    with pytest.raises(OptionError, match="a tensor in memory takes only"):
        foldcorr.score(t, cluster="station")
