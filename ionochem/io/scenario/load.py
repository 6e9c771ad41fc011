"""Load a scenario: read the file (bounded), parse the TOML, validate it into a Scenario."""

from __future__ import annotations

import dataclasses
import hashlib
import json
import re
import tomllib
from pathlib import Path

from ionochem.errors import ScenarioError
from ionochem.io.paths import PathProblem, read_bounded, resolve_path
from ionochem.io.scenario.schema import SchemaValidator
from ionochem.io.scenario.sections import Scenario

#: Largest scenario file (bytes): the demo scenarios are under 2 kB *(common practice)*.
MAX_SCENARIO_BYTES = 1_000_000
#: Deepest nesting of tables and lists a scenario may have (the schema needs 4).
MAX_DEPTH = 16

def load_scenario(path: str | Path) -> Scenario:
    """Load and validate a scenario file.

    Parameters
    ----------
    path : str or Path
        The ``*.toml`` scenario; relative paths inside resolve against its folder.

    Returns
    -------
    Scenario
        With ``path`` as given, ``sha256`` of the file bytes and ``raw`` the parsed TOML.

    Raises
    ------
    ScenarioError
        ``file:line: message`` for a TOML syntax error, ``file: key: message`` for anything
        invalid (see docs/scenario.md), ``file: message`` when the file cannot be read.
    """
    path = Path(path)
    try:
        data = read_bounded(resolve_path(path), MAX_SCENARIO_BYTES)
    except PathProblem as exc:
        raise ScenarioError(f"scenario {exc}", file=path) from None
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError as exc:
        line = data[:exc.start].count(b"\n") + 1
        raise ScenarioError("not UTF-8 text", file=path, line=line) from None
    try:
        raw = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise _toml_error(exc, text, path) from None
    except RecursionError:
        raise ScenarioError(f"nested deeper than the parser can follow; a scenario is "
                            f"at most {MAX_DEPTH} levels deep", file=path) from None
    scen = scenario_from_dict(raw, path=path, base_dir=path.parent)
    return dataclasses.replace(scen, sha256=hashlib.sha256(data).hexdigest())


def _toml_error(exc: tomllib.TOMLDecodeError, text: str, path: Path) -> ScenarioError:
    """Turn a tomllib error into ``file:line: message``.

    tomllib (Python 3.11) reports the place only inside its message, as
    ``(at line L, column C)`` or ``(at end of document)``.
    """
    msg = str(exc)
    line = None
    m = re.search(r"\s*\(at line (\d+), column (\d+)\)\s*$", msg)
    if m:
        line = int(m.group(1))
        msg = msg[:m.start()] + f" (column {m.group(2)})"
    else:
        m = re.search(r"\s*\(at end of document\)\s*$", msg)
        if m:
            line = max(1, len(text.splitlines()))
            msg = msg[:m.start()] + " (at the end of the file)"
    msg = msg[:1].lower() + msg[1:]
    return ScenarioError(f"not valid TOML: {msg}", file=path, line=line)


def scenario_from_dict(data: dict, path: str | Path | None = None,
                       base_dir: str | Path | None = None) -> Scenario:
    """Validate a scenario given as a dictionary (the parsed TOML).

    Parameters
    ----------
    data : dict
        Same structure as the TOML file (``datetime`` values allowed for ``time.utc``).
    path : str or Path, optional
        Name used in error messages and stored as ``Scenario.path``.
    base_dir : str or Path, optional
        Folder for relative paths; the current folder when None.

    Returns
    -------
    Scenario
        ``sha256`` is that of a canonical JSON form of ``data``.

    Raises
    ------
    ScenarioError
        At the dotted key of the first problem found.
    """
    path = None if path is None else Path(path)
    source = "<scenario>" if path is None else str(path)
    try:
        base = resolve_path(Path.cwd() if base_dir is None else base_dir)
    except PathProblem as exc:
        raise ScenarioError(f"the scenario's folder: {exc}", file=source) from None
    key = _too_deep(data)
    if key is not None:
        raise ScenarioError(f"nested more than {MAX_DEPTH} levels deep; no scenario key is",
                            file=source, key=key)
    v = SchemaValidator(source, base)
    scen = v.scenario(data)
    digest = hashlib.sha256(json.dumps(data, sort_keys=True, default=str)
                            .encode("utf-8")).hexdigest()
    return dataclasses.replace(scen, path=path, base_dir=base, sha256=digest, raw=data,
                               warnings=tuple(v.warnings))


def _too_deep(data) -> str | None:
    """Dotted key of the first value nested beyond :data:`MAX_DEPTH` (iteratively), or None."""
    stack = [(data, "", 0)]
    while stack:
        value, key, depth = stack.pop()
        if depth > MAX_DEPTH:
            return key.split(".")[0] or "(top level)"
        if isinstance(value, dict):
            stack.extend((v, f"{key}.{k}" if key else str(k), depth + 1)
                         for k, v in value.items())
        elif isinstance(value, list):
            stack.extend((v, key, depth + 1) for v in value)
    return None

