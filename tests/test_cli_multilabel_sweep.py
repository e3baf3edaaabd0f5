"""The multilabel mode of `score`, the `sweep` verb and `--prevalence`, end to end."""

import json

import numpy as np
import pandas as pd
import pytest
from sklearn.metrics import matthews_corrcoef, multilabel_confusion_matrix

from foldcorr.cli import main

LABELS = ["gull", "tern", "auk", "wren"]


@pytest.fixture
def tags(tmp_path):
    rng = np.random.default_rng(3)
    n = 400
    t = rng.random((n, 4)) < [0.3, 0.1, 0.05, 0.5]
    p = t ^ (rng.random((n, 4)) < 0.15)
    s = rng.normal(size=(n, 4)) + 1.5 * t
    df = pd.DataFrame({**{f"y_{lab}": t[:, i].astype(int) for i, lab in enumerate(LABELS)},
                       **{f"p_{lab}": p[:, i].astype(int) for i, lab in enumerate(LABELS)},
                       **{f"s_{lab}": s[:, i] for i, lab in enumerate(LABELS)}})
    df["fold"] = np.arange(n) % 4
    df["tags"] = ["|".join(lab for lab, b in zip(LABELS, row) if b) for row in t]
    df["ptags"] = ["|".join(lab for lab, b in zip(LABELS, row) if b) for row in p]
    df["bird"] = np.where(t[:, 0], "gull", "other")
    df["score"] = s[:, 0]
    path = tmp_path / "tags.csv"
    df.to_csv(path, index=False)
    return path, t, p, s, df


def run(capsys, *argv):
    code = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    return code, out, err


@pytest.mark.parametrize("layout", [
    ("--truth-prefix", "y_", "--pred-prefix", "p_"),
    ("--truth-cols", ",".join(f"y_{x}" for x in LABELS), "--pred-cols",
     ",".join(f"p_{x}" for x in LABELS)),
    ("--truth", "tags", "--pred", "ptags", "--sep", "|"),
])
def test_multilabel_json_matches_reference(capsys, tags, layout):
    # sklearn.metrics.matthews_corrcoef per label column and on the raveled indicators (micro)
    path, t, p, _, df = tags
    code, out, err = run(capsys, "score", path, *layout, "--format", "json")
    assert code == 0, err
    doc = json.loads(out)
    assert doc["schema"] == "foldcorr.multilabel/2"
    # with --truth-cols the labels are the truth column names
    doc["labels"] = [lab.removeprefix("y_") for lab in doc["labels"]]
    for row in doc["per_label"]:
        row["label"] = row["label"].removeprefix("y_")
    assert sorted(doc["labels"]) == sorted(LABELS) and doc["n"] == 400
    order = [LABELS.index(lab) for lab in doc["labels"]]
    assert doc["micro_mcc"] == pytest.approx(matthews_corrcoef(t[:, order].ravel(),
                                                               p[:, order].ravel()), abs=1e-12)
    ref = {lab: matthews_corrcoef(t[:, i], p[:, i]) for i, lab in enumerate(LABELS)}
    assert doc["macro_mcc"] == pytest.approx(np.mean(list(ref.values())), abs=1e-12)
    mcm = multilabel_confusion_matrix(t, p)  # sklearn: [[TN, FP], [FN, TP]] per label
    for row in doc["per_label"]:
        i = LABELS.index(row["label"])
        assert row["mcc"] == pytest.approx(ref[row["label"]], abs=1e-12)
        assert row["in_truth"] == mcm[i, 1].sum() and row["predicted"] == mcm[i, :, 1].sum()
        assert set(row) >= {"prevalence", "recall", "precision"}
    assert [f["fold"] for f in doc["folds"]] == [0, 1, 2, 3]
    for f in doc["folds"]:
        keep = (df.fold == f["fold"]).to_numpy()
        assert f["micro_mcc"] == pytest.approx(matthews_corrcoef(t[keep].ravel(), p[keep].ravel()))
    assert isinstance(doc["warnings"], list)


def test_multilabel_text_and_markdown(capsys, tags):
    path = tags[0]
    code, out, _ = run(capsys, "score", path, "--truth-prefix", "y_", "--pred-prefix", "p_")
    assert code == 0 and "Labels by cost" in out and "micro MCC" in out
    code, out, _ = run(capsys, "score", path, "--truth-prefix", "y_", "--pred-prefix", "p_",
                       "--format", "markdown", "--top", "2")
    # Issue 14: Markdown shows the top rows, and every row in a collapsible block.
    assert code == 0 and out.startswith("## foldcorr score (multilabel)")
    assert "(top 2 of 4)" in out and "<details><summary>All 4 rows</summary>" in out


def test_multilabel_bad_input(capsys, tags, tmp_path):
    path = tags[0]
    code, _, err = run(capsys, "score", path, "--truth-cols", "y_gull,y_tern", "--pred-cols",
                       "p_gull")
    assert code == 2 and "names 2 columns but --pred-cols names 1" in err
    code, _, err = run(capsys, "score", path, "--truth", "tags", "--pred", "ptags", "--sep", "|",
                       "--classes", "gull,tern,auk")
    assert code == 2 and "label 'wren' is not in the label list" in err
    assert err.count("\n") == 1
    code, _, err = run(capsys, "score", path, "--truth-prefix", "y_", "--pred-prefix", "q_")
    assert code == 2 and "do not pair by suffix" in err
    bad = tmp_path / "bad.csv"
    bad.write_text("y_a,p_a\n1,0\n2,1\n")
    code, _, err = run(capsys, "score", bad, "--truth-prefix", "y_", "--pred-prefix", "p_")
    assert code == 2 and "row 2: indicator 2 is not 0/1" in err


def test_label_without_positives_warns(capsys, tmp_path):
    path = tmp_path / "none.csv"
    path.write_text("y_a,y_b,p_a,p_b\n1,0,1,0\n0,0,0,0\n1,0,0,0\n")
    code, out, _ = run(capsys, "score", path, "--truth-prefix", "y_", "--pred-prefix", "p_",
                       "--format", "json", "--undefined", "nan")
    doc = json.loads(out)
    assert code == 0 and any("'b'" in w for w in doc["warnings"])
    assert next(r for r in doc["per_label"] if r["label"] == "b")["mcc"] is None


def test_sweep_json_matches_brute_force(capsys, tags, tmp_path):
    # best threshold against a loop over every distinct score with sklearn.metrics.matthews_corrcoef
    path, t, _, s, df = tags
    curve = tmp_path / "curve.csv"
    code, out, err = run(capsys, "sweep", path, "--truth", "bird", "--positive", "gull",
                         "--at", "0.5", "--format", "json", "--curve", curve)
    assert code == 0, err
    doc = json.loads(out)
    assert doc["schema"] == "foldcorr.sweep/1" and len(doc["labels"]) == 1
    entry = doc["labels"][0]
    y, sc = t[:, 0], s[:, 0]
    ref = {th: matthews_corrcoef(y, sc >= th) for th in np.unique(sc)}
    assert entry["best_mcc"] == pytest.approx(max(ref.values()), abs=1e-12)
    assert entry["mcc_at"] == pytest.approx(matthews_corrcoef(y, sc >= 0.5), abs=1e-12)
    assert entry["n_thresholds"] == len(ref)
    assert [c["fold"] for c in entry["crossfold_threshold"]] == [0, 1, 2, 3]
    assert entry["crossfold_mcc"] == pytest.approx(
        np.mean([c["mcc"] for c in entry["crossfold_threshold"]]))
    written = pd.read_csv(curve)
    assert len(written) == len(ref)
    np.testing.assert_allclose(written["mcc"], [ref[th] for th in sorted(ref)], atol=1e-9)


def test_sweep_multilabel_and_text(capsys, tags):
    path = tags[0]
    code, out, _ = run(capsys, "sweep", path, "--truth-prefix", "y_", "--score-prefix", "s_",
                       "--format", "json")
    doc = json.loads(out)
    assert code == 0 and [e["label"] for e in doc["labels"]] == LABELS
    code, out, _ = run(capsys, "sweep", path, "--truth-prefix", "y_", "--score-prefix", "s_")
    assert code == 0 and "held-out MCC" in out and "Cross-fold choice" in out


def test_sweep_bad_input(capsys, tags, tmp_path):
    path = tags[0]
    code, _, err = run(capsys, "sweep", path, "--truth", "bird")
    assert code == 2 and "--positive" in err
    multi = tmp_path / "multi.csv"
    multi.write_text("actual,score\nowl,0.1\nwren,0.2\nrail,0.3\n")
    code, _, err = run(capsys, "sweep", multi)
    assert code == 2 and "3 distinct values" in err
    nan = tmp_path / "nan.csv"
    nan.write_text("actual,score\n1,0.1\n0,\n1,0.3\n")
    code, _, err = run(capsys, "sweep", nan)
    assert code == 2 and "column 'score' row 2: score missing" in err
    text = tmp_path / "text.csv"
    text.write_text("actual,score\n1,0.1\n0,high\n")
    code, _, err = run(capsys, "sweep", text)
    assert code == 2 and "row 2: score 'high' is not a finite number" in err
    inf = tmp_path / "inf.csv"
    inf.write_text("actual,score\n1,inf\n0,0.2\n")
    code, _, err = run(capsys, "sweep", inf)
    assert code == 2 and "row 1" in err and "finite" in err
    code, _, err = run(capsys, "sweep", tags[0], "--truth", "bird", "--positive", "gull",
                       "--curve", tmp_path / "c.txt")
    assert code == 2 and "--curve must end in" in err
    assert not (tmp_path / "c.txt").exists()


def test_sweep_plot(capsys, tags, tmp_path):
    pytest.importorskip("matplotlib")
    folder = tmp_path / "plots"
    code, _, err = run(capsys, "sweep", tags[0], "--truth-prefix", "y_", "--score-prefix", "s_",
                       "--at", "0.5", "--plot", folder)
    assert code == 0, err
    pngs = sorted(folder.glob("*.png"))
    assert len(pngs) == 4 and all(p.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n" for p in pngs)


@pytest.fixture
def species(tmp_path):
    rng = np.random.default_rng(4)
    n = 900
    t = rng.choice(["copepod", "diatom", "detritus"], size=n, p=[0.7, 0.2, 0.1])
    p = np.where(rng.random(n) < 0.25, rng.choice(["copepod", "diatom", "detritus"], size=n), t)
    path = tmp_path / "species.csv"
    pd.DataFrame({"actual": t, "predicted": p, "fold": np.arange(n) % 3}).to_csv(path, index=False)
    return path, t, p


def test_prevalence_json_matches_duplicated_samples(capsys, species, tmp_path):
    # target prevalence obtained by repeating the diatom samples 3 times: the shifted R_K equals
    # sklearn.metrics.matthews_corrcoef on the duplicated samples
    path, t, p = species
    keep = np.repeat(np.arange(len(t)), np.where(t == "diatom", 3, 1))
    share = {c: float((t[keep] == c).mean()) for c in ("copepod", "diatom", "detritus")}
    target = ",".join(f"{c}={v!r}" for c, v in share.items())
    code, out, err = run(capsys, "score", path, "--prevalence", target, "--format", "json")
    assert code == 0, err
    doc = json.loads(out)
    assert doc["shifted"]["rk"] == pytest.approx(matthews_corrcoef(t[keep], p[keep]), abs=1e-9)
    assert doc["pooled"]["rk"] == pytest.approx(matthews_corrcoef(t, p), abs=1e-12)
    assert {r["class"] for r in doc["shifted"]["per_class"]} == set(share)
    file = tmp_path / "target.csv"
    file.write_text("class,share\n" + "".join(f"{c},{v!r}\n" for c, v in share.items()))
    code, out, _ = run(capsys, "score", path, "--prevalence", file, "--format", "json")
    assert json.loads(out)["shifted"]["rk"] == pytest.approx(doc["shifted"]["rk"], abs=1e-12)


def test_prevalence_text_and_bad_input(capsys, species):
    path = species[0]
    code, out, _ = run(capsys, "score", path, "--prevalence", "uniform")
    assert code == 0 and "At the target prevalence" in out
    code, _, err = run(capsys, "score", path, "--prevalence", "copepod=0.5,diatom=0.4")
    assert code == 2 and "must sum to 1" in err
    code, _, err = run(capsys, "score", path, "--prevalence", "copepod=0.5,tuna=0.5")
    assert code == 2 and "'tuna'" in err
    code, _, err = run(capsys, "score", path, "--prevalence", "copepod:0.5")
    assert code == 2 and "CLASS=SHARE" in err


def test_sweep_plot_without_matplotlib(capsys, tags, tmp_path, monkeypatch):
    import importlib.util

    real = importlib.util.find_spec
    monkeypatch.setattr(importlib.util, "find_spec",
                        lambda name, *a: None if name == "matplotlib" else real(name, *a))
    code, _, err = run(capsys, "sweep", tags[0], "--truth", "bird", "--positive", "gull",
                       "--plot", tmp_path / "figs")
    assert code == 2 and "foldcorr[plot]" in err


def test_multilabel_intervals_on_the_command_line(capsys, tags):
    path = tags[0]
    argv = ("score", path, "--truth-prefix", "y_", "--pred-prefix", "p_", "--ci", "0.9",
            "--resamples", "300", "--seed", "4", "--format", "json")
    code, out, err = run(capsys, *argv)
    assert code == 0, err
    doc = json.loads(out)
    assert doc["ci"] == {"level": 0.9, "method": "percentile", "resamples": 300, "seed": 4}
    for key in ("micro_mcc", "macro_mcc", "weighted_mcc"):
        low, high = doc[f"{key}_ci"]
        assert low < doc[key] < high
    for row in doc["per_label"]:
        assert row["mcc_ci"][0] < row["mcc"] < row["mcc_ci"][1]
    code, again, _ = run(capsys, *argv)
    assert again == out  # same seed, same intervals
    code, _, err = run(capsys, "score", path, "--truth-prefix", "y_", "--pred-prefix", "p_",
                       "--resamples", "300")
    assert code == 2 and "needs `--ci LEVEL`" in err
    code, _, err = run(capsys, "score", path, "--truth-prefix", "y_", "--pred-prefix", "p_",
                       "--ci", "1.5")
    assert code == 2 and "--ci" in err
