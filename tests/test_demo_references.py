"""Every demo scenario's result equals its committed reference values to 1e-10 relative.

The references (tests/regression/demo_references.npz) are the code's own answers, written by
tests/regression/make_demo_references.py; they guard refactorings of the column system
(issue 21) and performance work against moving an answer. They are not an outside check of
the physics — the other tests are. A change meant to move answers regenerates them (the
script says how) and says so in its commit.
"""

from __future__ import annotations

import importlib.util
from pathlib import Path

import numpy as np
import pytest

HERE = Path(__file__).resolve().parent
_spec = importlib.util.spec_from_file_location(
    "make_demo_references", HERE / "regression" / "make_demo_references.py")
refs = importlib.util.module_from_spec(_spec)
_spec.loader.exec_module(refs)

RTOL = 1e-10
#: Variables that are small differences of large terms (the transport divergence, the flux
#: between rows): their precision is the solver's, 1e-10 of the column's gross rates, so
#: they are compared to RTOL of their own largest magnitude rather than value by value.
DIFFERENCES = ("transport_rate", "vertical_flux")


@pytest.fixture(scope="module")
def stored():
    with np.load(refs.OUT) as z:
        return {name: z[name] for name in z.files}


def _close(new, old, name=""):
    """Equal to RTOL relative, values below 1e-3 RTOL of the array's largest magnitude being
    noise of the same size as the largest's rounding (see DIFFERENCES for the exceptions)."""
    scale = float(np.nanmax(np.abs(old), initial=0.0))
    if name in DIFFERENCES:
        return np.allclose(new, old, rtol=0.0, atol=RTOL * scale, equal_nan=True)
    return np.allclose(new, old, rtol=RTOL, atol=RTOL * scale * 1e-3, equal_nan=True)


@pytest.mark.parametrize("path", [
    pytest.param(p, marks=pytest.mark.slow) if p.stem == "midlatitude_sunset" else p
    for p in refs.scenarios()], ids=lambda p: p.stem)  # the sunset transient takes ~12 s
def test_demo_result_equals_its_reference(path, stored):
    """Each numeric variable of the demo's dataset against the stored values (1e-10)."""
    if path.stem == "midlatitude_sunset":
        pytest.importorskip("scipy")
    new = refs.demo_arrays(path)
    keys = {k.split("/", 1)[1] for k in stored if k.startswith(path.stem + "/")}
    assert keys, f"no reference for {path.stem}: run {refs.__file__}"
    missing = keys - set(new)
    assert not missing, f"{path.stem}: variables gone from the result: {sorted(missing)}"
    moved = [name for name in sorted(keys)
             if new[name].shape != stored[f"{path.stem}/{name}"].shape
             or not _close(new[name], stored[f"{path.stem}/{name}"], name)]
    assert not moved, f"{path.stem}: variables moved beyond {RTOL:g}: {moved}"
