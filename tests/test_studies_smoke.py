"""Smoke runs of every study in experiments/ in its --quick mode.

Each study must rerun from a clean checkout with one command and regenerate
its table(s) and figure(s); here the quick mode writes into a temporary folder
and the test checks that the files appear and hold data.
"""

from __future__ import annotations

import csv
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]

# study script -> files its --quick run must write into --out
STUDIES = {
    "waterfall.py": ["waterfall.csv", "waterfall.md", "golay-24-12.png", "peg-504-3-6.png"],
    "throughput_scaling.py": ["length_scaling.csv", "lp_scaling.csv", "throughput_scaling.png"],
    "soft_output_study.py": ["table.csv", "table.md", "soft_output.png"],
    "fw_convergence.py": ["fw_convergence.md", "fw_convergence.png"],
    "fixed_point_loss.py": ["fixed_point_loss.md", "fixed_point_loss.json"],
}


@pytest.mark.slow
@pytest.mark.parametrize("script", sorted(STUDIES))
def test_study_quick_mode(script, tmp_path):
    out = tmp_path / "out"
    proc = subprocess.run(
        [sys.executable, str(ROOT / "experiments" / script), "--quick", "--out", str(out)],
        capture_output=True, text=True, timeout=600, cwd=tmp_path,
    )
    assert proc.returncode == 0, proc.stderr[-3000:]
    for name in STUDIES[script]:
        path = out / name
        wrote = sorted(p.name for p in out.iterdir())
        assert path.is_file(), f"{script} did not write {name}; wrote {wrote}"
        assert path.stat().st_size > 0
        if name.endswith(".png"):
            assert path.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
        if name.endswith(".csv"):
            with path.open() as fh:
                rows = list(csv.DictReader(fh))
            assert rows, f"{name} has no data rows"
