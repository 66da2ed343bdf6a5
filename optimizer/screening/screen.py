"""``screen``: the [uncertain] quantities of a case ranked for the reactor outputs, or with re-optimisation
for the optimal goal and design."""

from __future__ import annotations

from tubewright.optimizer.screening.analysis import ScreeningResult, run
from tubewright.optimizer.screening.evaluation import evaluate
from tubewright.optimizer.screening.uncertain import read_uncertain, refuse_unused_radial_data

SCREENED_OUTPUTS = ("max_temperature_K", "conversion", "product_selectivity", "production_rate_mol_s",
                    "pressure_drop_Pa", "passes_hot_spot_limit", "passes_limits")


def screen(case, method: str = "morris", n: int = 16, seed: int = 0, policy: str = "censor",
           batched: bool = True, batch_size: int = 500, progress=None, reoptimise: bool = False,
           workers: int = 1, radial: bool = False) -> ScreeningResult:
    """Screen the [uncertain] quantities of a case for the reactor outputs (SCREENED_OUTPUTS), or with
    ``reoptimise`` for the optimal goal and design; ``radial`` evaluates the samples with the 2-D model."""
    items = read_uncertain(case)
    refuse_unused_radial_data(case, items, two_dimensional=radial and not reoptimise)
    if reoptimise:  # the design problem needs Pyomo and IPOPT: imported only when asked for
        from tubewright.optimizer.screening.reoptimise import reoptimise_evaluator

        return run(items, reoptimise_evaluator(case, items, progress), method, n, seed, policy)

    def evaluator(unit_x):
        return evaluate(case, items, unit_x, batch_size=batch_size, batched=batched, progress=progress,
                        workers=workers, radial=radial)

    return run(items, evaluator, method, n, seed, policy, SCREENED_OUTPUTS)
