"""The Pyomo-to-cyipopt bridge: any Pyomo NLP in, a typed outcome out. Knows nothing of reactors."""
