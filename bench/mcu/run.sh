#!/bin/sh
# Instruction counts per control tick under QEMU, `.text` size of the two-axis tick and
# the panic-free scan, for thumbv6m-none-eabi (microbit) and thumbv7em-none-eabihf
# (mps2-an386). Counts are instructions executed, not cycles.
#
#   bench/mcu/run.sh            build, run, print the tables
#   bench/mcu/run.sh --check    same, and exit non-zero if a limit in limits.toml is
#                               exceeded, the calibration loop is not counted exactly,
#                               or a core panicking symbol is found
#
# Needs: rustup targets thumbv6m-none-eabi and thumbv7em-none-eabihf, qemu-system-arm.
# Firmware and tool build into bench/mcu/target (CARGO_TARGET_DIR is not used).
set -eu
here=$(cd "$(dirname "$0")" && pwd)
unset CARGO_TARGET_DIR RUSTFLAGS CARGO_ENCODED_RUSTFLAGS CARGO_BUILD_TARGET || true
cargo build --quiet --release --manifest-path "$here/tool/Cargo.toml" \
    --target-dir "$here/target/host"
exec "$here/target/host/release/bench-mcu-tool" --dir "$here" "$@"
