# python3.12 may be a pyenv shim that is not active; fall back to pyenv's own install.
PYTHON ?= $(shell for p in python3.12 $$(ls -d /root/.pyenv/versions/3.12*/bin/python3.12 /usr/local/bin/python3.12 /usr/bin/python3.12 2>/dev/null); do $$p -c 'import sys; assert sys.version_info >= (3, 12)' 2>/dev/null && { echo $$p; break; }; done)
VENV := .venv
BIN := $(VENV)/bin

.PHONY: venv demo test bench calibrate corpus fuzz golden clean

$(BIN)/returngap: pyproject.toml
	@test -n "$(PYTHON)" || { echo "error: Python 3.12 or newer not found (set PYTHON=...)"; exit 2; }
	test -x $(BIN)/python || $(PYTHON) -m venv $(VENV)
	$(BIN)/python -m pip install -q --upgrade pip
	$(BIN)/python -m pip install -q -e '.[test,dask]'
	@touch $(BIN)/returngap

venv: $(BIN)/returngap

demo: venv
	$(BIN)/returngap check examples/demo-board --stackup examples/demo-board/stackup.toml \
		--json out/demo/findings.json --out out/demo --fail-on never --pictures info --frequency-view info

test: venv
	$(BIN)/ruff check .
	$(BIN)/ruff format --check .
	$(BIN)/python -m pytest

golden: venv  # rewrites testdata/golden/: only when a change of the findings is meant
	$(BIN)/python tests/golden.py

corpus: venv
	RETURNGAP_SLOW=1 $(BIN)/python -m pytest tests/test_corpus.py --durations=0

fuzz: venv
	FUZZ_N=50000 FUZZ_CORPUS_N=2000 $(BIN)/python -m pytest tests/test_bad_inputs.py -k "mutated"

bench: venv
	$(BIN)/python benchmarks/run.py

calibrate: venv  # rewrites testdata/slot-calibration.csv: the field-solve sweep the closed form is fitted to
	$(BIN)/python benchmarks/calibrate_slot.py

clean:
	rm -rf $(VENV) out
