# Two commands on a fresh machine:
#   make demo   create .venv, install, run the main job on a shipped default
#   make test   same install plus the test extras, then the test suite
PYTHON ?= python3
VENV   := .venv
PY     := $(VENV)/bin/python
PIP    := $(PY) -m pip
TORCH  := torch==2.13.0

.PHONY: demo test install install-test bench clean

$(VENV)/.base: pyproject.toml
	$(PYTHON) -m venv $(VENV)
	$(PIP) install --quiet --upgrade pip
	# torch first and pinned: the CPU build; an unpinned torch pulls a multi-GB CUDA build
	$(PIP) install --quiet $(TORCH)
	$(PIP) install --quiet -e .
	touch $@

$(VENV)/.test: $(VENV)/.base
	$(PIP) install --quiet -e ".[test]"
	touch $@

install: $(VENV)/.base
install-test: $(VENV)/.test

demo: $(VENV)/.base
	$(VENV)/bin/intervgnn run configs/quickstart.yaml

test: $(VENV)/.test
	$(PY) -m pytest -q || { rc=$$?; if [ $$rc -eq 5 ]; then echo "no tests collected"; else exit $$rc; fi; }

bench: $(VENV)/.test
	$(PY) experiments/bench/exact_vs_reference.py
	$(PY) experiments/bench/fuzz_readers.py --inputs 10000
	$(PY) experiments/bench/layer_overhead.py
	$(PY) experiments/bench/neural_speed.py
	$(PY) experiments/bench/neural_parts.py
	$(PY) experiments/bench/neural_accuracy.py --mixed --out experiments/results/neural_accuracy.json
	$(PY) experiments/bench/hidden_accuracy.py --out experiments/results/hidden_accuracy.json
	$(VENV)/bin/intervgnn run configs/random.yaml --output experiments/results/random
	$(PY) experiments/bench/neural_ratios.py experiments/results/random/summary.csv --goals random
	$(VENV)/bin/intervgnn run configs/relational.yaml --output experiments/results/relational
	$(PY) experiments/bench/relational_ratios.py experiments/results/relational/summary.csv
	$(VENV)/bin/intervgnn run configs/relational-seeds.yaml --output experiments/results/relational-seeds
	$(PY) experiments/bench/relational_ratios.py experiments/results/relational-seeds/summary.csv
	$(VENV)/bin/intervgnn run configs/relational-bins.yaml --output experiments/results/relational-bins
	$(PY) experiments/bench/relational_ratios.py experiments/results/relational-bins/summary.csv --bins
	$(VENV)/bin/intervgnn run configs/relational-bins-seeds.yaml --output experiments/results/relational-bins-seeds
	$(PY) experiments/bench/relational_ratios.py experiments/results/relational-bins-seeds/summary.csv --bins
	$(PY) experiments/bench/relational_draw_check.py
	$(PY) experiments/bench/relational_interval_coverage.py --seeds 0 1 2 3 4
	$(PY) experiments/bench/relational_scale.py
	$(PY) experiments/bench/interval_coverage.py --timing --out experiments/results/interval_coverage.json
	$(PY) experiments/bench/interval_coverage.py --seeds 0 1 2 3 4 5 6 7 8 9 10 11 12 13 14 15 16 17 18 19 --out experiments/results/interval_coverage_seeds20.json
	$(PY) experiments/bench/interval_coverage.py --networks random:nodes=10,seed=0 random:nodes=12,seed=1 random:nodes=15,seed=2 random:nodes=17,seed=3 random:nodes=20,seed=4 random:nodes=23,seed=5 random:nodes=25,seed=6 random:nodes=28,seed=7 random:nodes=31,seed=8 random:nodes=33,seed=9 --seeds 0 1 2 3 4 5 6 7 8 9
	$(PY) experiments/bench/interval_coverage.py --networks random:nodes=12,seed=203,states=2,concentration=0.3,deterministic=0.3 random:nodes=15,seed=204,concentration=0.3,deterministic=0.3 cancer sachs --rows 300 --seeds 0 1 2 3 4 5 6 7 8 9

clean:
	rm -rf $(VENV) build *.egg-info
