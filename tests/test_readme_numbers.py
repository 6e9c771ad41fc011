"""The numbers the README quotes are those the current code gives.

docs/readme_numbers.py recomputes every marked passage of README.md from the demo scenarios;
this test fails when any passage is stale (issue: README numbers typed by hand went stale).
"""

from __future__ import annotations

import importlib.util
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]


@pytest.mark.slow
def test_readme_passages_match_the_current_run():
    """Regenerated passages equal the README's (run ``python docs/readme_numbers.py`` to
    update them)."""
    spec = importlib.util.spec_from_file_location("readme_numbers",
                                                  ROOT / "docs" / "readme_numbers.py")
    mod = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(mod)
    files = mod.render_all(mod.generate())
    assert len(files) == 2
    for path, (old, new) in files.items():
        assert "<!-- generated: " in old, path
        assert new == old, f"{path} is stale: run python docs/readme_numbers.py"
