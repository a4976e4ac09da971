"""README certified-marginals table = latest benchmark results (reads files only)."""

from __future__ import annotations

import importlib.util
import json
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]


def _bench():
    spec = importlib.util.spec_from_file_location("bench_certified",
                                                  ROOT / "experiments" / "bench_certified.py")
    mod = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(mod)
    return mod


def test_readme_table_matches_latest_results():
    bench = _bench()
    results = json.loads((ROOT / "experiments" / "results" / "bench_certified.json").read_text())
    readme = (ROOT / "README.md").read_text()
    assert bench.BEGIN in readme and bench.END in readme
    block = readme.split(bench.BEGIN, 1)[1].split(bench.END, 1)[0].strip()
    assert block == bench.render_table(results)
    # the results file is the full benchmark (both codes, both SNRs, 1 and 2 threads)
    seen = {(p["code"], p["ebn0_db"], r["threads"]) for r in results["runs"] for p in r["points"]}
    assert {(c, e, t) for c in ("peg-504-3-6", "peg-1008-3-6") for e in (1.5, 2.5)
            for t in (1, 2)} <= seen
