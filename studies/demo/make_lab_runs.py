"""INVENTED DEMO DATA: writes oxidation-lab-runs.csv, the laboratory runs of the invented propene oxidation
demo. The runs are simulations of oxidation-lab.toml with invented "true" kinetics (below; deliberately not
the starting values of the case) plus seeded Gaussian noise of the errors stated in its [fit.errors].
Nothing here is a measurement.

Run: .venv/bin/python studies/demo/make_lab_runs.py"""

from pathlib import Path

import numpy as np
from tubewright.models import load_case
from tubewright.models.simulator import simulate

HERE = Path(__file__).resolve().parent
TRUE_KINETICS = {  # invented
    "chemistry.reactions.partial_oxidation.k_ref": "1.45e-9 mol/kg/s/Pa^1.3",
    "chemistry.reactions.partial_oxidation.activation_energy": "74 kJ/mol",
    "chemistry.reactions.combustion.k_ref": "2.9e-11 mol/kg/s/Pa^1.5",
    "chemistry.reactions.combustion.activation_energy": "98 kJ/mol",
}
TEMPERATURES_K = [560.0, 570.0, 580.0, 590.0, 600.0, 610.0, 620.0]
FLOWS_MOL_S = [0.001, 0.002]
REPLICATES_AT = (590.0, 0.001)  # three runs at the same conditions: a lack-of-fit test becomes possible


def main(seed: int = 2026):
    rng = np.random.default_rng(seed)
    conditions = [(t, f) for f in FLOWS_MOL_S for t in TEMPERATURES_K] + [REPLICATES_AT] * 2
    rows = ["feed.temperature [K],feed.molar_flow [mol/s],measured.conversion,measured.outlet_flow.C3H4O [mol/s]"]
    for t, f in conditions:
        case = load_case(HERE / "oxidation-lab.toml", {**TRUE_KINETICS, "feed.temperature": f"{t} K",
                                                        "feed.molar_flow": f"{f} mol/s"})
        res = simulate(case, checks=False)
        x = res.summary["conversion"] + rng.normal(0.0, 0.005)
        acrolein = res.columns["F_C3H4O_mol_s"][-1] * (1.0 + rng.normal(0.0, 0.02))
        rows.append(f"{t:g},{f:g},{x:.5f},{acrolein:.6e}")
    (HERE / "oxidation-lab-runs.csv").write_text("\n".join(rows) + "\n")


if __name__ == "__main__":
    main()
