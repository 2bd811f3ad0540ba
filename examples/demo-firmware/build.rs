//! Build script of the demo firmware: the linker script for the LM3S6965 and the checked
//! constants generated from the design file.
//!
//! The design file is `../greenhouse-rover/rover.toml`, or the file named by the
//! environment variable `CTRL_DESIGN_FILE` (relative to this folder), which is how the
//! must-fail test builds a design that has to be refused.

use std::path::PathBuf;

fn main() {
    let out = PathBuf::from(std::env::var_os("OUT_DIR").expect("cargo sets OUT_DIR"));
    if let Err(e) = std::fs::copy("memory.x", out.join("memory.x")) {
        println!(
            "cargo::error=cannot copy memory.x to {}: {e}",
            out.display()
        );
        std::process::exit(1);
    }
    println!("cargo:rustc-link-search={}", out.display());
    // cortex-m-rt's linker script (here rather than in RUSTFLAGS, so a RUSTFLAGS set in the
    // environment, as CI does, cannot drop it).
    println!("cargo:rustc-link-arg-bins=-Tlink.x");
    println!("cargo:rerun-if-changed=memory.x");

    println!("cargo:rerun-if-env-changed=CTRL_DESIGN_FILE");
    let design = std::env::var("CTRL_DESIGN_FILE")
        .unwrap_or_else(|_| "../greenhouse-rover/rover.toml".to_string());
    ctrl_design::emit::build_script(design);
}
