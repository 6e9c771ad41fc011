"""Library errors name their arguments; the command line shows its options instead.

docs/style.md, "Rules the suite and CI check": an analysis raises
``InputError("must be at least 1, not 0", file="top")``; ``ionochem rank ... --top 0`` shows
``--top: must be at least 1, not 0``. The reference is the command's own argparse parser
(its option strings), not a table kept by hand.
"""

from __future__ import annotations

import argparse
import ast
import re
from pathlib import Path

import pytest

from ionochem.analysis.compare import parse_bands
from ionochem.analysis.discern import parse_error
from ionochem.cli import build_parser
from ionochem.cli.wording import option_flags, reworded, worded
from ionochem.errors import InputError, ScenarioError

ROOT = Path(__file__).resolve().parents[1]

#: Library modules that still raise errors naming options, with the owner's issue.
FLAG_WORDING_LEFT = {
    "ionochem/analysis/diurnal.py": "issue 21 (lead)",
    "ionochem/analysis/ensemble.py": "issue 25 (performance)",
    "ionochem/analysis/ensemble_store.py": "issue 25 (performance)",
    "ionochem/analysis/fit.py": "issue 25 (performance)",
    "ionochem/analysis/fit_problem.py": "issue 25 (split from fit.py)",
    "ionochem/analysis/sampling.py": "issue 25 (performance)",
    "ionochem/analysis/sweep.py": "issue 25 (performance)",
    "ionochem/analysis/sweep_run.py": "issue 25 (split from sweep.py)",
    "ionochem/analysis/sweep_axes.py": "issue 25 (performance)",
    "ionochem/analysis/uncertainty.py": "issue 25 (performance)",
}
_FLAG = re.compile(r"(^|[\s(`'\"])--[a-z]")


def _subparser(*names):
    parser = build_parser()
    for name in names:
        sub = next(a for a in parser._actions if isinstance(a, argparse._SubParsersAction))
        parser = sub.choices[name]
    return parser


def _flag_texts(path):
    """Strings naming an option inside raise statements of ``path``."""
    tree = ast.parse(path.read_text())
    found = []
    for node in ast.walk(tree):
        if isinstance(node, ast.Raise):
            for sub in ast.walk(node):
                if isinstance(sub, ast.Constant) and isinstance(sub.value, str) \
                        and _FLAG.search(sub.value):
                    found.append(f"{path.relative_to(ROOT)}:{node.lineno}: {sub.value!r}")
    return found


def test_library_errors_name_no_options():
    """analysis/ and rates/ raise no error naming a command-line option (except the
    modules listed with their owner's issue)."""
    files = sorted([*(ROOT / "ionochem" / "analysis").glob("*.py"),
                    *(ROOT / "ionochem" / "rates").glob("*.py")])
    bad = [t for p in files if str(p.relative_to(ROOT)) not in FLAG_WORDING_LEFT
           for t in _flag_texts(p)]
    assert not bad, "\n".join(bad)
    stale = [p for p in FLAG_WORDING_LEFT if not _flag_texts(ROOT / p)]
    assert not stale, f"remove from FLAG_WORDING_LEFT: {stale}"


def test_argument_becomes_the_commands_option():
    """`bands` of parse_bands is `--bands` of compare; `error` of parse_error is `--error`
    of discern; the text is unchanged."""
    with pytest.raises(InputError) as lib:
        parse_bands("E")
    assert lib.value.file == "bands" and "--" not in str(lib.value)
    shown = reworded(lib.value, option_flags(_subparser("compare")))
    assert shown.file == "--bands" and shown.message == lib.value.message
    with pytest.raises(InputError) as lib:
        parse_error("-1")
    assert reworded(lib.value, option_flags(_subparser("discern"))).file == "--error"


def test_backquoted_arguments_in_the_text_become_options():
    """A mentioned argument (`additions`) reads as the option of the command (--add)."""
    exc = InputError("not in the baseline (new reactions belong in `additions`)",
                     file="new.reactions")
    shown = reworded(exc, option_flags(_subparser("compare")))
    assert shown.message.endswith("(new reactions belong in --add)")
    assert shown.file == "new.reactions"


def test_nested_commands_and_renamed_arguments():
    """`n_boot` of level_populations is `--bootstrap` of `rates populations`."""
    exc = InputError("the number of refits 1 must be a whole number from 2 to 100000",
                     file="n_boot")
    assert reworded(exc, option_flags(_subparser("rates", "populations"))).file == \
        "--bootstrap"


def test_errors_at_a_line_or_key_and_unknown_names_are_kept():
    flags = option_flags(_subparser("rank"))
    at_line = InputError("bad", file="top", line=3)
    at_key = ScenarioError("bad", file="s.toml", key="output.budget")
    unknown = InputError("bad", file="somefile.csv")
    for exc in (at_line, at_key, unknown):
        assert reworded(exc, flags) is exc


def test_every_command_function_is_worded():
    """build_parser wraps the function of every command and subcommand, so that a caller of
    args.func sees options too: the wrapped function raises --top for `top`."""
    parser = _subparser("rank")

    def raises(args):
        raise InputError("must be at least 1, not 0", file="top")

    with pytest.raises(InputError) as info:
        worded(raises, option_flags(parser))(None)
    assert str(info.value) == "--top: must be at least 1, not 0"
    func = parser.get_default("func")
    assert func.__wrapped__.__name__ == "cmd_rank"
    nested = _subparser("rates", "populations").get_default("func")
    assert hasattr(nested, "__wrapped__")
