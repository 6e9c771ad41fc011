"""Which libraries each command loads, and with how many BLAS threads (issue 13).

Each command runs as its own process (``python -m ionochem``) that prints, at its end,
the modules it imported; a command must not load a heavy library it never uses. Reference:
the import profiles of ``python -X importtime -m ionochem ...`` (benchmarks/bench_startup.py):
xarray with pandas costs about 0.3 s, scipy's array-API layer (any scipy submodule) 0.1-0.2
s, scipy.stats, scipy.integrate and scipy.optimize more on top.
"""

import json
import os
import subprocess
import sys
from pathlib import Path

import pytest

from ionochem.cli import BLAS_THREAD_VARIABLES

ROOT = Path(__file__).resolve().parents[1]

#: Runs the command line as ``python -m ionochem`` does, then prints sys.modules as JSON.
CHILD = r"""
import json, sys
from ionochem.cli import main
try:
    main()
except SystemExit:
    pass
mods = sorted(m for m, v in sys.modules.items() if v is not None)
threads = []
if "numpy" in sys.modules:
    from threadpoolctl import threadpool_info
    threads = [i["num_threads"] for i in threadpool_info() if i["user_api"] == "blas"]
print(json.dumps([mods, threads]))
"""


def run_child(*args, cwd=ROOT, **env_vars):
    """Modules loaded by ``ionochem ARGS`` run as its own process, and the thread counts of
    its BLAS libraries (empty without numpy). The BLAS thread variables are unset unless
    given."""
    env = {k: v for k, v in os.environ.items() if k not in BLAS_THREAD_VARIABLES}
    env.update(PYTHONPATH=str(ROOT), **env_vars)
    done = subprocess.run([sys.executable, "-c", CHILD, *map(str, args)], cwd=cwd, env=env,
                          capture_output=True, text=True, timeout=300)
    assert done.returncode == 0, done.stderr
    mods, threads = json.loads(done.stdout.strip().splitlines()[-1])
    return set(mods), threads


def imported_by(*args, cwd=ROOT):
    """Names of the modules loaded by ``ionochem ARGS`` run as its own process."""
    return run_child(*args, cwd=cwd)[0]


def loaded(modules, names):
    """Those of ``names`` (or their submodules) that ``modules`` holds."""
    return sorted(n for n in names
                  if any(m == n or m.startswith(n + ".") for m in modules))


def test_help_loads_no_numerical_library():
    """``ionochem --help`` builds the parser only: no numpy, scipy, xarray."""
    mods = imported_by("--help")
    assert loaded(mods, ["numpy", "scipy", "xarray", "pandas"]) == []


def test_check_loads_neither_xarray_nor_scipy():
    """``check`` parses and compiles the list (numpy): no xarray, pandas, scipy, dask,
    matplotlib, pymsis."""
    mods = imported_by("check", ROOT / "reactions" / "ionosphere.reactions")
    assert "numpy" in mods                        # the check is not vacuous
    assert loaded(mods, ["xarray", "pandas", "scipy", "dask", "pint", "matplotlib",
                         "pymsis", "ppigrf"]) == []


@pytest.mark.slow
def test_run_loads_no_unused_scipy_dask_or_plotting(tmp_path):
    """``run`` of the demo with -o loads xarray and the scipy parts it uses (sparse, linalg,
    special), but not scipy.stats, scipy.integrate, scipy.optimize (transient solver and the
    laboratory toolkit only), dask, pint or matplotlib."""
    out = tmp_path / "out.nc"
    mods = imported_by("run", ROOT / "scenarios" / "midlatitude_equinox.toml", "-o", out)
    assert out.exists()
    assert "xarray" in mods and "scipy.sparse" in mods     # the check is not vacuous
    assert loaded(mods, ["scipy.stats", "scipy.integrate", "scipy.optimize", "dask", "pint",
                         "matplotlib", "distributed"]) == []


def test_one_column_command_runs_with_one_blas_thread_unless_the_user_says():
    """``check`` as a process asks OpenBLAS for one thread before numpy is loaded
    (cli._one_blas_thread); a user's OMP_NUM_THREADS=2 is left alone."""
    reactions = ROOT / "reactions" / "ionosphere.reactions"
    _, threads = run_child("check", reactions)
    assert threads and set(threads) == {1}
    if (os.cpu_count() or 1) >= 2:
        _, threads = run_child("check", reactions, OMP_NUM_THREADS="2")
        assert threads and set(threads) == {2}
