"""Class groups: merging classes, the inside/between split of 1 - R_K, the --groups option.

Outside references: group-level R_K is `sklearn.metrics.matthews_corrcoef` on labels mapped to
their groups; R_K after repairing the confusions inside (between) groups is the same function on
predictions set to the truth wherever the two fall in the same (a different) group; that the two
parts add up to 1 - R_K is an identity of the two-player Shapley split (Shapley 1953: the values
of the players add up to the value of the grand coalition), checked with hypothesis.
"""

import json
import warnings

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from sklearn.metrics import matthews_corrcoef

import foldcorr as fc
from foldcorr.analysis.groups import group_shares, group_split, merge_classes
from foldcorr.cli import main
from foldcorr.errors import InvalidInputError
from foldcorr.evaluation import evaluate
from foldcorr.pipeline.groups import evaluate_groups

TOL = 1e-12
FIXTURES = __import__("pathlib").Path(__file__).parent.parent / "fixtures"


def quiet(f, *a, **k):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return f(*a, **k)


def _labels(seed, n=400, k=7, noise=0.35):
    rng = np.random.default_rng(seed)
    y = rng.integers(0, k, n)
    pred = np.where(rng.random(n) < noise, rng.integers(0, k, n), y)
    folds = rng.integers(0, 4, n)
    return y, pred, folds


MAPPING = {0: "a", 1: "a", 2: "b", 3: "b", 4: "b", 5: "c", 6: "c"}


def _mapped(labels, mapping=MAPPING):
    return np.array([mapping[v] for v in labels])


@pytest.mark.parametrize("sparse", [False, True])
def test_group_level_rk_equals_sklearn_on_labels_mapped_to_groups(sparse):
    y, pred, folds = _labels(1)
    t = fc.tally(y, pred, folds=folds)
    if sparse:
        import sparse as sp

        t = t.copy(data=sp.COO.from_numpy(t.values))
    merged = merge_classes(t, MAPPING)
    assert merged.coords["actual"].values.tolist() == ["a", "b", "c"]
    ev = evaluate(merged)
    assert merged.dims == t.dims and ev.n == len(y)
    # sklearn.metrics.matthews_corrcoef is the reference for R_K
    assert abs(ev.rk - matthews_corrcoef(_mapped(y), _mapped(pred))) < TOL
    for f in range(4):
        keep = folds == f
        ref = matthews_corrcoef(_mapped(y[keep]), _mapped(pred[keep]))
        assert abs(float(ev.folds["rk"].sel(fold=f)) - ref) < TOL


def _repaired(y, pred, same_group: bool):
    """Predictions with every confusion inside (or between) groups set to the truth."""
    gy, gp = _mapped(y), _mapped(pred)
    fix = (y != pred) & ((gy == gp) if same_group else (gy != gp))
    return np.where(fix, y, pred)


@pytest.mark.parametrize("seed", [2, 3, 4])
def test_repaired_rk_equals_sklearn_on_repaired_predictions(seed):
    y, pred, _ = _labels(seed)
    s = group_split(fc.tally(y, pred), MAPPING)
    assert abs(float(s.rk_fix_inside) - matthews_corrcoef(y, _repaired(y, pred, True))) < TOL
    assert abs(float(s.rk_fix_between) - matthews_corrcoef(y, _repaired(y, pred, False))) < TOL
    # the Shapley split, written out from its definition
    r0, ri, rb = matthews_corrcoef(y, pred), float(s.rk_fix_inside), float(s.rk_fix_between)
    assert abs(float(s.inside) - 0.5 * ((ri - r0) + (1 - rb))) < TOL


@settings(max_examples=60, deadline=None)
@given(st.integers(2, 12).flatmap(lambda k: st.tuples(
    st.just(k), st.lists(st.integers(0, 40), min_size=k * k, max_size=k * k),
    st.lists(st.integers(0, 3), min_size=k, max_size=k))))
def test_inside_and_between_add_up_to_one_minus_rk(case):
    k, cells, groups = case
    counts = np.array(cells, dtype=np.int64).reshape(k, k)
    if counts.sum() == 0:
        counts[0, 0] = 1
    t = fc.confusion_tensor(counts, list(range(k)))
    mapping = dict(enumerate(groups))
    s = quiet(group_split, t, mapping)
    rk = float(quiet(fc.rk, t))
    assert abs(float(s.inside + s.between) - (1 - rk)) < TOL
    d = quiet(fc.decompose, t)
    shares = group_shares(d.shortfall_share, mapping)
    assert abs(float(shares.sum()) - (1 - rk)) < 1e-9


def test_split_with_folds_is_per_fold():
    y, pred, folds = _labels(5)
    t = fc.tally(y, pred, folds=folds)
    s = group_split(t, MAPPING)
    for f in range(4):
        keep = folds == f
        assert abs(float(s.rk.sel(fold=f)) - matthews_corrcoef(y[keep], pred[keep])) < TOL
        assert abs(float((s.inside + s.between).sel(fold=f) + s.rk.sel(fold=f)) - 1) < TOL


def test_missing_classes_are_named_unless_an_other_group_is_given():
    t = fc.tally([0, 1, 2, 3], [0, 1, 3, 2])
    with pytest.raises(InvalidInputError, match=r"classes missing from the groups: 2, 3"):
        merge_classes(t, {0: "a", 1: "a"})
    merged = merge_classes(t, {0: "a", 1: "a"}, other="rest")
    assert merged.coords["actual"].values.tolist() == ["a", "rest"]
    assert merged.values.tolist() == [[2, 0], [0, 2]]


def test_groups_read_from_text_match_integer_classes():
    t = fc.tally([0, 1, 2], [0, 2, 2])
    merged = merge_classes(t, {"0": "x", "1": "y", "2": "y"})
    assert merged.values.tolist() == [[1, 0], [0, 2]]


def test_evaluate_groups_ranks_groups_by_their_share():
    y, pred, folds = _labels(6)
    ev = evaluate(fc.tally(y, pred, folds=folds))
    result = evaluate_groups(ev, {"g": MAPPING, "all": {k: "one" if k < 6 else "two"
                                                        for k in range(7)}})
    level = result.level("g")
    assert level.members == {"a": [0, 1], "b": [2, 3, 4], "c": [5, 6]}
    values = level.shares.values
    assert (np.diff(values) <= 0).all()
    classes = ev.per_class["shortfall_share"]
    assert abs(float(level.shares.sel(group="b")) - float(classes.sel({"class": [2, 3, 4]}).sum())) < TOL
    assert [lv.name for lv in result.levels] == ["g", "all"]


def _table(path, y, pred, folds):
    import pandas as pd

    pd.DataFrame({"actual": y, "predicted": pred, "fold": folds}).to_csv(path, index=False)
    return path


def test_cli_groups_json_text_and_gate(tmp_path, capsys):
    y, pred, folds = _labels(7)
    names = {k: f"c{k}" for k in range(7)}
    table = _table(tmp_path / "p.csv", [names[v] for v in y], [names[v] for v in pred], folds)
    groups = tmp_path / "g.csv"
    groups.write_text("class,genus,family\n" + "".join(
        f"c{k},{MAPPING[k]},{'x' if k < 5 else 'z'}\n" for k in range(7)))
    assert main(["score", str(table), "--groups", str(groups), "--format", "json",
                 "--ci", "0.9", "--resamples", "200", "--seed", "1"]) == 0
    doc = json.loads(capsys.readouterr().out)
    assert doc["schema"] == "foldcorr.score/2"
    genus = doc["groups"][0]
    assert genus["level"] == "genus" and [e["level"] for e in doc["groups"]] == ["genus", "family"]
    ref = matthews_corrcoef(_mapped(y), _mapped(pred))
    assert abs(genus["rk"] - ref) < TOL
    assert abs(genus["inside"] + genus["between"] - (1 - doc["pooled"]["rk"])) < TOL
    assert genus["rk_interval"][0] <= genus["rk"] <= genus["rk_interval"][1]
    assert len(genus["folds"]) == 4 and {g["group"] for g in genus["groups"]} == {"a", "b", "c"}
    assert main(["score", str(table), "--groups", str(groups)]) == 0
    out = capsys.readouterr().out
    assert "Class groups" in out and "Groups (family) by share of 1 - R_K" in out
    assert main(["gate", str(table), "--groups", str(groups), "--min-group-rk",
                 f"genus={ref + 0.01}"]) == 1
    assert main(["gate", str(table), "--groups", str(groups), "--min-group-rk",
                 f"genus={ref - 0.01}"]) == 0
    capsys.readouterr()


def test_cli_groups_missing_class_is_one_line_exit_2(tmp_path, capsys):
    y, pred, folds = _labels(8)
    table = _table(tmp_path / "p.csv", y, pred, folds)
    groups = tmp_path / "g.csv"
    groups.write_text("class,group\n0,a\n1,a\n2,b\n")
    assert main(["score", str(table), "--groups", str(groups)]) == 2
    err = capsys.readouterr().err.strip()
    assert err.count("\n") == 0 and "'3', '4', '5', '6'" in err and "--groups-other" in err
    assert main(["score", str(table), "--groups", str(groups), "--groups-other", "rest",
                 "--format", "json"]) == 0
    doc = json.loads(capsys.readouterr().out)
    assert [g["group"] for g in doc["groups"][0]["groups"]].count("rest") == 1


def test_demo_with_the_invented_plankton_groups(tmp_path, capsys):
    # fixtures/plankton_groups.csv is an invented grouping of the demo's invented taxa
    saved = tmp_path / "demo.nc"
    assert main(["demo", "--out", str(tmp_path), "--samples", "3000", "--groups",
                 str(FIXTURES / "plankton_groups.csv"), "--format", "json",
                 "--output", str(tmp_path / "d.json"), "--save", str(saved)]) == 0
    doc = json.loads((tmp_path / "d.json").read_text())
    assert [e["level"] for e in doc["groups"]] == ["group", "living"]
    for entry in doc["groups"]:
        assert abs(sum(g["share"] for g in entry["groups"]) - (1 - doc["pooled"]["rk"])) < 1e-9
    capsys.readouterr()
    # a saved evaluation keeps its groups: show renders the same document
    assert main(["show", str(saved), "--format", "json"]) == 0
    assert json.loads(capsys.readouterr().out)["groups"] == doc["groups"]
