# hiplan: two entry points for a fresh clone, `make demo` and `make test`.
PYTHON ?= python3
VENV   := .venv
PY     := $(VENV)/bin/python
OUT    := demo-output

.PHONY: demo test bench clean

# The stamp files re-run pip only when pyproject.toml changes.
$(VENV)/.stamp-run: pyproject.toml
	$(PYTHON) -m venv $(VENV)
	$(PY) -m pip install --quiet --upgrade pip
	$(PY) -m pip install --quiet -e .
	touch $@

$(VENV)/.stamp-test: pyproject.toml
	$(PYTHON) -m venv $(VENV)
	$(PY) -m pip install --quiet --upgrade pip
	$(PY) -m pip install --quiet -e '.[test]'
	touch $@ $(VENV)/.stamp-run

demo: $(VENV)/.stamp-run
	$(VENV)/bin/hiplan demo --output-dir $(OUT) --force

test: $(VENV)/.stamp-test
	$(PY) -m pytest -q

$(VENV)/.stamp-bench: pyproject.toml
	$(PYTHON) -m venv $(VENV)
	$(PY) -m pip install --quiet --upgrade pip
	$(PY) -m pip install --quiet -e '.[bench]'
	touch $@ $(VENV)/.stamp-test $(VENV)/.stamp-run

bench: $(VENV)/.stamp-bench
	$(PY) benchmarks/run_all.py

clean:
	rm -rf $(VENV) $(OUT) .pytest_cache .hypothesis
