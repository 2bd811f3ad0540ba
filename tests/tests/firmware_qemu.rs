//! The demo firmware, built from the demo design for thumbv7m-none-eabi (the emulated
//! LM3S6965, Cortex-M3) and for thumbv6m-none-eabi (the emulated nRF51822 of QEMU's
//! `microbit`, Cortex-M0), runs its route under qemu-system-arm with semihosting, and on
//! each core its reported results agree with the host simulation of the same design, with
//! the same tolerances. The two cores use the two forms of `ctrl-core`'s `Coeff` multiply
//! (one `i64` product on the M3, two 32-bit multiplies on the M0), which must be
//! bit-identical, so the two cores must also print the very same `MOVE` lines.
//!
//! Without `qemu-system-arm` or a core's Rust target a test says so and passes, unless
//! `CTRL_REQUIRE_QEMU=1` (CI sets it), which turns the skip into a failure.
//!
//! Tolerance (stated here, checked below), per free move, firmware against host:
//! - final tracking error within [`FINAL_ERROR_TOL_COUNTS`] counts. Both rest inside the
//!   friction dead band, where the loop's force is below the bias; the on-target drive
//!   reads two wheel encoders (axis position in half counts) where the host reads the
//!   axis in whole counts, and steps the plant in fixed point, so where in the band each
//!   stops can differ by up to a count (measured on the demo: at most 0.61 count).
//! - peak wheel duty within [`PEAK_DUTY_TOL`] (absolute): the peak is the feedforward's
//!   at the end of the acceleration plus a little feedback, the same in both (measured on
//!   the demo: at most 0.016).

use std::time::Duration;

use ctrl_design::emit::{self, emit, AxisReport, Emission};
use ctrl_design::sim;
use ctrl_tests::{
    build_firmware, build_firmware_for, firmware_elf_for, firmware_prerequisites,
    firmware_prerequisites_for, firmware_target_dir, parse_moves, rover_dir, run_qemu_on,
    FirmwareCore, MoveReport, CORTEX_M0, CORTEX_M3,
};

/// Largest |firmware - host| final tracking error, counts.
const FINAL_ERROR_TOL_COUNTS: f64 = 1.0;
/// Largest |firmware - host| peak wheel duty.
const PEAK_DUTY_TOL: f64 = 0.03;
/// The simulated robot's battery in the firmware (`BATTERY_VOLTS` in src/main.rs), V.
const BATTERY_VOLTS: f64 = 7.4;

/// Host simulation of one route leg: `ctrl-core`'s drive through the simulation's firmware
/// loop against the exact `f64` drive model, on the firmware's battery, with no computation
/// delay (the firmware applies each tick's duty right after computing it).
fn host_move(e: &Emission, r: &AxisReport, distance: f64) -> sim::Metrics {
    emit::simulate_move(&e.design, r, distance, BATTERY_VOLTS, 0)
        .unwrap_or_else(|msg| panic!("{msg}"))
        .0
}

#[test]
fn firmware_route_under_qemu_matches_the_host_simulation() {
    route_matches_the_host_simulation(CORTEX_M3);
}

#[test]
fn firmware_route_on_the_cortex_m0_under_qemu_matches_the_host_simulation() {
    route_matches_the_host_simulation(CORTEX_M0);
}

#[test]
fn firmware_route_prints_the_same_moves_on_the_cortex_m0_and_m3() {
    if !firmware_prerequisites_for(CORTEX_M3, true) || !firmware_prerequisites_for(CORTEX_M0, true)
    {
        return;
    }
    let m3 = route_output(CORTEX_M3);
    let m0 = route_output(CORTEX_M0);
    let lines = |s: &str| -> Vec<String> {
        s.lines()
            .filter(|l| l.starts_with("MOVE ") || l.starts_with("ROUTE "))
            .map(str::to_string)
            .collect()
    };
    let (m3, m0) = (lines(&m3), lines(&m0));
    assert_eq!(m3.len(), 9, "{m3:?}");
    assert_eq!(
        m0, m3,
        "the Cortex-M0 (two 32-bit multiplies) and the Cortex-M3 (one i64 product) \
         must compute the same route"
    );
}

/// Builds the firmware for `core`, runs it under QEMU and returns what it printed, after
/// checking that it exited with status 0.
fn route_output(core: FirmwareCore) -> String {
    let target = firmware_target_dir("tests");
    let out = build_firmware_for(core, None, &target);
    assert!(
        out.status.success(),
        "the demo firmware does not build for {}:\n{}",
        core.target,
        String::from_utf8_lossy(&out.stderr)
    );
    let run = run_qemu_on(
        core,
        &firmware_elf_for(core, &target),
        Duration::from_secs(120),
    );
    assert_eq!(
        run.code,
        Some(0),
        "the firmware reported a failure on {}:\n{}\n{}",
        core.target,
        run.stdout,
        run.stderr
    );
    run.stdout
}

/// The route on `core` under QEMU against the host simulation, within the tolerances above.
fn route_matches_the_host_simulation(core: FirmwareCore) {
    if !firmware_prerequisites_for(core, true) {
        return;
    }
    let stdout = route_output(core);
    println!("{}:\n{stdout}", core.target);
    assert!(stdout.contains("ROUTE ok=1"), "{stdout}");
    let moves = parse_moves(&stdout);
    assert_eq!(moves.len(), 7, "{stdout}");

    let e = emit(&rover_dir().join("rover.toml")).unwrap_or_else(|f| panic!("{f}"));
    let mut compared = 0;
    for m in &moves {
        assert_eq!(m.get("ok"), Some("1"), "{m:?}");
        if m.get("expect_stall") == Some("1") {
            assert_eq!(
                m.get("stalled"),
                Some("1"),
                "the blocked move must trip the guard"
            );
            continue;
        }
        assert_eq!(m.get("stalled"), Some("0"), "{m:?}");
        let (r, distance) = leg(&e, m);
        let host = host_move(&e, r, distance);
        let host_counts = host.final_error * r.counts_per_unit;
        let fw_counts = m.num("final_error_counts");
        println!(
            "{} move {}: final error firmware {fw_counts:.3} counts, host {host_counts:.3}; peak duty firmware {:.3}, host {:.3}",
            core.target,
            m.index,
            m.num("peak_duty"),
            host.peak_volts / BATTERY_VOLTS
        );
        assert!(
            (fw_counts - host_counts).abs() <= FINAL_ERROR_TOL_COUNTS,
            "{} move {}: final error {fw_counts} counts on the target, {host_counts} on the host",
            core.target,
            m.index
        );
        let host_duty = host.peak_volts / BATTERY_VOLTS;
        assert!(
            (m.num("peak_duty") - host_duty).abs() <= PEAK_DUTY_TOL,
            "{} move {}: peak duty {} on the target, {host_duty} on the host",
            core.target,
            m.index,
            m.num("peak_duty")
        );
        compared += 1;
    }
    assert_eq!(compared, 6);
}

#[test]
fn build_script_watches_the_design_and_every_log() {
    if !firmware_prerequisites(false) {
        return;
    }
    let target = firmware_target_dir("tests");
    let out = build_firmware(None, &target);
    assert!(
        out.status.success(),
        "the demo firmware does not build:\n{}",
        String::from_utf8_lossy(&out.stderr)
    );
    // cargo keeps each build script's stdout in build/<pkg>-<hash>/output.
    let build = target.join("thumbv7m-none-eabi/release/build");
    let outputs: Vec<String> = std::fs::read_dir(&build)
        .expect("build folder")
        .filter_map(|e| e.ok())
        .filter(|e| {
            e.file_name()
                .to_string_lossy()
                .starts_with("demo-firmware-")
        })
        .filter_map(|e| std::fs::read_to_string(e.path().join("output")).ok())
        .filter(|s| s.contains("rover.toml"))
        .collect();
    assert_eq!(
        outputs.len(),
        1,
        "one build-script output naming rover.toml"
    );
    let text = &outputs[0];
    let watched: Vec<&str> = text
        .lines()
        .filter_map(|l| l.strip_prefix("cargo:rerun-if-changed="))
        .collect();
    assert!(watched.iter().any(|w| w.ends_with("rover.toml")), "{text}");
    for axis in ["forward", "rotation"] {
        let logs = std::fs::read_dir(rover_dir().join("logs").join(axis)).unwrap();
        let mut n = 0;
        for log in logs.filter_map(|e| e.ok()) {
            let name = log.file_name().to_string_lossy().into_owned();
            if name.starts_with("step_") && name.ends_with(".csv") {
                n += 1;
                let want = format!("{axis}/{name}");
                assert!(
                    watched.iter().any(|w| w.ends_with(&want)),
                    "{want} not watched:\n{text}"
                );
            }
        }
        assert!(n >= 3, "{axis}: only {n} step logs");
        // The folder itself too, so a new log reruns the script.
        assert!(
            watched.iter().any(|w| w.ends_with(&format!("logs/{axis}"))),
            "{text}"
        );
    }
}

/// The axis report and the distance (axis unit) of a move line.
fn leg<'a>(e: &'a Emission, m: &MoveReport) -> (&'a AxisReport, f64) {
    let d = m.num("distance");
    match (m.get("axis"), m.get("unit")) {
        (Some("forward"), Some("mm")) => (&e.axes[0], d),
        (Some("rotation"), Some("mrad")) => (&e.axes[1], d / 1000.0),
        other => panic!("unexpected axis/unit {other:?}"),
    }
}
