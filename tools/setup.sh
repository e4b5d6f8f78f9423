#!/usr/bin/env bash
# Installs what twistmark needs to build on Debian, only when it is missing:
# the FFmpeg development libraries, libclang (for bindgen) and pkg-config; with --browser,
# also headless Chromium for the browser test of the HTML reports.
# Uses sudo when not run as root. Safe to run again.
set -euo pipefail

pkgs=(libavcodec-dev libavformat-dev libavutil-dev libswscale-dev libclang-dev pkg-config)
# --browser: also Debian's chromium (large), which tests/html_report.rs uses to render
# report.html and summary.html headless. Only the test command asks for it.
for arg in "$@"; do
  case "$arg" in
    --browser) pkgs+=(chromium) ;;
    *) echo "setup: unknown option $arg (the only option is --browser)" >&2; exit 2 ;;
  esac
done
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
