"""Shared helpers: write small synthetic columns (invented test data) to a temporary folder."""

from __future__ import annotations

import numpy as np
import pytest


def _csv(path, header, rows):
    lines = [",".join(header)] + [",".join(f"{v:.17g}" for v in row) for row in rows]
    path.write_text("\n".join(lines) + "\n")


@pytest.fixture
def column(tmp_path):
    """Factory writing a tabulated scenario; returns the scenario path.

    ``column(reactions, altitudes, neutrals={name: array}, Tn=..., Te=..., Ti=...,
    production={reaction id: array}, extra="toml text")``. Values are invented test inputs.
    """
    return make_column(tmp_path)


def make_column(tmp_path):
    """The factory of the ``column`` fixture, writing into ``tmp_path`` (for fixtures of a
    wider scope)."""

    def make(reactions, altitudes, *, neutrals, Tn, Te=None, Ti=None, production=None,
             extra="", name="s"):
        alt = np.asarray(altitudes, float)
        (tmp_path / f"{name}.reactions").write_text(reactions)
        names = list(neutrals)
        _csv(tmp_path / f"{name}_neutrals.csv", ["altitude_km", *names, "Tn_K"],
             np.column_stack([alt, *[np.broadcast_to(neutrals[n], alt.shape) for n in names],
                              np.broadcast_to(Tn, alt.shape)]))
        Te = Tn if Te is None else Te
        Ti = Tn if Ti is None else Ti
        _csv(tmp_path / f"{name}_temps.csv", ["altitude_km", "Te_K", "Ti_K"],
             np.column_stack([alt, np.broadcast_to(Te, alt.shape),
                              np.broadcast_to(Ti, alt.shape)]))
        toml = [f'title = "synthetic test column {name}"', f'reactions = "{name}.reactions"',
                "[grid]", f"altitude_km = {list(map(float, alt))}",
                "[neutrals]", 'model = "table"', f'table = "{name}_neutrals.csv"',
                "[temperatures]", 'electron = "table"', 'ion = "table"',
                f'table = "{name}_temps.csv"']
        if production:
            ids = list(production)
            _csv(tmp_path / f"{name}_prod.csv", ["altitude_km", *ids],
                 np.column_stack([alt, *[np.broadcast_to(production[i], alt.shape)
                                         for i in ids]]))
            toml += ["[production]", f'table = "{name}_prod.csv"']
        path = tmp_path / f"{name}.toml"
        path.write_text("\n".join(toml) + "\n" + extra)
        return path

    return make
