//! `ctrl-design sweep`: the simulation over a spread of plant constants, worst case of each
//! figure and the plant that gave it.

use super::simulate::{Arithmetic, SimArgs};
use super::{CliError, Format};
use ctrl_design::sweep::{self, Sampling, Spread, SweepReport, WorstCase};
use indicatif::{ProgressBar, ProgressDrawTarget, ProgressStyle};
use std::time::Instant;

/// Arguments of `ctrl-design sweep`.
#[derive(Debug, clap::Args)]
pub struct Args {
    #[command(flatten)]
    sim: SimArgs,
    /// Spread of K, T and bias, percent of nominal (0 <= spread < 100).
    #[arg(
        long,
        value_name = "PERCENT",
        allow_negative_numbers = true,
        default_value_t = 20.0
    )]
    spread: f64,
    /// Monte-Carlo runs (1 ..= 10000000).
    #[arg(long, conflicts_with = "grid", default_value_t = 1000)]
    samples: u32,
    /// A grid of N values per constant instead (N^3 runs, 1 ..= 200).
    #[arg(long, value_name = "N")]
    grid: Option<u32>,
    /// Seed of the Monte-Carlo draw.
    #[arg(long, default_value_t = 1)]
    seed: u64,
    /// Arithmetic of the loop (fixed or f64).
    #[arg(long, value_enum, default_value = "fixed")]
    arithmetic: Arithmetic,
    /// No progress bar.
    #[arg(long)]
    quiet: bool,
    /// Output format.
    #[arg(long, value_enum, default_value = "text")]
    format: Format,
}

#[derive(Debug, serde::Serialize)]
struct Report<'a> {
    arithmetic: Arithmetic,
    spread: Spread,
    sampling: Sampling,
    nominal: &'a ctrl_design::Plant,
    ticks_per_run: u32,
    #[serde(flatten)]
    result: &'a SweepReport,
    elapsed_s: f64,
    ticks_per_s: f64,
}

/// Progress bar on stderr for runs of more than this many ticks in all.
const PROGRESS_TICKS: u64 = 20_000_000;

fn line(name: &str, w: &WorstCase, unit: &str) {
    let v = match w.value {
        Some(v) if unit.is_empty() => format!("{v:.0}"),
        Some(v) => format!("{v:.4} {unit}"),
        None => "never".to_string(),
    };
    println!(
        "  {name:<22} {v:<16} run {:>7}: K = {:.4}, T = {:.5}, bias = {:.4}",
        w.run, w.plant.gain, w.plant.time_constant_s, w.plant.bias_volts
    );
}

/// Runs the subcommand.
pub fn run(args: Args) -> Result<(), CliError> {
    let setup = args.sim.setup()?;
    let config = setup.config;
    if !(args.spread.is_finite() && (0.0..100.0).contains(&args.spread)) {
        return Err(CliError::bad_input(format!(
            "--spread = {} is out of range: valid is 0 <= spread < 100 (percent)",
            args.spread
        )));
    }
    let spread = Spread::uniform(args.spread / 100.0);
    let sampling = match args.grid {
        Some(points) => Sampling::Grid { points },
        None => Sampling::MonteCarlo {
            samples: args.samples,
            seed: args.seed,
        },
    };
    let plants = sweep::plants(&config.plant, &spread, &sampling).map_err(|e| {
        let flag = match e.field {
            "grid" => "--grid",
            "samples" => "--samples",
            _ => "--spread",
        };
        CliError::bad_input(format!(
            "{flag} = {} is out of range: valid is {}",
            e.value, e.valid
        ))
    })?;
    let total_ticks = plants.len() as u64 * u64::from(config.ticks);
    let bar = if args.quiet || total_ticks < PROGRESS_TICKS {
        ProgressBar::hidden()
    } else {
        let b =
            ProgressBar::with_draw_target(Some(plants.len() as u64), ProgressDrawTarget::stderr());
        if let Ok(style) = ProgressStyle::with_template("{bar:40} {pos}/{len} runs, {eta} left") {
            b.set_style(style);
        }
        b
    };
    let start = Instant::now();
    let result = match args.arithmetic {
        Arithmetic::F64 => sweep::sweep(&config, &plants, || setup.ideal_loop(), &bar),
        Arithmetic::Fixed => {
            let (proto, _) = setup.firmware_loop()?;
            sweep::sweep(&config, &plants, || proto.clone(), &bar)
        }
        Arithmetic::Both => {
            return Err(CliError::bad_input(
                "--arithmetic = both is not valid for sweep: valid is fixed or f64",
            ))
        }
    };
    let elapsed_s = start.elapsed().as_secs_f64();
    bar.finish_and_clear();
    let report = Report {
        arithmetic: args.arithmetic,
        spread,
        sampling,
        nominal: &config.plant,
        ticks_per_run: config.ticks,
        result: &result,
        elapsed_s,
        ticks_per_s: result.ticks as f64 / elapsed_s.max(1e-12),
    };
    match args.format {
        Format::Json => println!(
            "{}",
            serde_json::to_string(&report)
                .map_err(|e| CliError::failure(format!("cannot encode the report: {e}")))?
        ),
        Format::Text => {
            println!(
                "{} runs x {} ticks ({:.1} M ticks/s, {:.3} s), {} not settled, {} stalled",
                result.runs,
                config.ticks,
                report.ticks_per_s / 1e6,
                elapsed_s,
                result.unsettled_runs,
                result.stalled_runs
            );
            if let Some(w) = &result.worst {
                println!("worst case:");
                line("overshoot", &w.overshoot_pct, "%");
                line("peak time", &w.peak_time_s, "s");
                line("rise time", &w.rise_time_s, "s");
                line("settling time", &w.settling_time_s, "s");
                line("|final error|", &w.final_error_abs, "units");
                line("max tracking error", &w.max_tracking_error, "units");
                line("peak voltage", &w.peak_volts, "V");
                line("RMS voltage", &w.rms_volts, "V");
                line("voltage variation", &w.voltage_total_variation, "V");
                line("ticks at the supply", &w.saturated_ticks, "");
            }
        }
    }
    Ok(())
}
