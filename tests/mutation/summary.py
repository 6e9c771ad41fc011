"""Kill rate of a mutmut run, per module, from mutmut's result files (mutants/**/*.meta).

    python tests/mutation/summary.py [MUTANTS_DIR]

Counts: killed (a test failed), survived (every test passed), other (timeouts, no test reaches
the mutated function, ...) and not checked (the run stopped before it). The kill rate is
killed / (killed + survived). See DEVELOPERS.md, "Mutation testing".
"""

from __future__ import annotations

import json
import sys
from collections import Counter
from pathlib import Path


def _status(code):
    if code is None:
        return "not checked"
    try:
        from mutmut.__main__ import status_by_exit_code
        return status_by_exit_code[code]
    except Exception:  # pragma: no cover - mutmut missing or renamed
        return {0: "survived", 1: "killed", 33: "no tests"}.get(code, f"exit {code}")


def main(argv):
    root = Path(argv[0] if argv else "mutants")
    total = Counter()
    print(f"{'module':45s} {'killed':>6s} {'surv.':>6s} {'other':>6s} {'unchk':>6s} {'kill %':>7s}")
    for meta in sorted(root.glob("**/*.meta")):
        codes = json.loads(meta.read_text()).get("exit_code_by_key", {})
        c = Counter(_status(v) for v in codes.values())
        total += c
        done = c["killed"] + c["survived"]
        other = sum(v for k, v in c.items() if k not in ("killed", "survived", "not checked"))
        rate = f"{100 * c['killed'] / done:6.1f}" if done else "     -"
        name = str(meta.relative_to(root)).removesuffix(".meta")
        print(f"{name:45s} {c['killed']:6d} {c['survived']:6d} {other:6d} "
              f"{c['not checked']:6d} {rate}")
    done = total["killed"] + total["survived"]
    other = sum(v for k, v in total.items() if k not in ("killed", "survived", "not checked"))
    print(f"{'all':45s} {total['killed']:6d} {total['survived']:6d} {other:6d} "
          f"{total['not checked']:6d} {100 * total['killed'] / max(done, 1):6.1f}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main(sys.argv[1:]))
