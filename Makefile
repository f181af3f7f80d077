# The two commands of the README: `make demo` and `make test`.
PYTHON ?= python3
VENV ?= .venv
BIN := $(VENV)/bin
STAMP := $(VENV)/.installed

.PHONY: demo test setup bench clean

setup: $(STAMP)

$(STAMP): pyproject.toml
	test -x $(BIN)/python || $(PYTHON) -m venv $(VENV)
	$(BIN)/python -m pip install --quiet --quiet --upgrade pip
	$(BIN)/python -m pip install --quiet --quiet -e ".[test,cluster,plot,preview]"
	touch $(STAMP)

demo: $(STAMP)
	@mkdir -p renders
	@for patch in patches/*.yaml; do \
		$(BIN)/synth render "$$patch" --quiet || exit 1; \
	done
	@$(BIN)/synth midi patches/midi/demo-song.mid --map patches/midi/demo-map.yaml -o renders/demo-song.wav --quiet
	@$(BIN)/synth midi patches/midi/demo-song.mid --map patches/midi/instrument-map.yaml -o renders/demo-song-instruments.wav --quiet
	@$(BIN)/synth batch patches/library/demo-library.yaml --quiet
	@$(BIN)/synth batch patches/library/dulcimer-library.yaml --quiet
	@echo "listening caution: start playback quietly and raise it slowly; long exposure to loud sound harms hearing"

test: $(STAMP)
	$(BIN)/python -m pytest -q

bench: $(STAMP)
	$(BIN)/python benchmarks/engine.py
	$(BIN)/python benchmarks/e2e.py
	$(BIN)/python benchmarks/fit.py
	$(BIN)/python benchmarks/fe.py

clean:
	rm -rf renders/*.wav .pytest_cache
