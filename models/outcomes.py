"""Typed outcomes: one vocabulary of statuses for simulations, optimisations, screening samples and study
tasks, and machine-readable reason codes beside every human message. Code compares these members, never
the message text.

Both are ``str`` enumerations: a member equals its value (``Status.OK == "ok"``), so JSON, SQLite and
printed reports carry the plain word.
"""

from __future__ import annotations

from enum import Enum


class _Word(str, Enum):
    def __str__(self) -> str:
        return self.value

    def __format__(self, spec: str) -> str:
        return format(self.value, spec)


class Status(_Word):
    """What became of one computation."""

    OK = "ok"  # a simulation reached the tube outlet
    STOPPED = "stopped"  # a simulation left its validity (runaway past the ceiling, pressure floor)
    FAILED = "failed"  # the computation ran but did not succeed (integrator error, solver failure)
    OPTIMAL = "optimal"  # an optimisation converged (and was verified)
    INFEASIBLE = "infeasible"  # an optimisation found no point meeting every limit
    NOT_OPTIMISED = "not_optimised"  # nothing was free: the case was simulated instead
    DONE = "done"  # a study task finished with a usable result
    ERROR = "error"  # a study task raised (its traceback is kept in the reason)
    TIMEOUT = "timeout"  # a study task passed its time limit
    PENDING = "pending"  # a study task not yet run
    INTERRUPTED = "interrupted"  # a study task stopped by Ctrl-C or SIGINT (run again to resume)


class Reason(_Word):
    """Why an outcome has its status."""

    INTEGRATED = "integrated"  # reached the tube outlet
    TEMPERATURE_CEILING = "temperature_ceiling"  # the temperature passed numerics.temperature_ceiling
    PRESSURE_FLOOR = "pressure_floor"  # the pressure fell to numerics.min_pressure
    INTEGRATOR_ERROR = "integrator_error"  # the integrator raised (overflow, invalid values)
    INTEGRATOR_FAILED = "integrator_failed"  # the integrator gave up (step size too small)
    SHOOTING_FAILED = "shooting_failed"  # no counter-current coolant outlet temperature closes the balance
    BATCH_FAILED = "batch_failed"  # the process integrating a batch of samples failed
    CONVERGED = "converged"  # the NLP solver converged
    SOLVER_FAILED = "solver_failed"  # the NLP solver stopped without convergence
    NO_FEASIBLE_POINT = "no_feasible_point"  # the NLP solver reports the limits infeasible
    BEYOND_STOICHIOMETRY = "beyond_stoichiometry"  # a duty above what the feed can give (checked before IPOPT)
    NOTHING_FREE = "nothing_free"  # no free design variable
    START_NOT_SIMULATED = "start_not_simulated"  # the starting design of an optimisation cannot be simulated
    COMPLETED = "completed"  # a study task completed
    PARTLY_FAILED = "partly_failed"  # some parts of a study task failed (points of a front)
    EXCEPTION = "exception"  # a study task raised
    TIME_LIMIT = "time_limit"  # a study task passed its time limit
    WORKER_LOST = "worker_lost"  # the worker process or Dask worker of a task died
    INTERRUPTED = "interrupted"  # stopped by Ctrl-C or SIGINT
    DISK_FULL = "disk_full"  # no space left while writing results
    FITTED = "fitted"  # a kinetics fit converged and its statistics were computed
    TOO_FEW_MEASUREMENTS = "too_few_measurements"  # a fit with no more usable measurements than parameters
    RUN_NOT_SIMULATED = "run_not_simulated"  # a laboratory run cannot be simulated at the fitted parameters
    RADIAL_DATA = "radial_data"  # the radial data cannot reproduce the given overall U (2-D model not run)


# The statuses after which a study task is not run again unless asked to (--retry-failed).
RETRYABLE = (Status.FAILED, Status.ERROR, Status.TIMEOUT, Status.STOPPED, Status.INFEASIBLE)
