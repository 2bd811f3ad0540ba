//! Speed of `identify` on long logs (goal: a 1,000,000-row log in under 0.5 s).
//!
//! `cargo bench -p ctrl-design --bench identify`
//!
//! The log is a simulated 500 Hz position log of 1,000,000 rows (2000 s): a staircase of
//! voltages of both signs, 3-unit encoder counts, 0.5 % speed noise. Benched: the whole
//! `identify` call (automatic choice -> excitation mode: equation-error start, output-error
//! fit over all rows, quality figures and warnings), and, apart, parsing the same log from
//! CSV text.

use criterion::{criterion_main, Criterion};
use ctrl_design::identify::{
    self,
    simulate::{simulate, staircase_volts, Recording},
    Columns, Log, Options, SignalKind,
};
use ctrl_design::Plant;
use std::fmt::Write as _;

const ROWS: usize = 1_000_000;

fn long_log() -> Log {
    let truth = Plant::new(180.0, 0.09, 0.7).unwrap();
    let pattern = [
        0.0, 2.0, 4.0, 6.0, 3.0, 0.0, -3.0, -6.0, -1.5, 0.5, 5.0, 1.2,
    ];
    let mut levels = Vec::new();
    let mut total = 0.0;
    let mut i = 0;
    while total < ROWS as f64 * 0.002 {
        levels.push((pattern[i % pattern.len()], 0.4));
        total += 0.4;
        i += 1;
    }
    let mut v = staircase_volts(&levels, 0.002);
    v.truncate(ROWS);
    let rec = Recording {
        sample_period_s: 0.002,
        count_size: 3.0,
        speed_noise_rms: 0.005 * truth.steady_speed(6.0),
        kind: SignalKind::Position,
        seed: 42,
    };
    simulate("long.csv", &truth, &v, &rec).unwrap()
}

/// CPU seconds used by this process so far (Linux `/proc/self/stat`; `None` elsewhere). The
/// bench machine is shared, so wall time can exceed CPU time; both are printed.
fn cpu_seconds() -> Option<f64> {
    let s = std::fs::read_to_string("/proc/self/stat").ok()?;
    let f: Vec<&str> = s.rsplit(')').next()?.split_whitespace().collect();
    let ticks: f64 = f.get(11)?.parse::<f64>().ok()? + f.get(12)?.parse::<f64>().ok()?;
    Some(ticks / 100.0)
}

fn bench(c: &mut Criterion) {
    let log = long_log();
    assert_eq!(log.len(), ROWS);
    let logs = [log];
    let id = identify::identify(&logs, &Options::default()).unwrap();
    eprintln!(
        "1M-row log: K = {:.4}, T = {:.5}, bias = {:.4}, R2 = {:.5}",
        id.plant.gain, id.plant.time_constant_s, id.plant.bias_volts, id.r_squared
    );
    if let Some(c0) = cpu_seconds() {
        let t0 = std::time::Instant::now();
        for _ in 0..5 {
            let _ = identify::identify(&logs, &Options::default()).unwrap();
        }
        if let Some(c1) = cpu_seconds() {
            eprintln!(
                "identify 1M rows: {:.3} s CPU, {:.3} s wall per call (mean of 5)",
                (c1 - c0) / 5.0,
                t0.elapsed().as_secs_f64() / 5.0
            );
        }
    }
    let mut g = c.benchmark_group("identify");
    g.sample_size(10);
    g.bench_function("identify_1M_rows_excitation", |b| {
        b.iter(|| identify::identify(&logs, &Options::default()).unwrap())
    });
    let mut csv = String::from("time_s,volts,position\n");
    let l = &logs[0];
    for k in 0..l.len() {
        let _ = writeln!(csv, "{:.3},{},{}", l.time_s[k], l.volts[k], l.signal[k]);
    }
    g.bench_function("parse_1M_rows_csv", |b| {
        b.iter(|| Log::parse("long.csv", csv.as_bytes(), &Columns::default()).unwrap())
    });
    g.finish();
}

/// The criterion group (the macro's generated function carries no docs of its own).
mod group {
    #![allow(missing_docs)]
    criterion::criterion_group!(benches, super::bench);
}
criterion_main!(group::benches);
