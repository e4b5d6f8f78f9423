#!/usr/bin/env bash
# Installs what twistmark needs to build on Debian, only when it is missing:
# the FFmpeg development libraries, libclang (for bindgen) and pkg-config.
# Uses sudo when not run as root. Safe to run again.
set -euo pipefail

pkgs=(libavcodec-dev libavformat-dev libavutil-dev libswscale-dev libclang-dev pkg-config)
missing=()
for p in "${pkgs[@]}"; do
  dpkg-query -W -f='${Status}' "$p" 2>/dev/null | grep -q "install ok installed" || missing+=("$p")
done
if [ ${#missing[@]} -gt 0 ]; then
  echo "setup: installing ${missing[*]}" >&2
  SUDO=""
  if [ "$(id -u)" -ne 0 ]; then SUDO="sudo"; fi
  $SUDO apt-get update -qq
  DEBIAN_FRONTEND=noninteractive $SUDO apt-get install -y -qq --no-install-recommends "${missing[@]}" >&2
fi
if ! command -v cargo >/dev/null 2>&1; then
  echo "setup: cargo is not on PATH; install Rust (rustup) first, then run this again" >&2
  exit 1
fi
