//! The must-fail design (`examples/greenhouse-rover/must_fail.toml`: a forward settling time
//! so long that Kd would be negative) must stop the firmware build, with a message that
//! names the file, the line, the key and the longest settling time allowed.

use ctrl_tests::{build_firmware, firmware_prerequisites, firmware_target_dir, rover_dir};

#[test]
fn must_fail_design_refuses_to_build_for_the_right_reason() {
    if !firmware_prerequisites(false) {
        return;
    }
    let design = rover_dir().join("must_fail.toml");
    let src = std::fs::read_to_string(&design).expect("must_fail.toml");
    let at = src
        .find("settling_time_s = 1.0")
        .expect("the too-long settling time");
    let line = src[..at].matches('\n').count() + 1;

    let out = build_firmware(Some(&design), &firmware_target_dir("tests"));
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert!(
        !out.status.success(),
        "the firmware built with a design whose Kd is negative:\n{stderr}"
    );
    let expected = format!("must_fail.toml:{line}: `forward.loop.settling_time_s`");
    assert!(stderr.contains(&expected), "no `{expected}` in:\n{stderr}");
    assert!(
        stderr.contains("the derivative gain would be negative"),
        "{stderr}"
    );
    assert!(stderr.contains("valid: 0 < settling time <="), "{stderr}");
    assert!(stderr.contains("no constants were generated"), "{stderr}");
    // Refused by the design check, not by a crash of the build script.
    assert!(!stderr.contains("panicked"), "{stderr}");
    assert!(!stderr.contains("RUST_BACKTRACE"), "{stderr}");
}
