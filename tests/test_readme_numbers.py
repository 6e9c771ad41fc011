"""Every number and figure the documentation shows is the one the current code gives.

docs/readme_numbers.py recomputes every marked prose passage and printed command output of
README.md, docs/*.md, reactions/README.md and examples/*/README.md, and redraws every figure
(``--figures``); these tests fail when a passage is stale (issue: README numbers typed by
hand went stale, and a printed fit output in docs/observations.md had drifted from what the
command prints) or when a Markdown file shows a figure the script does not draw.
"""

from __future__ import annotations

import importlib.util
import re
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
#: Every Markdown file a user reads (the repository's docs, examples and lists).
DOCS = sorted({ROOT / "README.md", ROOT / "reactions" / "README.md",
               *(ROOT / "docs").glob("*.md"), *(ROOT / "examples").glob("*/README.md")})
IMAGE = re.compile(r"!\[[^\]]*\]\(([^)\s]+\.(?:png|svg|pdf|jpg))\)")


def _script():
    spec = importlib.util.spec_from_file_location("readme_numbers",
                                                  ROOT / "docs" / "readme_numbers.py")
    mod = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(mod)
    return mod


def test_every_figure_the_docs_show_is_drawn_by_the_script():
    """Each image a Markdown file links (resolved against that file's folder) is one that
    ``docs/readme_numbers.py --figures`` draws, and each such figure is committed."""
    drawn = set(_script().figure_paths())
    shown = set()
    for md in DOCS:
        for link in IMAGE.findall(md.read_text(encoding="utf-8")):
            shown.add((md.parent / link).resolve().relative_to(ROOT).as_posix())
    assert shown, "no figure links found"
    assert not shown - drawn, f"figures shown but not regenerated: {sorted(shown - drawn)}"
    missing = [f for f in drawn if not (ROOT / f).is_file()]
    assert not missing, missing


@pytest.mark.slow
def test_readme_passages_match_the_current_run():
    """Regenerated passages and printed outputs equal the committed ones in every file
    (run ``python docs/readme_numbers.py`` to update them)."""
    mod = _script()
    files = mod.render_all(mod.generate(), mod.generate_outputs())
    assert {p.name for p in files} >= {"README.md", "observations.md"}
    for path, (old, new) in files.items():
        assert "<!-- generated" in old, path
        assert new == old, f"{path} is stale: run python docs/readme_numbers.py"
