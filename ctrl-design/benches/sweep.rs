//! Speed of the robustness sweep: 10,000 simulated moves of 1,000 ticks each (goal:
//! under 0.5 s on a 2-core machine, that is at least 20 M simulated ticks per second).
//!
//! Run: `cargo bench -p ctrl-design --bench sweep`.

use criterion::{criterion_main, Criterion, Throughput};
use ctrl_design::sim::{
    AxisKind, Command, DerivativeForm, Feedforward, FirmwareLoop, FirmwareUnits, IdealLoop,
    LoopDesign, SimConfig,
};
use ctrl_design::sweep::{plants, sweep, Sampling, Spread};
use ctrl_design::Plant;
use indicatif::ProgressBar;

/// The demo rover's forward axis (invented numbers) and a 400 mm move: 1,000 ticks at
/// 500 Hz cover the 1.33 s move and 0.67 s of settling.
fn setup() -> (SimConfig, LoopDesign) {
    let plant = Plant::new(180.0, 0.09, 0.7).expect("valid plant");
    let design = LoopDesign {
        kp: 0.12,
        kd: 0.004,
        derivative: DerivativeForm::OnError,
        feedforward: Some(Feedforward::for_plant(&plant)),
    };
    let config = SimConfig {
        plant,
        rate_hz: 500.0,
        count_size: Some(0.36652),
        supply_volts: 6.4,
        delay_ticks: 1,
        disturbance: None,
        command: Command::Move {
            distance: 400.0,
            cruise_speed: 400.0,
            accel: 1200.0,
        },
        ticks: 1000,
        band: 0.02,
    };
    (config, design)
}

fn bench(c: &mut Criterion) {
    let (config, design) = setup();
    let runs = plants(
        &config.plant,
        &Spread::uniform(0.2),
        &Sampling::MonteCarlo {
            samples: 10_000,
            seed: 1,
        },
    )
    .expect("valid spread");
    let mut g = c.benchmark_group("sweep_10k_moves_x_1k_ticks");
    g.sample_size(10);
    g.throughput(Throughput::Elements(10_000 * 1000));
    g.bench_function("f64", |b| {
        b.iter(|| {
            sweep(
                &config,
                &runs,
                || IdealLoop::new(&design, &config.command, config.rate_hz),
                &ProgressBar::hidden(),
            )
        })
    });
    let units = FirmwareUnits {
        count_size: 0.36652,
        rate_hz: 500.0,
    };
    let (proto, _) =
        FirmwareLoop::from_design(&design, AxisKind::Forward, &units, 6.4, &config.command)
            .expect("the demo design holds in fixed point");
    g.bench_function("fixed", |b| {
        b.iter(|| sweep(&config, &runs, || proto.clone(), &ProgressBar::hidden()))
    });
    g.finish();
}

mod group {
    // criterion's macro generates an undocumented `pub fn`.
    #![allow(missing_docs)]
    criterion::criterion_group!(benches, super::bench);
}
criterion_main!(group::benches);
