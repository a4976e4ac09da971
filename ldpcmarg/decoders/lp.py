"""LP decoding over the local polytope with HiGHS: the repeated LP oracle, the LP and ML decoders.

The local polytope ``L`` of a code (DESIGN.md section 4) has one column per bit,
``tau_i = P(x_i = 1)`` in ``[0, 1]``, then one column ``tau_c(S) >= 0`` per
local codeword ``S`` of every check ``c`` (the even-weight patterns on the
check's neighbourhood, in the global order of
:meth:`ldpcmarg.code.parity_check.ParityCheckCode.local_codewords`). Rows:

* per check ``c``: ``sum_S tau_c(S) = 1``  (rows ``0 .. m-1``);
* per edge ``e = (c, i)`` in check-major order:
  ``tau_i - sum_{S containing i} tau_c(S) = 0``  (rows ``m + e``).

:class:`LocalPolytopeLP` builds this model once per code as a column-wise
``highspy.HighsLp`` and afterwards changes only the objective, so that a
re-solve starts from the previous optimal basis (a "hot" start). Measured
choices (``experiments/bench_lp_oracle.py``): the primal simplex for hot
re-solves, and a cold solve by the dual simplex (bit costs only) or by the
interior-point method with crossover (dense local-codeword costs).

References
----------
J. Feldman, M. J. Wainwright and D. R. Karger, "Using linear programming to
decode binary linear codes", IEEE Trans. Inf. Theory 51(3), 954-972, 2005.
doi:10.1109/TIT.2004.842696
"""

from __future__ import annotations

import math
import os
import sys
import time
from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp

from .._params import Param
from .._settings import DEFAULT_MAX_CHECK_DEGREE
from ..errors import InputError, MissingExtraError, SolverError
from .base import Decoder, DecodeResult

__all__ = ["LPSolution", "LocalPolytopeLP", "ParityMIP", "LPDecoder", "MLDecoder",
           "INTEGRALITY_TOL"]

#: An LP optimum counts as integral (an ML certificate) when every bit value is
#: within this distance of 0 or 1.
INTEGRALITY_TOL = 1e-9

_COLD_METHODS = ("auto", "dual", "primal", "ipm")
_HOT_METHODS = ("primal", "dual", "choose")
_SIMPLEX_STRATEGY = {"choose": 0, "dual": 1, "primal": 4}

_banner_done = False


def _highspy():
    try:
        import highspy
    except ImportError as exc:  # pragma: no cover - highspy is a core dependency here
        raise MissingExtraError(
            "LP decoding needs the 'highspy' package (pip install highspy)."
        ) from exc
    return highspy


def _new_highs():
    """A silent single-threaded ``Highs`` object.

    HiGHS prints a one-time banner to the process's standard output at the
    first construction even with ``output_flag`` off; the first construction
    is therefore done with file descriptor 1 pointed at the null device.
    """
    global _banner_done
    highspy = _highspy()
    if _banner_done:
        h = highspy.Highs()
    else:
        try:
            sys.stdout.flush()
        except Exception:  # pragma: no cover - closed stdout
            pass
        saved = None
        try:
            saved = os.dup(1)
            devnull = os.open(os.devnull, os.O_WRONLY)
            os.dup2(devnull, 1)
            os.close(devnull)
        except OSError:  # pragma: no cover - no usable descriptors
            saved = None
        try:
            h = highspy.Highs()
        finally:
            if saved is not None:
                os.dup2(saved, 1)
                os.close(saved)
        _banner_done = True
    for name, value in (("output_flag", False), ("log_to_console", False), ("threads", 1)):
        _set_option(h, name, value)
    return h


def _set_option(h, name: str, value) -> None:
    status = h.setOptionValue(name, value)
    if status != _highspy().HighsStatus.kOk:
        raise SolverError(f"HiGHS rejected option {name}={value!r} (status {status}).")


@dataclass
class LPSolution:
    """Result of one :meth:`LocalPolytopeLP.solve` call.

    Attributes
    ----------
    bits : ndarray of shape (n,), float64
        ``tau_i = P(x_i = 1)`` at the optimum, clipped to ``[0, 1]`` (HiGHS
        vertex values carry round-off within its feasibility tolerance, 1e-7;
        local weights are clipped at 0 likewise). All NaN when no usable solution
        exists (every non-optimal LP status; a MIP that hit its time limit
        keeps its best feasible codeword here, with ``optimal`` False).
    local : ndarray of shape (L,), float64
        Local-codeword weights in the flat layout of
        :class:`~ldpcmarg.code.parity_check.LocalCodewords` (NaN like ``bits``).
    objective : float
        ``<bit_costs, bits> + <local_costs, local>`` (NaN without a solution).
    status : str
        ``"optimal"``, ``"time_limit"``, ``"infeasible"``, ``"iteration_limit"``,
        ``"error"`` or another lower-case HiGHS model status.
    optimal : bool
        True only when HiGHS proved optimality.
    simplex_iterations : int
        Simplex iterations of this call, crossover iterations included after
        an interior-point solve (0 for a MIP).
    seconds : float
        Wall-clock time of this call, in seconds.
    method : str
        How it was solved: ``"hot"``, ``"cold-dual"``, ``"cold-primal"``,
        ``"cold-ipm"``, ``"hot+cold-<m>"`` (a hot start given up after
        ``hot_iteration_limit`` iterations, then solved cold) or ``"mip"``.
    """

    bits: np.ndarray
    local: np.ndarray
    objective: float
    status: str
    optimal: bool
    simplex_iterations: int
    seconds: float
    method: str = ""

    @property
    def has_solution(self) -> bool:
        """True when ``bits`` and ``local`` hold a feasible point."""
        return bool(np.isfinite(self.objective))

    def require_optimal(self) -> LPSolution:
        """Return self, or raise :class:`~ldpcmarg.errors.SolverError` when not optimal."""
        if not self.optimal:
            raise SolverError(
                f"The local-polytope LP was not solved to optimality (status {self.status!r}, "
                f"{self.seconds:.3g} s)."
            )
        return self


class LocalPolytopeLP:
    """The local-polytope LP of a code, kept in HiGHS for repeated solves.

    Parameters
    ----------
    code : ParityCheckCode
    max_check_degree : int
        Refuse codes with a check of larger degree (``InputError`` naming the
        check and its degree); a check of degree d has ``2**(d-1)`` columns.
    integral_bits : bool
        Declare the bit columns integer: the feasible set becomes the set of
        codewords and :meth:`solve` solves a MIP (block-ML decoding).
    threads : int
        HiGHS threads (keep 1 and parallelise frames across processes).
    cold_method : {"auto", "dual", "primal", "ipm"}
        Method for a cold solve. ``"auto"``: dual simplex when there are no
        local-codeword costs, interior point + crossover otherwise.
    hot_method : {"primal", "dual", "choose"}
        Simplex variant for a hot re-solve from the previous basis.
    hot_iteration_limit : int, "auto" or None
        Give up a hot start after this many simplex iterations and solve cold
        instead (None: never). ``"auto"`` = ``max(1000, number of rows)``.
        Measured: after a large objective change (a new frame) a hot start can
        take 50x longer than a cold interior-point solve at n = 1008, while a
        1 % change needs a few hundred iterations.

    Attributes
    ----------
    local_codewords : LocalCodewords
        The local codewords indexing the columns ``n .. n+L-1``.
    n, m, num_local, num_cols, num_rows : int
        Model sizes.

    Notes
    -----
    Costs follow the LLR convention: cost ``lambda_i`` on ``tau_i`` with
    ``lambda_i = ln P(x_i=0|y) - ln P(x_i=1|y)``, so minimising
    ``sum_i lambda_i tau_i`` is LP decoding. Bits that belong to no check
    have empty columns; their value is whichever bound the cost favours
    (either, with zero cost).

    Examples
    --------
    >>> import numpy as np
    >>> from ldpcmarg.code.parity_check import ParityCheckCode
    >>> code = ParityCheckCode(np.array([[1, 1, 0], [0, 1, 1]]))
    >>> lp = LocalPolytopeLP(code)
    >>> sol = lp.solve(np.array([1.0, -3.0, 1.0]))
    >>> sol.status, sol.bits.round(6).tolist(), round(sol.objective, 6)
    ('optimal', [1.0, 1.0, 1.0], -1.0)
    """

    def __init__(self, code, *, max_check_degree: int = DEFAULT_MAX_CHECK_DEGREE,
                 integral_bits: bool = False, threads: int = 1,
                 cold_method: str = "auto", hot_method: str = "primal",
                 hot_iteration_limit: int | str | None = "auto"):
        if cold_method not in _COLD_METHODS:
            raise InputError(f"cold_method must be one of {_COLD_METHODS}; got {cold_method!r}.")
        if hot_method not in _HOT_METHODS:
            raise InputError(f"hot_method must be one of {_HOT_METHODS}; got {hot_method!r}.")
        if int(threads) < 1:
            raise InputError(f"threads must be an integer >= 1; got {threads!r}.")
        self.code = code
        self.max_check_degree = int(max_check_degree)
        self.integral_bits = bool(integral_bits)
        self.threads = int(threads)
        self.cold_method = cold_method
        self.hot_method = hot_method
        if hot_iteration_limit == "auto":
            hot_iteration_limit = max(1000, code.m + code.num_edges)
        if hot_iteration_limit is not None and (
                isinstance(hot_iteration_limit, bool) or int(hot_iteration_limit) < 1):
            raise InputError("hot_iteration_limit must be 'auto', None or an integer >= 1; "
                             f"got {hot_iteration_limit!r}.")
        self.hot_iteration_limit = (None if hot_iteration_limit is None
                                    else int(hot_iteration_limit))
        self.local_codewords = code.local_codewords(self.max_check_degree)
        self.n = int(code.n)
        self.m = int(code.m)
        self.num_local = self.local_codewords.count
        self.num_cols = self.n + self.num_local
        self.num_rows = self.m + int(code.num_edges)
        self._matrix = self._build_matrix()
        self._h = None
        self._has_basis = False
        self._cost = np.zeros(self.num_cols, dtype=np.float64)

    # -------------------------------------------------------------- building
    def _build_matrix(self) -> sp.csc_matrix:
        """Constraint matrix, shape (m + E, n + L), CSC, float64."""
        code, lc = self.code, self.local_codewords
        n, m = self.n, self.m
        # bit columns: +1 in edge rows
        b_rows = m + np.arange(code.num_edges, dtype=np.int64)
        b_cols = code.edge_var
        b_vals = np.ones(code.num_edges)
        # local columns: +1 in the owner's check row ...
        L = lc.count
        owner = lc.owner
        l_cols1 = np.arange(L, dtype=np.int64) + n
        l_rows1 = owner
        # ... and -1 in the edge rows of the bits set in the pattern
        deg = code.check_degrees[owner]
        col_start = lc.bit_ptr[owner] + (np.arange(L, dtype=np.int64) - lc.offset[owner]) * deg
        total = int(lc.bits.size)
        flat_col = np.repeat(np.arange(L, dtype=np.int64), deg)
        t = np.arange(total, dtype=np.int64) - np.repeat(col_start, deg)
        on = lc.bits.astype(bool)
        fc = flat_col[on]
        l_rows2 = m + code.check_ptr[owner[fc]] + t[on]
        l_cols2 = fc + n
        rows = np.concatenate([b_rows, l_rows1, l_rows2])
        cols = np.concatenate([b_cols, l_cols1, l_cols2])
        vals = np.concatenate([b_vals, np.ones(L), -np.ones(l_rows2.size)])
        A = sp.csc_matrix((vals, (rows, cols)), shape=(self.num_rows, self.num_cols))
        A.sort_indices()
        return A

    def constraint_matrix(self) -> sp.csc_matrix:
        """The equality-constraint matrix ``A`` (rows: checks then edges), a copy."""
        return self._matrix.copy()

    def row_bounds(self) -> np.ndarray:
        """Right-hand side of ``A tau = b``: 1 for check rows, 0 for edge rows."""
        b = np.zeros(self.num_rows)
        b[: self.m] = 1.0
        return b

    def _ensure_model(self):
        if self._h is not None:
            return self._h
        highspy = _highspy()
        h = _new_highs()
        _set_option(h, "threads", self.threads)
        lp = highspy.HighsLp()
        lp.num_col_ = self.num_cols
        lp.num_row_ = self.num_rows
        lp.col_cost_ = np.zeros(self.num_cols)
        lower = np.zeros(self.num_cols)
        upper = np.full(self.num_cols, highspy.kHighsInf)
        upper[: self.n] = 1.0
        lp.col_lower_ = lower
        lp.col_upper_ = upper
        b = self.row_bounds()
        lp.row_lower_ = b
        lp.row_upper_ = b.copy()
        A = self._matrix
        lp.a_matrix_.format_ = highspy.MatrixFormat.kColwise
        lp.a_matrix_.num_col_ = self.num_cols
        lp.a_matrix_.num_row_ = self.num_rows
        lp.a_matrix_.start_ = A.indptr.astype(np.int32)
        lp.a_matrix_.index_ = A.indices.astype(np.int32)
        lp.a_matrix_.value_ = A.data.astype(np.float64)
        if self.integral_bits:
            integrality = [highspy.HighsVarType.kContinuous] * self.num_cols
            for i in range(self.n):
                integrality[i] = highspy.HighsVarType.kInteger
            lp.integrality_ = integrality
        status = h.passModel(lp)
        if status != highspy.HighsStatus.kOk:
            raise SolverError(f"HiGHS refused the local-polytope model (status {status}).")
        if h.getNumCol() != self.num_cols or h.getNumRow() != self.num_rows:
            raise SolverError("HiGHS holds a model of the wrong size after passModel.")
        if self.integral_bits:
            # exact block ML: no relative gap; an absolute gap far below any LLR scale
            _set_option(h, "mip_rel_gap", 0.0)
            _set_option(h, "mip_abs_gap", 1e-9)
            # measured on Golay(24,12) frames: presolve off is 2-3x faster here
            _set_option(h, "presolve", "off")
        self._h = h
        self._has_basis = False
        self._indices = np.arange(self.num_cols, dtype=np.int32)
        return h

    # ---------------------------------------------------------------- solving
    def _costs(self, bit_costs, local_costs) -> np.ndarray:
        g = np.asarray(bit_costs, dtype=np.float64)
        if g.shape != (self.n,):
            raise InputError(f"bit_costs must have shape ({self.n},); got {g.shape}.")
        cost = np.empty(self.num_cols, dtype=np.float64)
        cost[: self.n] = g
        if local_costs is None:
            cost[self.n:] = 0.0
        else:
            hc = np.asarray(local_costs, dtype=np.float64)
            if hc.shape != (self.num_local,):
                raise InputError(
                    f"local_costs must have shape ({self.num_local},) (one per local codeword); "
                    f"got {hc.shape}."
                )
            cost[self.n:] = hc
        if not np.all(np.isfinite(cost)):
            bad = int(np.flatnonzero(~np.isfinite(cost))[0])
            where = f"bit {bad}" if bad < self.n else f"local codeword {bad - self.n}"
            raise InputError(f"LP costs must be finite; {where} has {cost[bad]!r}.")
        return cost

    def __getstate__(self):
        # a Highs object does not pickle: ship the model data, rebuild HiGHS lazily
        state = self.__dict__.copy()
        state.update(_h=None, _has_basis=False, _last_optimal=False)
        return state

    def duals(self) -> tuple[np.ndarray, np.ndarray]:
        """Row duals of the last solve, which must have been an optimal LP solve.

        Returns
        -------
        check_duals : ndarray of shape (m,), float64
            Duals ``nu_c`` of the rows ``sum_S tau_c(S) = 1``.
        edge_duals : ndarray of shape (E,), float64
            Duals ``mu_e`` of the rows ``tau_i - sum_{S containing i} tau_c(S) = 0``,
            edges in check-major order.

        Notes
        -----
        HiGHS convention: reduced costs are ``cost - A^T y``. With the rows above,
        ``mu = edge_duals`` are the multipliers of DESIGN.md section 5a: the
        Lagrangian bound ``sum_c min_S [h_c(S) + sum_{i in S} mu_ic] +
        sum_i min(0, g_i - sum_{c containing i} mu_ic)`` equals the LP optimum
        at these duals (strong duality; checked in tests/test_lp.py).

        Raises
        ------
        SolverError
            When there is no optimal LP solution to read duals from.
        """
        if self._h is None or not getattr(self, "_last_optimal", False):
            raise SolverError("No optimal LP solve to read duals from (solve first).")
        y = np.asarray(self._h.getSolution().row_dual, dtype=np.float64)
        if y.shape != (self.num_rows,):
            raise SolverError("HiGHS returned row duals of the wrong length.")
        return y[: self.m].copy(), y[self.m:].copy()

    def reset(self) -> None:
        """Forget the current basis: the next :meth:`solve` is cold."""
        if self._h is not None:
            self._h.clearSolver()
        self._has_basis = False

    def solve(self, bit_costs, local_costs=None, *, warm: bool = True,
              time_limit: float | None = None) -> LPSolution:
        """Minimise ``<bit_costs, tau_bits> + <local_costs, tau_local>`` over the local polytope.

        Parameters
        ----------
        bit_costs : ndarray of shape (n,), float
            Cost per bit column (LP decoding: the channel LLRs).
        local_costs : ndarray of shape (L,), float, optional
            Cost per local-codeword column, flat layout of ``local_codewords``;
            None means zero.
        warm : bool
            True: re-solve from the previous optimal basis with only the
            objective changed (hot start; cold if there is no basis yet).
            False: forget the basis and solve cold.
        time_limit : float, optional
            Seconds allowed for this call (None: no limit).

        Returns
        -------
        LPSolution
            With ``integral_bits`` the problem is a MIP over codewords.

        Raises
        ------
        InputError
            Wrong shapes or non-finite costs, or a bad time limit.
        SolverError
            HiGHS failed to accept the costs or options.
        """
        highspy = _highspy()
        cost = self._costs(bit_costs, local_costs)
        if time_limit is not None:
            time_limit = float(time_limit)
            if not (time_limit > 0 and math.isfinite(time_limit)):
                raise InputError(
                    f"time_limit must be a positive number of seconds; got {time_limit!r}."
                )
        h = self._ensure_model()
        t0 = time.perf_counter()
        status = h.changeColsCost(self.num_cols, self._indices, cost)
        if status != highspy.HighsStatus.kOk:
            raise SolverError(f"HiGHS changeColsCost failed (status {status}).")
        self._cost = cost
        hot = warm and self._has_basis and not self.integral_bits
        if not warm and self._has_basis:
            h.clearSolver()
            self._has_basis = False
        cold = self.cold_method
        if cold == "auto":
            cold = "dual" if local_costs is None else "ipm"
        deadline = h.getRunTime() + time_limit if time_limit is not None else None
        if self.integral_bits:
            method = "mip"
        elif hot:
            method = "hot"
        else:
            method = f"cold-{cold}"
        run_status = self._run(h, method, deadline)
        model_status = h.getModelStatus()
        iters_before = 0
        if method == "hot" and model_status == highspy.HighsModelStatus.kIterationLimit:
            # the hot start wandered off: start again from scratch
            iters_before = max(int(h.getInfo().simplex_iteration_count), 0)
            h.clearSolver()
            self._has_basis = False
            method = f"hot+cold-{cold}"
            run_status = self._run(h, f"cold-{cold}", deadline)
            model_status = h.getModelStatus()
        seconds = time.perf_counter() - t0
        info = h.getInfo()
        iters = 0
        if not self.integral_bits:
            iters = iters_before + max(int(info.simplex_iteration_count), 0)
            if method.endswith("ipm"):
                iters += max(int(info.crossover_iteration_count), 0)
        optimal = (model_status == highspy.HighsModelStatus.kOptimal
                   and run_status != highspy.HighsStatus.kError)
        name = h.modelStatusToString(model_status).strip().lower()
        status_text = _status_text(highspy, model_status, name)
        if run_status == highspy.HighsStatus.kError and status_text == "optimal":
            status_text = "error"
        feasible = int(highspy.SolutionStatus.kSolutionStatusFeasible)
        usable = optimal or (self.integral_bits and int(info.primal_solution_status) == feasible)
        if usable:
            x = np.asarray(h.getSolution().col_value, dtype=np.float64)
            if x.shape != (self.num_cols,):
                raise SolverError("HiGHS returned a solution of the wrong length.")
            # vertex values carry round-off of the order of the feasibility tolerance
            bits = np.clip(x[: self.n], 0.0, 1.0)
            local = np.maximum(x[self.n:], 0.0)
            objective = float(cost[: self.n] @ bits + cost[self.n:] @ local)
        else:
            bits = np.full(self.n, np.nan)
            local = np.full(self.num_local, np.nan)
            objective = float("nan")
        if optimal and not self.integral_bits:
            if method.endswith("ipm"):
                # keep the crossover basis for the next simplex run (HIGHS-NOTES pitfall 3)
                h.setBasis(h.getBasis())
            self._has_basis = True
        elif model_status == highspy.HighsModelStatus.kTimeLimit and not self.integral_bits:
            # a simplex stopped by the clock still holds a valid basis; an IPM does not
            self._has_basis = not method.endswith("ipm") and bool(info.basis_validity)
            if not self._has_basis:
                h.clearSolver()
        elif not self.integral_bits:
            h.clearSolver()
            self._has_basis = False
        self._last_optimal = bool(optimal) and not self.integral_bits
        return LPSolution(bits=bits, local=local, objective=objective, status=status_text,
                          optimal=bool(optimal), simplex_iterations=iters, seconds=seconds,
                          method=method)

    def _run(self, h, method: str, deadline: float | None):
        """Set the options of ``method`` and run HiGHS once; return the run status."""
        highspy = _highspy()
        iteration_limit = highspy.kHighsIInf
        if method == "hot":
            _set_option(h, "solver", "simplex")
            _set_option(h, "simplex_strategy", _SIMPLEX_STRATEGY[self.hot_method])
            if self.hot_iteration_limit is not None:
                iteration_limit = self.hot_iteration_limit
        elif method == "cold-ipm":
            _set_option(h, "solver", "ipm")
            _set_option(h, "run_crossover", "on")
        elif method.startswith("cold-"):
            _set_option(h, "solver", "simplex")
            _set_option(h, "simplex_strategy", _SIMPLEX_STRATEGY[method[5:]])
        if not self.integral_bits:
            _set_option(h, "simplex_iteration_limit", int(iteration_limit))
        # time_limit counts the object's cumulative run time (HIGHS-NOTES pitfall 2)
        limit = deadline if deadline is not None else highspy.kHighsInf
        if deadline is not None and limit <= h.getRunTime():
            limit = h.getRunTime() + 1e-9
        _set_option(h, "time_limit", float(limit))
        return h.run()


def _status_text(highspy, model_status, fallback: str) -> str:
    S = highspy.HighsModelStatus
    table = {
        S.kOptimal: "optimal",
        S.kTimeLimit: "time_limit",
        S.kInfeasible: "infeasible",
        S.kUnbounded: "unbounded",
        S.kUnboundedOrInfeasible: "unbounded_or_infeasible",
        S.kIterationLimit: "iteration_limit",
        S.kInterrupt: "interrupted",
        S.kModelEmpty: "empty",
        S.kNotset: "error",
        S.kLoadError: "error",
        S.kModelError: "error",
        S.kPresolveError: "error",
        S.kSolveError: "error",
        S.kPostsolveError: "error",
        S.kMemoryLimit: "memory_limit",
    }
    return table.get(model_status, fallback.replace(" ", "_") or "unknown")


class ParityMIP:
    """Block-ML decoding as the compact MIP ``H x = 2 z`` (x binary, z integer).

    Minimises ``<bit_costs, x>`` over codewords with ``n + m`` integer
    columns and ``m`` rows, instead of the local-codeword columns of
    ``LocalPolytopeLP(integral_bits=True)``. Measured on Golay(24,12) frames
    (experiments/bench_lp_oracle.py notes): about ten times faster than the
    extended model. It takes costs on bits only.

    Parameters
    ----------
    code : ParityCheckCode
    threads : int
    """

    def __init__(self, code, *, threads: int = 1):
        self.code = code
        self.n = int(code.n)
        self.m = int(code.m)
        self.threads = int(threads)
        self._h = None

    def __getstate__(self):
        state = self.__dict__.copy()
        state["_h"] = None
        return state

    def _ensure_model(self):
        if self._h is not None:
            return self._h
        highspy = _highspy()
        n, m = self.n, self.m
        A = sp.hstack([self.code.H.astype(np.float64), -2.0 * sp.identity(m, format="csc")])
        A = sp.csc_matrix(A)
        A.sort_indices()
        h = _new_highs()
        _set_option(h, "threads", self.threads)
        lp = highspy.HighsLp()
        lp.num_col_ = n + m
        lp.num_row_ = m
        lp.col_cost_ = np.zeros(n + m)
        lp.col_lower_ = np.zeros(n + m)
        lp.col_upper_ = np.concatenate([np.ones(n), (self.code.check_degrees // 2).astype(float)])
        lp.row_lower_ = np.zeros(m)
        lp.row_upper_ = np.zeros(m)
        lp.a_matrix_.format_ = highspy.MatrixFormat.kColwise
        lp.a_matrix_.num_col_ = n + m
        lp.a_matrix_.num_row_ = m
        lp.a_matrix_.start_ = A.indptr.astype(np.int32)
        lp.a_matrix_.index_ = A.indices.astype(np.int32)
        lp.a_matrix_.value_ = A.data.astype(np.float64)
        lp.integrality_ = [highspy.HighsVarType.kInteger] * (n + m)
        status = h.passModel(lp)
        if status != highspy.HighsStatus.kOk:
            raise SolverError(f"HiGHS refused the parity MIP (status {status}).")
        _set_option(h, "mip_rel_gap", 0.0)
        _set_option(h, "mip_abs_gap", 1e-9)
        _set_option(h, "presolve", "off")
        self._h = h
        self._indices = np.arange(n, dtype=np.int32)
        return h

    def solve(self, bit_costs, *, time_limit: float | None = None) -> LPSolution:
        """Minimise ``<bit_costs, x>`` over codewords; ``local`` is empty in the result."""
        highspy = _highspy()
        g = np.asarray(bit_costs, dtype=np.float64)
        if g.shape != (self.n,) or not np.all(np.isfinite(g)):
            raise InputError(f"bit_costs must be finite with shape ({self.n},); got {g.shape}.")
        h = self._ensure_model()
        t0 = time.perf_counter()
        if h.changeColsCost(self.n, self._indices, g) != highspy.HighsStatus.kOk:
            raise SolverError("HiGHS changeColsCost failed.")
        limit = h.getRunTime() + time_limit if time_limit is not None else highspy.kHighsInf
        _set_option(h, "time_limit", float(limit))
        run_status = h.run()
        seconds = time.perf_counter() - t0
        model_status = h.getModelStatus()
        info = h.getInfo()
        optimal = (model_status == highspy.HighsModelStatus.kOptimal
                   and run_status != highspy.HighsStatus.kError)
        status_text = _status_text(highspy, model_status,
                                   h.modelStatusToString(model_status).strip().lower())
        if run_status == highspy.HighsStatus.kError and status_text == "optimal":
            status_text = "error"
        feasible = int(highspy.SolutionStatus.kSolutionStatusFeasible)
        if optimal or int(info.primal_solution_status) == feasible:
            x = np.asarray(h.getSolution().col_value, dtype=np.float64)[: self.n]
            bits = np.clip(x, 0.0, 1.0)
            objective = float(g @ bits)
        else:
            bits = np.full(self.n, np.nan)
            objective = float("nan")
        return LPSolution(bits=bits, local=np.zeros(0), objective=objective, status=status_text,
                          optimal=bool(optimal), simplex_iterations=0, seconds=seconds)


# ---------------------------------------------------------------- decoders
#: HiGHS treats costs of magnitude >= 1e20 as infinite (its ``infinite_cost``
#: option), and large costs also swamp its absolute tolerances. The LP and ML
#: decoders therefore rescale a frame whose largest |LLR| exceeds this by a
#: power of two: exact in binary floating point, and the minimiser of a linear
#: objective does not change, so decisions are exact at every finite magnitude.
COST_SCALE_MAX = 2.0**13


def cost_scale(llr_row: np.ndarray) -> float:
    """Power-of-two factor that brings ``max |llr_row|`` to at most :data:`COST_SCALE_MAX`."""
    top = float(np.max(np.abs(llr_row))) if llr_row.size else 0.0
    if top <= COST_SCALE_MAX:
        return 1.0
    return 2.0 ** -math.ceil(math.log2(top / COST_SCALE_MAX))


#: Default wall-clock caps per frame (seconds): LP decoding solves one LP per frame
#: (well under a second at n = 504); an ML MIP can take much longer.
DEFAULT_LP_TIME_LIMIT = 10.0
DEFAULT_ML_TIME_LIMIT = 30.0
_TIME_LIMIT = Param("float", DEFAULT_LP_TIME_LIMIT, low=0.0, low_open=True,
                    doc="Seconds allowed per frame (none: no limit); a frame that hits it is "
                        "reported in info['capped'].")
_ML_TIME_LIMIT = Param("float", DEFAULT_ML_TIME_LIMIT, low=0.0, low_open=True,
                       doc="Seconds allowed per frame (none: no limit); a frame that hits it "
                           "is reported in info['capped'].")
_MAX_DEG = Param("int", DEFAULT_MAX_CHECK_DEGREE, low=1, high=24,
                 doc="Refuse checks of larger degree (2**(d-1) local codewords each).")


class _LPBackedDecoder(Decoder):
    _integral = False

    def _setup(self) -> None:
        self._lp = None
        if self.options.get("formulation", "local") == "local":
            # refuse over-large checks at construction, not at the first frame
            self.code.local_codewords(self.options["max_check_degree"])

    def _model(self):
        if self._lp is None:
            if self.options.get("formulation", "local") == "parity":
                self._lp = ParityMIP(self.code)
            else:
                self._lp = LocalPolytopeLP(self.code,
                                           max_check_degree=self.options["max_check_degree"],
                                           integral_bits=self._integral)
        return self._lp

    # HiGHS objects do not pickle: ship the options only, rebuild on the other side
    def __getstate__(self):
        state = self.__dict__.copy()
        state["_lp"] = None
        return state


class LPDecoder(_LPBackedDecoder):
    """LP decoding over the local polytope (Feldman, Wainwright & Karger 2005).

    Per frame, minimise ``sum_i lambda_i tau_i`` over the local polytope
    (channel LLRs as costs: a positive LLR favours ``tau_i = 0``).

    Outputs
    -------
    bits : (F, n) uint8
        The optimum rounded: ``tau_i > 1/2`` gives 1, ``tau_i < 1/2`` gives 0;
        an exact ``tau_i = 1/2`` is decided by the sign of the channel LLR.
    posterior_llr : None
        An LP optimum is not a posterior; no soft output is claimed.
    iterations : (F,) int64
        Simplex iterations of the frame's solve.
    info["ml_certificate"] : (F,) bool
        The optimum is integral (every ``tau_i`` within ``INTEGRALITY_TOL``
        of 0 or 1): then ``bits`` is the block-ML codeword.
    info["pseudo_codeword"] : (F, n) float64
        The optimum ``tau`` (a fractional pseudo-codeword when not certified).
    info["num_fractional"] : (F,) int64
        Bits with ``tau_i`` farther than ``INTEGRALITY_TOL`` from 0 and 1.
    info["lp_objective"] : (F,) float64
        ``sum_i lambda_i tau_i`` at the optimum.
    info["proved_optimal"] : (F,) bool
        False when the frame hit ``time_limit`` (its outputs are then the
        channel hard decisions and NaN pseudo-codeword, never a stale point).
    info["capped"] : (F,) bool
        The frame hit ``time_limit`` (default :data:`DEFAULT_LP_TIME_LIMIT` s).

    Each frame is solved cold (dual simplex; measured faster than a hot
    start from the previous frame's basis, see experiments/bench_lp_oracle.py).
    """

    name = "lp"
    description = "LP decoding over the local polytope (HiGHS), with ML certificate."
    params = {"time_limit": _TIME_LIMIT, "max_check_degree": _MAX_DEG}
    hard_output = True

    def _decode(self, llr: np.ndarray) -> DecodeResult:
        lp = self._model()
        F, n = llr.shape
        bits = np.zeros((F, n), dtype=np.uint8)
        tau = np.full((F, n), np.nan)
        obj = np.full(F, np.nan)
        cert = np.zeros(F, dtype=bool)
        nfrac = np.zeros(F, dtype=np.int64)
        proved = np.zeros(F, dtype=bool)
        iters = np.zeros(F, dtype=np.int64)
        for f in range(F):
            scale = cost_scale(llr[f])
            sol = lp.solve(llr[f] * scale, warm=False, time_limit=self.options["time_limit"])
            iters[f] = sol.simplex_iterations
            if not sol.optimal:
                if sol.status != "time_limit":
                    raise SolverError(
                        f"LP decoding of frame {f} failed: HiGHS status {sol.status!r}."
                    )
                bits[f] = llr[f] < 0
                nfrac[f] = n
                continue
            proved[f] = True
            t = np.clip(sol.bits, 0.0, 1.0)
            tau[f] = t
            obj[f] = sol.objective / scale
            dist = np.minimum(t, 1.0 - t)
            frac = dist > INTEGRALITY_TOL
            nfrac[f] = int(frac.sum())
            cert[f] = nfrac[f] == 0
            b = t > 0.5
            tie = t == 0.5
            b[tie] = llr[f][tie] < 0
            bits[f] = b
        valid = np.asarray(self.code.is_codeword(bits), dtype=bool).reshape(-1)
        cert &= valid
        return DecodeResult(bits=bits, posterior_llr=None, iterations=iters, valid=valid,
                            info={"ml_certificate": cert, "pseudo_codeword": tau,
                                  "num_fractional": nfrac, "lp_objective": obj,
                                  "proved_optimal": proved, "capped": ~proved})


class MLDecoder(_LPBackedDecoder):
    """Block-ML decoding as a HiGHS MIP: the local-polytope model with integer bits.

    Minimises ``sum_i lambda_i x_i`` over codewords. ``formulation="parity"``
    (default) solves the compact MIP ``H x = 2 z`` (:class:`ParityMIP`);
    ``"local"`` solves the local-polytope model with integer bit columns
    (integral bits force every check's local distribution onto the one local
    codeword they spell). Both are exact; the compact one was about ten times
    faster on Golay(24,12) frames. Suited to moderate codes; the time per
    frame grows quickly with n.

    Outputs
    -------
    bits : (F, n) uint8
        The ML codeword, or the best codeword found when the time limit hit
        (channel hard decisions if none was found).
    posterior_llr : None
    info["proved_optimal"] : (F,) bool
        False when the frame hit ``time_limit`` before optimality was proved.
    info["capped"] : (F,) bool
        The frame hit ``time_limit`` (default :data:`DEFAULT_ML_TIME_LIMIT` s).
    info["ml_objective"] : (F,) float64
        ``sum_i lambda_i x_i`` of the returned word (NaN if none found).
    """

    name = "ml"
    description = "Block-ML decoding as a HiGHS MIP (moderate codes)."
    params = {"time_limit": _ML_TIME_LIMIT,
              "max_check_degree": Param("int", DEFAULT_MAX_CHECK_DEGREE, low=1, high=24,
                                        doc="formulation=local only: refuse checks of larger "
                                            "degree."),
              "formulation": Param("choice", "parity", choices=("parity", "local"),
                                   doc="Compact parity MIP or local-polytope model with integer "
                                       "bits.")}
    hard_output = True
    _integral = True

    def _decode(self, llr: np.ndarray) -> DecodeResult:
        lp = self._model()
        F, n = llr.shape
        bits = np.zeros((F, n), dtype=np.uint8)
        obj = np.full(F, np.nan)
        proved = np.zeros(F, dtype=bool)
        for f in range(F):
            sol = lp.solve(llr[f] * cost_scale(llr[f]), time_limit=self.options["time_limit"])
            if sol.has_solution:
                bits[f] = np.rint(np.clip(sol.bits, 0.0, 1.0)).astype(np.uint8)
                obj[f] = float(llr[f] @ bits[f])
            elif sol.status == "time_limit":
                bits[f] = llr[f] < 0
            else:
                raise SolverError(f"ML decoding of frame {f} failed: HiGHS status {sol.status!r}.")
            proved[f] = sol.optimal
        valid = np.asarray(self.code.is_codeword(bits), dtype=bool).reshape(-1)
        return DecodeResult(bits=bits, posterior_llr=None,
                            iterations=np.zeros(F, dtype=np.int64), valid=valid,
                            info={"proved_optimal": proved, "ml_objective": obj,
                                  "capped": ~proved})
