"""Progress lines of `ldpcmarg simulate`: compact, at most 80 columns, SNR order in logs."""

from __future__ import annotations

import io
import re

from cli_helpers import run_cli

from ldpcmarg.commands.simulate import _Progress, progress_lines

DECODERS = ["sum-product", "min-sum:alpha=0.8,max_iter=30", "layered-sum-product:max_iter=25"]
SIM = ["simulate", "hamming-7-4", *sum((["-d", d] for d in DECODERS), []), "--ebn0", "0:1:3",
       "--frame-errors", "20", "--max-frames", "3000", "--chunk-frames", "100", "--workers", "1"]


def _info(index, frames, done=False, eta=12.0, names=DECODERS):
    return {"snr": 1.5 + index, "snr_kind": "ebn0_db", "index": index, "done": done,
            "eta": None if done else eta, "fraction": 0.5, "elapsed": 3.0, "reused_chunks": 0,
            "decoders": [{"decoder": n, "frames": frames, "frame_errors": 12345,
                          "fer": 0.1234, "ber": 0.0123, "done": done, "stop": "frame_errors",
                          "ms_per_frame": 1.25} for n in names]}


def test_compact_line_keeps_frames_errors_fer_and_eta():
    long = ["reweighted-sum-product:max_iter=200,damping=0.25,rho=0.5", "min-sum"]
    for width in (60, 79, 80):  # the essentials need about 60 columns
        lines = progress_lines(_info(0, 1_234_567, names=long), width)
        assert len(lines) == 2  # one line per decoder
        for line in lines:
            assert len(line) <= width
            assert "1234567fr" in line and "12345err" in line and "FER 1.23e-01" in line
            assert "ETA 12s" in line


def test_terminal_redraw_lines_fit_80_columns(monkeypatch):
    class Tty(io.StringIO):
        def isatty(self):
            return True

    import ldpcmarg.commands.simulate as simcmd

    monkeypatch.setattr(simcmd, "_term_width", lambda: 80)
    out = Tty()
    prog = _Progress(True, stream=out)
    for i, info in enumerate([_info(0, 10), _info(0, 500), _info(0, 900, done=True),
                              _info(1, 10)]):
        prog.last = -1.0  # no throttling in the test
        prog(info)
        assert i >= 0
    prog.close()
    text = re.sub(r"\x1b\[\d*[A-Za-z]", "\n", out.getvalue()).replace("\r", "\n")
    lines = [ln for ln in text.split("\n") if ln]
    assert lines and all(len(ln) <= 80 for ln in lines)
    assert sum("ETA" in ln for ln in lines) >= 3


def test_log_lines_are_compact_in_snr_order_and_say_resuming(tmp_path, capsys):
    store = tmp_path / "s.sqlite"
    status, _, err = run_cli(SIM + ["--store", store], capsys)
    assert status == 0, err
    lines = err.strip().splitlines()
    assert lines and all(len(ln) <= 80 for ln in lines)
    snrs = [float(m.group(1)) for m in (re.match(r"Eb/N0 (\S+)dB", ln) for ln in lines) if m]
    assert snrs == sorted(snrs) and len(snrs) == 4 * len(DECODERS)
    status, _, err = run_cli(SIM + ["--store", store], capsys)
    assert status == 0 and err.splitlines()[0].startswith("resuming: ")
    assert int(err.split()[1]) > 0
