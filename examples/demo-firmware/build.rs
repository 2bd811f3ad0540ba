//! Build script of the demo firmware: the memory layout of the target's chip and the
//! checked constants generated from the design file.
//!
//! The memory layout follows the target (`TARGET`): `memory-lm3s6965.x` for
//! thumbv7m-none-eabi (QEMU `lm3s6965evb`, Cortex-M3), `memory-nrf51.x` for
//! thumbv6m-none-eabi (QEMU `microbit`, Cortex-M0); it is copied to `OUT_DIR` as `memory.x`,
//! where cortex-m-rt's `link.x` looks for it. Any other target is refused.
//!
//! The design file is `../greenhouse-rover/rover.toml`, or the file named by the
//! environment variable `CTRL_DESIGN_FILE` (relative to this folder), which is how the
//! must-fail test builds a design that has to be refused.

use std::path::PathBuf;

fn main() {
    let out = PathBuf::from(std::env::var_os("OUT_DIR").expect("cargo sets OUT_DIR"));
    let target = std::env::var("TARGET").unwrap_or_default();
    let memory = match target.as_str() {
        "thumbv7m-none-eabi" => "memory-lm3s6965.x",
        "thumbv6m-none-eabi" => "memory-nrf51.x",
        other => {
            println!(
                "cargo::error=the demo firmware has a memory layout for thumbv7m-none-eabi \
                 (LM3S6965) and thumbv6m-none-eabi (nRF51822), not for `{other}`"
            );
            std::process::exit(1);
        }
    };
    if let Err(e) = std::fs::copy(memory, out.join("memory.x")) {
        println!(
            "cargo::error=cannot copy {memory} to {}: {e}",
            out.display()
        );
        std::process::exit(1);
    }
    println!("cargo:rustc-link-search={}", out.display());
    // cortex-m-rt's linker script (here rather than in RUSTFLAGS, so a RUSTFLAGS set in the
    // environment, as CI does, cannot drop it).
    println!("cargo:rustc-link-arg-bins=-Tlink.x");
    println!("cargo:rerun-if-changed={memory}");

    println!("cargo:rerun-if-env-changed=CTRL_DESIGN_FILE");
    let design = std::env::var("CTRL_DESIGN_FILE")
        .unwrap_or_else(|_| "../greenhouse-rover/rover.toml".to_string());
    ctrl_design::emit::build_script(design);
}
