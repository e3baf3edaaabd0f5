"""Hostile and odd inputs to every verb and every source kind.

Each case runs the command line in-process and checks the promise of the command line: the
documented exit code, exactly one line on stderr naming the culprit, no traceback, and no file
left in the output folder (a failed run writes nothing; a good one writes only its outputs).
A few cases run as a subprocess: interrupts and a full device.
"""

import errno
import json
import os
import signal
import subprocess
import sys
import time
import xml.etree.ElementTree as ET
from pathlib import Path

import pytest
from hostile_data import HOSTILE, make_bad, make_inputs

from foldcorr._files import TEMP_PREFIX
from foldcorr.cli import main

#: Bad inputs, one a row: (arguments, the text the one stderr line must contain).
#: ``{name}`` is an input file of hostile_data, ``{out}`` the output folder.
BAD = [
    # CSV tables
    ("score {empty_csv}", "empty.csv: the file is empty"),
    ("score {header_csv}", "header.csv: the table has no rows"),
    ("score {nocol_csv}", "nocol.csv: column 'actual' not found"),
    ("score {missing_csv}", "missing.csv: column 'predicted' row 1: missing label"),
    ("score {garbage_csv}", "garbage.csv: cannot read as csv"),
    ("score {latin_csv}", "latin.csv: cannot read as csv"),
    ("score {semicolon_csv}", "semicolon.csv: column 'actual' not found"),
    ("score {negw_csv} --weight w", "negw.csv: weights must be finite and non-negative"),
    ("score {nanw_csv} --weight w", "nanw.csv: weights must be finite and non-negative"),
    ("score {textw_csv} --weight w", "textw.csv: weights must be numbers"),
    ("score {quote_csv}", "quote.csv: cannot read as csv"),
    ("score {csv} --fold nope", "good.csv: column 'nope' not found"),
    ("score {csv} --classes owl", "label 'wren' is not among the classes ['owl']"),
    ("score {csv} --where 'fold =='", "`where`: cannot read 'fold =='"),
    ("score {csv} --where 'nope == 1'", "names column 'nope'"),
    ("score {out}/none.csv", "none.csv: file not found"),
    ("score {csv} --prevalence owl=2", "`prevalence` must sum to 1"),
    ("score {csv} --prevalence {prevalence_csv}", "class 'owl' must be a finite share"),
    ("score {csv} --prevalence {out}/none.csv", "none.csv: file not found"),
    # Parquet and JSON Lines
    ("score {fake_parquet}", "fake.parquet: cannot read as parquet"),
    ("score {trunc_parquet}", "trunc.parquet: cannot read as parquet"),
    ("score {parquet} --truth nope", "good.parquet: column 'nope' not found"),
    ("score {bad_jsonl}", "bad.jsonl: cannot read as jsonl"),
    ("score {array_jsonl}", "array.jsonl: cannot read as jsonl"),
    ("score {nokeys_jsonl}", "nokeys.jsonl: column 'actual' not found"),
    ("score {jsonl} --pred nope", "good.jsonl: column 'nope' not found"),
    # counts matrices
    ("score {mnonsq_csv} --matrix", "mnonsq.csv: a counts matrix must be square"),
    ("score {mneg_csv} --matrix", "mneg.csv: row 'a' column 'b' (line 2): cell '-2'"),
    ("score {mtext_csv} --matrix", "mtext.csv: row 'a' column 'b' (line 2): cell 'x'"),
    ("score {mnan_csv} --matrix", "mnan.csv: row 'a' column 'b' (line 2): cell is empty"),
    ("score {mempty_csv} --matrix", "mempty.csv: cannot read as a counts matrix"),
    ("score {mfloat_csv} --matrix", "mfloat.csv: row 'a' column 'a' (line 2): cell '1.5'"),
    ("score {mbig_csv} --matrix", "mbig.csv: row 'a' column 'a' (line 2): cell '1e400'"),
    ("score {mdup_csv} --matrix", "mdup.csv: row label 'a' appears more than once"),
    ("gate {mneg_csv} --matrix --min-rk 0", "mneg.csv: row 'a' column 'b'"),
    # saved evaluations: every attribute and variable checked on open
    ("show {text_nc}", "text.nc: cannot read as a saved evaluation"),
    ("show {trunc_nc}", "trunc.nc: cannot read as a saved evaluation"),
    ("show {opt_list_nc}", "opt_list.nc: attribute 'options' must be a JSON object; got an array"),
    ("show {opt_num_nc}", "opt_num.nc: attribute 'options' must be a JSON object; got a number"),
    ("show {opt_null_nc}", "opt_null.nc: attribute 'options' must be a JSON object; got null"),
    ("show {opt_str_nc}", "opt_str.nc: attribute 'options' must be a JSON object; got a string"),
    ("show {opt_bad_nc}", "opt_bad.nc: attribute 'options' is not valid JSON"),
    ("show {opt_int_nc}", "opt_int.nc: attribute 'options' must be JSON text"),
    ("show {schema2_nc}", "schema2.nc: saved with schema 'foldcorr.saved/9'"),
    ("show {noschema_nc}", "noschema.nc: a NetCDF file but not a saved foldcorr evaluation"),
    ("show {nocount_nc}", "nocount.nc: a NetCDF file but not a saved foldcorr evaluation"),
    ("show {fold_oob_nc}", "fold_oob.nc: variable 'sample_fold' row 1: index 10 is out of range"),
    ("gate {fold_oob_nc} --min-rk 0", "fold_oob.nc: variable 'sample_fold' row 1"),
    ("gate {csv} --id id --baseline {fold_oob_nc}", "fold_oob.nc: variable 'sample_fold'"),
    ("score {fold_oob_nc}", "fold_oob.nc: variable 'sample_fold'"),
    ("show {act_oob_nc}", "act_oob.nc: variable 'sample_actual' row 1: index -1 is out of range"),
    ("show {pred_oob_nc}", "pred_oob.nc: variable 'sample_predicted' row 1: index 101"),
    ("show {codes_float_nc}", "codes_float.nc: variable 'sample_actual' has dtype 'float64'"),
    ("show {no_pred_nc}", "no_pred.nc: per-sample variables are incomplete"),
    ("show {fold_no_dim_nc}", "fold_no_dim.nc: variable 'sample_fold' is stored but"),
    ("show {count_str_nc}", "count_str.nc: variable 'count' has dtype"),
    ("show {count_bool_nc}", "count_bool.nc: variable 'count' has dtype 'bool'"),
    ("show {count_neg_nc}", "count_neg.nc: the stored counts are not a valid tensor: counts must"),
    ("show {count_nan_nc}", "count_nan.nc: the stored counts are not a valid tensor: counts must"),
    ("show {count_dims_nc}", "count_dims.nc: variable 'count' has dims ('split', "),
    ("show {count_1d_nc}", "count_1d.nc: variable 'count' has dims ('actual',)"),
    ("show {dup_class_nc}", "dup_class.nc: coordinate 'actual' repeats 'owl'"),
    ("show {saved} --top -1", "argument --top"),
    ("show {csv}", "good.csv"),
    ("score {saved} --where 'fold == 1'", "saved.nc is a saved evaluation"),
    # bounds of counts and limits
    ("score {csv} --ci 0.9 --resamples 4611686018427387904", "argument --resamples: expected a "
                                                             "whole number from 1 to 1,000,000"),
    ("score {csv} --ci 0.9 --resamples 0", "argument --resamples"),
    ("score {csv} --ci 0.9 --resamples 2.5", "argument --resamples"),
    ("score {csv} --ci 0.9 --resamples 20", "`--resamples` must be a whole number of at least"),
    ("score {csv} --ci 1.5", "`--ci` must be a number strictly between 0 and 1"),
    ("score {csv} --ci nan", "argument --ci: expected a number; got 'nan'"),
    ("score {csv} --seed -1", "argument --seed"),
    ("compare {csv} --pred-a predicted --pred-b other --permutations 99999999",
     "argument --permutations"),
    ("compare {csv} --pred-a predicted --pred-b other --resamples 4611686018427387904",
     "argument --resamples"),
    ("gate {csv} --baseline {saved} --confidence 0.9 --resamples 9999999", "argument --resamples"),
    ("demo --out {out} --samples 1000000000000", "argument --samples: expected a whole number "
                                                 "from 100 to 1,000,000,000"),
    ("demo --out {out} --samples 50", "argument --samples"),
    ("demo --out {out} --samples many", "argument --samples"),
    ("gate {csv} --min-rk 1.5", "argument --min-rk: R_K lies in [-1, 1]"),
    ("gate {csv} --min-rk -2", "argument --min-rk: R_K lies in [-1, 1]"),
    ("gate {csv} --min-fold-rk 1.01", "argument --min-fold-rk"),
    ("gate {csv} --min-class-mcc 2", "argument --min-class-mcc: MCC lies in [-1, 1]"),
    ("gate {csv} --min-macro-mcc -1.5", "argument --min-macro-mcc"),
    ("gate {csv} --min-micro-mcc inf", "argument --min-micro-mcc: expected a number"),
    ("gate {csv} --min-class-mcc nan", "argument --min-class-mcc: expected a number"),
    ("gate {csv} --max-marginal-mismatch -0.1", "argument --max-marginal-mismatch"),
    ("gate {csv} --baseline {saved} --max-drop 3", "argument --max-drop"),
    ("gate {csv} --baseline {saved} --confidence 2", "`--confidence` must be a number"),
    ("gate {csv} --class-floors {floors_csv}", "floors.csv line 2: floor '1.5'"),
    ("gate {csv} --class-floors {out}/none.csv", "none.csv: file not found"),
    ("gate {csv} --max-drop 0.1", "`--max-drop` compares with a baseline"),
    # usage
    ("score", "the following arguments are required: PATH (see 'foldcorr score --help')"),
    ("frobnicate", "invalid choice: 'frobnicate'"),
    ("score {csv} --bogus", "unrecognized arguments: --bogus"),
    ("score {csv} --format yaml", "argument --format: invalid choice: 'yaml'"),
    ("score {csv} --top -1", "argument --top"),
    ("sweep {csv} --at nan", "argument --at: expected a number"),
    ("compare {csv} {parquet}", "--id COL"),
    ("compare {csv} --pred-a predicted --pred-b nope", "good.csv: column 'nope' not found"),
    ("compare {csv} --pred-a predicted --pred-b other --ci 1", "`--ci` must be a number"),
    ("sweep {csv}", "good.csv: column 'actual' has 3 distinct values"),
    ("sweep {csv} --positive dodo", "--positive 'dodo' does not occur in column 'actual'"),
    ("sweep {csv} --positive owl --score nope", "good.csv: column 'nope' not found"),
    ("sweep {jsonl} --positive owl --score actual", "good.jsonl"),
    # targets
    ("score {csv} --output {out}/no/r.txt", "does not exist"),
    ("score {csv} --output {out}", "it is a folder"),
    ("score {csv} --output {csv}", "is the input file"),
    ("score {csv} --save {out}/r.csv", "`--save` writes a NetCDF-4 file"),
    ("score {csv} --save {out}/r.nc --output {out}/r.nc", "give each output its own path"),
    ("gate {csv} --min-rk 0 --junit {out}/r.xml --markdown {out}/r.xml", "its own path"),
    ("sweep {csv} --positive owl --curve {out}/c.txt", "--curve must end in .csv"),
    ("sweep {csv} --positive owl --curve {out}/c.txt --output {out}/r.txt", "--curve must end"),
    ("score {csv} --id id", "`--id` stores sample ids with --save"),
    ("score {csv} --plot {csv}", "cannot draw plots into"),
    ("sweep {csv} --positive owl --plot {csv}", "`--plot` takes a folder"),
]


@pytest.fixture(scope="module")
def inputs(tmp_path_factory):
    folder = tmp_path_factory.mktemp("inputs")
    files = make_bad(folder, make_inputs(folder))
    return {name.replace(".", "_"): str(path) for name, path in files.items()}


@pytest.fixture
def out(tmp_path):
    folder = tmp_path / "out"
    folder.mkdir()
    return folder


def run(capsys, line, inputs, out):
    import shlex

    argv = [a.format(out=out, **inputs) for a in shlex.split(line)]
    code = main(argv)
    stdout, stderr = capsys.readouterr()
    return code, stdout, stderr


def assert_one_line(stderr, culprit):
    lines = stderr.strip().splitlines()
    assert "Traceback" not in stderr
    assert len(lines) == 1, stderr
    assert culprit in lines[0], lines[0]


def left_in(folder):
    return sorted(p.relative_to(folder).as_posix() for p in Path(folder).rglob("*"))


@pytest.mark.parametrize("line, culprit", BAD, ids=[line for line, _ in BAD])
def test_bad_input_is_one_line_and_exit_2(capsys, inputs, out, line, culprit):
    # every failing run also names report files: none may appear
    code, stdout, stderr = run(capsys, line, inputs, out)
    assert code == 2
    assert_one_line(stderr, culprit)
    assert left_in(out) == []


@pytest.mark.parametrize("line, problem", [
    ("score {dupcol_csv}", "column 'actual' appears 2 times; column names must be unique"),
    ("score {nested_jsonl}", "column 'actual' holds struct<x: int64> values; labels must be "
                             "text, numbers or booleans"),
])
def test_source_errors_name_file_and_column(capsys, inputs, out, line, problem):
    code, _, stderr = run(capsys, line, inputs, out)
    assert code == 2
    assert_one_line(stderr, f"{Path(line.split()[-1].format(**inputs)).name}: {problem}")


#: Every output option of every verb, with the files the run must leave.
OUTPUTS = [
    ("score {hostile_csv} --output {out}/r.md --format markdown --save {out}/r.nc --plot {out}/p",
     ["p", "p/class_fold.png", "p/class_fold.svg", "p/confusion.png", "p/confusion.svg",
      "p/folds.png", "p/folds.svg", "p/loss_budget.png", "p/loss_budget.svg", "r.md", "r.nc"]),
    ("score {hostile_parquet} --format html --output {out}/r.html", ["r.html"]),
    ("score {hostile_csv} --format json --output {out}/r.json --ci 0.9 --resamples 200",
     ["r.json"]),
    ("score {hostile_wide} --truth-prefix y_ --pred-prefix p_ --format markdown "
     "--output {out}/r.md", ["r.md"]),
    ("show {hostile_saved} --format markdown --output {out}/r.md", ["r.md"]),
    ("show {hostile_saved} --format html --output {out}/r.html", ["r.html"]),
    ("gate {hostile_saved} --min-rk 0.99 --min-class-mcc 0.9 --junit {out}/r.xml "
     "--markdown {out}/r.md --format html --output {out}/r.html", ["r.html", "r.md", "r.xml"]),
    ("gate {hostile_csv} --min-rk -1 --format json --output {out}/r.json", ["r.json"]),
    ("compare {hostile_csv} --pred-a predicted --pred-b other --resamples 200 --format markdown "
     "--output {out}/r.md", ["r.md"]),
    ("compare {hostile_csv} --pred-a predicted --pred-b other --resamples 200 --format html "
     "--output {out}/r.html", ["r.html"]),
    ("sweep {hostile_csv} --truth positive --positive '<script>alert(1)</script>' --curve "
     "{out}/c.csv --format markdown --output {out}/r.md", ["c.csv", "r.md"]),
    ("sweep {hostile_wide} --truth-prefix y_ --score-prefix s_ --plot {out}/p --format html "
     "--output {out}/r.html", ["p", "p/sweep_000_script_alert_1_script.png",
                               "p/sweep_001_img_src_x_onerror_alert_1.png", "p/sweep_002_a_b.png",
                               "p/sweep_003_bold__em.png", "r.html"]),
    ("demo --out {out}/d --samples 500 --format markdown --output {out}/r.md --save {out}/r.nc",
     ["d", "d/plankton_predictions.csv", "r.md", "r.nc"]),
]


def assert_inert(path: Path):
    """No hostile label is live markup in the file: Markdown, HTML and JUnit escape it."""
    text = path.read_text(encoding="utf-8")
    if path.suffix == ".xml":
        ET.fromstring(text)  # well-formed, control characters included
    if path.suffix == ".md":
        assert "&lt;script&gt;" in text or "foldcorr score (multilabel)" in text \
            or "alert" not in text
        assert "[link](" not in text and "*bold*" not in text and "\x1b" not in text
    if path.suffix == ".json":
        json.loads(text)
        return
    assert "<script>alert" not in text and "<img src=x" not in text


@pytest.mark.parametrize("line, leaves", OUTPUTS, ids=[line.split()[0] + " " + line.split()[-1]
                                                      for line, _ in OUTPUTS])
def test_hostile_labels_in_every_output_are_data(capsys, inputs, out, line, leaves):
    if "--plot" in line:
        pytest.importorskip("matplotlib")
    code, stdout, stderr = run(capsys, line, inputs, out)
    assert code in (0, 1) and "Traceback" not in stderr, stderr
    assert left_in(out) == sorted(leaves)
    for name in leaves:
        path = out / name
        if path.suffix in (".md", ".html", ".xml", ".json"):
            assert_inert(path)


@pytest.mark.parametrize("verb", ["score {hostile_csv}", "show {hostile_saved}",
                                  "gate {hostile_saved} --min-rk 0.5",
                                  "compare {hostile_csv} --pred-a predicted --pred-b other "
                                  "--resamples 200",
                                  "sweep {hostile_csv} --truth positive --positive "
                                  "'<img src=x onerror=alert(1)>'"])
@pytest.mark.parametrize("fmt", ["text", "markdown", "json", "html"])
def test_hostile_labels_on_stdout(capsys, inputs, out, verb, fmt):
    code, stdout, stderr = run(capsys, f"{verb} --format {fmt}", inputs, out)
    assert code in (0, 1) and "Traceback" not in stderr, stderr
    if fmt in ("markdown", "html"):
        assert "<script>alert" not in stdout and "<img src=x" not in stdout
    if fmt == "json":
        json.loads(stdout)
    assert left_in(out) == []


def full_disk(monkeypatch, *names):
    """Make writing a file whose name ends in one of ``names`` fail as on a full disk."""
    import builtins

    real_open = builtins.open

    def fake_open(file, mode="r", *args, **kwargs):
        handle = real_open(file, mode, *args, **kwargs)
        if "w" in mode and any(name in Path(str(file)).name for name in names):
            handle.close()
            raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))
        return handle

    monkeypatch.setattr(builtins, "open", fake_open)


def fail_netcdf(monkeypatch):
    import xarray as xr

    def no_space(*args, **kwargs):
        raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))

    monkeypatch.setattr(xr.Dataset, "to_netcdf", no_space)


def fail_plots(monkeypatch):
    from matplotlib.figure import Figure

    calls = []

    def no_space(self, *args, **kwargs):
        calls.append(1)
        if len(calls) > 4:  # some plots written, then the disk is full
            raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))
        return real(self, *args, **kwargs)

    real = Figure.savefig
    monkeypatch.setattr(Figure, "savefig", no_space)


#: A full disk on one output of a run with several: (arguments, which write fails, culprit).
FULL_DISK = [
    ("score {csv} --output {out}/r.txt", ("r.txt",), "r.txt"),
    ("score {csv} --format json --output {out}/r.json --save {out}/r.nc", ("r.json",), "r.json"),
    ("score {csv} --format markdown --output {out}/r.md --save {out}/r.nc", "netcdf", "r.nc"),
    ("score {csv} --id id --output {out}/r.txt --save {out}/r.nc", "netcdf", "r.nc"),
    ("demo --out {out} --samples 300 --save {out}/r.nc --output {out}/r.md", "netcdf", "r.nc"),
    ("show {saved} --format html --output {out}/r.html", ("r.html",), "r.html"),
    ("gate {csv} --min-rk 0 --junit {out}/a.xml --markdown {out}/b.md", ("b.md",), "b.md"),
    ("gate {csv} --min-rk 0 --junit {out}/a.xml --markdown {out}/b.md", ("a.xml",), "a.xml"),
    ("gate {csv} --min-rk 0 --junit {out}/a.xml --output {out}/r.txt", ("r.txt",), "r.txt"),
    ("compare {csv} --pred-a predicted --pred-b other --resamples 200 --output {out}/r.txt",
     ("r.txt",), "r.txt"),
    ("sweep {csv} --positive owl --curve {out}/c.csv --output {out}/r.txt", ("r.txt",), "r.txt"),
    ("sweep {csv} --positive owl --curve {out}/c.csv --output {out}/r.txt", ("c.csv",), "c.csv"),
    ("score {csv} --plot {out}/p --output {out}/r.txt", ("r.txt",), "r.txt"),
    ("score {csv} --plot {out}/p --output {out}/r.txt", "plots", "p"),
    ("score {matrix} --matrix --plot {out}/p --save {out}/r.nc", "netcdf", "r.nc"),
]


@pytest.mark.parametrize("line, failing, culprit", FULL_DISK,
                         ids=[f"{line.split()[0]} {culprit}" for line, _, culprit in FULL_DISK])
def test_a_full_disk_leaves_nothing(capsys, monkeypatch, inputs, out, line, failing, culprit):
    if failing == "plots" or "--plot" in line:
        pytest.importorskip("matplotlib")
    if failing == "netcdf":
        fail_netcdf(monkeypatch)
    elif failing == "plots":
        fail_plots(monkeypatch)
    else:
        full_disk(monkeypatch, *failing)
    code, _, stderr = run(capsys, line, inputs, out)
    assert code == 2
    assert_one_line(stderr, culprit)
    assert "No space left on device" in stderr and TEMP_PREFIX not in stderr
    # demo writes its input table first; that is data, not an output of the run
    assert left_in(out) in ([], ["plankton_predictions.csv"])


@pytest.mark.parametrize("error, code, message", [
    (MemoryError(), 2, "out of memory"),
    (KeyboardInterrupt(), 130, "interrupted"),
    (OSError(errno.EIO, "Input/output error"), 2, "Input/output error"),
    (RuntimeError("surprise"), 2, "unexpected RuntimeError: surprise"),
])
def test_failures_at_any_point_are_one_line(capsys, monkeypatch, inputs, out, error, code,
                                            message):
    import foldcorr.report

    def fail(*args, **kwargs):
        raise error

    monkeypatch.setattr(foldcorr.report, "document", fail)
    got, _, stderr = run(capsys, "gate {csv} --min-rk 0 --junit {out}/a.xml --output {out}/r.md",
                         inputs, out)
    assert got == code
    assert_one_line(stderr, message)
    assert left_in(out) == []


def test_stray_temporaries_are_removed_by_the_next_run(capsys, inputs, out):
    old = out / f"{TEMP_PREFIX}dead-r.md"
    young = out / f"{TEMP_PREFIX}live-r.md"
    foreign = out / ".other-tmp"
    for path in (old, young, foreign):
        path.write_text("half")
    os.utime(old, (time.time() - 7200, time.time() - 7200))
    code, _, _ = run(capsys, "score {csv} --output {out}/r.md", inputs, out)
    assert code == 0
    assert left_in(out) == sorted([young.name, foreign.name, "r.md"])


def test_plots_are_not_left_when_the_report_fails(capsys, monkeypatch, inputs, out):
    pytest.importorskip("matplotlib")
    full_disk(monkeypatch, "r.md")
    code, _, stderr = run(capsys, "score {csv} --plot {out}/p --output {out}/r.md", inputs, out)
    assert code == 2 and stderr.count("\n") == 1 and "plot files" not in stderr
    assert left_in(out) == []


# ---- a handful in a subprocess: signals and real devices ----

#: What the installed ``foldcorr`` command runs.
COMMAND = [sys.executable, "-c", "from foldcorr.cli import run; run()"]


def entry(*argv, **kwargs):
    env = {**os.environ, "NO_COLOR": "1"}
    return subprocess.Popen([*COMMAND, *map(str, argv)],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, env=env,
                            **kwargs)


@pytest.mark.skipif(not os.path.exists("/dev/full"), reason="needs /dev/full")
@pytest.mark.parametrize("option", ["--output", "--markdown", "--junit", "stdout"])
def test_dev_full(inputs, out, option):
    args = ["gate", inputs["csv"], "--min-rk", "0", "--junit", out / "a.xml"]
    if option == "stdout":
        with open("/dev/full", "w") as full:
            proc = subprocess.run([*COMMAND, *map(str, args),
                                   "--format", "json"], stdout=full, stderr=subprocess.PIPE,
                                  text=True)
    else:
        if option == "--junit":
            args = args[:-2]
        proc = subprocess.run([*COMMAND, *map(str, args), option,
                               "/dev/full"], capture_output=True, text=True)
    assert proc.returncode == 2
    assert_one_line(proc.stderr, "No space left on device")
    if option != "stdout":
        assert "/dev/full" in proc.stderr
        assert left_in(out) == []


@pytest.mark.parametrize("sig", [signal.SIGINT, signal.SIGTERM])
def test_interrupt_exits_130_without_traceback_or_files(tmp_path, sig):
    out = tmp_path / "out"
    out.mkdir()
    proc = entry("demo", "--out", tmp_path / "d", "--samples", "3000", "--ci", "0.95",
                 "--resamples", "200000", "--output", out / "r.md", "--save", out / "r.nc")
    deadline = time.time() + 60
    while not (tmp_path / "d" / "plankton_predictions.csv").exists() and time.time() < deadline:
        time.sleep(0.05)
    time.sleep(0.5)  # well inside the resampling
    proc.send_signal(sig)
    _, stderr = proc.communicate(timeout=60)
    assert proc.returncode == 130
    assert "Traceback" not in stderr
    assert stderr.strip().splitlines()[-1] == "foldcorr: interrupted; no output was written"
    assert left_in(out) == []


def test_demo_memory_is_estimated_before_allocating(capsys, monkeypatch, inputs, out):
    import foldcorr.cli.verbs as verbs

    monkeypatch.setattr(verbs, "available_memory", lambda: 10**6)
    code, _, stderr = run(capsys, "demo --out {out}/d --samples 5000", inputs, out)
    assert code == 2
    assert_one_line(stderr, "`--samples` 5,000 needs about 0.0 GiB of memory, but only")
    assert left_in(out) == []


def test_deeply_nested_json_lines(tmp_path):
    # refused before pyarrow's parser sees the line (its stack would overflow)
    path = tmp_path / "deep.jsonl"
    path.write_text('{"actual": ' + "[" * 100000 + "]" * 100000 + ', "predicted": "x"}\n')
    proc = subprocess.run([*COMMAND, "score", str(path)], capture_output=True, text=True,
                          timeout=120)
    assert proc.returncode == 2
    assert_one_line(proc.stderr, "deep.jsonl")
