#!/usr/bin/env bash
# Installs the Debian packages tapgrid needs to build and test (idempotent; needs root or sudo).
set -euo pipefail
# Xvfb, ImageMagick and Mesa's software OpenGL: the GUI smoke test runs the window headless.
need=(build-essential pkg-config libasound2-dev xvfb xauth imagemagick libgl1-mesa-dri libegl1 libegl-mesa0 libgl1 libglx-mesa0
  libx11-6 libx11-xcb1 libxcb1 libxcursor1 libxrandr2 libxi6 libxkbcommon-x11-0 libasound2-data)
missing=()
sudo=""
[ "$(id -u)" -eq 0 ] || sudo="sudo"
for p in "${need[@]}"; do
  dpkg -s "$p" >/dev/null 2>&1 || missing+=("$p")
done
if [ ${#missing[@]} -gt 0 ]; then
  $sudo apt-get update -qq
  DEBIAN_FRONTEND=noninteractive $sudo apt-get install -y -qq --no-install-recommends "${missing[@]}"
fi
if ! command -v cargo >/dev/null 2>&1; then
  # A fresh machine: the Rust toolchain comes from rustup (Debian's own cargo is too old).
  command -v curl >/dev/null 2>&1 || { $sudo apt-get update -qq; $sudo apt-get install -y -qq curl ca-certificates; }
  curl --proto '=https' --tlsv1.2 -sSf https://sh.rustup.rs | sh -s -- -y --profile minimal --component rustfmt,clippy
  # shellcheck disable=SC1091
  . "$HOME/.cargo/env"
fi
