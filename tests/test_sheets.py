"""Tests for atlas.sheets: threshold tables, rule audits, the PDF sheet and the wiki page."""

import csv
import html.parser
import io
import json
import os
import re
import shutil
import subprocess
import xml.etree.ElementTree as ET
from pathlib import Path

import matplotlib

matplotlib.use("Agg")

import matplotlib.image as mpimg  # noqa: E402
import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402
import pytest  # noqa: E402
from numpy.testing import assert_allclose  # noqa: E402

from atlas import build_atlas, cube, sheets  # noqa: E402
from atlas.cli import main  # noqa: E402
from atlas.engine import worst_error  # noqa: E402
from atlas.rules import CLASSIC_RULES, NP5  # noqa: E402

TOLS = (0.01, 0.005, 0.001)
PS = (0.01, 0.05, 0.1, 0.3, 0.5)  # all on the chart atlas's p axis


@pytest.fixture(autouse=True)
def _close_figures():
    yield
    plt.close("all")


# ---- threshold tables ----


def test_table_is_the_query_api(chart_atlas):
    table = sheets.threshold_table(chart_atlas, TOLS, PS, method="edgeworth_cc", metric="cdf")
    assert table.tols == TOLS and table.ps == PS
    for p, row in zip(PS, table.min_n, strict=True):
        for tol, value in zip(TOLS, row, strict=True):
            assert value == chart_atlas.min_n(p, tol, method="edgeworth_cc", metric="cdf")
    assert table.n_max == 100000 and table.dense_n == 30  # the chart atlas's grid


@pytest.mark.parametrize("method", ["normal_cc", "poisson"])
def test_table_against_the_cube(chart_atlas, method):
    # Brute force over the stored errors: n* is on the grid, every grid n from n* on is within
    # tol and the grid n before it is not; None when the largest n fails.
    table = sheets.threshold_table(chart_atlas, TOLS, PS, method=method)
    ds = chart_atlas.dataset
    n = ds["n"].values
    for p, row in zip(PS, table.min_n, strict=True):
        column = ds["interval_error"].sel({"method": method, "p": p}).values
        for tol, value in zip(TOLS, row, strict=True):
            if value is None:
                assert column[-1] > tol
                continue
            i = int(np.flatnonzero(n == value)[0])
            assert (column[i:] <= tol).all()
            assert i == 0 or column[i - 1] > tol


def test_table_at_one_half_from_the_engine(chart_atlas):
    table = sheets.threshold_table(chart_atlas, [0.01], [0.5])
    (n_star,) = table.min_n[0]
    # REFERENCES.md fact 1 (common teaching fact): W(n, 1/2) <= 0.01 for every n >= 10.
    assert n_star <= 10
    # Within the dense part of the grid (every n to 30) n* is exact: the engine, not the cube.
    errors = worst_error(np.arange(1, 31), 0.5, method="normal_cc")
    assert (errors[n_star - 1 :] <= 0.01).all() and errors[n_star - 2] > 0.01


def test_table_formats(chart_atlas):
    table = sheets.threshold_table(chart_atlas, TOLS + (1e-4,), PS, method="poisson")
    rows = list(csv.reader(io.StringIO(table.to_csv())))
    assert rows[0] == ["p", "tol=0.01", "tol=0.005", "tol=0.001", "tol=0.0001"]
    for line, p, values in zip(rows[1:], PS, table.min_n, strict=True):
        assert float(line[0]) == p
        assert line[1:] == ["" if v is None else str(v) for v in values]
    assert any(v is None for row in table.min_n for v in row)  # Poisson never reaches 1e-4 here
    record = json.loads(table.to_json())
    assert record["min_n"] == [list(r) for r in table.min_n]
    assert record["method"] == "poisson" and record["metric"] == "interval"
    assert record["tols"] == list(TOLS) + [1e-4] and record["n_max"] == 100000
    markdown = table.to_markdown()
    assert markdown.startswith("### Minimum n for poisson, interval error\n")
    assert "| p | tol 0.01 | tol 0.005 | tol 0.001 | tol 1e-4 |" in markdown
    assert "> 10⁵" in markdown  # None: not reached on a grid that ends at 10^5
    assert "†: beyond n = 30 only the grid's n are checked" in markdown
    for value in (v for row in table.min_n for v in row if v is not None):
        assert f"{value:,}" + (" †" if value > 30 else "") in markdown
    assert table.render("md") == markdown
    with pytest.raises(ValueError, match=r"^`format` must be one of 'csv', 'md', 'json'; got "
                                         r"'xml'\.$"):  # fmt: skip
        table.render("xml")


def test_table_refuses(chart_atlas):
    with pytest.raises(ValueError, match=r"^`tols` must hold numbers in \(0, 1\); got 1\.5\.$"):
        sheets.threshold_table(chart_atlas, [0.01, 1.5], PS)
    with pytest.raises(ValueError, match=r"^`ps` must hold at least one number"):
        sheets.threshold_table(chart_atlas, TOLS, [])
    with pytest.raises(ValueError, match=r"^`metric` must be one of 'interval', 'cdf'"):
        sheets.threshold_table(chart_atlas, TOLS, PS, metric="tail")
    with pytest.raises(ValueError, match=r"^`method` must be one of "):
        sheets.threshold_table(chart_atlas, TOLS, PS, method="bogus")


# ---- rule audits ----


def _brute_masks(n, p):
    """The classic rules written out directly in numpy, with the decimal boundaries kept."""
    q = 1.0 - p
    slack = 1e-9  # grid products on a boundary are within 1e-15 of it, others far from it
    return {
        CLASSIC_RULES[0]: (n * p >= 5 - slack) & (n * q >= 5 - slack),
        CLASSIC_RULES[1]: (n * p >= 10 - slack) & (n * q >= 10 - slack),
        CLASSIC_RULES[2]: n * p * q > 9 + slack,
        CLASSIC_RULES[3]: n * p * q >= 5 - slack,
        "n*p*q >= 25 or n > 50000": (n * p * q >= 25 - slack) | (n > 50000),
    }


def test_audit_against_brute_force(chart_atlas):
    ds = chart_atlas.dataset
    n = ds["n"].values.astype(float)[:, None]
    p = ds["p"].values[None, :]
    masks = _brute_masks(n, p)
    # The slack is safe only if no product lies between 1e-12 and 1e-9 of a boundary.
    for value in (n * p, n * (1 - p), n * p * (1 - p)):
        for c in (5, 9, 10, 25):
            gap = np.abs(value - c) / c
            assert not ((gap > 1e-12) & (gap < 1e-9)).any()
    audit = sheets.rule_audit(chart_atlas, list(masks), tols=TOLS)
    assert len(audit.rows) == len(masks) * 3 * 2
    assert audit.grid_cells == n.size * p.size
    for row in audit.rows:
        mask = np.broadcast_to(masks[row.rule], (n.size, p.size))
        values = ds[f"{row.metric}_error"].sel({"method": row.method}).values
        inside = values[mask]
        assert row.cells == inside.size > 0
        assert row.worst_error == inside.max()
        i, j = np.argwhere(mask & (values == inside.max()))[0]
        assert (row.worst_n, row.worst_p) == (int(n[i, 0]), float(p[0, j]))
        assert_allclose(row.shares, [np.mean(inside <= t) for t in TOLS], rtol=0, atol=0)
    assert [r.name for r in audit.rows[:6]] == ["np >= 5 and nq >= 5"] * 6


def test_audit_known_value():
    ds = build_atlas(n="9,10,20,40", p="0.5", methods="normal_cc", progress=False)
    (row,) = sheets.rule_audit(ds, [NP5], metrics="interval").rows
    assert (row.cells, row.worst_n, row.worst_p) == (3, 10, 0.5)  # n = 9 fails np >= 5
    assert_allclose(row.worst_error, 0.005372, atol=5e-7)  # W(10, 1/2), REFERENCES.md fact 1
    assert row.shares == (1.0, 2 / 3, 0.0)  # W(20, 1/2) = 0.002782 (REFERENCES.md); W(40) > 1e-3


def test_audit_of_an_empty_region(chart_atlas):
    audit = sheets.rule_audit(chart_atlas, ["n > 1e9"], methods=["poisson"], metrics=["cdf"])
    (row,) = audit.rows
    assert (row.cells, row.worst_error, row.worst_n, row.worst_p) == (0, None, None, None)
    assert row.shares == (None, None, None)
    assert "| n > 1e9 | poisson | cdf | 0 | — | — | — | — | — | — |" in audit.to_markdown()
    record = json.loads(audit.to_json())
    assert record["rows"][0]["worst_error"] is None
    assert record["rows"][0]["share_within"] == {"0.01": None, "0.005": None, "0.001": None}


def test_audit_formats(chart_atlas):
    audit = sheets.rule_audit(chart_atlas, methods=["normal_cc"], metrics=["interval"])
    markdown = audit.render("md")
    assert markdown.startswith("### Rules of thumb: the worst error each admits\n")
    assert ("| rule | method | metric | cells | worst error | at n | at p | ≤ 0.01 | ≤ 0.005 | "
            "≤ 0.001 |") in markdown  # fmt: skip
    for row in audit.rows:
        assert f"| {row.name} | normal_cc | interval | {row.cells:,} | {row.worst_error:.3g} |" in (
            markdown
        )
    record = json.loads(audit.render("json"))
    assert [r["rule"] for r in record["rows"]] == list(CLASSIC_RULES)
    assert record["rows"][2]["name"] == "npq > 9"
    assert record["rows"][0]["worst_error"] == audit.rows[0].worst_error
    with pytest.raises(ValueError, match=r"^`format` must be one of 'md', 'json'; got 'csv'\.$"):
        audit.render("csv")


def test_audit_refuses(chart_atlas):
    with pytest.raises(ValueError, match=r"^`rule` may not contain a function call"):
        sheets.rule_audit(chart_atlas, ["abs(n) > 1"])
    with pytest.raises(ValueError, match=r"^`rules` must hold at least one rule"):
        sheets.rule_audit(chart_atlas, [])
    with pytest.raises(ValueError, match=r"^`methods` must be one of 'normal_cc', "):
        sheets.rule_audit(chart_atlas, methods=["normal"])
    with pytest.raises(ValueError, match=r"^`metric` must be one of"):
        sheets.rule_audit(chart_atlas, metrics=["pdf"])
    with pytest.raises(ValueError, match=r"^`tols` must hold numbers in \(0, 1\); got 0\.0\.$"):
        sheets.rule_audit(chart_atlas, tols=[0])


# ---- the PDF sheet ----


def _pdf_page_count(data):
    # Page objects (/Type /Page), not the page tree (/Type /Pages).
    return len(re.findall(rb"/Type\s*/Page(?![s\w])", data))


def test_sheet_pages(chart_atlas):
    pages = sheets.sheet_figures(chart_atlas)
    titles = [next(t.get_text() for t in fig.texts if t.get_gid() == "title") for fig in pages]
    assert titles == [
        "Worst-case error of interval probabilities: normal_cc",
        "Worst-case error of interval probabilities: edgeworth_cc",
        "Minimum n for each tolerance",
        "Rules of thumb: the worst error each admits",
        "Definitions",
        "Provenance and caution",
    ]
    for k, fig in enumerate(pages, start=1):
        texts = {t.get_gid(): t.get_text() for t in fig.texts if t.get_gid()}
        assert texts["page-number"] == f"page {k} of 6"
        assert " ".join(cube.CAUTION.split()) in " ".join(texts["footer"].split())
    last = " ".join(t.get_text() for t in pages[-1].texts)
    assert chart_atlas.dataset.attrs["checksum"] in last and "chart.nc" in last
    definitions = " ".join(t.get_text() for t in pages[4].texts)
    assert "max over 0 ≤ a ≤ b ≤ n of |P(a ≤ X ≤ b) − (G(b) − G(a − 1))|" in definitions
    assert "max over 0 ≤ k ≤ n of |F(k) − G(k)|" in definitions
    # The tables page holds the four tables (two methods, two metrics) with the query's values.
    cells = {t.get_text() for ax in pages[2].axes for t in ax.texts} | {
        c.get_text().get_text() for ax in pages[2].axes for tab in ax.tables
        for c in tab.get_celld().values()}  # fmt: skip
    for method in ("normal_cc", "edgeworth_cc"):
        value = chart_atlas.min_n(0.3, 0.01, method=method, metric="cdf")
        assert f"{value:,}" + (" †" if value > 30 else "") in cells


def test_write_sheet(chart_atlas, tmp_path):
    path = sheets.write_sheet(chart_atlas, tmp_path / "sheet.pdf")
    data = path.read_bytes()
    assert data.startswith(b"%PDF-") and b"%%EOF" in data[-64:]
    assert _pdf_page_count(data) == 6
    assert os.listdir(tmp_path) == ["sheet.pdf"]
    with pytest.raises(ValueError, match=r"^`path` must end in '\.pdf'; got '.*sheet\.png'\.$"):
        sheets.write_sheet(chart_atlas, tmp_path / "sheet.png")
    with pytest.raises(FileNotFoundError, match=r"^`path` is in a directory that does not"):
        sheets.write_sheet(chart_atlas, tmp_path / "no" / "sheet.pdf")


# ---- the wiki page ----


@pytest.fixture(scope="module")
def wiki(chart_atlas, tmp_path_factory):
    folder = tmp_path_factory.mktemp("wiki") / "page"
    written = sheets.write_wiki(chart_atlas, folder)
    return folder, written


class _Links(html.parser.HTMLParser):
    def __init__(self):
        super().__init__()
        self.tags, self.images, self.links = [], [], []

    def handle_starttag(self, tag, attrs):
        attrs = dict(attrs)
        self.tags.append(tag)
        if tag == "img":
            self.images.append(attrs.get("src"))
        for key in ("href", "src", "srcset", "action", "data"):
            if key in attrs:
                self.links.append(attrs[key])


def _is_local(link):
    return not re.match(r"^([a-z][a-z0-9+.-]*:|//|/)", link, re.IGNORECASE)


def test_wiki_files(wiki, chart_atlas):
    folder, written = wiki
    names = sorted(p.name for p in written)
    assert names == sorted(["map_normal_cc_interval.svg", "map_edgeworth_cc_interval.svg",
                            "compare_normal_cc_edgeworth_cc_interval.svg",
                            "gain_edgeworth_cc_over_normal_cc_interval.svg", "best_interval.svg",
                            "index.md", "index.html"])  # fmt: skip
    assert sorted(os.listdir(folder)) == names  # nothing else, no temporary file


def test_wiki_html_opens_offline(wiki):
    folder, _ = wiki
    page = (folder / "index.html").read_text(encoding="utf-8")
    parser = _Links()
    parser.feed(page)
    assert "script" not in parser.tags and "iframe" not in parser.tags
    assert "http://" not in page and "https://" not in page and "url(" not in page
    assert len(parser.images) == 5
    for link in parser.links:
        assert _is_local(link), link
        assert (folder / link).is_file(), link
    for src in parser.images:
        root = ET.parse(folder / src).getroot()  # valid XML
        assert root.tag == "{http://www.w3.org/2000/svg}svg"
        refs = [v for el in root.iter() for k, v in el.attrib.items() if k.endswith("href")]
        assert all(r.startswith(("data:", "#")) for r in refs)  # embedded or internal only
    assert " ".join(cube.CAUTION.split()) in " ".join(page.split())
    assert "Minimum n for normal_cc, interval error" in page
    assert "np &gt;= 5 and nq &gt;= 5" in page and "npq &gt; 9" in page


def test_wiki_markdown(wiki):
    folder, _ = wiki
    text = (folder / "index.md").read_text(encoding="utf-8")
    images = re.findall(r"!\[[^\]]*\]\(([^)]+)\)", text)
    assert len(images) == 5 and all(_is_local(i) and (folder / i).is_file() for i in images)
    assert "http" not in text and "](/" not in text  # no links out of the page
    assert cube.CAUTION in text
    assert "| p | tol 0.01 | tol 0.005 | tol 0.001 | tol 1e-4 |" in text
    assert "| np >= 5 and nq >= 5 | normal_cc | interval |" in text


def _chromium():
    found = shutil.which("chromium") or (
        "/usr/bin/chromium" if os.path.exists("/usr/bin/chromium") else None
    )
    if found is None:
        if os.environ.get("CI"):
            pytest.fail("Chromium is required in CI (.ci/run installs Debian's chromium)")
        pytest.skip("Chromium is not installed (/usr/bin/chromium); .ci/run installs it in CI")
    return found


_FLAGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-background-networking",
          "--disable-component-update", "--disable-sync", "--no-first-run",
          "--disable-default-apps", "--mute-audio"]  # fmt: skip

# A test-only page (never part of the wiki) that loads the wiki in a frame and reports, once
# everything has loaded, each image's state. Chromium lets a file:// page read a file:// frame
# only with --allow-file-access-from-files.
_HARNESS = """<!DOCTYPE html><html><head><meta charset="utf-8"></head><body>
<iframe id="good" src="{good}" style="width:1200px;height:900px"></iframe>
<iframe id="broken" src="{broken}" style="width:1200px;height:900px"></iframe>
<pre id="report">pending</pre>
<script>
window.addEventListener("load", function () {{
  var report = {{}};
  ["good", "broken"].forEach(function (id) {{
    var doc = document.getElementById(id).contentDocument;
    report[id] = {{title: doc.title, tables: doc.querySelectorAll("table").length,
      images: Array.prototype.map.call(doc.images, function (img) {{
        return {{src: img.getAttribute("src"), complete: img.complete,
                 width: img.naturalWidth, height: img.naturalHeight}};
      }})}};
  }});
  document.getElementById("report").textContent = JSON.stringify(report);
}});
</script></body></html>
"""


def test_wiki_in_a_real_browser(wiki, tmp_path):
    """Headless Chromium loads the page and every image, and renders it.

    The check: a test-only harness page frames the wiki and, after the load event, reports
    every <img>'s ``complete`` and ``naturalWidth`` through ``--dump-dom``; a copy of the wiki
    with one chart deleted is framed beside it, so the test also sees a broken image reported
    as broken (the harness can fail). A screenshot of the page itself must not be blank.
    """
    browser = _chromium()
    folder, _ = wiki
    broken = tmp_path / "broken"
    shutil.copytree(folder, broken)
    (broken / "best_interval.svg").unlink()
    harness = tmp_path / "harness.html"
    harness.write_text(_HARNESS.format(good=(folder / "index.html").as_uri(),
                                       broken=(broken / "index.html").as_uri()))  # fmt: skip
    profile = tmp_path / "profile"
    result = subprocess.run(
        [browser, *_FLAGS, f"--user-data-dir={profile}", "--allow-file-access-from-files",
         "--virtual-time-budget=15000", "--dump-dom", harness.as_uri()],
        capture_output=True, text=True, timeout=120,
    )  # fmt: skip
    match = re.search(r'<pre id="report">(.*?)</pre>', result.stdout, re.DOTALL)
    assert match, result.stdout[-2000:] + result.stderr[-2000:]
    report = json.loads(html.unescape(match.group(1)))
    good = report["good"]
    assert good["title"].startswith("approx-atlas")
    assert good["tables"] == 5  # four threshold tables and the audit
    assert len(good["images"]) == 5
    for image in good["images"]:
        assert image["complete"] and image["width"] > 500 and image["height"] > 300, image
    states = {i["src"]: i["width"] for i in report["broken"]["images"]}
    assert states.pop("best_interval.svg") == 0  # the harness does see a missing image
    assert all(width > 500 for width in states.values())

    shot = tmp_path / "page.png"
    subprocess.run(
        [browser, *_FLAGS, f"--user-data-dir={profile}", "--hide-scrollbars",
         "--window-size=1200,1600", "--virtual-time-budget=15000", f"--screenshot={shot}",
         (folder / "index.html").as_uri()],
        capture_output=True, text=True, timeout=120, cwd=tmp_path,
    )  # fmt: skip
    image = mpimg.imread(shot)
    assert image.shape[:2] == (1600, 1200)
    assert image[..., :3].std() > 0.05  # charts and text, not a blank page


# ---- the command line ----


def test_cli_table(chart_atlas, capsys, tmp_path):
    args = ["table", "--atlas", str(chart_atlas.path), "--tol", "0.01,0.001", "--p", "0.1,0.5",
            "--method", "edgeworth_cc"]  # fmt: skip
    assert main([*args, "--format", "csv"]) == 0
    out = capsys.readouterr().out
    expected = sheets.threshold_table(chart_atlas, [0.01, 0.001], [0.1, 0.5],
                                      method="edgeworth_cc")  # fmt: skip
    assert out == expected.to_csv()
    assert main([*args, "--format", "json", "-o", str(tmp_path / "t.json")]) == 0
    assert capsys.readouterr().out.strip() == str(tmp_path / "t.json")
    assert json.loads((tmp_path / "t.json").read_text())["min_n"] == [
        list(r) for r in expected.min_n]  # fmt: skip
    assert main([*args]) == 0  # Markdown by default
    assert capsys.readouterr().out == expected.to_markdown()


@pytest.mark.parametrize(
    ("args", "message"),
    [
        (["table", "--format", "xml"], "`--format` must be one of 'csv', 'md', 'json'; got 'xml'."),
        (["table", "--tol", "0.01,x"],
         "`--tol` must be comma-separated numbers such as 0.01,0.005; got '0.01,x'."),
        (["table", "--p", "0.5,1.5"], "`ps` must hold numbers in (0, 1); got 1.5."),
        (["rules", "--rule", "abs(n) > 1"], "`--rule` may not contain a function call; allowed: "
         "numbers, n, p, q, + - * / **, unary -, < <= > >= == !=, and, or, not, parentheses. "
         "Got 'abs(n) > 1'."),
        (["rules", "--format", "csv"], "`--format` must be one of 'md', 'json'; got 'csv'."),
        (["rules", "--method", "normal"], "`methods` must be one of 'normal_cc', 'edgeworth_cc', "
         "'poisson' (the atlas's methods); got 'normal'."),
        (["sheet", "-o", "sheet.txt"], "`path` must end in '.pdf'; got 'sheet.txt'."),
    ],
)  # fmt: skip
def test_cli_errors(chart_atlas, capsys, tmp_path, monkeypatch, args, message):
    monkeypatch.chdir(tmp_path)
    assert main([*args, "--atlas", str(chart_atlas.path)]) == 2
    assert capsys.readouterr().err == f"approx-atlas: error: {message}\n"
    assert os.listdir(tmp_path) == []


def test_cli_rules(chart_atlas, capsys):
    assert main(["rules", "--atlas", str(chart_atlas.path), "--rule", "n*p*q >= 25",
                 "--method", "normal_cc", "--metric", "cdf", "--format", "json",
                 "--tol", "0.01"]) == 0  # fmt: skip
    record = json.loads(capsys.readouterr().out)
    assert [r["rule"] for r in record["rows"]] == [*CLASSIC_RULES, "n*p*q >= 25"]
    assert {r["method"] for r in record["rows"]} == {"normal_cc"}
    assert {r["metric"] for r in record["rows"]} == {"cdf"}
    expected = sheets.rule_audit(
        chart_atlas,
        [*CLASSIC_RULES, "n*p*q >= 25"],
        methods=["normal_cc"],
        metrics=["cdf"],
        tols=[0.01],
    )
    assert record == json.loads(expected.to_json())


def test_cli_sheet_and_wiki(chart_atlas, capsys, tmp_path):
    pdf = tmp_path / "sheet.pdf"
    assert main(["sheet", "--atlas", str(chart_atlas.path), "--method", "poisson", "-o",
                 str(pdf)]) == 0  # fmt: skip
    assert capsys.readouterr().out.strip() == str(pdf)
    assert _pdf_page_count(pdf.read_bytes()) == 5  # one map, tables, audit, two text pages
    folder = tmp_path / "wiki"
    assert main(["wiki", "--atlas", str(chart_atlas.path), "--method", "poisson", "-o",
                 str(folder)]) == 0  # fmt: skip
    assert capsys.readouterr().out.strip() == str(folder / "index.html")
    assert sorted(os.listdir(folder)) == ["best_interval.svg", "index.html", "index.md",
                                          "map_poisson_interval.svg"]  # fmt: skip
    assert Path(folder / "index.html").read_text().count("<img ") == 2
