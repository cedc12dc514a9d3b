"""Tests of atlas.decision_pages and the decision-page and decision-sheet commands.

The page's numbers come from the tested API (test_tails.py, test_sizes.py, test_decisions.py,
test_decision_tables.py, test_decision_rules.py); here: the files, their links, offline
opening, atomic writing and the errors. Slow (about 20 s: the maps and audits are computed).
"""

import re

import pytest

from atlas import cube
from atlas.cli import main
from atlas.decision_pages import DEFINITIONS, write_decision_page, write_decision_sheet

pytestmark = pytest.mark.slow


def test_page_files_and_links(tmp_path, capsys):
    target = tmp_path / "page"
    written = write_decision_page(target)
    names = sorted(p.name for p in written)
    assert names == ["decision_size_lot.svg", "decision_tail_maps.svg", "index.html", "index.md"]
    assert sorted(p.name for p in target.iterdir()) == names  # nothing else, no temporary left
    text = (target / "index.html").read_text()
    assert "<script" not in text and not re.search(r"(src|href)=\"https?://", text)
    for svg in ("decision_size_lot.svg", "decision_tail_maps.svg"):
        assert f'src="{svg}"' in text
    assert cube.CAUTION in text
    md = (target / "index.md").read_text()
    for term, _ in DEFINITIONS:
        assert f"**{term}.**" in md
    # The command refuses the existing page without --force and replaces it with it.
    assert main(["decision-page", "-o", str(target)]) == 2
    assert "approx-atlas: error:" in capsys.readouterr().err
    assert main(["decision-page", "-o", str(target), "--force"]) == 0
    assert sorted(p.name for p in target.iterdir()) == names


def test_sheet(tmp_path, capsys):
    path = write_decision_sheet(tmp_path / "tests.pdf")
    data = path.read_bytes()
    assert data[:5] == b"%PDF-" and data.count(b"/Type /Page\n") + data.count(b"/Type /Page ")
    assert len(re.findall(rb"/Type\s*/Page[^s]", data)) == 6
    with pytest.raises(ValueError, match=r"^`path` must end in '.pdf'; got"):
        write_decision_sheet(tmp_path / "tests.png")
    assert main(["decision-sheet", "-o", str(path)]) == 2
    assert "pass --force to replace it" in capsys.readouterr().err
    assert main(["decision-sheet", "-o", str(tmp_path / "x.txt")]) == 2
    assert "`-o` must end in '.pdf'" in capsys.readouterr().err
