#!/usr/bin/env bash
# Installs cargo-fuzz (the libFuzzer driver for cargo) from the crate
# registry, unless `cargo fuzz` already works. The version is pinned so every
# machine fuzzes with the same driver.
set -euo pipefail
CARGO_FUZZ_VERSION=0.13.2
if cargo fuzz --version >/dev/null 2>&1; then
    echo "cargo-fuzz present: $(cargo fuzz --version)"
    exit 0
fi
cargo install cargo-fuzz --version "$CARGO_FUZZ_VERSION" --locked
cargo fuzz --version
