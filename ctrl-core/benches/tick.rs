//! Host timing of one two-axis tick, fixed point and `f32`, with the invented rover's
//! constants (see docs/core.md). Speed goals for the MCU are measured as instruction counts
//! under QEMU by `bench/mcu`; this bench tracks host regressions.
#![allow(missing_docs)] // criterion_group! generates undocumented public items

use std::hint::black_box;

use criterion::{criterion_group, criterion_main, BatchSize, Criterion, Throughput};
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

/// Ticks per measured batch: both moves are still running at the last one (the turn, the
/// shorter move, lasts about 330 ticks; the forward move about 1400).
const TICKS: usize = 300;

/// Fresh fixed-point state with the battery read and both moves just started.
fn fixed_state(drive: &TwoAxisDrive) -> DriveState {
    let (fwd, turn) = moves();
    let mut st = DriveState::new();
    drive.set_battery(&mut st, I16F16::lit("7.4"));
    st.forward_mut().start(fwd).unwrap();
    st.rotation_mut().start(turn).unwrap();
    st
}

/// Fresh `f32` state, same moves.
fn float_state() -> float::DriveState {
    let (fwd, turn) = moves();
    let mut st = float::DriveState::new(6.4);
    st.supply.set_battery(7.4);
    st.forward.profile.start(fwd).unwrap();
    st.rotation.profile.start(turn).unwrap();
    st
}

/// Raw counter readings of wheels that follow the setpoints one tick late (so no stall
/// guard trips and every tick is a moving tick); right wheel counts backwards.
fn follow_raw(drive: &TwoAxisDrive) -> Vec<(u16, u16)> {
    let mut st = fixed_state(drive);
    let mut raw = (0u16, 0u16);
    let mut out = Vec::with_capacity(TICKS);
    for _ in 0..TICKS {
        out.push(raw);
        drive.tick(&mut st, raw.0, raw.1);
        let s = st.sample();
        assert!(!st.is_stalled());
        let f: i64 = s.forward.setpoint.round().to_num();
        let r: i64 = s.rotation.setpoint.round().to_num();
        raw = ((f - r) as u16, (-(f + r)) as u16);
    }
    assert!(!st.forward().profile().is_done() && !st.rotation().profile().is_done());
    out
}

fn bench(cr: &mut Criterion) {
    let drive = fixed_drive();
    let raw = follow_raw(&drive);
    let mut g = cr.benchmark_group("two_axis_tick");
    // Reported per tick: each batch restarts both moves from a fresh state.
    g.throughput(Throughput::Elements(TICKS as u64));
    g.bench_function("fixed", |b| {
        b.iter_batched_ref(
            || fixed_state(&drive),
            |st| {
                for &(l, r) in &raw {
                    black_box(drive.tick(st, black_box(l), black_box(r)));
                }
            },
            BatchSize::SmallInput,
        )
    });

    let fdrive = float_drive();
    g.bench_function("f32", |b| {
        b.iter_batched_ref(
            float_state,
            |st| {
                for &(l, r) in &raw {
                    black_box(fdrive.tick(st, black_box(l), black_box(r)));
                }
            },
            BatchSize::SmallInput,
        )
    });
    g.finish();
}

criterion_group!(benches, bench);
criterion_main!(benches);
