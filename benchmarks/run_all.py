"""Run every benchmark and write ``results/benchmarks.json``.

Each ``bench_*.py`` module beside this file exposes ``run() -> dict`` and measures the project's code against a
plain baseline in the same process, so the ratios hold on any machine; absolute times are this machine's.
"""

from __future__ import annotations

import importlib.util
import json
import sys
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parent / "studies"))
from _record import versions  # noqa: E402


def main(argv=None) -> int:
    names = sys.argv[1:] if argv is None else argv
    results = {"versions": versions()}
    for path in sorted(HERE.glob("bench_*.py")):
        if names and path.stem not in names:
            continue
        spec = importlib.util.spec_from_file_location(path.stem, path)
        module = importlib.util.module_from_spec(spec)
        spec.loader.exec_module(module)
        print(f"== {path.stem}", flush=True)
        t = time.perf_counter()
        results[path.stem] = module.run()
        results[path.stem]["wall_seconds"] = round(time.perf_counter() - t, 1)
    from capacity.cli._common import to_jsonable

    out = HERE.parent / "results" / "benchmarks.json"
    out.parent.mkdir(parents=True, exist_ok=True)
    previous = json.loads(out.read_text()) if out.exists() else {}
    previous.update(to_jsonable(results))
    out.write_text(json.dumps(previous, indent=2) + "\n")
    print(f"wrote {out}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
