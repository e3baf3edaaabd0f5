"""The HTML report: self-contained, same figures as the JSON, sortable in a real browser."""

import json
import shutil
import struct
import subprocess
from html.parser import HTMLParser

import numpy as np
import pandas as pd
import pytest

from foldcorr.cli import main
from foldcorr.report.tables import format_value

CHROMIUM_FLAGS = ["--headless", "--no-sandbox", "--disable-gpu",
                  "--disable-background-networking", "--disable-component-update",
                  "--disable-sync", "--no-first-run", "--hide-scrollbars"]


def chromium():
    for name in ("chromium", "chromium-browser"):
        found = shutil.which(name)
        if found:
            return found
    return None


needs_chromium = pytest.mark.skipif(chromium() is None, reason="no chromium on this machine")


@pytest.fixture(scope="module")
def report(tmp_path_factory):
    folder = tmp_path_factory.mktemp("html")
    rng = np.random.default_rng(8)
    names = ["wren", "robin", "owl", "heron", "kite", "rail", "snipe"]
    y = rng.choice(names, 900, p=[0.3, 0.2, 0.15, 0.12, 0.1, 0.08, 0.05])
    p = np.where(rng.random(900) < 0.7, y, rng.choice(names, 900))
    path = folder / "calls.csv"
    pd.DataFrame({"actual": y, "predicted": p, "fold": np.arange(900) % 3 + 1}).to_csv(
        path, index=False)
    html_path, json_path = folder / "report.html", folder / "report.json"
    assert main(["score", str(path), "--top", "all", "--format", "html",
                 "--output", str(html_path)]) == 0
    assert main(["score", str(path), "--format", "json", "--output", str(json_path)]) == 0
    return html_path, json.loads(json_path.read_text())


def figures(doc):
    """Figures of the JSON output as the report prints them (three decimals)."""
    out = [format_value(doc["pooled"][k], "metric") for k in ("rk", "accuracy", "kappa")]
    out += [format_value(f["rk"], "metric") for f in doc["folds"]]
    out += [format_value(c["mcc"], "metric") for c in doc["per_class"]]
    return out


class Resources(HTMLParser):
    def __init__(self):
        super().__init__()
        self.external, self.tags, self.text = [], [], []

    def handle_starttag(self, tag, attrs):
        self.tags.append(tag)
        for name, value in attrs:
            # Links inside the inline SVG, and images embedded in it, are not fetches.
            local = value is not None and value.startswith(("#", "data:"))
            if name in ("src", "href", "xlink:href", "srcset", "action", "data", "poster") \
                    and value and not local:
                self.external.append((tag, name, value))

    def handle_data(self, data):
        self.text.append(data)


def test_self_contained(report):
    path, _ = report
    page = path.read_text()
    parser = Resources()
    parser.feed(page)
    # Nothing is loaded from anywhere: no src/href attributes at all, no <link>, no @import.
    assert parser.external == []
    assert "link" not in parser.tags and "@import" not in page
    assert page.count("url(") == page.count("url(#")
    assert parser.tags.count("script") == 1  # our sort script; inline SVG may bring <style>


def test_same_figures_as_json(report):
    path, doc = report
    parser = Resources()
    parser.feed(path.read_text())
    text = " ".join(parser.text)
    for figure in figures(doc):
        assert figure in text
    for row in doc["per_class"]:
        assert row["class"] in text


def png_size(data: bytes):
    assert data[:8] == b"\x89PNG\r\n\x1a\n"
    return struct.unpack(">II", data[16:24])


@needs_chromium
def test_chromium_renders_and_screenshots(report, tmp_path):
    path, doc = report
    shot = tmp_path / "report.png"
    run = [chromium(), *CHROMIUM_FLAGS, f"--user-data-dir={tmp_path / 'profile'}"]
    subprocess.run([*run, "--window-size=1280,1600", f"--screenshot={shot}", path.as_uri()],
                   capture_output=True, timeout=120, check=True)
    width, height = png_size(shot.read_bytes())
    assert (width, height) == (1280, 1600)
    assert shot.stat().st_size > 20_000  # a blank page compresses to a few hundred bytes
    dom = subprocess.run([*run, "--dump-dom", path.as_uri()], capture_output=True, text=True,
                         timeout=120, check=True).stdout
    assert "Classes by shortfall share" in dom
    for figure in figures(doc):
        assert figure in dom


@needs_chromium
def test_sorting_a_column_reorders_rows(report, tmp_path):
    sync_api = pytest.importorskip("playwright.sync_api")
    path, doc = report
    mcc = {row["class"]: row["mcc"] for row in doc["per_class"]}
    with sync_api.sync_playwright() as pw:
        browser = pw.chromium.launch_persistent_context(
            str(tmp_path / "profile"), executable_path=chromium(), headless=True,
            args=[f for f in CHROMIUM_FLAGS if f != "--headless"])
        try:
            page = browser.new_page()
            page.goto(path.as_uri())
            table = page.locator("#classes-by-shortfall-share-table")

            def first_column():
                return table.locator("tbody tr td:first-child").all_inner_texts()

            by_drag = first_column()
            assert by_drag == [row["class"] for row in doc["per_class"]]
            header = table.locator("thead th", has_text="MCC").first
            header.locator("button").click()
            ascending = first_column()
            assert ascending == sorted(mcc, key=lambda c: mcc[c])
            assert ascending != by_drag
            assert header.get_attribute("aria-sort") == "ascending"
            header.locator("button").click()
            assert first_column() == sorted(mcc, key=lambda c: -mcc[c])
            table.locator("thead th", has_text="class").first.locator("button").click()
            assert first_column() == sorted(mcc, key=str.lower)
            page.screenshot(path=str(tmp_path / "sorted.png"), full_page=True)
        finally:
            browser.close()


def _page(tmp_path, argv=()):
    path = tmp_path / "calls.csv"
    rng = np.random.default_rng(2)
    y = rng.choice(["a", "b", "c"], 200)
    pd.DataFrame({"actual": y, "predicted": np.where(rng.random(200) < 0.8, y, "a"),
                  "fold": np.arange(200) % 2}).to_csv(path, index=False)
    out = tmp_path / "r.html"
    assert main(["score", str(path), "--format", "html", "--output", str(out), *argv]) == 0
    return out.read_text()


def test_plots_inline_as_svg(tmp_path):
    pytest.importorskip("foldcorr.report.plots")
    pytest.importorskip("matplotlib")
    page = _page(tmp_path)
    body = page.split('<section id="plots">')[1]
    # loss budget, heatmap, R_K per fold, class by fold
    assert body.count("<figure><svg") == 4
    assert "<?xml" not in page and "<!DOCTYPE svg" not in page


def test_plots_need_the_plot_extra(tmp_path, monkeypatch):
    pytest.importorskip("foldcorr.report.plots")
    import importlib.util

    real = importlib.util.find_spec
    monkeypatch.setattr(importlib.util, "find_spec",
                        lambda name, *a: None if name == "matplotlib" else real(name, *a))
    page = _page(tmp_path)
    assert "The plots need matplotlib, from the plot extra" in page
    assert "<svg" not in page


def test_every_report_renders_as_html(tmp_path):
    # Reports other than score (multilabel, sweep) go through the same renderer.
    path = tmp_path / "tags.csv"
    path.write_text("gull,tern,p_gull,p_tern\n1,0,1,0\n0,1,0,1\n1,1,1,0\n0,0,0,0\n1,0,0,0\n")
    out = tmp_path / "tags.html"
    assert main(["score", str(path), "--truth-cols", "gull,tern", "--pred-cols",
                 "p_gull,p_tern", "--format", "html", "--output", str(out)]) == 0
    parser = Resources()
    parser.feed(out.read_text())
    assert parser.external == [] and parser.tags.count("table") >= 1
    assert "gull" in " ".join(parser.text)


@needs_chromium
def test_filter_box_finds_a_class_and_the_header_stays(report, tmp_path):
    # Issue 14: every class is on the page, a long table filters by the text typed (class names
    # searchable) and its header row is sticky.
    sync_api = pytest.importorskip("playwright.sync_api")
    path, doc = report
    with sync_api.sync_playwright() as pw:
        browser = pw.chromium.launch_persistent_context(
            str(tmp_path / "profile"), executable_path=chromium(), headless=True,
            args=[f for f in CHROMIUM_FLAGS if f != "--headless"])
        try:
            page = browser.new_page()
            page.goto(path.as_uri())
            rows = page.locator("#classes-by-shortfall-share-table tbody tr")
            assert rows.count() == len(doc["per_class"])
            page.locator('input.filter[data-table="classes-by-shortfall-share-table"]').fill("sni")
            visible = [r for r in rows.all() if r.is_visible()]
            assert [r.locator("td").first.inner_text() for r in visible] == ["snipe"]
            header = page.locator("#classes-by-shortfall-share-table thead th").first
            assert header.evaluate("th => getComputedStyle(th).position") == "sticky"
            assert page.locator("#colour-scale").is_visible()
        finally:
            browser.close()
