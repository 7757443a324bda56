#!/usr/bin/env bash
# Installs every Debian 12 package plimsoll needs to build, test and run.
# Idempotent: installs only what is missing; runs `apt-get update` at most once.
# Needs root (or sudo) only when something is missing.
set -euo pipefail

PACKAGES=(
  g++ cmake ninja-build ccache pkg-config
  clang libclang-rt-14-dev
  librdkafka-dev kcat
  libeigen3-dev libboost-dev
  libspdlog-dev libfmt-dev
  libsqlite3-dev sqlite3
  catch2 libnlopt-cxx-dev libtomlplusplus-dev libcli11-dev
  libsimdjson-dev libbenchmark-dev
  python3 python3-statsmodels python3-pandas
)

missing=()
for pkg in "${PACKAGES[@]}"; do
  if ! dpkg-query -W -f='${Status}' "$pkg" 2>/dev/null | grep -q "install ok installed"; then
    missing+=("$pkg")
  fi
done

if [ ${#missing[@]} -eq 0 ]; then
  echo "setup: all ${#PACKAGES[@]} packages present"
  exit 0
fi

echo "setup: missing packages: ${missing[*]}"
SUDO=""
if [ "$(id -u)" -ne 0 ]; then
  if command -v sudo >/dev/null 2>&1; then
    SUDO="sudo"
  else
    echo "setup: not root and no sudo; install as root: apt-get install -y ${missing[*]}" >&2
    exit 1
  fi
fi
export DEBIAN_FRONTEND=noninteractive
$SUDO apt-get update -q
$SUDO apt-get install -y -q --no-install-recommends "${missing[@]}"
echo "setup: installed ${#missing[@]} packages"
