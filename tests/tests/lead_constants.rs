//! The lead form of the emitted constants compiles and holds the Tustin coefficients of the
//! designed lead (`tests/designs/lead.toml`, a test-only variant of the demo with a lead
//! rotation loop; its committed output is `tests/designs/lead_constants.rs`).

use ctrl_core::drive::Feedback;
use ctrl_design::emit::{emit, Gains};
use std::path::Path;

#[allow(dead_code)]
mod lead {
    include!("../designs/lead_constants.rs");
}

fn design() -> std::path::PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("designs/lead.toml")
}

#[test]
fn committed_lead_constants_are_current() {
    let e = emit(&design()).unwrap_or_else(|f| panic!("{f}"));
    let committed = std::fs::read_to_string(
        Path::new(env!("CARGO_MANIFEST_DIR")).join("designs/lead_constants.rs"),
    )
    .unwrap();
    assert!(
        committed == e.source,
        "tests/designs/lead_constants.rs is stale; regenerate: cargo run -p ctrl-design -- emit tests/designs/lead.toml -o tests/designs/lead_constants.rs"
    );
}

#[test]
fn lead_coefficients_are_the_prewarped_tustin_map() {
    let e = emit(&design()).unwrap_or_else(|f| panic!("{f}"));
    let r = &e.axes[1];
    let (kc, alpha, t1) = match r.gains {
        Gains::Lead { kc, alpha, t1, .. } => (kc, alpha, t1),
        ref g => panic!("{g:?}"),
    };
    // Tustin with pre-warping at the crossover (any digital-control text, from memory):
    // s = c (z - 1)/(z + 1), c = wc / tan(wc h / 2). For Kc (T1 s + 1)/(alpha T1 s + 1):
    // b0 = Kc (T1 c + 1)/d, b1 = Kc (1 - T1 c)/d, a1 = (1 - alpha T1 c)/d, d = alpha T1 c + 1.
    let (wc, h) = (12.0f64, 1.0 / 500.0);
    let c = wc / (wc * h / 2.0).tan();
    let d = alpha * t1 * c + 1.0;
    let (b0, b1, a1) = (
        kc * (t1 * c + 1.0) / d,
        kc * (1.0 - t1 * c) / d,
        (1.0 - alpha * t1 * c) / d,
    );
    let cpu = r.counts_per_unit;
    let lead = match lead::ROTATION_AXIS.feedback() {
        Feedback::Lead(l) => l,
        Feedback::Pd(_) => panic!("rotation must be a lead loop"),
    };
    let [q0, q1, qa] = lead.coefficients();
    let close = |got: f64, want: f64, what: &str| {
        assert!(
            (got - want).abs() <= 3.1e-5 * want.abs(),
            "{what}: {got} vs {want}"
        )
    };
    close(q0.to_f64(), b0 / cpu, "b0");
    close(q1.to_f64(), b1 / cpu, "b1");
    close(qa.to_f64(), a1, "a1");
    assert!(matches!(lead::FORWARD_AXIS.feedback(), Feedback::Pd(_)));
    assert_eq!(lead::DRIVE.rotation(), lead::ROTATION_AXIS);
}
