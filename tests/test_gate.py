"""The CI gate: rule values against the reference library, exit codes, JUnit, Markdown, JSON."""

import json
import os
import xml.etree.ElementTree as ET

import numpy as np
import pandas as pd
import pytest
from sklearn.metrics import matthews_corrcoef

from foldcorr.cli import main
from foldcorr.evaluation import evaluate
from foldcorr.gate import GateRules, check_gate
from foldcorr.tensor import confusion_tensor

CLASSES = ["kelp", "urchin", "sea star", "anemone", "crab"]


def run(capsys, *argv):
    code = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    return code, out, err


def make_table(path, *, seed, skill, n=600, classes=CLASSES):
    rng = np.random.default_rng(seed)
    y = rng.choice(classes, n)
    p = np.where(rng.random(n) < skill, y, rng.choice(classes, n))
    df = pd.DataFrame({"frame": [f"f{i:04d}" for i in range(n)], "actual": y, "predicted": p,
                       "fold": np.arange(n) % 3 + 1})
    df.to_csv(path, index=False)
    return df


@pytest.fixture
def good(tmp_path):
    path = tmp_path / "good.csv"
    return path, make_table(path, seed=1, skill=0.8)


def ovr(df, label):
    # One-vs-rest MCC of a class, computed by the reference library on binary labels.
    return matthews_corrcoef(df.actual == label, df.predicted == label)


def test_values_match_the_reference_library(capsys, good):
    # References: sklearn.metrics.matthews_corrcoef on the samples (pooled, per fold, one-vs-rest).
    path, df = good
    code, out, _ = run(capsys, "gate", path, "--min-rk", "0", "--min-fold-rk", "0",
                       "--min-class-mcc", "0", "--format", "json")
    assert code == 0
    doc = json.loads(out)
    assert doc["schema"] == "foldcorr.gate/2" and doc["passed"] is True
    rules = {r["rule"]: r for r in doc["rules"]}
    assert set(rules["min_rk"]) >= {"rule", "value", "threshold", "passed", "detail"}
    assert abs(rules["min_rk"]["value"] - matthews_corrcoef(df.actual, df.predicted)) < 1e-12
    fold_rk = [matthews_corrcoef(g.actual, g.predicted) for _, g in df.groupby("fold")]
    assert abs(rules["min_fold_rk"]["value"] - min(fold_rk)) < 1e-12
    lowest = min(ovr(df, c) for c in CLASSES)
    assert abs(rules["min_class_mcc"]["value"] - lowest) < 1e-12
    assert doc["failing_classes"] == []


def test_exit_code_matrix(capsys, good, tmp_path):
    path, df = good
    rk = matthews_corrcoef(df.actual, df.predicted)
    fold_min = min(matthews_corrcoef(g.actual, g.predicted) for _, g in df.groupby("fold"))
    class_min = min(ovr(df, c) for c in CLASSES)
    cases = [
        (["--min-rk", rk - 0.01], 0),
        (["--min-rk", rk + 0.01], 1),
        (["--min-fold-rk", fold_min - 0.01], 0),
        (["--min-fold-rk", fold_min + 0.01], 1),
        (["--min-class-mcc", class_min - 0.01], 0),
        (["--min-class-mcc", class_min + 0.01], 1),
        (["--max-marginal-mismatch", 1.0], 0),
        (["--max-marginal-mismatch", 0.0], 1),
        (["--min-rk", rk - 0.01, "--min-class-mcc", class_min + 0.01], 1),
        (["--min-rk", "abc"], 2),
        ([], 2),
    ]
    for extra, expected in cases:
        code, _, err = run(capsys, "gate", path, *extra)
        assert code == expected, (extra, err)


def test_class_floors(capsys, good, tmp_path):
    path, df = good
    urchin = ovr(df, "urchin")
    floors = tmp_path / "floors.csv"
    floors.write_text(f"class,floor\nurchin,{urchin + 0.05:.6f}\ncrab,-1\n")
    code, out, _ = run(capsys, "gate", path, "--class-floors", floors, "--format", "json")
    assert code == 1
    doc = json.loads(out)
    [failing] = doc["failing_classes"]
    assert failing["class"] == "urchin" and failing["rule"] == "class_floors"
    assert abs(failing["mcc"] - urchin) < 1e-12
    assert failing["in_truth"] == int((df.actual == "urchin").sum())
    rule = doc["rules"][0]
    assert rule["rule"] == "class_floors" and rule["threshold"] == 0.0
    assert abs(rule["value"] - (urchin - round(urchin + 0.05, 6))) < 1e-9
    # The plain table names the class with its figures.
    code, out, _ = run(capsys, "gate", path, "--class-floors", floors)
    assert "Classes below their floors (1)" in out and "urchin" in out and "FAIL" in out
    assert "\x1b[" not in out


def test_failing_classes_are_sorted_across_rules(capsys, good, tmp_path):
    # docs/json.md: failing_classes lists "the furthest below first", over both class rules.
    # Shortfalls computed from sklearn's one-vs-rest MCC (matthews_corrcoef, via ovr()).
    path, df = good
    mcc = {c: ovr(df, c) for c in CLASSES}
    common = max(mcc.values()) + 0.01  # every class misses min_class_mcc
    # One class misses its own floor by far more than any class misses the common one.
    target = min(mcc, key=mcc.get)
    floors = tmp_path / "floors.csv"
    floors.write_text(f"class,floor\n{target},{min(mcc[target] + 0.5, 1.0):.6f}\n")
    code, out, _ = run(capsys, "gate", path, "--min-class-mcc", common, "--class-floors",
                       floors, "--format", "json")
    assert code == 1
    failing = json.loads(out)["failing_classes"]
    shortfalls = [f["mcc"] - f["floor"] for f in failing]
    expected = sorted([(mcc[c] - common, "min_class_mcc", c) for c in CLASSES]
                      + [(mcc[target] - round(min(mcc[target] + 0.5, 1.0), 6), "class_floors",
                          target)])
    assert [(f["class"], f["rule"]) for f in failing] == [(c, r) for _, r, c in expected]
    np.testing.assert_allclose(shortfalls, [v for v, _, _ in expected], atol=1e-9)
    assert failing[0]["rule"] == "class_floors"  # it came second among the rules


def test_floors_for_unknown_classes(capsys, good, tmp_path):
    path, _ = good
    floors = tmp_path / "floors.csv"
    floors.write_text("class,floor\nlobster,0.5\n")
    code, out, err = run(capsys, "gate", path, "--class-floors", floors)
    assert code == 2 and out == ""
    assert "floors.csv line 2: class 'lobster' is not among the evaluation's classes" in err
    floors.write_text("urchin,1.5\n")
    code, _, err = run(capsys, "gate", path, "--class-floors", floors)
    assert code == 2 and "must be a number from -1 to 1" in err
    floors.write_text("class,floor\n")
    code, _, err = run(capsys, "gate", path, "--class-floors", floors)
    assert code == 2 and "the floors file lists no class" in err


def test_floors_file_that_is_not_utf8(capsys, good, tmp_path):
    path, _ = good
    floors = tmp_path / "floors.csv"
    floors.write_bytes("class,floor\nurchin,0.5\nlimpet \u00e9,0.2\n".encode("latin-1"))
    code, out, err = run(capsys, "gate", path, "--class-floors", floors)
    assert code == 2 and out == ""
    assert "floors.csv: the floors file is not UTF-8 text (byte b'\\xe9' at offset" in err
    assert err.count("\n") == 1


def test_baseline_drop_against_hand_computed_difference(capsys, tmp_path):
    # Two runs on the same samples; the drop is the difference of the reference library's MCCs.
    base_csv, new_csv = tmp_path / "base.csv", tmp_path / "new.csv"
    base = make_table(base_csv, seed=3, skill=0.85)
    new = make_table(new_csv, seed=3, skill=0.78)
    base_nc = tmp_path / "base.nc"
    assert run(capsys, "score", base_csv, "--save", base_nc)[0] == 0
    expected = (matthews_corrcoef(base.actual, base.predicted)
                - matthews_corrcoef(new.actual, new.predicted))
    assert expected > 0.02
    code, out, _ = run(capsys, "gate", new_csv, "--baseline", base_nc,
                       "--max-drop", expected + 0.001, "--format", "json")
    assert code == 0
    doc = json.loads(out)
    rule = doc["rules"][0]
    assert rule["rule"] == "max_drop" and abs(rule["value"] - expected) < 1e-12
    assert doc["comparison"] == "plain" and doc["baseline"] == "base.csv"
    code, _, _ = run(capsys, "gate", new_csv, "--baseline", base_nc,
                     "--max-drop", expected - 0.001)
    assert code == 1
    # A better model never fails the drop rule.
    assert run(capsys, "gate", base_csv, "--baseline", new_csv, "--max-drop", 0)[0] == 0


def test_baseline_with_other_classes(capsys, tmp_path):
    base_csv, new_csv = tmp_path / "base.csv", tmp_path / "new.csv"
    make_table(base_csv, seed=4, skill=0.8, classes=CLASSES[:4] + ["limpet"])
    new = make_table(new_csv, seed=5, skill=0.8)
    code, out, err = run(capsys, "gate", new_csv, "--baseline", base_csv, "--max-drop", 0.5)
    assert code == 2 and out == ""
    assert "added since the baseline ['crab'], removed ['limpet']" in err
    assert "--allow-new-classes" in err
    code, out, _ = run(capsys, "gate", new_csv, "--baseline", base_csv, "--max-drop", 0.5,
                       "--allow-new-classes", "--format", "json")
    assert code == 0
    doc = json.loads(out)
    shared = CLASSES[:4]
    keep = new.actual.isin(shared) & new.predicted.isin(shared)
    base = pd.read_csv(base_csv)
    keep_b = base.actual.isin(shared) & base.predicted.isin(shared)
    # Reference: sklearn's MCC on the samples whose truth and prediction are both shared classes.
    expected = (matthews_corrcoef(base.actual[keep_b], base.predicted[keep_b])
                - matthews_corrcoef(new.actual[keep], new.predicted[keep]))
    assert abs(doc["rules"][0]["value"] - expected) < 1e-12
    assert "4 shared classes" in doc["rules"][0]["detail"]
    assert any("shared classes only" in w for w in doc["warnings"])


def test_incompatible_baseline_schema(capsys, good, tmp_path):
    import h5py

    path, _ = good
    base = tmp_path / "base.nc"
    run(capsys, "score", path, "--save", base)
    with h5py.File(base, "a") as h5:
        h5.attrs["schema"] = "foldcorr.saved/2"
    code, _, err = run(capsys, "gate", path, "--baseline", base)
    assert code == 2 and "saved with schema 'foldcorr.saved/2'" in err


def test_junit_report(capsys, good, tmp_path):
    # The commonly used JUnit XML shape: testsuites > testsuite > testcase (> failure).
    path, df = good
    junit = tmp_path / "gate.xml"
    rk = matthews_corrcoef(df.actual, df.predicted)
    code, _, _ = run(capsys, "gate", path, "--min-rk", rk + 0.1, "--min-fold-rk", 0,
                     "--max-marginal-mismatch", 1, "--junit", junit)
    assert code == 1
    root = ET.parse(junit).getroot()
    assert root.tag == "testsuites"
    [suite] = root.findall("testsuite")
    cases = suite.findall("testcase")
    assert len(cases) == 3 == int(suite.get("tests"))
    failures = [c for c in cases if c.find("failure") is not None]
    assert len(failures) == 1 == int(suite.get("failures"))
    assert failures[0].get("name").startswith("min_rk")
    assert "pooled R_K" in failures[0].find("failure").get("message")
    # Read back by a general-purpose JUnit parser.
    junitparser = pytest.importorskip("junitparser")
    xml = junitparser.JUnitXml.fromfile(str(junit))
    parsed = list(xml)[0]
    assert parsed.tests == 3 and parsed.failures == 1
    results = {case.name.split(":")[0]: bool(case.result) for case in parsed}
    assert results == {"min_rk": True, "min_fold_rk": False, "max_marginal_mismatch": False}


def test_markdown_summary(capsys, good, tmp_path):
    path, _ = good
    md = tmp_path / "summary.md"
    code, out, _ = run(capsys, "gate", path, "--min-rk", 0.99, "--markdown", md)
    assert code == 1
    text = md.read_text()
    assert text.startswith("## foldcorr gate")
    assert "- **result**: FAIL (1 of 1 rules failed)" in text
    assert "| pooled R_K |" in text and "| FAIL |" in text


def test_nothing_half_written_on_bad_output(capsys, good, tmp_path):
    path, _ = good
    md = tmp_path / "summary.md"
    code, out, err = run(capsys, "gate", path, "--min-rk", 0, "--markdown", md,
                         "--junit", tmp_path / "no" / "gate.xml")
    assert code == 2 and "does not exist" in err
    assert not md.exists()
    if os.geteuid() != 0:  # root may write anywhere
        locked = tmp_path / "locked"
        locked.mkdir(mode=0o500)
        code, _, err = run(capsys, "gate", path, "--min-rk", 0, "--junit", locked / "g.xml")
        assert code == 2 and "permission denied" in err


def test_undefined_value_fails_its_rule():
    # All predictions in one class: R_K is 0/0 (undefined; common practice).
    t = confusion_tensor([[5, 0], [3, 0]], ["a", "b"])
    result = check_gate(evaluate(t, undefined="nan"), GateRules(min_rk=-1.0))
    assert not result.passed and np.isnan(result.rules[0].value)
    assert check_gate(evaluate(t), GateRules(min_rk=0.0)).passed


def test_bad_option_combinations(capsys, good):
    path, _ = good
    code, _, err = run(capsys, "gate", path, "--max-drop", 0.1)
    assert code == 2 and "give --baseline FILE too" in err
    counts = path.parent / "m.csv"
    counts.write_text(",a,b\na,5,1\nb,2,7\n")
    code, _, err = run(capsys, "gate", counts, "--matrix", "--min-fold-rk", 0.1)
    assert code == 2 and "`min_fold_rk` needs folds" in err



def _two_runs(tmp_path, *, n, seed, skill_a, skill_b, ids_b=None):
    rng = np.random.default_rng(seed)
    y = rng.choice(CLASSES, n)
    a = np.where(rng.random(n) < skill_a, y, rng.choice(CLASSES, n))
    b = np.where(rng.random(n) < skill_b, y, rng.choice(CLASSES, n))
    ids = [f"f{i:04d}" for i in range(n)]
    base = pd.DataFrame({"frame": ids, "actual": y, "predicted": a, "fold": np.arange(n) % 3})
    new = pd.DataFrame({"frame": ids_b or ids, "actual": y, "predicted": b,
                        "fold": np.arange(n) % 3})
    base.to_csv(tmp_path / "base.csv", index=False)
    new.iloc[::-1].to_csv(tmp_path / "new.csv", index=False)  # another row order
    return base, new


def _batch_rk(y, p, k=len(CLASSES)):
    """Gorodkin's R_K of each row of label arrays (last axis: samples), vectorised."""
    y, p = np.atleast_2d(y), np.atleast_2d(p)
    rows = np.arange(y.shape[0])[:, None]
    c = np.bincount((rows * k * k + y * k + p).ravel(), minlength=y.shape[0] * k * k)
    c = c.reshape(-1, k, k).astype(float)
    s, trace = c.sum(axis=(1, 2)), np.trace(c, axis1=1, axis2=2)
    t, q = c.sum(axis=2), c.sum(axis=1)
    out = (trace * s - (t * q).sum(1)) / np.sqrt((s**2 - (q**2).sum(1)) * (s**2 - (t**2).sum(1)))
    return out if out.size > 1 else float(out[0])


def test_confidence_paired_interval_against_scipy(capsys, tmp_path):
    # Reference: scipy.stats.bootstrap (paired, percentile) of the per-sample difference in MCC.
    pytest.importorskip("foldcorr.analysis.compare")
    from scipy.stats import bootstrap

    base, new = _two_runs(tmp_path, n=500, seed=21, skill_a=0.8, skill_b=0.7)
    run(capsys, "score", tmp_path / "base.csv", "--save", tmp_path / "base.nc", "--id", "frame")
    code, out, _ = run(capsys, "gate", tmp_path / "new.csv", "--id", "frame",
                       "--baseline", tmp_path / "base.nc", "--max-drop", 0.0,
                       "--confidence", 0.95, "--resamples", 2000, "--seed", 4,
                       "--format", "json")
    doc = json.loads(out)
    assert doc["comparison"] == "paired"
    rule = doc["rules"][0]
    drop = matthews_corrcoef(base.actual, base.predicted) - matthews_corrcoef(new.actual,
                                                                              new.predicted)
    assert abs(rule["value"] - drop) < 1e-12
    codes = {c: i for i, c in enumerate(CLASSES)}
    y, a, b = (np.array([codes[v] for v in col]) for col in (base.actual, base.predicted,
                                                             new.predicted))
    # The statistic checked against sklearn on the full sample, then resampled by scipy.
    assert abs(_batch_rk(y, a) - matthews_corrcoef(base.actual, base.predicted)) < 1e-12
    ref = bootstrap((y, a, b), lambda y, a, b, axis=-1: _batch_rk(y, a) - _batch_rk(y, b),
                    paired=True, vectorized=True, n_resamples=4000, method="percentile",
                    confidence_level=0.95, random_state=1)
    low, high = ref.confidence_interval
    detail = rule["detail"]
    ours_low, ours_high = rule["interval"]
    # Within Monte Carlo error of two independent bootstraps: the standard error of a
    # 0.025 / 0.975 quantile from B draws is about 2.67 sigma / sqrt(B) (asymptotic order
    # statistics, Efron & Tibshirani 1993, section 19.3); allow 4 standard errors of the
    # difference of ours (B = 2000) and scipy's (B = 4000), as tests/test_uncertainty.py does.
    sigma = float(np.std(ref.bootstrap_distribution))
    tol = 4 * 2.67 * sigma * np.sqrt(1 / 2000 + 1 / 4000)
    assert abs(ours_low - low) < tol and abs(ours_high - high) < tol
    # the detail speaks of the change (+ better), the negated drop
    assert f"interval {-ours_high:+.3f} to {-ours_low:+.3f}" in detail
    assert "paired bootstrap on 500 shared samples" in detail
    # The whole interval lies above 0: a regression, exit 1.
    assert low > 0 and code == 1 and rule["passed"] is False


def test_confidence_spares_a_drop_within_noise(capsys, tmp_path):
    pytest.importorskip("foldcorr.analysis.uncertainty")
    base, new = _two_runs(tmp_path, n=120, seed=5, skill_a=0.72, skill_b=0.70,
                          ids_b=[f"g{i:04d}" for i in range(120)])
    drop = matthews_corrcoef(base.actual, base.predicted) - matthews_corrcoef(new.actual,
                                                                              new.predicted)
    assert drop > 0
    args = ["gate", tmp_path / "new.csv", "--id", "frame", "--baseline", tmp_path / "base.csv",
            "--max-drop", 0.0]
    assert run(capsys, *args)[0] == 1  # the plain check counts any drop
    code, out, _ = run(capsys, *args, "--confidence", 0.95, "--seed", 2, "--format", "json")
    doc = json.loads(out)
    assert code == 0 and doc["comparison"] == "unpaired"
    assert any("the sample ids differ" in w for w in doc["warnings"])
    assert "unpaired bootstrap" in doc["rules"][0]["detail"]


def test_confidence_options_are_checked(capsys, good, tmp_path):
    pytest.importorskip("foldcorr.analysis.uncertainty")
    path, _ = good
    code, _, err = run(capsys, "gate", path, "--baseline", path, "--confidence", 1.5)
    assert code == 2 and "--confidence" in err and err.count("\n") == 1
    code, _, err = run(capsys, "gate", path, "--baseline", path, "--confidence", 0.9,
                       "--resamples", 5)
    assert code == 2 and "--resamples" in err
    code, _, err = run(capsys, "gate", path, "--min-rk", 0, "--confidence", 0.9)
    assert code == 2 and "give --baseline FILE too" in err
