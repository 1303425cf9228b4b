#!/usr/bin/env bash
# Install CMake, which the optional `osqp` feature needs to build the OSQP C
# sources, unless it is already on PATH. Debian/Ubuntu only (apt-get).
set -euo pipefail

if command -v cmake >/dev/null 2>&1; then
    exit 0
fi

if ! command -v apt-get >/dev/null 2>&1; then
    echo "install-cmake: cmake is missing and apt-get is not available" >&2
    exit 1
fi

# Run as root directly, or through sudo when it exists.
SUDO=""
if [ "$(id -u)" -ne 0 ] && command -v sudo >/dev/null 2>&1; then
    SUDO="sudo"
fi

# `env` carries the setting through sudo, which resets the environment.
$SUDO env DEBIAN_FRONTEND=noninteractive apt-get update -qq
$SUDO env DEBIAN_FRONTEND=noninteractive \
    apt-get install -y -qq --no-install-recommends cmake >/dev/null
cmake --version | head -n 1
