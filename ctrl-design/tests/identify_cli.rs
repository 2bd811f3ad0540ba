//! `ctrl-design identify` as a user runs it: exit status, messages, JSON and the plot.

use std::path::{Path, PathBuf};
use std::process::Command;

use ctrl_design::identify::simulate::{simulate, staircase_volts, step_volts, Recording};
use ctrl_design::identify::SignalKind;
use ctrl_design::Plant;

fn bin() -> Command {
    Command::new(env!("CARGO_BIN_EXE_ctrl-design"))
}

fn scratch(name: &str) -> PathBuf {
    let d = std::env::temp_dir().join(format!(
        "ctrl-design-identify-cli-{}-{name}",
        std::process::id()
    ));
    std::fs::create_dir_all(&d).unwrap();
    d
}

fn write(dir: &Path, file: &str, text: &str) -> PathBuf {
    let p = dir.join(file);
    std::fs::write(&p, text).unwrap();
    p
}

/// Runs `identify` on `args`, expects exit status 2 and returns stderr.
fn refused(args: &[&std::ffi::OsStr]) -> String {
    let out = bin().arg("identify").args(args).output().unwrap();
    let err = String::from_utf8_lossy(&out.stderr).to_string();
    assert_eq!(out.status.code(), Some(2), "stderr: {err}");
    assert!(out.stdout.is_empty());
    err
}

#[test]
fn bad_files_exit_2_naming_file_line_and_column() {
    let d = scratch("bad");
    let cases: [(&str, &str, &str); 7] = [
        ("empty.csv", "", "line 1: the file is empty"),
        (
            "nocol.csv",
            "time_s,volts\n0,0\n1,1\n",
            "line 1: missing column \"position\" or \"speed\"",
        ),
        (
            "text.csv",
            "time_s,volts,position\n0,0,0\n0.002,1,0\n0.004,1,x1\n",
            "line 4, column 3 \"position\": \"x1\" is not a number",
        ),
        (
            "nan.csv",
            "time_s,volts,speed\n0,0,0\n0.002,NaN,0\n",
            "line 3, column 2 \"volts\"",
        ),
        (
            "time.csv",
            "time_s,volts,position\n0,0,0\n0.002,1,0\n0.001,1,1\n",
            "line 4, column 1 \"time_s\": time 0.001 s does not increase",
        ),
        (
            "one.csv",
            "time_s,volts,position\n0,1,0\n",
            "line 2: the log has a single data row",
        ),
        (
            "flat.csv",
            "time_s,volts,position\n0,2,0\n0.002,2,1\n0.004,2,2\n",
            "line 2, column 2 \"volts\": the voltage never changes",
        ),
    ];
    for (file, text, words) in cases {
        let p = write(&d, file, text);
        let err = refused(&[p.as_os_str()]);
        assert!(err.starts_with("error: "), "{err}");
        assert!(err.contains(&format!("{}: ", p.display())), "{file}: {err}");
        assert!(err.contains(words), "{file}: expected {words:?} in {err}");
    }
    let missing = d.join("no-such-file.csv");
    let err = refused(&[missing.as_os_str()]);
    assert!(err.contains("no-such-file.csv: cannot read"), "{err}");
}

#[test]
fn a_good_log_among_bad_ones_still_exits_2() {
    let d = scratch("mixed");
    let good = write(
        &d,
        "good.csv",
        "time_s,volts,position\n0,0,0\n0.002,1,0\n0.004,1,1\n",
    );
    let bad = write(
        &d,
        "bad.csv",
        "time_s,volts,position\n0,0,0\n0.002,oops,0\n",
    );
    let err = refused(&[good.as_os_str(), bad.as_os_str()]);
    assert!(err.contains("bad.csv: line 3, column 2"), "{err}");
}

#[test]
fn column_flags_rename_columns() {
    let d = scratch("rename");
    let truth = Plant::new(300.0, 0.06, 0.5).unwrap();
    let rec = Recording {
        sample_period_s: 0.002,
        count_size: 1.0,
        speed_noise_rms: 1.0,
        kind: SignalKind::Position,
        seed: 9,
    };
    let mut paths = Vec::new();
    for (i, v) in [2.0, 4.0, -5.0].iter().enumerate() {
        let log = simulate("x", &truth, &step_volts(*v, 0.1, 0.6, 0.002), &rec).unwrap();
        let mut s = String::from("t,cmd,enc,other\n");
        for k in 0..log.len() {
            s += &format!("{},{},{},zz\n", log.time_s[k], log.volts[k], log.signal[k]);
        }
        paths.push(write(&d, &format!("s{i}.csv"), &s));
    }
    let err = refused(&paths.iter().map(|p| p.as_os_str()).collect::<Vec<_>>());
    assert!(err.contains("missing column \"time_s\""), "{err}");
    let out = bin()
        .args([
            "identify",
            "--time-column",
            "t",
            "--volts-column",
            "cmd",
            "--position-column",
            "enc",
        ])
        .args(["--unit", "mm", "--format", "json"])
        .args(&paths)
        .output()
        .unwrap();
    assert_eq!(
        out.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert!(
        (v["gain"].as_f64().unwrap() / 300.0 - 1.0).abs() < 0.01,
        "{v}"
    );
    assert_eq!(v["unit"], "mm");
}

#[test]
fn json_output_and_plot() {
    let d = scratch("json");
    let truth = Plant::new(180.0, 0.09, 0.7).unwrap();
    let rec = Recording {
        sample_period_s: 0.002,
        count_size: 0.36652,
        speed_noise_rms: 2.0,
        kind: SignalKind::Position,
        seed: 11,
    };
    let v = staircase_volts(
        &[(0.0, 0.1), (2.0, 0.4), (5.0, 0.4), (-3.0, 0.4), (0.0, 0.3)],
        0.002,
    );
    let log = simulate("x", &truth, &v, &rec).unwrap();
    let mut s = String::from("time_s,volts,position\n");
    for k in 0..log.len() {
        s += &format!("{},{},{}\n", log.time_s[k], log.volts[k], log.signal[k]);
    }
    let p = write(&d, "stairs.csv", &s);
    let svg = d.join("fit.svg");
    let out = bin()
        .args(["identify", "--unit", "mm", "--format", "json", "--plot"])
        .arg(&svg)
        .arg(&p)
        .output()
        .unwrap();
    assert_eq!(
        out.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let j: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    for key in [
        "gain",
        "time_constant_s",
        "bias_volts",
        "r_squared",
        "residual_rms",
    ] {
        assert!(j[key].is_number(), "{key} in {j}");
    }
    assert_eq!(j["mode"], "excitation");
    assert_eq!(j["per_log"].as_array().unwrap().len(), 1);
    assert!(j["warnings"].is_array());
    assert!((j["gain"].as_f64().unwrap() / 180.0 - 1.0).abs() < 0.01);
    let svg_text = std::fs::read_to_string(&svg).unwrap();
    assert!(
        svg_text.starts_with("<svg") || svg_text.contains("<svg"),
        "not an SVG"
    );
    assert!(svg_text.contains("stairs.csv"));
    assert!(svg_text.matches("<circle").count() > 100);
    // the default text table
    let out = bin()
        .args(["identify", "--unit", "mm"])
        .arg(&p)
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(0));
    let text = String::from_utf8_lossy(&out.stdout);
    assert!(
        text.contains("gain K") && text.contains("mm/s per V") && text.contains("stairs.csv"),
        "{text}"
    );
}

#[test]
fn unidentifiable_logs_exit_2() {
    let d = scratch("unid");
    let p = write(
        &d,
        "step.csv",
        "time_s,volts,position\n0,0,0\n0.002,3,0\n0.004,3,1\n0.006,3,3\n0.008,3,5\n0.010,3,8\n0.012,3,11\n",
    );
    let err = refused(&[p.as_os_str()]);
    assert!(err.contains("cannot identify"), "{err}");
}
