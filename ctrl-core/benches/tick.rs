//! Host timing of one two-axis tick, fixed point and `f32`, with the invented rover's
//! constants (see docs/core.md). Speed goals for the MCU are measured as instruction counts
//! under QEMU by `bench/mcu`; this bench tracks host regressions.
#![allow(missing_docs)] // criterion_group! generates undocumented public items

use std::hint::black_box;

use criterion::{criterion_group, criterion_main, Criterion};
use ctrl_core::{
    drive::{Axis, DriveState, Feedback, TwoAxisDrive},
    encoder::Encoders,
    feedforward::Feedforward,
    float,
    pd::{Derivative, Pd},
    profile::Move,
    stall::StallGuard,
    supply::Supply,
    Coeff,
};
use fixed::types::{I16F16, I32F32};

/// Rover wheel gain, counts/tick per volt: 180 mm/s/V / 0.36652 mm / 500 Hz.
const K: f64 = 0.982_21;

fn c(x: f64) -> Coeff {
    Coeff::from_f64(x).unwrap().0
}

fn fixed_drive() -> TwoAxisDrive {
    let ff = Feedforward::new(c(1.0 / K), c(45.0 / K), I16F16::lit("0.7"));
    let pd = Pd::new(c(0.1145), c(2.647), Derivative::OnError, I16F16::lit("8.4"));
    let axis = Axis::new(ff, Feedback::Pd(pd), StallGuard::new(I16F16::lit("40"), 50));
    TwoAxisDrive::new(
        Encoders::new(false, true),
        axis,
        axis,
        Supply::new(I16F16::lit("6.4")),
        I16F16::lit("8.4"),
    )
}

fn float_drive() -> float::TwoAxisDrive {
    let ff = float::Feedforward::new(1.0 / K as f32, 45.0 / K as f32, 0.7);
    let pd = float::Pd::new(0.1145, 2.647, Derivative::OnError, 8.4);
    let axis = float::Axis::new(
        ff,
        float::Feedback::Pd(pd),
        StallGuard::new(I16F16::lit("40"), 50),
    );
    float::TwoAxisDrive::new(Encoders::new(false, true), axis, axis, 8.4)
}

fn moves() -> (Move, Move) {
    let n = I32F32::from_num::<f64>;
    (
        Move::new(n(2728.0), n(2.18), I32F32::ZERO, n(0.0131)),
        Move::new(n(300.0), n(1.53), I32F32::ZERO, n(0.0115)),
    )
}

fn bench(cr: &mut Criterion) {
    let (fwd, turn) = moves();
    let drive = fixed_drive();
    let mut st = DriveState::new();
    drive.set_battery(&mut st, I16F16::lit("7.4"));
    st.forward_mut().start(fwd).unwrap();
    st.rotation_mut().start(turn).unwrap();
    let mut raw = (0u16, 0u16);
    cr.bench_function("two_axis_tick_fixed", |b| {
        b.iter(|| {
            raw = (raw.0.wrapping_add(2), raw.1.wrapping_sub(2));
            black_box(drive.tick(&mut st, black_box(raw.0), black_box(raw.1)))
        })
    });

    let fdrive = float_drive();
    let mut fst = float::DriveState::new(6.4);
    fst.supply.set_battery(7.4);
    fst.forward.profile.start(fwd).unwrap();
    fst.rotation.profile.start(turn).unwrap();
    let mut raw = (0u16, 0u16);
    cr.bench_function("two_axis_tick_f32", |b| {
        b.iter(|| {
            raw = (raw.0.wrapping_add(2), raw.1.wrapping_sub(2));
            black_box(fdrive.tick(&mut fst, black_box(raw.0), black_box(raw.1)))
        })
    });
}

criterion_group!(benches, bench);
criterion_main!(benches);
