"""The typed outcome of a design optimisation: status and reason code, design, limits with multipliers,
costs, verification against the adaptive integrator, solver counters and timings."""

from __future__ import annotations

from dataclasses import dataclass, field

from tubewright.models.outcomes import Reason, Status


@dataclass
class LimitRow:
    name: str
    value: float
    bound: float
    kind: str  # "min" or "max"
    binding: bool
    multiplier: float | None  # d objective / d bound; None where the point is not optimal (no meaning there)
    unit: str

    @property
    def violation(self) -> float:
        """By how much the value passes the bound (0 when the limit is kept)."""
        excess = self.value - self.bound if self.kind == "max" else self.bound - self.value
        return max(0.0, float(excess))

    @property
    def violated(self) -> bool:
        return self.violation > 1e-6 * abs(self.bound) + 1e-9

    def as_dict(self):
        return {"limit": self.name, "value": self.value, "bound": self.bound, "kind": self.kind,
                "binding": self.binding, "multiplier_per_unit": self.multiplier, "unit": self.unit,
                "violation": self.violation, "violated": self.violated}


@dataclass
class OptimizationResult:
    status: Status  # OPTIMAL, INFEASIBLE, FAILED, NOT_OPTIMISED
    reason: str
    goal: str
    objective: float | None
    design: dict = field(default_factory=dict)
    limits: list = field(default_factory=list)
    costs: dict = field(default_factory=dict)
    verification: dict = field(default_factory=dict)
    solver: dict = field(default_factory=dict)
    timings: dict = field(default_factory=dict)
    simulation: object = None  # models SimulationResult at the final design
    notes: list = field(default_factory=list)
    hint: str = ""
    reason_code: Reason = Reason.CONVERGED
    extras: dict = field(default_factory=dict)  # standard-tube ranking, ideal bound, multi-start, Pareto front
    case: object = None  # the case that was optimised (with the chosen standard tube, if ranked)

    @property
    def ok(self):
        return self.status == Status.OPTIMAL

    @property
    def goal_valid(self) -> bool:
        """The goal value means what it says only at a converged (optimal) design; otherwise it is the value
        at the best point found, which breaks a limit or the balances."""
        return self.status == Status.OPTIMAL

    def as_dict(self) -> dict:
        """The report fields (SI, units in the names); JSON-safe after ``jsonsafe.finite``."""
        return {"status": self.status, "reason": self.reason, "reason_code": self.reason_code, "goal": self.goal,
                "objective": self.objective, "goal_valid": self.goal_valid,
                "design": self.design, "limits": [r.as_dict() for r in self.limits], "costs_per_year": self.costs,
                "verification": self.verification, "solver": self.solver, "timings_s": self.timings,
                "notes": self.notes, "hint": self.hint,
                "summary": self.simulation.summary if self.simulation is not None else {},
                "findings": [f.as_dict() for f in self.simulation.findings] if self.simulation is not None else [],
                **self.extras}
