"""Reports people read (issue 14): a gate that never flips, rows that say what they check,
text that fits its width, complete pages, one interval style, our own colour scale and words."""

import json

import numpy as np
import pandas as pd
import pytest
from sklearn.metrics import matthews_corrcoef

from foldcorr.cli import main
from foldcorr.errors import DEFAULT_SEED
from foldcorr.evaluation import evaluate
from foldcorr.report.colours import MCC_ANCHORS, mcc_colour
from foldcorr.report.tables import format_interval, format_value, score_report
from foldcorr.report.text import render_text
from foldcorr.tensor import tally

CLASSES = ["diatom", "copepod", "detritus", "fibre", "bubble", "radiolarian"]


def run(capsys, *argv):
    code = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    return code, out, err


def write_table(path, *, seed, skill, n=900):
    rng = np.random.default_rng(seed)
    y = rng.choice(CLASSES, n, p=[0.3, 0.25, 0.2, 0.12, 0.08, 0.05])
    p = np.where(rng.random(n) < skill, y, rng.choice(CLASSES, n))
    frame = pd.DataFrame({"actual": y, "predicted": p, "fold": np.arange(n) % 3 + 1})
    frame.to_csv(path, index=False)
    return frame


@pytest.fixture
def pair(tmp_path):
    base, new = tmp_path / "base.csv", tmp_path / "new.csv"
    write_table(base, seed=1, skill=0.80)
    frame = write_table(new, seed=2, skill=0.78)
    return base, new, frame


def test_gate_without_seed_gives_byte_identical_output(capsys, pair):
    base, new, _ = pair
    argv = ("gate", new, "--baseline", base, "--confidence", 0.95, "--resamples", 300)
    first, second = run(capsys, *argv), run(capsys, *argv)
    assert first == second and first[0] in (0, 1)
    assert f"seed: {DEFAULT_SEED}" in first[1]
    doc = json.loads(run(capsys, *argv, "--format", "json")[1])
    assert doc["seed"] == DEFAULT_SEED
    other = json.loads(run(capsys, *argv, "--format", "json", "--seed", 5)[1])
    assert other["seed"] == 5 and other["rules"][0]["interval"] != doc["rules"][0]["interval"]


def test_score_and_compare_intervals_are_fixed_by_default(capsys, pair, tmp_path):
    base, new, _ = pair
    argv = ("score", new, "--ci", 0.9, "--resamples", 200, "--format", "json")
    one, two = (json.loads(run(capsys, *argv)[1]) for _ in range(2))
    assert one["ci"]["seed"] == DEFAULT_SEED and one["pooled"]["rk_ci"] == two["pooled"]["rk_ci"]
    joined = tmp_path / "joined.csv"
    a, b = pd.read_csv(base), pd.read_csv(new)
    pd.DataFrame({"actual": b.actual, "a": a.predicted, "b": b.predicted}).to_csv(joined,
                                                                                 index=False)
    argv = ("compare", joined, "--pred-a", "a", "--pred-b", "b", "--resamples", 200)
    first, second = run(capsys, *argv), run(capsys, *argv)
    assert first == second and f"seed" in first[1] and str(DEFAULT_SEED) in first[1]


def test_gate_rows_name_the_figure_value_limit_and_verdict(capsys, pair, tmp_path):
    # Reference for the values: sklearn.metrics.matthews_corrcoef (R_K of the pooled samples).
    base, new, frame = pair
    floors = tmp_path / "floors.csv"
    floors.write_text("class,floor\nradiolarian,0.99\ndiatom,0.1\n")
    code, out, _ = run(capsys, "gate", new, "--min-rk", 0.5, "--class-floors", floors,
                       "--baseline", base, "--format", "markdown")
    assert code == 1
    rows = [line for line in out.splitlines() if line.startswith("| ")]
    assert rows[0] == "| checks | value | limit | verdict | rule |"
    rk = matthews_corrcoef(frame.actual, frame.predicted)
    assert f"| pooled R_K | {format_value(rk, 'metric')} | &gt;= 0.500 | PASS | min-rk |" in rows
    floor_row = next(r for r in rows if r.startswith("| MCC of the classes with floors"))
    assert "radiolarian" in floor_row and "&lt; 0.990" in floor_row and "FAIL" in floor_row
    base_frame = pd.read_csv(base)
    change = rk - matthews_corrcoef(base_frame.actual, base_frame.predicted)
    change_row = next(r for r in rows if r.startswith("| R_K change from baseline"))
    sign = "+" if change > 0 else ""
    assert f"| {sign}{format_value(change, 'metric')} |" in change_row
    assert "-0.000" not in out


def test_limits_outside_a_figures_range_are_refused(capsys, pair):
    _, new, _ = pair
    for flag, value in (("--min-rk", 1.5), ("--min-class-mcc", -2), ("--min-macro-mcc", 3),
                        ("--max-marginal-mismatch", -0.1)):
        code, _, err = run(capsys, "gate", new, flag, value)
        assert code == 2 and "outside it" in err and err.count("\n") == 1


def test_text_fits_columns_and_drops_by_priority(capsys, pair, monkeypatch):
    _, new, _ = pair
    widths = {}
    for columns in (60, 80, 250):
        monkeypatch.setenv("COLUMNS", str(columns))
        code, out, _ = run(capsys, "score", new)
        assert code == 0 and "(continued)" not in out
        assert max(len(line) for line in out.splitlines()) <= columns
        widths[columns] = out
    assert "not shown at this width" in widths[60]
    assert "not shown at this width" not in widths[250]
    monkeypatch.delenv("COLUMNS")
    out = run(capsys, "score", new)[1]
    assert max(len(line) for line in out.splitlines()) <= 100  # the default width


def test_top_zero_is_a_short_summary(capsys, pair, monkeypatch):
    _, new, _ = pair
    monkeypatch.setenv("COLUMNS", "80")
    code, out, _ = run(capsys, "score", new, "--top", "0")
    lines = out.splitlines()
    assert code == 0 and len(lines) <= 25
    assert "R_K" in out and "mean R_K over folds" in out and "Classes by" not in out


def test_one_interval_style_and_no_negative_zero():
    assert format_interval(-0.1472, -0.1118) == "-0.147 to -0.112"
    assert format_value(-0.0004, "metric") == "0.000" and format_value(-0.0005, "metric") == "-0.001"


def test_every_table_has_a_legend_of_its_words(pair):
    _, new, frame = pair
    ev = evaluate(tally(frame.actual, frame.predicted, folds=frame.fold))
    text = render_text(score_report(ev), width=250)
    assert "in truth: samples of this actual class" in text
    assert "drag: w_k x (1 - MCC_k)" in text and "support" not in text


def test_colour_scale_is_continuous_and_ours():
    # A continuous scale: nearby values get nearby colours, no jump at any cut-off.
    def rgb(value):
        code = mcc_colour(value)
        return np.array([int(code[i:i + 2], 16) for i in (1, 3, 5)])

    values = np.linspace(-1, 1, 401)
    steps = [np.abs(rgb(b) - rgb(a)).max() for a, b in zip(values, values[1:])]
    assert max(steps) <= 2
    assert [mcc_colour(v) for v, _ in MCC_ANCHORS] == [
        "#" + "".join(f"{c:02x}" for c in rgb_) for _, rgb_ in MCC_ANCHORS]
    for value in np.linspace(-1, 1, 41):  # never the red/amber/green of a traffic light
        r, g, b = rgb(value)
        assert not (g > r + 40 and g > b + 40) and not (r > g + 60 and r > b + 60)


def test_markdown_is_short_with_every_class_in_details(capsys, pair):
    _, new, _ = pair
    code, out, _ = run(capsys, "score", new, "--format", "markdown", "--top", 2)
    assert code == 0 and "(top 2 of 6)" in out
    details = out.split("<details><summary>All 6 rows</summary>")[1].split("</details>")[0]
    assert all(name in details for name in CLASSES)


def test_html_carries_every_class_and_no_command_line_hints(capsys, pair, tmp_path):
    _, new, _ = pair
    page = tmp_path / "r.html"
    assert run(capsys, "score", new, "--top", 2, "--format", "html", "--output", page)[0] == 0
    text = page.read_text()
    body = text.split('id="classes-by-shortfall-share-table"')[1].split("</table>")[0]
    assert body.count("<tr>") == len(CLASSES) + 1  # the header row and one row per class
    assert "--top" not in text and "pip install" not in text
    assert 'id="colour-scale"' in text and "position: sticky" in text
    assert text.index('id="colour-scale"') < text.index("<h2>Pooled")


def _keys(value, skip: set, out: set) -> set:
    """Every key of every object in a JSON document, except keys that are data (labels)."""
    if isinstance(value, dict):
        for key, item in value.items():
            if key not in skip:
                out.add(key)
            _keys(item, skip, out)
    elif isinstance(value, list):
        for item in value:
            _keys(item, skip, out)
    return out


def test_every_json_key_of_a_demo_run_is_listed_in_docs(capsys, tmp_path):
    import pathlib
    import re

    docs = (pathlib.Path(__file__).parents[1] / "docs" / "json.md").read_text()
    listed = {word for token in re.findall(r"`([^`]+)`", docs)
              for word in re.split(r"[\s.,{}\[\]\"():=]+", token) if word}
    code, out, _ = run(capsys, "demo", "--out", tmp_path, "--samples", 3000, "--format", "json",
                       "--ci", 0.9, "--resamples", 100, "--prevalence", "uniform")
    doc = json.loads(out)
    keys = _keys(doc, set(doc["classes"]), set())
    base = tmp_path / "plankton_predictions.csv"
    code, out, _ = run(capsys, "gate", base, "--baseline", base, "--confidence", 0.9,
                       "--resamples", 100, "--min-rk", 0.1, "--min-fold-rk", 0.1,
                       "--min-class-mcc", 0.9, "--format", "json")
    keys |= _keys(json.loads(out), set(), set())
    assert code == 1 and sorted(keys - listed) == []
