//! Host timing of the motion profile: planning a move (`start`) and one tick (`step`).
//!
//! Run: `cargo bench -p ctrl-core --bench profile`. Figures are host figures; on a core
//! without a divider `start` is far slower (its `i128` divisions are library calls), while
//! `step` has no calls at all (inside a piece it is a count-down and two `i64` additions;
//! the MCU instruction counts are in `bench/mcu`, see docs/profile.md).
// `criterion_group!` generates an undocumented `pub fn`.
#![allow(missing_docs)]

use criterion::{black_box, criterion_group, criterion_main, Criterion};
use ctrl_core::profile::{Move, Profile};
use fixed::types::I32F32;

/// The invented demo rover's forward axis: 1 m at 400 mm/s and 1200 mm/s^2, 500 Hz,
/// count = pi * 42 / 360 mm.
fn demo_move(metres: f64) -> Move {
    let count_mm = core::f64::consts::PI * 42.0 / 360.0;
    Move::new(
        I32F32::from_num(metres * 1000.0 / count_mm),
        I32F32::from_num(400.0 / 500.0 / count_mm),
        I32F32::ZERO,
        I32F32::from_num(1200.0 / 500.0 / 500.0 / count_mm),
    )
}

fn bench(c: &mut Criterion) {
    c.bench_function("profile start 1 m from rest", |b| {
        b.iter(|| {
            let mut p = Profile::new();
            p.start(black_box(demo_move(1.0))).unwrap();
            p
        })
    });
    let mut moving = Profile::new();
    moving.start(demo_move(1.0)).unwrap();
    for _ in 0..300 {
        moving.step();
    }
    c.bench_function("profile retarget -0.2 m while cruising", |b| {
        b.iter(|| {
            let mut p = moving.clone();
            p.start(black_box(demo_move(-0.2))).unwrap();
            p
        })
    });
    c.bench_function("profile step", |b| {
        let mut p = Profile::new();
        p.start(demo_move(1000.0)).unwrap();
        b.iter(|| black_box(p.step()))
    });
}

criterion_group! {
    name = benches;
    config = Criterion::default().sample_size(20).measurement_time(core::time::Duration::from_secs(2));
    targets = bench
}
criterion_main!(benches);
