"""The design problem: spec, goals and limits, costs, collocation model, optimisation, alternatives."""
