#!/usr/bin/env bash
# Builds tapgrid and analyses the bundled demo session (a simulated pump shaft).
set -euo pipefail
cd "$(dirname "$0")/.."
scripts/setup-system.sh
cargo build --release --locked
exec target/release/tapgrid demo "$@"
