#!/usr/bin/env bash
# The whole check, as CI runs it: formatting, lints, then every test.
set -euo pipefail
cd "$(dirname "$0")/.."
scripts/setup-system.sh
# setup-system.sh may have just installed rustup
[ -f "$HOME/.cargo/env" ] && . "$HOME/.cargo/env"
cargo fmt --check
cargo clippy --all-targets --locked -- -D warnings
cargo test --locked
