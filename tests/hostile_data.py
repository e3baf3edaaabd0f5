"""Input files for the hostile-input suite (tests/test_hostile.py): good ones and bad ones."""

import json

import numpy as np
import pandas as pd

#: Class names that are markup, escapes or syntax in some output format.
HOSTILE = ["<script>alert(1)</script>", "<img src=x onerror=alert(1)>", "a|b", "*bold* _em_",
           "`tick` [link](http://x)", "$\\frac{1}{0}$", "&amp; <b>", "[red]rich[/red] [/x]",
           "line\nbreak\ttab", "\x1b[31mred\x07", "#heading", "~~gone~~ !"]


def _labels(rng, classes, n):
    actual = rng.choice(classes, size=n)
    wrong = rng.random(n) < 0.3
    predicted = np.where(wrong, rng.choice(classes, size=n), actual)
    return actual, predicted


def make_inputs(folder):
    """Write every input the suite uses into ``folder``; return {name: path}."""
    from foldcorr.cli import main

    rng = np.random.default_rng(12)
    n = 300
    files = {}
    actual, predicted = _labels(rng, ["owl", "wren", "kite"], n)
    good = pd.DataFrame({"id": [f"s{i}" for i in range(n)], "actual": actual,
                         "predicted": predicted, "other": np.roll(predicted, 7),
                         "fold": np.arange(n) % 3, "score": rng.random(n) + (actual == "owl"),
                         "w": rng.random(n)})
    good["y_owl"] = (good.actual == "owl").astype(int)
    good["p_owl"] = (good.predicted == "owl").astype(int)
    files["csv"] = folder / "good.csv"
    good.to_csv(files["csv"], index=False)
    files["parquet"] = folder / "good.parquet"
    good.to_parquet(files["parquet"], index=False)
    files["jsonl"] = folder / "good.jsonl"
    good.to_json(files["jsonl"], orient="records", lines=True)
    files["matrix"] = folder / "matrix.csv"
    files["matrix"].write_text(",owl,wren,kite\nowl,30,2,1\nwren,3,25,4\nkite,0,5,20\n")
    a, p = _labels(rng, HOSTILE, n)
    hostile = pd.DataFrame({"id": range(n), "actual": a, "predicted": p, "other": np.roll(p, 3),
                            "fold": np.arange(n) % 2, "score": rng.random(n),
                            "positive": np.where(rng.random(n) < 0.4, HOSTILE[0], HOSTILE[1])})
    files["hostile_csv"] = folder / "hostile.csv"
    hostile.to_csv(files["hostile_csv"], index=False)
    files["hostile_parquet"] = folder / "hostile.parquet"
    hostile.to_parquet(files["hostile_parquet"], index=False)
    wide = pd.DataFrame({f"y_{lab}": rng.integers(0, 2, n) for lab in HOSTILE[:4]})
    for lab in HOSTILE[:4]:
        wide[f"s_{lab}"] = rng.random(n) + wide[f"y_{lab}"]
        wide[f"p_{lab}"] = (wide[f"s_{lab}"] > 0.8).astype(int)
    files["hostile_wide"] = folder / "hostile_wide.csv"
    wide.to_csv(files["hostile_wide"], index=False)
    for name, source, extra in (("saved", files["csv"], ["--id", "id"]),
                                ("hostile_saved", files["hostile_csv"], []),
                                ("matrix_saved", files["matrix"], ["--matrix"])):
        files[name] = folder / f"{name}.nc"
        assert main(["score", str(source), "--save", str(files[name]), "--quiet", "--format",
                     "json", "--output", str(folder / f"{name}.json"), *extra]) == 0
    (folder / "saved.json").unlink()
    (folder / "hostile_saved.json").unlink()
    (folder / "matrix_saved.json").unlink()
    return files


def write_bad(folder, name: str, text, *, binary: bool = False):
    """Write one bad input file and return its path."""
    path = folder / name
    if binary:
        path.write_bytes(text)
    else:
        path.write_text(text, encoding="utf-8")
    return path


def rewrite_saved(source, target, change):
    """Copy a saved evaluation to ``target`` after ``change(dataset)`` (returns the new one)."""
    import xarray as xr

    with xr.open_dataset(source, engine="h5netcdf") as opened:
        ds = opened.load()
    ds = change(ds)
    ds.to_netcdf(target, engine="h5netcdf", format="NETCDF4")
    return target


def with_attr(**attrs):
    def change(ds):
        ds.attrs.update(attrs)
        return ds
    return change


def json_attr(value):
    return with_attr(options=json.dumps(value))


#: Bad tables and counts matrices: file name -> content (bytes, text, or None: a truncated copy).
BAD_FILES = {
    "empty.csv": "", "header.csv": "actual,predicted\n", "nocol.csv": "a,b\n1,2\n",
    "missing.csv": "actual,predicted\nx,\ny,y\n", "garbage.csv": b"\x00\x01\xff\xfe" * 50,
    "latin.csv": b"actual,predicted\n\xe9t\xe9,x\n", "semicolon.csv": "actual;predicted\nx;y\n",
    "negw.csv": "actual,predicted,w\nx,x,-1\ny,y,1\n",
    "nanw.csv": "actual,predicted,w\nx,x,nan\ny,y,1\n",
    "textw.csv": "actual,predicted,w\nx,x,heavy\n", "quote.csv": 'actual,predicted\n"x,y\n',
    "dupcol.csv": "actual,actual,predicted\nx,x,y\n",
    "fake.parquet": "actual,predicted\nx,y\n", "trunc.parquet": None,
    "bad.jsonl": '{"actual": "x", "predicted": "y"}\n{oops\n', "array.jsonl": "[1, 2]\n[3, 4]\n",
    "nokeys.jsonl": '{"a": 1}\n', "nested.jsonl": '{"actual": {"x": 1}, "predicted": [1]}\n',
    "mnonsq.csv": ",a,b\na,1,2\n", "mneg.csv": ",a,b\na,1,-2\nb,0,3\n",
    "mtext.csv": ",a,b\na,1,x\nb,0,3\n", "mnan.csv": ",a,b\na,1,\nb,0,3\n", "mempty.csv": "",
    "mfloat.csv": ",a,b\na,1.5,2\nb,0,3\n", "mbig.csv": ",a,b\na,1e400,2\nb,0,3\n",
    "mdup.csv": ",a,a\na,1,2\na,0,3\n", "text.nc": "not a netcdf file\n", "trunc.nc": None,
    "floors.csv": "class,floor\nowl,1.5\n", "prevalence.csv": "class,share\nowl,-1\n",
}


def _saved_changes():
    import xarray as xr

    return {
        "opt_list.nc": json_attr([1, 2]), "opt_num.nc": json_attr(3),
        "opt_null.nc": json_attr(None), "opt_str.nc": json_attr("x"),
        "opt_bad.nc": with_attr(options="{nope"), "opt_int.nc": with_attr(options=5),
        "schema2.nc": with_attr(schema="foldcorr.saved/9"),
        "noschema.nc": lambda ds: ds.assign_attrs(schema="").drop_attrs()
        if hasattr(ds, "drop_attrs") else xr.Dataset(ds.data_vars, coords=ds.coords),
        "fold_oob.nc": lambda ds: ds.assign(sample_fold=ds.sample_fold + 10),
        "act_oob.nc": lambda ds: ds.assign(sample_actual=ds.sample_actual * 0 - 1),
        "pred_oob.nc": lambda ds: ds.assign(sample_predicted=ds.sample_predicted + 99),
        "codes_float.nc": lambda ds: ds.assign(sample_actual=ds.sample_actual + 0.5),
        "no_pred.nc": lambda ds: ds.drop_vars("sample_predicted"),
        "count_str.nc": lambda ds: ds.assign(count=ds["count"].astype(str)),
        "count_neg.nc": lambda ds: ds.assign(count=-ds["count"]),
        "count_nan.nc": lambda ds: ds.assign(count=ds["count"].astype(float) * np.nan),
        "count_dims.nc": lambda ds: ds.rename({"fold": "split"}),
        "count_1d.nc": lambda ds: xr.Dataset({"count": ("actual", [1, 2, 3])}, attrs=ds.attrs),
        "dup_class.nc": lambda ds: ds.assign_coords(actual=["owl", "owl", "wren"],
                                                    predicted=["owl", "owl", "wren"]),
        "nocount.nc": lambda ds: ds.drop_vars("count"),
        "count_bool.nc": lambda ds: ds.assign(count=ds["count"] > 0),
        "fold_no_dim.nc": lambda ds: ds.sum("fold", keep_attrs=True).assign(
            sample_fold=ds.sample_fold),
    }


def make_bad(folder, files):
    """Write :data:`BAD_FILES` and the broken copies of the saved evaluation; add their paths."""
    for name, content in BAD_FILES.items():
        path = folder / name
        if content is None:
            source = files["parquet"] if name.endswith(".parquet") else files["saved"]
            path.write_bytes(source.read_bytes()[:300])
        elif isinstance(content, bytes):
            path.write_bytes(content)
        else:
            path.write_text(content, encoding="utf-8")
        files[name] = path
    for name, change in _saved_changes().items():
        files[name] = rewrite_saved(files["saved"], folder / name, change)
    return files
