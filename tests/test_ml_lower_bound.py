"""The ML lower bound counted during simulations, against exact ML decisions."""

from __future__ import annotations

import json

import numpy as np
import pytest
from cli_helpers import run_cli

from ldpcmarg.code import construct
from ldpcmarg.decoders.base import make_decoder
from ldpcmarg.engine.simulate import StopRule, _ml_also_fails, simulate

GOLAY = construct.golay24()
# a short LDPC code on which exact ML (enumeration of 2^14 words) stays affordable
SHORT_LDPC = construct.peg(28, 14, 3, seed=4)


def test_flagged_frames_are_ml_failures():
    # Pathwise statement behind the bound: when a decoder returns a valid codeword d != c
    # with sum_i lambda_i d_i <= sum_i lambda_i c_i, the block-ML word (exact decoder,
    # independent reference) is at least as likely as d, so ML errs on that frame too.
    rng = np.random.default_rng(8)
    for code in (GOLAY, SHORT_LDPC):
        sigma = np.sqrt(1 / (2 * code.rate * 10 ** (1.5 / 10)))
        llr = 2 * (1 + sigma * rng.standard_normal((300, code.n))) / sigma**2
        exact = make_decoder("exact", code).decode(llr)
        ml_wrong = exact.bits.any(axis=1)
        np.testing.assert_array_equal(_ml_also_fails(code, llr, exact, None), ml_wrong)
        for spec in ("min-sum:max_iter=20", "osd:order=0"):
            res = make_decoder(spec, code).decode(llr)
            flagged = _ml_also_fails(code, llr, res, None)
            assert flagged.any(), spec
            assert not (flagged & ~ml_wrong).any(), spec


def test_random_codewords_use_the_sent_word():
    # with a nonzero sent word c the comparison is against c, not the all-zero word:
    # the sent word itself is never flagged, a more likely codeword is (common practice)
    c = GOLAY.encode(np.ones((1, 12), dtype=np.uint8))
    llr = np.where(c == 0, 2.0, -2.0).astype(np.float64)

    class R:  # the decoder returned the sent word / the all-zero word
        def __init__(self, bits):
            self.bits, self.valid = bits, np.ones(1, dtype=bool)

    assert not _ml_also_fails(GOLAY, llr, R(c.copy()), c).any()
    zero = np.zeros_like(c)
    assert not _ml_also_fails(GOLAY, llr, R(zero), c).any()  # less likely than c
    assert _ml_also_fails(GOLAY, -llr, R(zero), c).any()     # more likely than c


@pytest.mark.slow
@pytest.mark.parametrize("code,ebn0,frames", [(GOLAY, 2.0, 1000), (SHORT_LDPC, 2.5, 600)])
def test_bound_below_exact_ml_below_decoder(code, ebn0, frames):
    # ML-lower-bound FER <= exact ML FER <= decoder FER (the bound by construction,
    # the second inequality because ML minimises the FER; Fossorier & Lin 1995 for
    # OSD, common practice for min-sum). Same frames for all decoders (no early stop),
    # so the first inequality holds for the counts; the second within the 95% interval.
    decoders = ["min-sum:max_iter=30", "osd:order=1", "exact"]
    res = simulate(code, decoders, [ebn0], seed=5, stop=StopRule(frame_errors=10**9,
                                                                 max_frames=frames))
    pts = {p.decoder: p for p in res.points}
    ml = pts["exact"]
    assert ml.frame_errors >= 20
    assert ml.ml_lower_bound_frame_errors == ml.frame_errors
    for spec in ("min-sum:max_iter=30", "osd:order=1"):
        p = pts[spec]
        assert p.frames == ml.frames
        assert p.ml_lower_bound_frame_errors <= ml.frame_errors
        assert p.ml_lower_bound_fer <= ml.fer <= p.fer_ci[1]
        lo, hi = p.ml_lower_bound_fer_ci
        assert lo <= p.ml_lower_bound_fer <= hi
    # OSD of order 1 is nearly ML on Golay: its bound is close to the ML FER
    osd = pts["osd:order=1"]
    assert osd.ml_lower_bound_frame_errors >= 0.8 * ml.frame_errors


def test_cli_json_csv_and_store(tmp_path, capsys):
    out_json, out_csv, store = tmp_path / "r.json", tmp_path / "r.csv", tmp_path / "r.sqlite"
    st, out, err = run_cli(["simulate", "golay-24-12", "-d", "osd:order=0", "--ebn0", "2",
                            "--frame-errors", "20", "--max-frames", "2000", "--workers", "1",
                            "--json", out_json, "--csv", out_csv, "--store", store], capsys)
    assert st == 0, err
    assert "ML-LB FER" in out
    p = json.loads(out_json.read_text())["points"][0]
    assert 0 <= p["ml_lower_bound_frame_errors"] <= p["frame_errors"]
    assert p["ml_lower_bound_fer"] == p["ml_lower_bound_frame_errors"] / p["frames"]
    assert "ml_lower_bound_fer" in out_csv.read_text().splitlines()[0]
    from ldpcmarg.engine.store import Store

    with Store.open_reader(store) as s:
        rows = s.results()
    assert rows[0]["ml_lower_bound_frame_errors"] == p["ml_lower_bound_frame_errors"]
    fig = tmp_path / "f.png"
    st, _, err = run_cli(["plot", store, "-o", fig, "--metric", "fer", "--limits"], capsys)
    assert st == 0 and fig.stat().st_size > 0, err


def test_version1_store_reads_without_the_bound(tmp_path, capsys):
    # a store written before the count existed: plotting and listing still work,
    # the bound is reported as unknown (None), and writing into it is refused
    import sqlite3

    from ldpcmarg.engine.store import Store
    from ldpcmarg.errors import StoreError
    from ldpcmarg.plots.curves import curves_from_store

    path = tmp_path / "old.sqlite"
    with Store.open_writer(path, GOLAY) as st:
        res = simulate(GOLAY, ["osd:order=0"], [2.0], seed=1,
                       stop=StopRule(frame_errors=5, max_frames=256), store=st)
    assert res.points[0].frames > 0
    con = sqlite3.connect(path)
    con.execute("UPDATE meta SET value='1' WHERE key='schema_version'")
    con.commit()
    con.close()
    with Store.open_reader(path) as st:
        rows = st.results()
    assert rows[0]["ml_lower_bound_frame_errors"] is None
    (curve,) = curves_from_store(path)
    assert curve.ml_lb is None and curve.fer[0] > 0
    with pytest.raises(StoreError, match="schema version"):
        Store.open_writer(path, GOLAY)
