"""One way out: every result kind renders in every output format through one Document."""

import importlib
import json

import numpy as np
import pytest

from foldcorr.analysis.compare import compare_models
from foldcorr.analysis.many import compare_many
from foldcorr.analysis.thresholds import sweep
from foldcorr.errors import OptionError
from foldcorr.evaluation import evaluate
from foldcorr.gate import GateRules, check_gate
from foldcorr.report import DOCUMENTS, FORMATS, WRITERS, document, render
from foldcorr.tensor import confusion_tensor, joint_tally


def _results():
    ev = evaluate(confusion_tensor([[6, 2, 0], [1, 3, 1], [0, 2, 5]], ["a", "b", "c"]))
    y = np.array([0, 1, 2] * 40)
    return {
        "Evaluation": ev,
        "Comparison": compare_models(joint_tally(y, np.roll(y, 1), y), n_resamples=100, seed=0),
        "GateResult": check_gate(ev, GateRules(min_rk=0.2)),
        "SweepResult": sweep([0, 1, 1, 0, 1], [0.1, 0.8, 0.6, 0.3, 0.4]),
        "ManyComparison": compare_many(y, {"a": y, "b": np.roll(y, 1), "c": y[::-1]},
                                       n_resamples=100, seed=0),
    }


def test_every_listed_writer_and_document_maker_exists():
    assert FORMATS == tuple(WRITERS) == ("text", "json", "markdown", "html")
    for spec in [*WRITERS.values(), *DOCUMENTS.values()]:
        module, name = spec.split(":")
        assert callable(getattr(importlib.import_module(module), name))


@pytest.mark.parametrize("kind", sorted(DOCUMENTS))
@pytest.mark.parametrize("fmt", FORMATS)
def test_every_result_kind_renders_in_every_format(kind, fmt):
    result = _results()[kind]
    text = render(result, fmt)
    assert text.strip()
    if fmt == "json":
        assert json.loads(text)["schema"].startswith("foldcorr.")
    if fmt == "html":
        assert text.startswith("<!DOCTYPE html>")


@pytest.mark.parametrize("kind", sorted(DOCUMENTS))
def test_top_cuts_rows_shown_never_json(kind):
    result = _results()[kind]
    assert render(result, "json", top=1) == render(result, "json", top=None)
    assert document(result, top=1).report.title == document(result, top=None).report.title


def test_unknown_result_or_format_is_refused_by_name():
    with pytest.raises(OptionError, match="cannot render a 'dict'"):
        render({}, "text")
    with pytest.raises(OptionError, match="format"):
        render(_results()["Evaluation"], "pdf")
