"""Error floors: structure search, importance-sampling FER, LP pseudo-codewords, the commands."""

from __future__ import annotations

import json
import math
import os
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
import scipy.sparse as sp
from cli_helpers import run_cli
from scipy.special import ndtr

from ldpcmarg import load_code, simulate
from ldpcmarg.analysis.error_structures import (
    find_low_weight_codewords,
    induced_ab,
    search_structures,
    structure_family,
)
from ldpcmarg.analysis.pseudocodewords import awgn_pseudo_weight, instanton_search
from ldpcmarg.code.construct import golay24, repetition
from ldpcmarg.code.parity_check import ParityCheckCode
from ldpcmarg.engine.importance_sampling import Bias, FloorStop, estimate_floor
from ldpcmarg.engine.simulate import StopRule
from ldpcmarg.engine.store import Store
from ldpcmarg.errors import InputError
from ldpcmarg.link.channels import ebn0_to_sigma


def _Q(x):
    return float(ndtr(-x))


def planted_code() -> ParityCheckCode:
    """Golay(24,12) beside a repetition code of length 3 (block-diagonal H).

    Codewords are (g, r) with g in Golay and r in {000, 111}: exactly one
    codeword of weight 3, then weight 8 (759 words; MacWilliams & Sloane).
    """
    G = golay24().H.toarray()
    R = repetition(3).H.toarray()
    H = sp.block_diag([G, R]).toarray().astype(np.uint8)
    return ParityCheckCode(H, name="golay-plus-rep3")


def _biases(structures):
    return [Bias(s.bits, s.shift) for s in structures]


# ---------------------------------------------------------------- small facts
def test_pseudo_weight_of_a_codeword_is_its_weight():
    # DESIGN.md section 9 (Forney, Koetter, Kschischang & Reznik 2001): w_p = Hamming weight
    assert awgn_pseudo_weight([1, 1, 0, 1, 1]) == pytest.approx(4.0)
    assert awgn_pseudo_weight([1.0, 0.5, 0.5]) == pytest.approx(4.0 / 1.5)


def test_induced_ab_of_a_codeword_has_no_odd_check(hamming74):
    # a codeword satisfies every check: no check sees an odd number of its bits
    a, b, _ = induced_ab(hamming74, [0, 1, 2])  # columns 1, 2, 3: 1 xor 2 xor 3 = 0
    assert (a, b) == (3, 0)
    a, b, _ = induced_ab(hamming74, [0])
    assert b == 1


def test_decoders_the_estimator_cannot_aim_at_are_refused():
    with pytest.raises(InputError, match="cannot bias"):
        structure_family("bit-flipping")
    assert structure_family("min-sum:alpha=0.8") == "trapping-sets"
    assert structure_family("lp") == "pseudo-codewords"


# ---------------------------------------------------------------- planted codeword, ML
def test_planted_codeword_found_and_ml_floor_matches_union_term():
    code = planted_code()
    A = code.weight_enumerator()
    assert A[3] == 1 and A[4:8].sum() == 0 and A[8] == 759  # the construction (see docstring)
    cw = find_low_weight_codewords(code, seed=0)
    assert [int(i) for i in cw.structures[0].bits] == [24, 25, 26]
    ebn0 = 8.0
    res = estimate_floor(code, "exact", _biases(cw.structures), [ebn0], seed=2,
                         stop=FloorStop(rel_half_width=0.1, max_frames=20_000), scale=1.0)
    p = res.points[0]
    g = 10 ** (ebn0 / 10)
    # Union bound (Lin & Costello, Error Control Coding, ch. 1/10): for ML decoding
    # Q(sqrt(2 w R Eb/N0)) <= FER <= sum_w A_w Q(sqrt(2 w R Eb/N0)); with A_3 = 1 the
    # lower bound is the weight-3 term itself and the rest adds < 0.1 % here.
    lower = _Q(math.sqrt(2 * 3 * code.rate * g))
    upper = sum(int(A[w]) * _Q(math.sqrt(2 * w * code.rate * g)) for w in range(1, code.n + 1))
    assert upper / lower < 1.001
    assert p.trustworthy
    lo, hi = p.fer_ci
    assert lo <= upper and hi >= lower
    # the target half-width is 10 %, so the estimate is within 15 % of the term
    assert abs(p.fer / lower - 1) < 0.15
    assert p.equivalent_frames > 10 * p.frames  # far fewer frames than plain Monte Carlo


# ---------------------------------------------------------------- coverage
@pytest.mark.slow
def test_interval_covers_the_exact_fer_of_a_repetition_code():
    # Repetition code n=5: its Tanner graph is a tree, so sum-product gives the exact
    # bitwise MAP, every bit follows sign(sum y), and FER = Q(sqrt(5)/sigma) exactly
    # (common practice: sum of n unit-amplitude BPSK samples in Gaussian noise).
    code = repetition(5)
    ebn0 = 7.0
    sigma = ebn0_to_sigma(ebn0, code.rate)
    truth = _Q(math.sqrt(5) / sigma)
    biases = _biases(find_low_weight_codewords(code).structures)
    covered, reps = 0, 200
    for seed in range(reps):
        p = estimate_floor(code, "sum-product", biases, [ebn0], seed=seed, chunk_frames=128,
                           stop=FloorStop(rel_half_width=5, max_frames=128,
                                          min_effective_hits=10), scale=1.0).points[0]
        covered += p.fer_ci[0] <= truth <= p.fer_ci[1]
    # nominal 95 %; 200 repetitions have a binomial sd of 1.5 %: 0.90 is three sd below
    assert covered / reps >= 0.90


# ---------------------------------------------------------------- IS against plain MC
@pytest.mark.slow
@pytest.mark.parametrize("name,ebn0", [("golay-24-12", 4.0), ("tanner-155-64", 2.5)])
@pytest.mark.parametrize("decoder", ["sum-product", "min-sum"])
def test_importance_sampling_agrees_with_plain_monte_carlo(name, ebn0, decoder):
    code = load_code(name)
    mc = simulate(code, [decoder], [ebn0], seed=11,
                  stop=StopRule(frame_errors=150, max_frames=200_000), workers=1).points[0]
    assert mc.frame_errors >= 100
    ss = search_structures(code, decoder, ebn0, seed=1, max_candidates=150,
                           codeword_budget=20, max_structures=60)
    p = estimate_floor(code, decoder, _biases(ss.structures), [ebn0], seed=5,
                       stop=FloorStop(rel_half_width=0.25, max_frames=8192),
                       pilot_frames=256).points[0]
    assert p.trustworthy
    # both are 95 % intervals of the same quantity: they must overlap
    assert p.fer_ci[0] <= mc.fer_ci[1] and mc.fer_ci[0] <= p.fer_ci[1], (p.fer, mc.fer)


# ---------------------------------------------------------------- LP pseudo-codewords
@pytest.mark.slow
def test_tanner_code_has_pseudo_codewords_lighter_than_its_minimum_distance():
    # Tanner (155,64): d_min = 20 (Tanner, Sridhara & Fuja 2001); Chertkov & Stepanov
    # (2008) report pseudo-codewords of AWGN pseudo-weight about 16.4 (from memory).
    code = load_code("tanner-155-64")
    res = instanton_search(code, starts=4, seed=0)
    w = [s.pseudo_weight for s in res.structures]
    assert w == sorted(w)
    assert w[0] < 20.0
    assert w[0] > 10.0  # a pseudo-weight far below the published minimum would be a bug
    for s in res.structures:  # the shift is the median point: its squared norm is w_p
        assert s.effective_weight == pytest.approx(s.pseudo_weight, rel=1e-9)


# ---------------------------------------------------------------- determinism, store, resume
def test_estimate_is_deterministic_and_resumes_from_the_store(tmp_path):
    code = load_code("golay-24-12")
    ss = search_structures(code, "sum-product", 6.0, seed=0, max_candidates=50,
                           codeword_budget=10, max_structures=20)
    stop = FloorStop(rel_half_width=0.3, max_frames=4096)
    path = tmp_path / "floor.db"
    a = estimate_floor(code, "sum-product", _biases(ss.structures), [5.0, 6.0], seed=3,
                       stop=stop, chunk_frames=256).points
    with Store.open_writer(path, code) as st:
        b = estimate_floor(code, "sum-product", _biases(ss.structures), [5.0, 6.0], seed=3,
                           stop=stop, chunk_frames=256, store=st, workers=2).points
    with Store.open_writer(path, code) as st:
        c = estimate_floor(code, "sum-product", _biases(ss.structures), [5.0, 6.0], seed=3,
                           stop=stop, chunk_frames=256, store=st).points
    for x, y, z in zip(a, b, c, strict=True):
        assert x.fer == y.fer == z.fer and x.frames == y.frames == z.frames
        assert x.fer_ci == y.fer_ci == z.fer_ci
    assert c[0].seconds == b[0].seconds  # all chunks came from the store


def test_too_few_hits_is_marked_untrustworthy():
    code = load_code("golay-24-12")
    # no structures at high SNR: plain Monte Carlo sees nothing
    p = estimate_floor(code, "sum-product", [], [9.0], seed=0,
                       stop=FloorStop(max_frames=512)).points[0]
    assert not p.trustworthy and p.fer_ci[0] == 0.0
    assert p.fer_ci[1] >= 1e-3  # Clopper-Pearson bound of 0 hits in 512 frames ~ 7e-3
    assert "not trustworthy" in p.reason


# ---------------------------------------------------------------- commands
def test_floor_command_contract(tmp_path, capsys):
    out = tmp_path / "floor.json"
    status, text, err = run_cli(["floor", "golay-24-12", "-d", "sum-product", "--ebn0", "5,7",
                                 "--seed", "1", "--json", out, "--workers", "1",
                                 "--candidates", "40", "--max-frames", "3000", "-q"], capsys)
    assert status == 0, err
    doc = json.loads(out.read_text())
    assert len(doc["points"]) == 2
    for p in doc["points"]:
        for key in ("decoder", "ebn0_db", "fer", "fer_ci", "method", "equivalent_frames",
                    "structures", "trustworthy"):
            assert key in p
        assert p["method"] == "importance-sampling"
        assert len(p["fer_ci"]) == 2 and p["fer_ci"][0] <= p["fer"] <= p["fer_ci"][1]
    assert "not a certification" in text


def test_floor_command_refuses_an_unbiasable_decoder(capsys):
    status, _, err = run_cli(["floor", "golay-24-12", "-d", "fw", "--ebn0", "5"], capsys)
    assert status == 2 and err.startswith("Error:") and "Traceback" not in err


def test_pseudocodewords_command_contract(tmp_path, capsys):
    out = tmp_path / "pcw.json"
    status, _, err = run_cli(["pseudocodewords", "hamming-7-4", "--json", out, "--starts", "5"],
                             capsys)
    assert status == 0, err
    items = json.loads(out.read_text())["pseudocodewords"]
    assert items, "Hamming(7,4) LP decoding fails on noisy words"
    w = [it["awgn_pseudo_weight"] for it in items]
    assert w == sorted(w)
    assert all(isinstance(it["support"], list) for it in items)
    assert w[0] <= 3 + 1e-9  # d_min(Hamming 7,4) = 3 (MacWilliams & Sloane), w_p <= d_min


def test_floor_command_with_lp_writes_pseudo_codewords_in_a_subprocess(tmp_path):
    # floor -d lp used to stop with a traceback on the first pseudo-codeword (no trapping-set b)
    out = tmp_path / "floor.json"
    env = dict(os.environ, PYTHONPATH=str(Path(__file__).resolve().parents[1]))
    done = subprocess.run(
        [sys.executable, "-m", "ldpcmarg", "floor", "hamming-7-4", "-d", "lp", "--ebn0", "4",
         "--seed", "0", "--pseudo-starts", "20", "--max-frames", "1000", "--chunk-frames", "500",
         "--workers", "1", "-q", "--json", str(out), "--store", str(tmp_path / "f.sqlite")],
        env=env, capture_output=True, text=True, timeout=120)
    assert done.returncode == 0 and "Traceback" not in done.stderr, done.stderr
    doc = json.loads(out.read_text())
    found = doc["searches"]["lp"]["structures"]
    kinds = {s["kind"] for s in found}
    assert "pseudo-codeword" in kinds, kinds
    for s in found:
        assert s["a"] == len(s["bits"])
        if s["kind"] == "codeword":
            # a codeword satisfies every check (definition): no odd-degree check
            assert s["b"] == 0
        else:
            assert "b" not in s  # fractional: no trapping-set (a, b) label
    # w_p <= d_min = 3 for Hamming(7,4) (MacWilliams & Sloane; w_p of a codeword = its weight)
    assert min(s["pseudo_weight"] for s in found) <= 3 + 1e-9
    # the stored search is read back on a second run (from_dict without b)
    again = subprocess.run(
        [sys.executable, "-m", "ldpcmarg", "floor", "hamming-7-4", "-d", "lp", "--ebn0", "4",
         "--seed", "0", "--pseudo-starts", "20", "--max-frames", "1000", "--chunk-frames", "500",
         "--workers", "1", "--json", str(out), "--force", "--store", str(tmp_path / "f.sqlite")],
        env=env, capture_output=True, text=True, timeout=120)
    assert again.returncode == 0 and "reusing the stored structure search" in again.stderr
    assert json.loads(out.read_text())["searches"]["lp"]["structures"] == found
