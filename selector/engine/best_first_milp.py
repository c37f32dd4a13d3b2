"""The MILP round of the single-axle search (`best_first.SingleAxleSearch` inherits it): the Pyomo/HiGHS
relaxation over the motors still open, consulted only when per-motor bounds stay weak for long.
"""

from __future__ import annotations

import time

import numpy as np

from selector.engine.evaluate import tie_tolerance


class MilpRound:
    """The MILP round of `SingleAxleSearch` (a mixin: it reads the search's own state)."""

    # ------------------------------------------------------------------ the MILP relaxation
    def milp_round(self, open_pos: np.ndarray, lb: np.ndarray, cells: dict):
        """Ask the MILP relaxation over the open motors: None when it is infeasible under the incumbent
        cutoff (no open motor can beat the pool: a proof), else the position of the motor it picks.

        Each open motor's first-gear L window is the hull of its admissible pairs (and, once its
        acceleration bound is refined, of the pairs in cells that can still count); the accel_time
        objective uses each motor's certified bound as its coefficient. Every row of the model is a
        relaxation (`model.py`), so infeasibility proves that no unevaluated design beats the cutoff.
        """
        from selector.engine.model import AccelWindows, SelectionModel

        parts = self.parts
        n_all = parts.sizes[0]
        lo = np.full(n_all, np.inf)
        hi = np.full(n_all, -np.inf)
        tmin = np.full(n_all, np.inf)
        h_lo, h_hi = self.hull(open_pos)
        limit = self.time_limit_s
        edges = self.cell_edges()
        for n, pos in enumerate(open_pos):
            a, b = h_lo[n], h_hi[n]
            cl = cells.get(int(pos))
            if cl is not None and self.pairs.multi_pairs.size == 0:
                ok = np.nonzero(cl <= min(limit, np.inf if self.objective != "accel_time" else lb[pos] * 1e9))[0]
                if ok.size:
                    a, b = max(a, edges[ok.min()]), min(b, edges[ok.max() + 1])
            i = int(self.motors[pos])
            lo[i], hi[i] = a - 1e-9, b + 1e-9
            tmin[i] = lb[pos]
        # a model over the parts still in play only (open motors, allowed reducers, usable tyres)
        m_rows = np.sort(self.motors[open_pos])
        r_rows = np.arange(parts.sizes[1]) if self.allowed.get("reducers") is None else \
            np.sort(np.asarray(self.allowed["reducers"], dtype=np.int64))
        sub = parts.subset(motors=m_rows, reducers=r_rows, tyres=self.use.tyres)
        windows = AccelWindows(lo=lo[m_rows], hi=hi[m_rows], t_min_s=tmin[m_rows])
        model = SelectionModel(sub, self.objective, windows=windows,
                               accel_target_kmh=self.req.accel_to_kmh if self.accel else None,
                               accel_limit_s=self.req.accel_time_s, deadline=self.deadline)
        self.stats["milp"] = self.stats.get("milp", 0) + 1
        if model.expired:
            return -1  # the deadline passed while building: the loop's next check returns time_limit
        if model.infeasible_reason:
            return None
        kth = self.kth()
        if np.isfinite(kth):
            model.set_cutoff((kth + tie_tolerance(kth)) * model.objective_scale())
        from pyomo.contrib.solver.common.results import TerminationCondition as TC

        from selector.engine.search import solver

        options = {"mip_rel_gap": 0.0, "mip_abs_gap": 1e-9, "presolve": "off", "threads": 1}
        if self.deadline is not None:  # HiGHS stops at the deadline too (no verdict: -1 below)
            options["time_limit"] = max(self.deadline - time.perf_counter(), 0.01)
        res = solver().solve(model.m, load_solutions=False, raise_exception_on_nonoptimal_result=False,
                             solver_options=options)
        if res.termination_condition in (TC.provenInfeasible, TC.infeasibleOrUnbounded, TC.locallyInfeasible):
            return None
        if res.termination_condition != TC.convergenceCriteriaSatisfied:
            return -1  # no verdict (e.g. the solver stopped early): keep the bound search going
        res.solution_loader.load_vars()
        i, _, _ = model.chosen()
        i = int(m_rows[i])
        return int(np.nonzero(self.motors == i)[0][0])
