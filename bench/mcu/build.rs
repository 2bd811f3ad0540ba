//! Puts the `memory.x` of the target being built where cortex-m-rt's `link.x` finds it.
use std::{env, fs, path::PathBuf};

fn main() {
    let target = env::var("TARGET").unwrap_or_default();
    let manifest = PathBuf::from(env::var("CARGO_MANIFEST_DIR").unwrap_or_default());
    let src = manifest.join(format!("memory-{target}.x"));
    println!("cargo:rerun-if-changed={}", src.display());
    println!("cargo:rerun-if-changed=build.rs");
    let text = match fs::read_to_string(&src) {
        Ok(t) => t,
        Err(e) => {
            println!(
                "cargo:warning=no memory map for target `{target}`: {}: {e} \
                 (supported: thumbv6m-none-eabi, thumbv7em-none-eabihf)",
                src.display()
            );
            std::process::exit(1);
        }
    };
    let out = PathBuf::from(env::var("OUT_DIR").unwrap_or_default());
    if let Err(e) = fs::write(out.join("memory.x"), text) {
        println!(
            "cargo:warning=cannot write memory.x to {}: {e}",
            out.display()
        );
        std::process::exit(1);
    }
    println!("cargo:rustc-link-search={}", out.display());
    // Here rather than in .cargo/config.toml so that a RUSTFLAGS set in the environment
    // (which replaces config rustflags) cannot drop it.
    println!("cargo:rustc-link-arg-bins=-Tlink.x");
}
