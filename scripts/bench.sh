#!/usr/bin/env bash
# Benchmark: tapgrid analyze vs the bare WAV decode and a numpy/scipy pipeline, in one run.
set -euo pipefail
cd "$(dirname "$0")/.."
scripts/setup-system.sh
python3 -c "import numpy, scipy" 2>/dev/null || python3 -m pip install --quiet numpy scipy
cargo build --release --locked
python3 scripts/bench.py
