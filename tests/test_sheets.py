"""Tests for atlas.sheets: the PDF sheet and the wiki page (tables: tests/test_tables.py)."""

import html.parser
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
import pytest  # noqa: E402

from atlas import cube, sheets  # noqa: E402
from atlas.cli import main  # noqa: E402


@pytest.fixture(autouse=True)
def _close_figures():
    yield
    plt.close("all")


# ---- the PDF sheet ----


def _pdf_page_count(data):
    # Page objects (/Type /Page), not the page tree (/Type /Pages).
    return len(re.findall(rb"/Type\s*/Page(?![s\w])", data))


def _title(fig):
    """A page's title: the text with gid "title", else the figure's suptitle."""
    found = [t.get_text() for t in fig.texts if t.get_gid() == "title"]
    suptitle = getattr(fig, "_suptitle", None)
    return found[0] if found else suptitle.get_text()


def test_sheet_pages(chart_atlas):
    from atlas import coverage_pages, decision_pages

    pages = sheets.sheet_figures(chart_atlas)
    titles = [_title(fig) for fig in pages]
    assert titles[:5] == [
        "Worst-case error of interval probabilities: normal_cc",
        "Worst-case error of interval probabilities: edgeworth_cc",
        "Minimum n for each tolerance",
        "Rules of thumb: the worst error each admits",
        # six rules (the skewness and 3-sigma rules joined the audit) x two methods x two metrics
        "Rules of thumb: the worst error each admits (continued)",
    ]
    assert titles[-2:] == ["Definitions", "Provenance and caution"]
    # The sections on tests and on confidence intervals, in that order, between them.
    middle = " | ".join(titles[5:-2])
    assert middle.startswith(decision_pages.TITLE) and coverage_pages.TITLE in middle
    assert middle.index(decision_pages.TITLE) < middle.index(coverage_pages.TITLE)
    assert "Tail relative error of normal_cc" in middle and "wilson interval" in middle
    for k, fig in enumerate(pages, start=1):
        texts = {t.get_gid(): t.get_text() for t in fig.texts if t.get_gid()}
        assert texts["page-number"] == f"page {k} of {len(pages)}"
        assert " ".join(cube.CAUTION.split()) in " ".join(texts["footer"].split())
    last = " ".join(t.get_text() for t in pages[-1].texts)
    assert chart_atlas.dataset.attrs["checksum"] in last and "chart.nc" in last
    definitions = " ".join(t.get_text() for t in pages[titles.index("Definitions")].texts)
    assert "max over 0 ≤ a ≤ b ≤ n of |P(a ≤ X ≤ b) − (G(b) − G(a − 1))|" in definitions
    assert "max over 0 ≤ k ≤ n of |F(k) − G(k)|" in definitions
    # The tables page holds the four tables (two methods, two metrics) with the query's values.
    cells = {t.get_text() for ax in pages[2].axes for t in ax.texts} | {
        c.get_text().get_text() for ax in pages[2].axes for tab in ax.tables
        for c in tab.get_celld().values()}  # fmt: skip
    for method in ("normal_cc", "edgeworth_cc"):
        value = chart_atlas.min_n(0.3, 0.01, method=method, metric="cdf")
        assert f"{value:,}" in cells  # exact for every integer: no mark


def test_write_sheet(chart_atlas, tmp_path):
    path = sheets.write_sheet(chart_atlas, tmp_path / "sheet.pdf")
    data = path.read_bytes()
    assert data.startswith(b"%PDF-") and b"%%EOF" in data[-64:]
    assert _pdf_page_count(data) == len(sheets.sheet_figures(chart_atlas))  # with the sections
    assert _pdf_page_count(sheets.write_sheet(chart_atlas, tmp_path / "alone.pdf",
                                              sections=()).read_bytes()) == 7  # fmt: skip
    (tmp_path / "alone.pdf").unlink()
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


def _section_charts(method="normal_cc"):
    """The SVG charts of the sections the sheet and the wiki add (tests, coverage)."""
    return [c.name for section in sheets.default_sections(method) for c in section.charts]


class _Links(html.parser.HTMLParser):
    def __init__(self):
        super().__init__()
        self.tags, self.images, self.links, self.anchors = [], [], [], []

    def handle_starttag(self, tag, attrs):
        attrs = dict(attrs)
        self.tags.append(tag)
        if tag == "img":
            self.images.append(attrs.get("src"))
        if tag == "a":
            self.anchors.append(attrs.get("href"))
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
                            "index.md", "index.html", *_section_charts()])  # fmt: skip
    assert sorted(os.listdir(folder)) == names  # nothing else, no temporary file


def test_wiki_html_opens_offline(wiki):
    folder, _ = wiki
    page = (folder / "index.html").read_text(encoding="utf-8")
    parser = _Links()
    parser.feed(page)
    assert "script" not in parser.tags and "iframe" not in parser.tags
    assert "http://" not in page and "https://" not in page and "url(" not in page
    assert len(parser.images) == 5 + len(_section_charts())
    # The contents first, then each chart opening full size from the page.
    contents = [a for a in parser.anchors if a.startswith("#")]
    assert contents == ["#charts", "#min-n", "#rules", "#tests", "#coverage", "#definitions",
                        "#provenance", "#caution"]  # fmt: skip
    for anchor in contents:
        assert f'id="{anchor[1:]}"' in page
    assert [a for a in parser.anchors if not a.startswith("#")] == parser.images
    for link in parser.links:
        assert _is_local(link), link
        assert link.startswith("#") or (folder / link).is_file(), link
    for src in parser.images:
        root = ET.parse(folder / src).getroot()  # valid XML
        assert root.tag == "{http://www.w3.org/2000/svg}svg"
        refs = [v for el in root.iter() for k, v in el.attrib.items() if k.endswith("href")]
        assert all(r.startswith(("data:", "#")) for r in refs)  # embedded or internal only
    assert " ".join(cube.CAUTION.split()) in " ".join(page.split())
    assert "Minimum n for normal_cc, interval error" in page
    page = page.replace("\u00a0", " ")  # comparisons are held together by no-break spaces
    assert "np &gt;= 5 and nq &gt;= 5" in page and "npq &gt; 9" in page


def test_wiki_markdown(wiki):
    folder, _ = wiki
    text = (folder / "index.md").read_text(encoding="utf-8")
    images = re.findall(r"!\[[^\]]*\]\(([^)]+)\)", text)
    assert len(images) == 5 + len(_section_charts())
    assert all(_is_local(i) and (folder / i).is_file() for i in images)
    assert "1. [Charts](#charts)" in text and "](#coverage)" in text
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
    # Four threshold tables and the audit; two of tests, two of coverage.
    assert good["tables"] == 5 + 2 + 2
    assert len(good["images"]) == 5 + len(_section_charts())
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


def test_cli_sheet_refuses_another_extension(chart_atlas, capsys, tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    status = main(["sheet", "-o", "sheet.txt", "--atlas", str(chart_atlas.path)])
    message = "`-o` must end in '.pdf'; got 'sheet.txt'."
    assert (status, capsys.readouterr().err) == (2, f"approx-atlas: error: {message}\n")
    assert os.listdir(tmp_path) == []


def test_cli_sheet_and_wiki(chart_atlas, capsys, tmp_path):
    pdf = tmp_path / "sheet.pdf"
    assert main(["sheet", "--atlas", str(chart_atlas.path), "--method", "poisson", "-o",
                 str(pdf)]) == 0  # fmt: skip
    assert capsys.readouterr().out.strip() == str(pdf)
    # One map, tables, audit, two text pages, and the sections' pages.
    alone = sheets.sheet_figures(chart_atlas, methods=["poisson"], sections=())
    assert len(alone) == 5
    assert _pdf_page_count(pdf.read_bytes()) == len(
        sheets.sheet_figures(chart_atlas, methods=["poisson"])
    )
    folder = tmp_path / "wiki"
    assert main(["wiki", "--atlas", str(chart_atlas.path), "--method", "poisson", "-o",
                 str(folder)]) == 0  # fmt: skip
    assert capsys.readouterr().out.strip() == str(folder / "index.html")
    assert sorted(os.listdir(folder)) == sorted(["best_interval.svg", "index.html", "index.md",
                                                 "map_poisson_interval.svg",
                                                 *_section_charts("poisson")])  # fmt: skip
    assert Path(folder / "index.html").read_text().count("<img ") == 2 + len(_section_charts())


# ---- paper, type sizes, whole lines ----


@pytest.mark.parametrize(
    ("environ", "paper"),
    [
        ({"LANG": "en_US.UTF-8"}, "letter"),
        ({"LANG": "es_MX.UTF-8"}, "letter"),
        ({"LANG": "fr_CA"}, "letter"),
        ({"LANG": "en_PH.UTF-8"}, "letter"),
        ({"LANG": "en_GB.UTF-8"}, "a4"),
        ({"LANG": "de_DE.UTF-8"}, "a4"),
        ({"LANG": "C.UTF-8"}, "a4"),
        ({"LANG": "POSIX"}, "a4"),
        ({}, "a4"),
        ({"LC_PAPER": "en_US.UTF-8", "LANG": "en_GB.UTF-8"}, "letter"),
        ({"LC_ALL": "en_GB.UTF-8", "LC_PAPER": "en_US.UTF-8"}, "a4"),  # LC_ALL wins (POSIX)
        ({"LC_ALL": "", "LANG": "en_CA.UTF-8"}, "letter"),  # an empty variable is unset
    ],
)  # fmt: skip
def test_default_paper_follows_the_locale(environ, paper):
    assert sheets.default_paper(environ) == paper


def test_sheet_paper_is_checked(chart_atlas, tmp_path):
    with pytest.raises(ValueError, match=r"^`paper` must be one of 'a4', 'letter'; got 'b5'\.$"):
        sheets.write_sheet(chart_atlas, tmp_path / "sheet.pdf", paper="b5")
    assert os.listdir(tmp_path) == []


@pytest.mark.parametrize("paper", ["a4", "letter"])
def test_sheet_prints_on_the_paper_with_no_small_or_cut_text(chart_atlas, paper):
    """Every page has the paper's size; no text is under 8 points; no line is cut with an
    ellipsis or runs off the page (long ones wrap)."""
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.text import Text

    size = {"a4": (297 / 25.4, 210 / 25.4), "letter": (11.0, 8.5)}[paper]  # ISO 216; ANSI
    pages = sheets.sheet_figures(chart_atlas, paper=paper)
    seen = []
    for fig in pages:
        assert tuple(fig.get_size_inches()) == pytest.approx(size)
        canvas = FigureCanvasAgg(fig)
        canvas.draw()
        renderer = canvas.get_renderer()
        page = fig.bbox
        for text in fig.findobj(Text):
            content = text.get_text()
            if not text.get_visible() or not content.strip():
                continue
            assert text.get_fontsize() >= 8.0, (content[:40], text.get_fontsize())
            assert "…" not in content and "..." not in content, content[:80]
            box = text.get_window_extent(renderer)
            if box.x1 < page.x0 or box.x0 > page.x1:
                continue  # a tick label beyond the axis limits, which is not drawn
            assert box.x0 >= page.x0 - 1 and box.x1 <= page.x1 + 1, content[:60]
            seen.append(content)
    joined = " ".join(" ".join(seen).split())
    ds = chart_atlas.dataset
    assert ds.attrs["checksum"] in joined  # the whole checksum, in the footers
    # The atlas's own six pages carry its checksum (the sections carry their own provenance).
    assert sum(" ".join(s.split()).count(ds.attrs["checksum"]) for s in seen) >= 6 - 2
    spec = ds.attrs["p_spec"]
    assert spec.replace(",", "") in joined.replace(",", "").replace(" ", "")  # whole, wrapped


def test_cli_sheet_paper(chart_atlas, capsys, tmp_path, monkeypatch):
    # PDF page sizes in points: A4 841.89 x 595.28 (ISO 216), Letter 792 x 612, landscape.
    monkeypatch.setenv("LC_ALL", "en_US.UTF-8")  # a Letter locale: --paper a4 overrides it
    pdf = tmp_path / "a4.pdf"
    assert main(["sheet", "--atlas", str(chart_atlas.path), "--method", "poisson", "--paper",
                 "a4", "-o", str(pdf)]) == 0  # fmt: skip
    assert re.search(rb"/MediaBox \[ *0 0 841\.8897\d* 595\.2755", pdf.read_bytes())
    pdf = tmp_path / "locale.pdf"
    assert main(["sheet", "--atlas", str(chart_atlas.path), "--method", "poisson", "-o",
                 str(pdf)]) == 0  # fmt: skip
    assert re.search(rb"/MediaBox \[ *0 0 792 612", pdf.read_bytes())
    capsys.readouterr()
    assert main(["sheet", "--atlas", str(chart_atlas.path), "--paper", "b5", "-o",
                 str(tmp_path / "b5.pdf")]) == 2  # fmt: skip
    assert capsys.readouterr().err == (
        "approx-atlas: error: `--paper` must be one of 'a4', 'letter'; got 'b5'.\n"
    )


# ---- the wiki page at page width ----

# A test-only page that frames the wiki at two widths and reports whether either scrolls
# sideways; a third frame holds a page that does (the check can fail).
_WIDTHS = """<!DOCTYPE html><html><head><meta charset="utf-8"></head><body>
<iframe id="w1280" src="{page}" style="width:1280px;height:900px;border:0"></iframe>
<iframe id="w800" src="{page}" style="width:800px;height:900px;border:0"></iframe>
<iframe id="wide" src="{wide}" style="width:800px;height:300px;border:0"></iframe>
<pre id="report">pending</pre>
<script>
window.addEventListener("load", function () {{
  var report = {{}};
  ["w1280", "w800", "wide"].forEach(function (id) {{
    var doc = document.getElementById(id).contentDocument;
    var root = doc.documentElement;
    var widest = 0;
    Array.prototype.forEach.call(doc.querySelectorAll("body *"), function (el) {{
      widest = Math.max(widest, el.getBoundingClientRect().right);
    }});
    var broken = 0;
    Array.prototype.forEach.call(doc.querySelectorAll("td.num"), function (td) {{
      var range = doc.createRange();
      range.selectNodeContents(td);
      if (range.getClientRects().length > 1) {{ broken += 1; }}
    }});
    report[id] = {{scroll: root.scrollWidth, client: root.clientWidth, widest: widest,
                   broken: broken,
                   images: Array.prototype.map.call(doc.images, function (img) {{
                     return img.getBoundingClientRect().width; }})}};
  }});
  document.getElementById("report").textContent = JSON.stringify(report);
}});
</script></body></html>
"""


def test_wiki_has_no_sideways_scrolling_at_1280_and_800_pixels(wiki, tmp_path):
    """Chromium lays the page out 1280 and 800 pixels wide: nothing is wider than the window
    (long attribute lines wrap), and every chart fits the width."""
    browser = _chromium()
    folder, _ = wiki
    wide = tmp_path / "wide.html"
    wide.write_text("<!DOCTYPE html><html><body><p>" + "x" * 400 + "</p></body></html>")
    harness = tmp_path / "widths.html"
    harness.write_text(_WIDTHS.format(page=(folder / "index.html").as_uri(),
                                      wide=wide.as_uri()))  # fmt: skip
    result = subprocess.run(
        [browser, *_FLAGS, f"--user-data-dir={tmp_path / 'profile'}",
         "--allow-file-access-from-files", "--virtual-time-budget=15000", "--dump-dom",
         harness.as_uri()],
        capture_output=True, text=True, timeout=120,
    )  # fmt: skip
    match = re.search(r'<pre id="report">(.*?)</pre>', result.stdout, re.DOTALL)
    assert match, result.stdout[-2000:] + result.stderr[-2000:]
    report = json.loads(html.unescape(match.group(1)))
    assert report["wide"]["scroll"] > report["wide"]["client"]  # the check sees overflow
    for width in ("w1280", "w800"):
        state = report[width]
        assert state["client"] <= int(width[1:]), state
        assert state["scroll"] <= state["client"], (width, state)
        assert state["widest"] <= state["client"] + 0.5, (width, state)
        assert state["broken"] == 0, (width, state)  # no number is split over two lines
        assert len(state["images"]) == 5 + len(_section_charts())
        assert all(0 < w <= state["client"] for w in state["images"]), (width, state)


def test_wiki_comparison_is_stacked(wiki):
    """The two-panel comparison is one panel above the other, so that it keeps its type size
    at page width."""
    folder, _ = wiki
    root = ET.parse(folder / "compare_normal_cc_edgeworth_cc_interval.svg").getroot()
    width, height = (float(root.get(k).removesuffix("pt")) for k in ("width", "height"))
    assert height > width
