#!/usr/bin/env python3
"""Run every bench/bench_*.py and print one table of figures: name, value, goal, verdict.

Each script defines ``rows() -> list[Row]`` (see bench/common.py). Figures, never timed
assertions: the suite in tests/ does not depend on them.
"""

from __future__ import annotations

import importlib.util
import sys
import time
import traceback
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))

from common import Row, format_table  # noqa: E402


def main(argv: list[str]) -> int:
    only = set(argv[1:])
    all_rows: list[Row] = []
    failed = []
    for script in sorted(HERE.glob("bench_*.py")):
        if only and script.stem not in only:
            continue
        spec = importlib.util.spec_from_file_location(script.stem, script)
        assert spec and spec.loader
        module = importlib.util.module_from_spec(spec)
        # registered before it runs: a dataclass with string annotations looks its module
        # up in sys.modules (Python 3.11 dataclasses), else the script fails to load
        sys.modules[script.stem] = module
        started = time.perf_counter()
        try:
            spec.loader.exec_module(module)
            rows = module.rows()
        except Exception:  # a broken bench must not hide the others' figures
            traceback.print_exc()
            failed.append(script.stem)
            continue
        print(f"# {script.stem}: {len(rows)} rows in {time.perf_counter() - started:.1f} s",
              file=sys.stderr)
        all_rows.extend(rows)
    print(format_table(all_rows))
    if failed:
        print(f"bench scripts that failed: {', '.join(failed)}", file=sys.stderr)
        return 1
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv))
