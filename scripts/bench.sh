#!/usr/bin/env bash
# Benchmark: tapgrid analyze vs the bare WAV decode and a numpy/scipy pipeline, in one run.
set -euo pipefail
cd "$(dirname "$0")/.."
scripts/setup-system.sh
# setup-system.sh may have just installed rustup
[ -f "$HOME/.cargo/env" ] && . "$HOME/.cargo/env"
python3 -c "import numpy, scipy" 2>/dev/null || python3 -m pip install --quiet numpy scipy
cargo build --release --locked
python3 scripts/bench.py
