//! Calibration paths: the external check of the counting method.
//!
//! `empty` is a tick that only returns; it measures the harness overhead (loop, indirect
//! call, the tick function's own entry and return), which the tool subtracts from every
//! other path. `calib_loop` adds a hand-written loop whose instruction count is known from
//! the instruction set alone: one `movs`, then `subs` + `bne` per pass, [`K`] passes, so
//! `2 K + 1` instructions more than `empty`. The tool fails unless it measures exactly that.

use crate::{Bench, Path};

/// Passes of the calibration loop (the `#100` in the asm below must match).
pub const K: u32 = 100;

#[inline(never)]
fn empty(_: &mut Bench) {}

#[inline(never)]
fn calib_loop(_: &mut Bench) {
    const _: () = assert!(K == 100);
    // SAFETY: only r1 and the flags are written; no memory, no stack.
    unsafe {
        core::arch::asm!(
            "movs r1, #100",
            "2:",
            "subs r1, #1",
            "bne 2b",
            out("r1") _,
            options(nomem, nostack),
        );
    }
}

/// Calibration paths, run first.
pub static PATHS: &[Path] = &[
    Path {
        name: "empty",
        tick: empty,
    },
    Path {
        name: "calib_loop",
        tick: calib_loop,
    },
];
