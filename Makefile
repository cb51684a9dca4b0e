# Sluice build, test and demo targets. CI (.ci/run) calls the same ones.
GO       ?= go
BIN      ?= $(shell $(GO) env GOPATH)/bin/sluice
FUZZTIME ?= 5s
PROMTOOL ?= promtool
PKGS     := ./...

PREFIX   ?= /usr/local

.PHONY: build install test unit fuzz lint rules e2e demo eval bench help

help:
	@echo "make demo   run the whole system on simulated nodes (about 75 s)"
	@echo "make eval   pattern library quality on 1,000 labelled simulated jobs (seed 1): recall, precision, false flags, delay"
	@echo "make test   lint, rule tests, unit and integration tests with -race, short fuzz runs"
	@echo "make build  build agent and aggregator into $(BIN)"
	@echo "make install  install them as $(PREFIX)/bin/sluice-agent and sluice-aggregator"
	@echo "make bench  run the benchmarks quoted in the README"
	@echo "make fuzz   run every fuzz target for FUZZTIME (default $(FUZZTIME))"
	@echo "make lint   gofmt check, go vet, go mod tidy check"
	@echo "make rules  check the Prometheus config and alert rules, run their promtool tests"
	@echo "make e2e    the real Prometheus server scrapes an aggregator; the storm's alerts must fire and resolve"

build:
	@mkdir -p $(BIN)
	$(GO) build -o $(BIN)/ ./agent ./aggregator

# Installs the binaries under the names the deploy/ files use.
install: build
	install -D -m 0755 $(BIN)/agent $(DESTDIR)$(PREFIX)/bin/sluice-agent
	install -D -m 0755 $(BIN)/aggregator $(DESTDIR)$(PREFIX)/bin/sluice-aggregator

demo: build
	$(BIN)/aggregator demo --agent.bin $(BIN)/agent

# Quality of the pattern library on labelled scenarios (pkg/sim/labelled.go):
# prints PASS/MISS per pattern and exits 0; the test in pkg/eval fails.
eval:
	$(GO) run ./aggregator eval --jobs 1000 --seed 1

test: lint rules fuzz unit e2e

unit:
	$(GO) test -race -count=1 $(PKGS)

lint:
	@out=$$(gofmt -l $$(git ls-files '*.go') $$(git ls-files --others --exclude-standard '*.go')); \
	  if [ -n "$$out" ]; then echo "gofmt would change:"; echo "$$out"; exit 1; fi
	$(GO) vet -tags e2e $(PKGS)
	@cp go.mod /tmp/sluice-go.mod.bak; cp go.sum /tmp/sluice-go.sum.bak; \
	  $(GO) mod tidy; \
	  if ! cmp -s go.mod /tmp/sluice-go.mod.bak || ! cmp -s go.sum /tmp/sluice-go.sum.bak; then \
	    echo "go mod tidy changed go.mod/go.sum; run it and commit the result"; \
	    cp /tmp/sluice-go.mod.bak go.mod; cp /tmp/sluice-go.sum.bak go.sum; exit 1; fi
	@# The agent must not link the NATS server: its process-statistics
	@# goroutine would wake every agent once a second (see pkg/bus/broker).
	@if $(GO) list -deps ./agent | grep -q '^github.com/nats-io/nats-server'; then \
	  echo "./agent links github.com/nats-io/nats-server; keep the broker in pkg/bus/broker"; exit 1; fi

# The Prometheus example config and alert rules in deploy/prometheus, and the
# rules' unit tests. promtool comes with the Debian package prometheus
# (.ci/run installs it); without it this fails rather than skip.
rules:
	@command -v $(PROMTOOL) >/dev/null || { \
	  echo "$(PROMTOOL) not found: install the Debian package prometheus (apt-get install prometheus), which provides it" >&2; exit 1; }
	$(PROMTOOL) check config deploy/prometheus/prometheus.yml
	$(PROMTOOL) check rules deploy/prometheus/sluice.rules.yml
	$(PROMTOOL) test rules deploy/prometheus/tests/*.test.yml
	$(PROMTOOL) check metrics < testdata/export/fixed.golden

# The real Prometheus server (Debian package prometheus) scrapes an
# aggregator fed through real agents, with the project's alert rules.
e2e:
	@command -v prometheus >/dev/null || { \
	  echo "prometheus not found: install the Debian package prometheus (apt-get install prometheus)" >&2; exit 1; }
	$(GO) test -tags e2e -count=1 -run TestAlertsFireInPrometheus ./pkg/aggregate

# Each fuzz target runs alone (go test -fuzz takes one target at a time). A
# run that finds a failing input fails at once (the input is written under
# the package's testdata/fuzz); a run that stops without one (a fuzzing
# worker lost under load) is shown and tried once more.
fuzz:
	@set -e; for pkg in $$($(GO) list ./...); do \
	  for t in $$($(GO) test -list '^Fuzz' $$pkg | grep '^Fuzz' || true); do \
	    echo "fuzz $$pkg $$t ($(FUZZTIME))"; \
	    if ! out=$$($(GO) test -run '^$$' -fuzz "^$$t$$" -fuzztime $(FUZZTIME) $$pkg 2>&1); then \
	      echo "$$out" | tail -40; \
	      if echo "$$out" | grep -q 'Failing input written to'; then exit 1; fi; \
	      echo "fuzz $$t stopped without a failing input; trying once more"; \
	      $(GO) test -run '^$$' -fuzz "^$$t$$" -fuzztime $(FUZZTIME) $$pkg || exit 1; \
	    fi; \
	  done; done

bench:
	$(GO) test -run '^$$' -bench . -benchmem -count 1 ./pkg/...
