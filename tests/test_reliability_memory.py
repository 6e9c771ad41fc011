"""Long transient runs keep bounded memory: the sun's rate lattice is a bounded cache.

Reference: the cache bound itself (``MAX_CACHED_NODES``) — after visiting more lattice times
than the bound, no more than the bound are held, and revisiting a dropped time recomputes the
same rates (checked against the first computation, to rounding).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

import ionochem
import ionochem.environment.sun as sun_module

ROOT = Path(__file__).resolve().parent.parent


def test_sun_lattice_cache_is_bounded_and_recomputes_the_same(tmp_path, monkeypatch):
    monkeypatch.setattr(sun_module, "MAX_CACHED_NODES", 4)
    (tmp_path / "s.toml").write_text(f"""title = "long-run memory test (invented)"
reactions = "{(ROOT / 'reactions' / 'ionosphere.reactions').as_posix()}"
[grid]
altitude_km = {{ start = 100.0, stop = 400.0, step = 50.0 }}
[location]
latitude_deg = 40.0
longitude_deg = 15.0
[time]
utc = 2025-03-20T11:00:00Z
[sun]
f107 = 150.0
f107a = 150.0
[geomagnetic]
ap = 8.0
[temperatures]
electron = "profile"
ion = "profile"
[solve]
mode = "transient"
times_s = [0.0, 3600.0]
""")
    model = ionochem.Model(ionochem.load_scenario(tmp_path / "s.toml"))
    sun = model.environment.sun
    first = sun.sources(0.0)
    for i in range(1, 12):
        sun.sources(i * sun_module.LATTICE_S)
        assert len(sun._cache) <= 4
    again = sun.sources(0.0)
    for key, val in first.items():
        np.testing.assert_allclose(again[key], val, rtol=1e-12, atol=0)
