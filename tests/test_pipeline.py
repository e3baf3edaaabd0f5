"""One pipeline: `foldcorr.score(...)` runs what `foldcorr score` runs; options checked once and saved
by name with a version."""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest

import foldcorr
from foldcorr.cli import main
from foldcorr.cli.args import get_parser
from foldcorr.cli.verbs import given_options
from foldcorr.errors import InvalidInputError, OptionError
from foldcorr.pipeline import OPTIONS_SCHEMA, ScoreOptions, saved_options
from foldcorr.report import render_score
from foldcorr.sources.saved import load_saved, save_evaluation


def run(capsys, *argv):
    code = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    return code, out, err


@pytest.fixture
def table(tmp_path):
    rng = np.random.default_rng(5)
    names = ["cod", "hake", "ling", "pollock"]
    y = rng.choice(names, 300, p=[0.4, 0.3, 0.2, 0.1])
    p = np.where(rng.random(300) < 0.7, y, rng.choice(names, 300))
    path = tmp_path / "catch.csv"
    pd.DataFrame({"actual": y, "predicted": p, "fold": np.arange(300) % 3 + 1,
                  "site": np.arange(300) % 2}).to_csv(path, index=False)
    return path


@pytest.mark.parametrize("argv, options", [
    ([], {}),
    (["--fold", "site"], {"fold": "site"}),
    (["--ci", "0.9", "--resamples", "200", "--seed", "3"],
     {"level": 0.9, "n_resamples": 200, "seed": 3}),
    (["--ci", "0.8", "--ci-method", "bca", "--resamples", "150", "--seed", "1"],
     {"level": 0.8, "method": "bca", "n_resamples": 150, "seed": 1}),
    (["--prevalence", "uniform", "--undefined", "nan"], {"prevalence": "uniform", "undefined": "nan"}),
    (["--prevalence", "cod=0.4,hake=0.3,ling=0.2,pollock=0.1", "--top", "2"],
     {"prevalence": {"cod": 0.4, "hake": 0.3, "ling": 0.2, "pollock": 0.1}, "top": 2}),
])
def test_python_call_gives_the_command_line_json(capsys, table, argv, options):
    code, printed, err = run(capsys, "score", table, "--format", "json", *argv)
    assert code == 0, err
    assert render_score(foldcorr.score(table, **options), "json") == printed


def test_text_of_the_python_call_is_the_command_line_text(capsys, table):
    code, printed, _ = run(capsys, "score", table, "--format", "markdown", "--top", "2")
    ev = foldcorr.score(str(table), top=2)
    assert code == 0 and render_score(ev, "markdown", top=2) == printed


def test_tensor_in_memory_goes_through_the_same_pipeline(table):
    from_file = foldcorr.score(table, level=0.9, n_resamples=100, seed=2)
    tensor = foldcorr.score(table, analyses=()).tensor
    in_memory = foldcorr.evaluate_with(tensor, ScoreOptions(level=0.9, n_resamples=100, seed=2))
    assert render_score(in_memory, "json") == render_score(from_file, "json")
    assert render_score(foldcorr.score(tensor, level=0.9, n_resamples=100, seed=2), "json") == \
        render_score(from_file, "json")
    with pytest.raises(OptionError, match="describe a file"):
        foldcorr.score(tensor, truth="y")
    with pytest.raises(OptionError, match=r"unknown option 'ci'; expected table options .*'level'"):
        foldcorr.score(table, ci=0.9)


def test_analyses_can_be_chosen(table):
    assert sorted(foldcorr.score(table).extras) == ["repair"]
    assert foldcorr.score(table, analyses=()).extras == {}
    with pytest.raises(OptionError, match=r"`analyses` must be one of .*'repair'.*; got 'plot'"):
        foldcorr.score(table, analyses=("plot",))


def test_multilabel_goes_through_the_same_call(capsys, tmp_path):
    path = tmp_path / "tags.csv"
    pd.DataFrame({"y_reef": [1, 0, 1, 1, 0, 0], "p_reef": [1, 0, 0, 1, 1, 0],
                  "y_sand": [0, 1, 1, 0, 0, 1], "p_sand": [0, 1, 1, 0, 1, 1]}).to_csv(path,
                                                                                       index=False)
    code, printed, _ = run(capsys, "score", path, "--truth-prefix", "y_", "--pred-prefix", "p_",
                           "--format", "json")
    from foldcorr.report.json import dumps, score_dict

    ev = foldcorr.score(path, truth_prefix="y_", pred_prefix="p_")
    assert code == 0 and ev.kind == "multilabel" and dumps(score_dict(ev)) == printed
    with pytest.raises(OptionError, match="`prevalence` applies to multiclass scoring"):
        foldcorr.score(path, truth_prefix="y_", pred_prefix="p_", prevalence="uniform")


@pytest.mark.parametrize("options, message", [
    ({"level": 1.5}, r"`level` must be a number strictly between 0 and 1 \(e.g. 0.95\); got 1.5"),
    ({"level": 0.9, "n_resamples": 20}, r"`n_resamples` must be a whole number of at least 100"),
    ({"n_resamples": 500}, r"`n_resamples` needs `level` \(e.g. level=0.95\); got n_resamples=500"),
    ({"method": "bca"}, r"`method` needs `level`"),
    ({"level": 0.9, "method": "normal"}, r"`method` must be one of 'percentile', 'bca'; got 'normal'"),
    ({"undefined": "none"}, r"`undefined` must be one of 'zero', 'nan'; got 'none'"),
    ({"top": -1}, r"`top` must be a whole number \(0: the summary only\) or None; got -1"),
    ({"seed": "x"}, r"`seed` must be a whole number or None; got 'x'"),
    ({"prevalence": 3}, r"`prevalence` must be 'uniform', CLASS=SHARE pairs, .*; got 3"),
])
def test_options_are_checked_once_with_their_names(options, message):
    with pytest.raises(OptionError, match=message):
        ScoreOptions(**options)


def test_options_take_the_library_defaults():
    options = ScoreOptions(level=0.95)
    assert (options.n_resamples, options.method, options.top, options.undefined) == \
        (ScoreOptions.DEFAULT_RESAMPLES, ScoreOptions.DEFAULT_METHOD, 20, "zero")
    assert ScoreOptions().n_resamples is None  # no intervals, no resamples
    assert ScoreOptions(**options.to_dict()) == options


def test_command_line_passes_only_what_the_user_gave():
    parser = get_parser()
    assert given_options(parser.parse_args(["score", "x.csv"])) == {}
    assert given_options(parser.parse_args(["demo"])) == {}
    args = parser.parse_args(["score", "x.csv", "--top", "all", "--resamples", "300",
                              "--truth", "y", "--matrix"])
    assert given_options(args) == {"top": None, "n_resamples": 300, "truth": "y", "matrix": True}
    pipeline = {"undefined", "top", "ci", "resamples", "ci_method", "seed", "prevalence", "truth",
                "pred", "fold", "weight", "classes", "where", "matrix", "engine", "scheduler",
                "skip_bad_files", "truth_cols", "pred_cols", "truth_prefix", "pred_prefix", "sep"}
    assert not pipeline & set(vars(parser.parse_args(["score", "x.csv"])))
    assert not pipeline & set(vars(parser.parse_args(["gate", "x.csv"])))
    assert not {"top"} & set(vars(parser.parse_args(["show", "x.nc"])))
    # the other verbs leave the defaults to the library too
    assert not {"top", "undefined", "truth", "score", "fold"} & set(vars(parser.parse_args(
        ["sweep", "x.csv"])))
    assert not {"top", "undefined", "truth", "pred", "fold", "ci", "resamples"} & set(vars(
        parser.parse_args(["compare", "x.csv", "--pred-a", "a", "--pred-b", "b"])))


def test_saved_options_are_named_and_versioned(capsys, table, tmp_path):
    out = tmp_path / "run.nc"
    code, printed, _ = run(capsys, "score", table, "--ci", "0.9", "--resamples", "200", "--seed",
                           "4", "--prevalence", "uniform", "--save", out, "--format", "json")
    stored = load_saved(out).options
    assert stored == {"options_schema": OPTIONS_SCHEMA, "undefined": "zero", "top": 20,
                      "level": 0.9, "n_resamples": 200, "method": "percentile", "seed": 4,
                      "prevalence": "uniform", "rank_by": "share", "groups": None,
                      "groups_other": None, "analyses": list(ScoreOptions().analyses)}
    assert run(capsys, "show", out, "--format", "json")[1] == printed
    ev, options = foldcorr.replay(out)
    assert render_score(ev, "json") == printed and options.level == 0.9


def test_file_saved_with_command_line_names_still_opens(capsys, table, tmp_path):
    # Files written before options were versioned stored the command line's names.
    argv = ["--undefined", "nan", "--top", "3", "--ci", "0.9", "--resamples", "200",
            "--ci-method", "bca", "--seed", "5", "--prevalence", "uniform"]
    code, printed, _ = run(capsys, "score", table, "--format", "json", *argv)
    old = {"undefined": "nan", "top": 3, "plot": None, "ci": 0.9, "resamples": 200,
           "ci_method": "bca", "seed": 5, "prevalence": "uniform"}
    out = tmp_path / "old.nc"
    save_evaluation(out, foldcorr.score(table, analyses=()).tensor, options=old)
    code, shown, err = run(capsys, "show", out, "--format", "json")
    assert code == 0 and shown == printed, err
    assert ScoreOptions.from_saved(old) == ScoreOptions(undefined="nan", top=3, level=0.9,
                                                        n_resamples=200, method="bca", seed=5,
                                                        prevalence="uniform")


def test_options_of_a_future_version_are_refused(capsys, table, tmp_path):
    out = tmp_path / "future.nc"
    options = {**saved_options(ScoreOptions()), "options_schema": OPTIONS_SCHEMA + 1}
    save_evaluation(out, foldcorr.score(table, analyses=()).tensor, options=options)
    code, shown, err = run(capsys, "show", out)
    assert code == 2 and shown == "" and err.count("\n") == 1
    assert f"future.nc: its options are of options schema {OPTIONS_SCHEMA + 1}" in err
    with pytest.raises(InvalidInputError, match="unknown stored options"):
        ScoreOptions.from_saved({"options_schema": OPTIONS_SCHEMA, "colour": "teal"})


def test_gate_reads_saved_and_table_sources_through_the_pipeline(capsys, table, tmp_path):
    out = tmp_path / "base.nc"
    assert run(capsys, "score", table, "--save", out, "--undefined", "nan")[0] == 0
    ev, samples = foldcorr.load_evaluation(out)
    assert ev.undefined == "nan" and ev.extras == {} and samples is None  # as saved; no analyses
    code, printed, _ = run(capsys, "gate", table, "--baseline", out, "--max-drop", "0",
                           "--format", "json")
    assert code == 0 and json.loads(printed)["passed"] is True


@pytest.mark.parametrize("argv, message", [
    (["--truth-prefix", "y_", "--pred-prefix", "p_", "--matrix"],
     "`--matrix` reads a multiclass counts matrix"),
    (["--truth-prefix", "y_", "--pred-prefix", "p_", "--prevalence", "uniform"],
     "`--prevalence` applies to multiclass scoring"),
    (["--truth-prefix", "y_", "--pred-prefix", "p_", "--engine", "dask"],
     "`--engine` and `--skip-bad-files` apply to multiclass scoring"),
    (["--scheduler", "tcp://127.0.0.1:1"], "`--scheduler` needs `--engine dask`; got --engine 'local'"),
    (["--matrix", "--where", "fold == 1"],
     "`--where` and `--engine` apply to prediction tables, not to `--matrix`"),
])
def test_options_that_do_not_combine_exit_2_with_flag_names(capsys, table, argv, message):
    code, out, err = run(capsys, "score", table, *argv)
    assert code == 2 and out == "" and err.count("\n") == 1 and message in err
