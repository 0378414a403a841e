#!/usr/bin/env bash
# Builds tapgrid and analyses the bundled demo session (a simulated pump shaft).
set -euo pipefail
cd "$(dirname "$0")/.."
scripts/setup-system.sh
# setup-system.sh may have just installed rustup
[ -f "$HOME/.cargo/env" ] && . "$HOME/.cargo/env"
cargo build --release --locked
exec target/release/tapgrid demo "$@"
