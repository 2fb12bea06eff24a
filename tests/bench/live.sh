#!/usr/bin/env bash
# Live service benchmark (mosquitto, victoria-metrics, load generator, `lifeledger run`); see benches/live.rs and BENCHMARKS.md.
cd "$(dirname "$0")/../.." && exec cargo bench --bench live "$@"
