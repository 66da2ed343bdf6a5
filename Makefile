# Two entry points: `make demo` simulates, optimises and screens the bundled invented demo, `make test` runs
# lint and the tests.
# Both create the virtual environment .venv on first use.
PYTHON ?= python3
VENV := .venv
BIN := $(VENV)/bin
STAMP := $(VENV)/.installed

.PHONY: demo test lint bench clean

$(STAMP): pyproject.toml
	test -d $(VENV) || $(PYTHON) -m venv $(VENV)
	$(BIN)/python -m pip install --quiet --upgrade pip
	$(BIN)/python -m pip install --quiet -e '.[test]'
	$(BIN)/python -m compileall -q tubewright models optimizer  # as a wheel install would (every verb is a process)
	touch $(STAMP)

demo: $(STAMP)
	$(BIN)/tubewright simulate studies/demo/oxidation.toml --out demo-output/oxidation
	$(BIN)/tubewright simulate studies/demo/coil.toml --out demo-output/coil
	$(BIN)/tubewright simulate studies/demo/oxidation-radial.toml --radial --out demo-output/radial
	$(BIN)/tubewright optimize studies/demo/oxidation-design.toml --ideal --out demo-output/oxidation-design
	$(BIN)/tubewright optimize studies/demo/oxidation-design.toml --radial-tighten --out demo-output/radial-design
	$(BIN)/tubewright optimize studies/demo/oxidation-design.toml --scenarios 8 --verify-samples 300 --out demo-output/robust
	$(BIN)/tubewright screen studies/demo/oxidation-screen.toml --method morris --samples 10 --out demo-output/screen
	$(BIN)/tubewright fit studies/demo/oxidation-lab.toml --data studies/demo/oxidation-lab-runs.csv --out demo-output/fit --design studies/demo/oxidation.toml
	$(BIN)/tubewright screen demo-output/fit/design-fitted.toml --method sobol --samples 64 --out demo-output/fit-screen
	$(BIN)/tubewright run studies/demo/study.toml --out demo-output/study
	$(BIN)/tubewright report demo-output/study

lint: $(STAMP)
	$(BIN)/ruff check tubewright models optimizer tests

test: lint
	$(BIN)/pytest -q

bench: $(STAMP)
	$(BIN)/python tests/benchmarks/bench_startup.py
	$(BIN)/python tests/benchmarks/bench_simulate.py
	$(BIN)/python tests/benchmarks/bench_optimize.py
	$(BIN)/python -m pip install -q -e ".[bench]"
	$(BIN)/python tests/benchmarks/bench_compact.py
	$(BIN)/python tests/benchmarks/bench_linear_solver.py --quick
	$(BIN)/python tests/benchmarks/bench_fit.py
	$(BIN)/python tests/benchmarks/bench_robust.py
	$(BIN)/python tests/benchmarks/bench_radial.py
	$(BIN)/python tests/benchmarks/bench_screen.py
	$(BIN)/python tests/benchmarks/bench_study.py
	$(BIN)/python tests/benchmarks/fuzz_cases.py 800
	$(BIN)/python tests/benchmarks/stress_study.py 20

clean:
	rm -rf $(VENV) demo-output .pytest_cache
