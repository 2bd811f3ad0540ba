//! Writes the INVENTED demo logs of the greenhouse-bench rover.
//!
//! ```text
//! cargo run -p ctrl-design --example make_demo_logs [-- --out DIR]
//! ```
//!
//! Default output: `examples/greenhouse-rover/logs/{forward,rotation}/*.csv` and a README.md
//! there with the true constants. Every number here is invented for the demo; the logs come
//! from a simulated first-order drive (ctrl_design::identify::simulate) with encoder
//! quantization and a little speed noise, from a fixed seed, so reruns give identical files.

use std::fmt::Write as _;
use std::path::PathBuf;

use ctrl_design::identify::simulate::{simulate, staircase_volts, step_volts, Recording};
use ctrl_design::identify::{Log, SignalKind};
use ctrl_design::Plant;

/// Sample period of the logger (500 Hz loop rate).
const DT: f64 = 0.002;
/// Encoder count as wheel arc, mm: pi * 42 mm / 360 counts.
const COUNT_MM: f64 = 0.36652;
/// Half the track width, mm: heading (rad) = rotation arc (mm) / 70 mm.
const HALF_TRACK_MM: f64 = 70.0;
/// Speed wobble as a fraction of each log's largest steady speed.
const NOISE_FRACTION: f64 = 0.005;

struct Axis {
    dir: &'static str,
    unit: &'static str,
    plant: Plant,
    count: f64,
    steps: &'static [f64],
    stairs: &'static [(f64, f64)],
    seed: u64,
}

fn file_stem(v: f64) -> String {
    let s = format!("{:.1}", v.abs()).replace('.', "v");
    if v < 0.0 {
        format!("step_neg{s}")
    } else {
        format!("step_{s}")
    }
}

fn write_log(path: &std::path::Path, log: &Log, count: f64) -> Result<(), String> {
    let mut s = String::from("time_s,volts,position,counts\n");
    for k in 0..log.len() {
        let counts = (log.signal[k] / count).round() as i64;
        // Position written from the whole count so every value is an exact multiple.
        let _ = writeln!(
            s,
            "{:.3},{},{:.6},{}",
            log.time_s[k],
            log.volts[k],
            counts as f64 * count,
            counts
        );
    }
    std::fs::write(path, s).map_err(|e| format!("{}: {e}", path.display()))
}

fn main() {
    if let Err(e) = run() {
        eprintln!("error: {e}");
        std::process::exit(1);
    }
}

fn run() -> Result<(), String> {
    let args: Vec<String> = std::env::args().skip(1).collect();
    let out = match args.as_slice() {
        [] => PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("../examples/greenhouse-rover/logs"),
        [flag, dir] if flag == "--out" => PathBuf::from(dir),
        _ => return Err("usage: make_demo_logs [--out DIR]".into()),
    };
    let plant = |k, t, b| Plant::new(k, t, b).map_err(|e| e.to_string());
    let axes = [
        Axis {
            dir: "forward",
            unit: "mm",
            plant: plant(180.0, 0.09, 0.7)?,
            count: COUNT_MM,
            steps: &[1.5, 3.0, 4.5, 6.0, -4.5, 0.5],
            stairs: &[
                (0.0, 0.1),
                (2.0, 0.4),
                (4.0, 0.4),
                (6.0, 0.4),
                (3.0, 0.4),
                (0.0, 0.3),
                (-3.0, 0.4),
                (-6.0, 0.4),
                (0.0, 0.4),
            ],
            seed: 0x6772_6565_6e01,
        },
        Axis {
            dir: "rotation",
            unit: "rad",
            plant: plant(2.6, 0.07, 0.8)?,
            count: COUNT_MM / HALF_TRACK_MM,
            steps: &[1.5, 3.0, 4.5, 6.0, -4.5, 0.6],
            stairs: &[
                (0.0, 0.1),
                (2.0, 0.3),
                (4.0, 0.3),
                (6.0, 0.3),
                (3.0, 0.3),
                (0.0, 0.3),
                (-3.0, 0.3),
                (-6.0, 0.3),
                (0.0, 0.3),
            ],
            seed: 0x6772_6565_6e02,
        },
    ];
    let mut readme = String::from(
        "# Demo logs of the greenhouse-bench rover: INVENTED\n\n\
         Every file here is invented for the demo. No robot was run: the logs come from a\n\
         simulated first-order drive (`ctrl_design::identify::simulate`) with the constants\n\
         below, encoder quantization (one count per `count` of the unit), a speed wobble of\n\
         0.5 % of each log's largest steady speed (white, Gaussian) and a fixed seed, sampled\n\
         at 500 Hz. The voltage is held from each row to the next. Columns: `time_s`, `volts`,\n\
         `position` (in the axis' unit, a whole number of counts) and `counts` (ignored by\n\
         `ctrl-design identify`; shown for reading).\n\n\
         Regenerate (identical files):\n\n\
         ```\ncargo run -p ctrl-design --example make_demo_logs\n```\n\n\
         Identify, e.g.:\n\n\
         ```\ncargo run -p ctrl-design -- identify --unit mm examples/greenhouse-rover/logs/forward/step_*.csv\n\
         cargo run -p ctrl-design -- identify --unit rad examples/greenhouse-rover/logs/rotation/staircase.csv\n```\n\n\
         | axis | unit | true gain K (unit/s per V) | true T (s) | true bias (V) | count (unit) | step logs (V) |\n\
         | --- | --- | --- | --- | --- | --- | --- |\n",
    );
    for (ai, ax) in axes.iter().enumerate() {
        let dir = out.join(ax.dir);
        std::fs::create_dir_all(&dir).map_err(|e| format!("{}: {e}", dir.display()))?;
        let make = |name: &str, volts: Vec<f64>, seed: u64| -> Result<(), String> {
            let peak = volts
                .iter()
                .map(|&v| ax.plant.steady_speed(v).abs())
                .fold(0.0f64, f64::max);
            let rec = Recording {
                sample_period_s: DT,
                count_size: ax.count,
                speed_noise_rms: NOISE_FRACTION * peak,
                kind: SignalKind::Position,
                seed,
            };
            let log = simulate(name, &ax.plant, &volts, &rec).map_err(|e| e.to_string())?;
            let path = dir.join(format!("{name}.csv"));
            write_log(&path, &log, ax.count)?;
            println!("wrote {} ({} rows) INVENTED", path.display(), log.len());
            Ok(())
        };
        for (i, &v) in ax.steps.iter().enumerate() {
            make(
                &file_stem(v),
                step_volts(v, 0.1, 0.9, DT),
                ax.seed + i as u64,
            )?;
        }
        make("staircase", staircase_volts(ax.stairs, DT), ax.seed + 100)?;
        let steps: Vec<String> = ax.steps.iter().map(|v| format!("{v}")).collect();
        let _ = writeln!(
            readme,
            "| {} | {} | {} | {} | {} | {:.8} | {} |",
            ax.dir,
            ax.unit,
            ax.plant.gain,
            ax.plant.time_constant_s,
            ax.plant.bias_volts,
            ax.count,
            steps.join(", ")
        );
        println!(
            "{} axis INVENTED truth: K = {} {}/s per V, T = {} s, bias = {} V, count = {:.8} {} (axis {})",
            ax.dir, ax.plant.gain, ax.unit, ax.plant.time_constant_s, ax.plant.bias_volts, ax.count, ax.unit, ai
        );
    }
    readme.push_str(
        "\nEach step log holds 0 V for 0.1 s and then the step voltage for 0.9 s; the one below\n\
         the bias never moves. `staircase.csv` steps through several voltages of both signs.\n\
         The rotation count is the heading change of one wheel count: 0.36652 mm / 70 mm (half\n\
         the 140 mm track).\n",
    );
    let path = out.join("README.md");
    std::fs::write(&path, readme).map_err(|e| format!("{}: {e}", path.display()))?;
    println!("wrote {}", path.display());
    Ok(())
}
