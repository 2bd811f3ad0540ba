//! Picks the `Coeff` multiply for the target: cores without a 32 x 32 -> 64-bit multiply
//! instruction (ARMv6-M and ARMv8-M Baseline: Cortex-M0/M0+/M1/M23) get the form built from
//! two 32-bit multiplies (`ctrl_core_narrow_mul`); every other target multiplies in `i64`.
//! Both forms give the same result bit for bit (unit-tested on the host).

fn main() {
    println!("cargo::rustc-check-cfg=cfg(ctrl_core_narrow_mul)");
    println!("cargo::rerun-if-changed=build.rs");
    let target = std::env::var("TARGET").unwrap_or_default();
    if target.starts_with("thumbv6m") || target.starts_with("thumbv8m.base") {
        println!("cargo::rustc-cfg=ctrl_core_narrow_mul");
    }
}
