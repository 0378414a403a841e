#!/usr/bin/env bash
# Builds tapgrid and opens its window on the bundled demo session (a simulated pump shaft).
# Without a display (no DISPLAY or WAYLAND_DISPLAY) it analyses the demo on the command line instead.
set -euo pipefail
cd "$(dirname "$0")/.."
scripts/setup-system.sh
# setup-system.sh may have just installed rustup
[ -f "$HOME/.cargo/env" ] && . "$HOME/.cargo/env"
cargo build --release --locked
if [ -z "${DISPLAY:-}" ] && [ -z "${WAYLAND_DISPLAY:-}" ]; then
  echo "no display: analysing the demo on the command line (run with a display to open the window)" >&2
  exec target/release/tapgrid demo "$@"
fi
exec target/release/tapgrid "$@"
