"""Batched certified TRW marginals: exact box-plus, points in L, valid certificates."""

from __future__ import annotations

import itertools
import math

import numpy as np
import pytest
from test_frank_wolfe import awgn_llr, brute_force
from test_hyperforest import random_regular_code

import ldpcmarg as lm
from ldpcmarg.decoders import certified as cert
from ldpcmarg.decoders import frank_wolfe as fw
from ldpcmarg.decoders.certified import CertifiedTRW, boxplus
from ldpcmarg.decoders.lp import LocalPolytopeLP


def test_boxplus_matches_the_tanh_rule_and_never_overflows():
    # a boxplus b = 2 atanh(tanh(a/2) tanh(b/2)) (Hagenauer, Offer & Papke 1996)
    rng = np.random.default_rng(0)
    a, b = rng.normal(0, 3, 200), rng.normal(0, 3, 200)
    ref = 2 * np.arctanh(np.tanh(a / 2) * np.tanh(b / 2))
    assert np.allclose(boxplus(a, b), ref, rtol=1e-12, atol=1e-13)
    # large magnitudes, where tanh saturates to 1 in float64: the independent form
    # a boxplus b = ln(1 + e^(a+b)) - ln(e^a + e^b) (same reference) via logaddexp
    a2 = np.array([40.0, -800.0, 1e4, 25.0])
    b2 = np.array([60.0, 900.0, -1e4, -30.0])
    ref2 = np.logaddexp(0.0, a2 + b2) - np.logaddexp(a2, b2)
    big = boxplus(a2, b2)
    assert np.all(np.isfinite(big))
    assert np.allclose(big, ref2, rtol=1e-14, atol=0)
    assert big[0] < 40.0  # 40 - log1p(e^-20): not clamped to the minimum
    # tanh(huge / 2) = 1 exactly, so huge boxplus 3 = 3
    assert boxplus(1e300, 3.0) == 3.0


@pytest.mark.parametrize("projection, ebn0", [("newton", 0.8), ("peeled", 0.8),
                                               ("peeled", 3.0)])
def test_projected_point_is_in_the_local_polytope(projection, ebn0):
    code = random_regular_code(48, 3, 6, 1)
    rho = lm.make_decoder("fw", code, entropy="trw").rho
    lam = np.stack([awgn_llr(code, ebn0, s) for s in range(3)])
    r = CertifiedTRW(code, rho, tol=1e-3, polish_rounds=0, projection=projection,
                     kappa_floor=0.1).run(lam)
    lp = LocalPolytopeLP(code)
    A, rows = lp.constraint_matrix(), lp.row_bounds()
    for f in range(3):
        x = np.concatenate([r.tau_bits[f], r.tau_local[f]])
        assert np.max(np.abs(A @ x - rows)) < 1e-12
        assert x.min() >= 0.0 and r.tau_bits[f].max() <= 1.0


@pytest.mark.parametrize("linear, kappa_floor, projection, ebn0",
                         [(False, 0.0, "newton", 0.9), (True, 0.0, "newton", 0.9),
                          (False, 0.1, "newton", 0.9), (False, 0.3, "newton", 0.9),
                          (False, 0.0, "peeled", 0.9), (False, 0.1, "peeled", 0.9),
                          (False, 0.1, "peeled", 3.0)])
def test_certified_gap_bounds_true_suboptimality(linear, kappa_floor, projection, ebn0):
    # F* from a long reference fw run (relative gap 1e-11); the certificate of a
    # loosely converged warm start must never be below F(tau) - F*
    # (weak duality, Boyd & Vandenberghe 2004 §5.1.3), and -(F - gap) >= ln Z
    # (Wainwright, Jaakkola & Willsky 2005)
    code = random_regular_code(24, 3, 6, 4)
    ref = lm.make_decoder("fw", code, entropy="trw", gap_tol=1e-11, max_iter=400)
    lam = np.stack([awgn_llr(code, ebn0, 200 + s) for s in range(3)])
    # kappa_floor > 0: the entropic bound with Heskes' allocation (bits borrow entropy
    # from a check; Heskes, Neural Comput. 18(10), 2006) must stay a valid bound; the
    # peeled projection's point and its closed-form bound likewise
    ct = CertifiedTRW(code, ref.rho, tol=1e-2, polish_rounds=0, linear=linear,
                      kappa_floor=kappa_floor, projection=projection)
    assert (ct._bit_alpha.max() > 0) == (kappa_floor > 0)  # the allocation is in use
    r = ct.run(lam, gap_tol=0)
    res = ref.decode(lam)
    prob = fw.FWProblem(code, ref.rho)
    for f in range(3):
        fv = prob.free_energy(lam[f], r.tau_bits[f], r.tau_local[f])
        assert r.free_energy[f] == pytest.approx(fv, rel=1e-12, abs=1e-12)
        subopt = fv - res.info["free_energy"][f]
        if ebn0 < 1.0:
            assert subopt > 0  # the loose start really is suboptimal
        # (at 3 dB the messages of this short code can reach the fixed point exactly)
        assert r.certified_gap[f] >= subopt
        ln_z = brute_force(code, lam[f])[1]
        assert r.certified_gap[f] - fv >= ln_z


def test_cold_run_whose_first_oracle_call_fails_reports_inf_gap():
    class TimedOutOracle:  # an oracle whose every call hits its time cap
        def solve(self, g, h, warm=True, time_limit=None):
            class Sol:
                optimal = False
                status = "time_limit"
                bits = np.full(g.shape, np.nan)
                local = np.full(h.shape, np.nan)
            return Sol()

    code = random_regular_code(24, 3, 6, 0)
    prob = fw.FWProblem(code, np.full(code.m, 0.3))
    r = fw.solve_frame(prob, TimedOutOracle(), awgn_llr(code, 1.0, 0))
    assert r.status == "time_limit"
    assert r.gap == math.inf and r.relative_gap == math.inf
    assert r.certified_gap is None


def test_fw_batched_route_certificate_bounds_suboptimality_and_ln_z():
    # fw's default route for convex F: Anderson-accelerated layered TRW, projection,
    # linear Lagrangian certificate. The certified gap must be >= F(tau) - F* (weak
    # duality, Boyd & Vandenberghe 2004 §5.1.3) with F* from the per-frame solver run
    # to a relative gap of 1e-11, and -(F - gap) >= ln Z (Wainwright, Jaakkola &
    # Willsky 2005) against enumeration.
    code = random_regular_code(24, 3, 6, 4)
    lam = np.stack([awgn_llr(code, 0.9, 300 + s) for s in range(4)])
    dec = lm.make_decoder("fw", code, entropy="trw", gap_tol=1e-4)
    res = dec.decode(lam)
    assert np.all(res.info["route"] == "batched")
    assert np.all(res.info["status"] == "converged")
    ref = lm.make_decoder("fw", code, entropy="trw", gap_tol=1e-11, max_iter=400,
                          route="per-frame").decode(lam)
    assert np.all(ref.info["route"] == "per-frame")
    subopt = res.info["free_energy"] - ref.info["free_energy"]
    assert np.all(res.info["certified_gap"] >= subopt - 1e-12)
    assert np.all(res.info["relative_gap"] <= 1e-4)
    # same marginals as the reference to the accuracy the gap allows: near the optimum
    # F grows quadratically, F(tau) - F* ~ |tau - tau*|^2 / 2 times a curvature that the
    # entropy terms keep of order 1 (common practice: sqrt of the gap as the scale), so
    # the bit probabilities agree to within sqrt(gap) per frame
    p_res = 1.0 / (1.0 + np.exp(res.posterior_llr))
    p_ref = 1.0 / (1.0 + np.exp(ref.posterior_llr))
    scale = np.sqrt(res.info["certified_gap"])[:, None]
    assert np.all(np.abs(p_res - p_ref) <= scale)
    for f in range(lam.shape[0]):
        assert res.info["log_partition_bound"][f] >= brute_force(code, lam[f])[1]


def test_fw_batched_route_hands_uncertified_frames_to_the_per_frame_solver():
    # a zero tolerance cannot be met by the loose batched certificate: every frame
    # must come back from the per-frame solver, with its own status
    code = random_regular_code(24, 3, 6, 4)
    lam = np.stack([awgn_llr(code, 0.9, 300 + s) for s in range(2)])
    res = lm.make_decoder("fw", code, entropy="trw", gap_tol=0.0, max_iter=5).decode(lam)
    assert np.all(res.info["route"] == "per-frame")
    assert np.all(res.info["oracle_calls"] >= 1)


def _enumerated_check(w):
    """Reference for one check by enumeration (numpy only): ln Z, marginals, covariance,
    negentropy of b(S) ∝ exp(-S.w) over the even patterns S, and ln Z_0, ln Z_1 of the
    patterns with S_0 = 0 / 1."""
    d = w.size
    pats = np.array([s for s in itertools.product([0, 1], repeat=d) if sum(s) % 2 == 0],
                    dtype=float)
    lw = -(pats @ w)
    lnz = np.logaddexp.reduce(lw)
    p = np.exp(lw - lnz)
    m = p @ pats
    cov = (pats * p[:, None]).T @ pats - np.outer(m, m)
    negent = float(np.sum(p * (lw - lnz)))
    lz0 = np.logaddexp.reduce(lw[pats[:, 0] == 0])
    lz1 = np.logaddexp.reduce(lw[pats[:, 0] == 1])
    return lnz, m, cov, negent, lz0, lz1


@pytest.mark.parametrize("scale", [0.3, 3.0, 30.0, 400.0])
def test_closed_form_check_quantities_match_enumeration(scale):
    # the peeled certificate's O(d^2) closed forms (product measure conditioned on even
    # parity, complements 1 - prod |tanh(w/2)|) against direct enumeration of the even
    # patterns, from cavities near 0 up to magnitudes where tanh(w/2) = +-1 in float64
    rng = np.random.default_rng(int(scale * 10))
    for d in (3, 4, 6, 7):
        for _ in range(40):
            w = rng.normal(0.0, scale, d)
            sc = [np.empty(d) for _ in range(5)]
            qx, qxx = np.empty(d + 1), np.empty((d + 1, d + 1))
            m, C = np.empty(d), np.empty((d, d))
            cert._edge_terms(w, d, *sc)
            lnz, negent = cert._closed_check(d, *sc, qx, qxx, m, C, True)
            lnz_r, m_r, cov_r, negent_r, lz0, lz1 = _enumerated_check(w)
            tol = 1e-12 * max(1.0, abs(lnz_r))
            assert lnz == pytest.approx(lnz_r, abs=tol)
            assert negent == pytest.approx(negent_r, abs=1e-12 * max(1.0, abs(negent_r)))
            # entries near 0 that are differences of numbers near 1 (m (1 - m) at
            # m ~ 1, E[S_t S_u] - m_t m_u) carry an absolute float64 rounding of
            # ~1e-15 in the enumeration too (checked against 60-digit arithmetic:
            # the closed form was the closer of the two there)
            assert np.allclose(m, m_r, rtol=1e-10, atol=1e-14)
            assert np.allclose(C, cov_r, rtol=1e-9, atol=1e-13)
            # the allocated piece: bit 0 borrows al of the check's entropy, multiplier
            # shifted by -al L_0; closed form of min over tau_c (see _check_dual)
            r, al, l0 = 0.3, 0.1, float(rng.normal(0.0, 5.0))
            got = cert._closed_check_dual(w, d, 0, al, r, l0, sc[1], sc[3], sc[4])
            w_shift = w.copy()
            w_shift[0] -= al * l0 / r
            _, _, _, _, a0, a1 = _enumerated_check(w_shift)
            ref = -(r - al) * np.logaddexp(r * a0 / (r - al), r * a1 / (r - al))
            assert got == pytest.approx(ref, abs=1e-12 * max(1.0, abs(ref)))


def test_peeled_certificate_is_second_order_where_the_uniform_mix_is_first_order():
    # at 2.5 dB on the shipped PEG (3,6) code most frames have checks whose belief
    # lies within ~1e-7 of a face of the check's parity polytope: at a 1e-2 message
    # change, the Newton projection must mix in the uniform point (a first-order cost),
    # while the peeled projection keeps the point interior and certifies a relative
    # gap below 1e-4 on the same messages (measured: 5e-6 to 3e-4 against 1e-1; the
    # factor 10 below leaves room for other frames)
    code = lm.load_code("peg-504-3-6")
    from ldpcmarg.code.hyperforest import trw_check_weights

    rho = trw_check_weights(code, 200, 0)
    sigma = np.sqrt(1.0 / (2.0 * code.rate * 10 ** 0.25))
    rng = np.random.default_rng(5)
    lam = 2.0 * (1.0 + sigma * rng.normal(size=(4, code.n))) / sigma**2
    kw = {"anderson": 5, "tol": 1e-2, "polish_rounds": 0, "kappa_floor": 0.1}
    newton = CertifiedTRW(code, rho, projection="newton", **kw).run(lam, gap_tol=0.0)
    peeled = CertifiedTRW(code, rho, projection="peeled", **kw).run(lam, gap_tol=0.0)
    assert np.array_equal(newton.iterations, peeled.iterations)  # the same messages
    assert np.any(newton.theta > 0)
    assert np.all(peeled.theta == 0)
    assert np.all(peeled.relative_gap <= 0.1 * newton.relative_gap)
    assert np.median(peeled.relative_gap) < 1e-4
    assert np.all(peeled.mismatch < 1e-12)


def _anderson_state(code, rho, lam, mem):
    gr = CertifiedTRW(code, rho)._gr
    F, E = lam.shape[0], gr.E
    st = np.zeros((F, 3))
    st[:, 2] = np.inf
    return gr, [np.zeros((F, E)), lam.copy(), np.zeros((F, mem + 1, E)),
                np.zeros((F, mem + 1, E)), np.zeros((F, mem + 1, mem + 1)), st, np.zeros(F)]


@pytest.mark.parametrize("mem, keep", [(0, True), (3, True), (3, False)])
def test_lane_anderson_kernel_follows_the_scalar_kernel(mem, keep):
    # the lane kernel must run the same iteration per frame as the scalar one: same
    # sweeps, same Anderson history (its ring slots are remapped per lane), same
    # restart rule. 70 frames = one full lane group plus refills and idle lanes; two
    # calls exercise the history carried between calls (keep) or dropped.
    # The lane check update uses polynomial exp/log (accurate to a few ulps), so the
    # messages agree to rounding amplified by the small Anderson solves: 1e-9 on
    # messages of magnitude up to ~40 (measured ~1e-14 on peg-1008 after 19 sweeps)
    code = random_regular_code(48, 3, 6, 2)
    rho = lm.make_decoder("fw", code, entropy="trw").rho
    lam = np.stack([awgn_llr(code, 1.5, 500 + s) for s in range(70)])
    gr, scalar = _anderson_state(code, rho, lam, mem)
    _, lanes = _anderson_state(code, rho, lam, mem)
    cp, ev = gr.check_ptr.astype(np.uint64), gr.edge_var.astype(np.uint64)
    dmax = int(code.check_degrees.max())
    active = np.ones(70, dtype=np.bool_)
    # sweep counts 5 and 3 (not multiples of the 4 ring slots) and one chunk: the refilled
    # lanes and the second call start with their ring shifted against the group's
    for sweeps in (5, 3):
        cert._anderson_batch(lam, gr.check_ptr, gr.edge_var, rho, sweeps, 0.0, mem, active,
                             *scalar, dmax)
        if not keep:
            scalar[5][:, 1] = 0.0           # what dropping the history means
        cert._anderson_lanes_batch(lam, cp, ev, rho, sweeps, 0.0, mem, keep, active, 1, *lanes,
                                   dmax)
    assert np.max(np.abs(scalar[0])) > 1.0          # messages really moved
    assert np.max(np.abs(lanes[0] - scalar[0])) < 1e-9
    assert np.array_equal(lanes[5][:, :2], scalar[5][:, :2])   # sweeps, history length
    assert np.allclose(lanes[6], scalar[6], rtol=1e-9, atol=1e-12)  # residuals
    # a tolerance stops each lane on its own, like the scalar kernel
    gr, scalar = _anderson_state(code, rho, lam, mem)
    _, lanes = _anderson_state(code, rho, lam, mem)
    cert._anderson_batch(lam, gr.check_ptr, gr.edge_var, rho, 200, 1e-3, mem, active, *scalar,
                         dmax)
    cert._anderson_lanes_batch(lam, cp, ev, rho, 200, 1e-3, mem, True, active, 1, *lanes, dmax)
    assert np.all(lanes[6] <= 1e-3)
    assert np.mean(lanes[5][:, 0] == scalar[5][:, 0]) >= 0.9


def test_lane_route_certificate_bounds_true_suboptimality(monkeypatch):
    # the lane warm start (large batches) feeds the same certificate: it
    # must stay >= F(tau) - F* (weak duality, Boyd & Vandenberghe 2004 §5.1.3) with F*
    # from the per-frame solver at a relative gap of 1e-11, and -(F - gap) >= ln Z
    # (Wainwright, Jaakkola & Willsky 2005). Four distinct frames, each nine times:
    # lanes are independent, so the copies must agree exactly.
    code = random_regular_code(24, 3, 6, 4)
    base = np.stack([awgn_llr(code, 0.9, 700 + s) for s in range(4)])
    lam = np.tile(base, (9, 1))
    ref_dec = lm.make_decoder("fw", code, entropy="trw", gap_tol=1e-11, max_iter=400,
                              route="per-frame")
    ref = ref_dec.decode(base)
    ct = CertifiedTRW(code, ref_dec.rho, tol=1e-2, polish_rounds=0, anderson=3,
                      kappa_floor=0.1, projection="peeled", lanes=True)
    # whatever the thread count, take the lane route (and check that it was taken)
    monkeypatch.setattr(cert, "_LANE_SPEEDUP", 1e9)
    calls = []
    lane_kernel = cert._anderson_lanes_batch
    monkeypatch.setattr(cert, "_anderson_lanes_batch",
                        lambda *a: calls.append(a[8]) or lane_kernel(*a))
    r = ct.run(lam, gap_tol=0)
    assert calls
    prob = fw.FWProblem(code, ct.rho)
    for f in range(lam.shape[0]):
        fv = prob.free_energy(lam[f], r.tau_bits[f], r.tau_local[f])
        assert r.free_energy[f] == pytest.approx(fv, rel=1e-12, abs=1e-12)
        assert r.certified_gap[f] >= fv - ref.info["free_energy"][f % 4]
        assert r.certified_gap[f] - fv >= brute_force(code, lam[f])[1]
    assert np.array_equal(r.tau_bits, np.tile(r.tau_bits[:4], (9, 1)))
    scalar = CertifiedTRW(code, ct.rho, tol=1e-2, polish_rounds=0, anderson=3, kappa_floor=0.1,
                          projection="peeled").run(base, gap_tol=0)
    assert np.allclose(r.tau_bits[:4], scalar.tau_bits, atol=1e-9)


@pytest.mark.parametrize("threads, count, chunks", [(1, 256, 1), (2, 256, 2), (1, 40, 1),
                                                     (2, 40, 0), (2, 64, 0), (2, 128, 2),
                                                     (1, 20, 0), (1, 0, 0)])
def test_lane_groups_only_where_they_beat_one_frame_at_a_time(monkeypatch, threads, count,
                                                              chunks):
    # cost model of _lane_chunks: a lane group costs LANES lane-sweeps however full,
    # a scalar frame-sweep _LANE_SPEEDUP (1.8) of them, both spread over the threads
    code = random_regular_code(24, 3, 6, 4)
    ct = CertifiedTRW(code, np.full(code.m, 0.5), anderson=3, lanes=True)
    monkeypatch.setattr(cert.nb, "get_num_threads", lambda: threads)
    assert ct._lane_chunks(count) == chunks
    assert CertifiedTRW(code, np.full(code.m, 0.5), anderson=3)._lane_chunks(count) == 0


def test_float32_lane_approach_tracks_the_float64_iteration():
    # the first approach may run in float32 lanes (CertifiedTRW(lane_float32=True)):
    # the same iteration, rounded to float32 (unit roundoff 6e-8). After 5 plain and
    # 5 accelerated sweeps the messages (magnitudes up to ~12 here) must agree with
    # the float64 kernel to 1e-4 absolute: rounding of ~1e-6 per sweep at magnitude 12,
    # amplified by the Anderson solves (measured: 1.6e-6 plain, 2.8e-6 accelerated);
    # a float32 iteration that mixed the wrong history or weights would be off by
    # whole LLR units
    code = random_regular_code(48, 3, 6, 2)
    rho = lm.make_decoder("fw", code, entropy="trw").rho
    lam = np.stack([awgn_llr(code, 0.7, 900 + s) for s in range(64)])  # sigma 0.7
    dmax = int(code.check_degrees.max())
    active = np.ones(64, dtype=np.bool_)
    for mem in (0, 3):
        gr, exact = _anderson_state(code, rho, lam, mem)
        _, single = _anderson_state(code, rho, lam, mem)
        cp, ev = gr.check_ptr.astype(np.uint64), gr.edge_var.astype(np.uint64)
        cert._anderson_lanes_batch(lam, cp, ev, rho, 5, 0.0, mem, False, active, 1, *exact, dmax)
        cert._anderson_lanes_batch(lam, cp, ev, rho.astype(np.float32), 5, 0.0, mem, False,
                                   active, 1, *single, dmax)
        assert np.max(np.abs(exact[0])) > 5.0
        dev = np.max(np.abs(single[0] - exact[0]))
        assert 0.0 < dev < 1e-4          # really float32 (not equal), and close
    # and the route certifies like the float64 one (same frames, same sweep counts)
    lam2 = np.stack([awgn_llr(code, 0.8, 950 + s) for s in range(40)])
    runs = [CertifiedTRW(code, rho, tol=1e-2, anderson=3, kappa_floor=0.1, projection="peeled",
                         lanes=True, lane_float32=f32) for f32 in (False, True)]
    for ct in runs:
        ct._lane_chunks = lambda count: 1 if count else 0    # lanes at any thread count
    r64, r32 = (ct.run(lam2, gap_tol=1e-4) for ct in runs)
    assert np.all(r32.certified) and np.all(r64.certified)
    assert np.mean(r32.iterations == r64.iterations) >= 0.9


def test_float32_lanes_only_for_a_loose_first_tolerance(monkeypatch):
    # float32 messages of magnitude ~300 are spaced 3e-5 apart: a tight first
    # tolerance must run in float64 lanes (common practice: float32 unit roundoff
    # 6e-8 times the magnitude), a loose one in float32 lanes
    code = random_regular_code(48, 3, 6, 2)
    rho = lm.make_decoder("fw", code, entropy="trw").rho
    lam = np.stack([awgn_llr(code, 0.8, 990 + s) for s in range(40)])
    seen = []
    lane_kernel = cert._anderson_lanes_batch
    monkeypatch.setattr(cert, "_anderson_lanes_batch",
                        lambda *a: seen.append(a[3].dtype) or lane_kernel(*a))
    for tol in (5e-3, 1e-5):
        ct = CertifiedTRW(code, rho, tol=tol, anderson=3, kappa_floor=0.1, projection="peeled",
                          lanes=True, lane_float32=True, polish_rounds=0)
        ct._lane_chunks = lambda count: 1 if count else 0
        seen.clear()
        r = ct.run(lam, gap_tol=1e-4)
        assert seen == [np.float32 if tol > 1e-3 else np.float64]
        assert np.all(r.residual <= tol)


def test_local_codewords_out_of_canonical_order_are_refused():
    # the point writer builds each check's patterns by doubling, which needs the
    # canonical order (even-weight integers increasing): a permuted table must be
    # refused with a clear error, not silently mis-assigned
    import dataclasses

    code = random_regular_code(24, 3, 6, 4)
    lc = code.local_codewords()
    rho = np.full(code.m, 0.5)
    CertifiedTRW(code, rho, lc=lc)                       # canonical: accepted
    bits = lc.bits.copy()
    d = int(code.check_ptr[1] - code.check_ptr[0])
    a = int(lc.bit_ptr[0])
    table = bits[a:a + d * 2 ** (d - 1)].reshape(-1, d)
    table[[1, 2]] = table[[2, 1]]                        # swap two patterns of check 0
    with pytest.raises(lm.InputError, match="canonical order"):
        CertifiedTRW(code, rho, lc=dataclasses.replace(lc, bits=bits))
