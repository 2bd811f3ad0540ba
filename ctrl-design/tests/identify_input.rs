//! Bad input to `identify`: every refusal names file, line and column; garbage never panics.

use ctrl_design::identify::{
    self, fit, simulate::simulate, simulate::staircase_volts, simulate::step_volts,
    simulate::Recording, Columns, IdentifyError, Log, Mode, Options, SignalKind,
};
use ctrl_design::Plant;
use proptest::prelude::*;

fn parse(text: &str) -> Result<Log, IdentifyError> {
    Log::parse("bench.csv", text.as_bytes(), &Columns::default())
}

/// Asserts an input error at `line` (and column index `col` if given) whose text contains
/// `words`, and that its message names the file and the line.
fn refused(text: &str, line: usize, col: Option<usize>, words: &str) {
    let e = parse(text).expect_err("must be refused");
    let msg = e.to_string();
    match &e {
        IdentifyError::Input {
            file,
            line: l,
            column,
            problem,
        } => {
            assert_eq!(file, "bench.csv");
            assert_eq!(*l, Some(line), "{msg}");
            assert_eq!(column.as_ref().map(|c| c.index), col, "{msg}");
            assert!(problem.contains(words), "{msg}");
        }
        other => panic!("wrong kind: {other:?}"),
    }
    assert!(msg.starts_with("bench.csv: line "), "{msg}");
    if let Some(c) = col {
        assert!(msg.contains(&format!("column {c} ")), "{msg}");
    }
}

const GOOD: &str = "time_s,volts,position\n0,0,0\n0.002,0,0\n0.004,3,0\n0.006,3,3\n";

#[test]
fn a_good_file_parses() {
    let log = parse(GOOD).unwrap();
    assert_eq!(log.len(), 4);
    assert_eq!(log.kind, SignalKind::Position);
    assert_eq!(log.lines, vec![2, 3, 4, 5]);
    assert_eq!(log.voltage_changes(), vec![2]);
}

#[test]
fn empty_file() {
    refused("", 1, None, "empty");
    refused("\n  \n", 1, None, "empty");
}

#[test]
fn header_without_rows() {
    refused("time_s,volts,position\n", 1, None, "no data rows");
}

#[test]
fn missing_column() {
    refused(
        "time_s,voltage,position\n0,0,0\n1,1,1\n",
        1,
        None,
        "missing column \"volts\"",
    );
    refused(
        "time_s,volts,pos\n0,0,0\n1,1,1\n",
        1,
        None,
        "\"position\" or \"speed\"",
    );
}

#[test]
fn non_numeric_cell() {
    refused(
        "time_s,volts,position\n0,0,0\n0.002,abc,0\n0.004,3,1\n",
        3,
        Some(2),
        "\"abc\" is not a number",
    );
    refused(
        "time_s,volts,position\n0,0,0\n0.002,,0\n",
        3,
        Some(2),
        "empty",
    );
}

#[test]
fn nan_and_infinity() {
    refused(
        "time_s,volts,position\n0,0,0\n0.002,1,NaN\n",
        3,
        Some(3),
        "finite",
    );
    refused(
        "time_s,volts,position\n0,0,0\n0.002,inf,1\n",
        3,
        Some(2),
        "finite",
    );
    refused(
        "time_s,volts,position\n0,0,0\n1e999,1,1\n",
        3,
        Some(1),
        "finite",
    );
}

#[test]
fn time_not_increasing() {
    refused(
        "time_s,volts,position\n0,0,0\n0.002,1,0\n0.002,1,1\n",
        4,
        Some(1),
        "does not increase",
    );
    refused(
        "time_s,volts,position\n0,0,0\n0.004,1,0\n0.002,1,1\n",
        4,
        Some(1),
        "does not increase",
    );
}

#[test]
fn single_row() {
    refused("time_s,volts,position\n0,1,0\n", 2, None, "single data row");
}

#[test]
fn no_voltage_change() {
    refused(
        "time_s,volts,position\n0,2,0\n0.002,2,1\n0.004,2,2\n",
        2,
        Some(2),
        "never changes",
    );
}

#[test]
fn short_row() {
    refused(
        "time_s,volts,position\n0,0,0\n0.002,1\n",
        3,
        Some(3),
        "missing",
    );
}

#[test]
fn not_utf8() {
    let e = Log::parse(
        "bench.csv",
        b"time_s,volts,position\n0,0,0\n\xff\xfe,1,1\n",
        &Columns::default(),
    )
    .unwrap_err();
    assert!(
        matches!(e, IdentifyError::Input { line: Some(3), .. }),
        "{e}"
    );
}

#[test]
fn renamed_columns_extra_columns_quotes_and_blank_lines() {
    let text = "\u{feff}\"t\", note , cmd,enc\n0, x ,0,0\n\n0.002,y,0,0\n0.004,z,2.5,0\n0.006,,2.5,\"3\"\n";
    let cols = Columns {
        time: "t".into(),
        volts: "cmd".into(),
        position: "enc".into(),
        ..Columns::default()
    };
    let log = Log::parse("r.csv", text.as_bytes(), &cols).unwrap();
    assert_eq!(log.signal, vec![0.0, 0.0, 0.0, 3.0]);
    assert_eq!(log.lines, vec![2, 4, 5, 6]);
    // a bad cell in a column that is not used is ignored; in a used one it is not
    let bad = "t,note,cmd,enc\n0,0,0,0\n0.002,0,1,zz\n";
    let e = Log::parse("r.csv", bad.as_bytes(), &cols).unwrap_err();
    assert!(e.to_string().contains("line 3, column 4 \"enc\""), "{e}");
}

#[test]
fn both_position_and_speed_prefers_position_unless_told() {
    let text = "time_s,volts,speed,position\n0,0,5,0\n0.002,1,6,1\n";
    let log = parse(text).unwrap();
    assert_eq!(log.kind, SignalKind::Position);
    let cols = Columns {
        prefer: SignalKind::Speed,
        ..Columns::default()
    };
    let log = Log::parse("b.csv", text.as_bytes(), &cols).unwrap();
    assert_eq!(log.kind, SignalKind::Speed);
    assert_eq!(log.signal, vec![5.0, 6.0]);
}

#[test]
fn log_new_checks_like_the_parser() {
    let e = Log::new(
        "mem",
        vec![0.0, 1.0],
        vec![0.0, 0.0],
        SignalKind::Speed,
        vec![0.0, 1.0],
    )
    .unwrap_err();
    assert!(e.to_string().contains("never changes"), "{e}");
    let e = Log::new(
        "mem",
        vec![0.0, f64::NAN],
        vec![0.0, 1.0],
        SignalKind::Speed,
        vec![0.0, 1.0],
    )
    .unwrap_err();
    assert!(e.to_string().contains("line 3, column 1"), "{e}");
    let e = Log::new(
        "mem",
        vec![0.0],
        vec![0.0, 1.0],
        SignalKind::Speed,
        vec![0.0],
    )
    .unwrap_err();
    assert!(e.to_string().contains("differ in length"), "{e}");
}

#[test]
fn data_that_cannot_give_three_constants_is_refused() {
    let truth = Plant::new(200.0, 0.05, 0.5).unwrap();
    let rec = Recording {
        sample_period_s: 0.002,
        count_size: 1.0,
        speed_noise_rms: 0.0,
        kind: SignalKind::Position,
        seed: 3,
    };
    let one = simulate("one.csv", &truth, &step_volts(3.0, 0.1, 0.5, 0.002), &rec).unwrap();
    // one step voltage: gain and bias cannot be separated
    let e = identify::identify(std::slice::from_ref(&one), &Options::default()).unwrap_err();
    assert!(matches!(e, IdentifyError::Unidentifiable { .. }), "{e}");
    let excite = Options {
        mode: Mode::Excitation,
        ..Options::default()
    };
    let e = identify::identify(std::slice::from_ref(&one), &excite).unwrap_err();
    assert!(
        e.to_string().contains("two different nonzero voltage"),
        "{e}"
    );
    // only steps below the bias
    let stuck: Vec<Log> = [0.2, 0.4]
        .iter()
        .map(|&v| simulate("s.csv", &truth, &step_volts(v, 0.1, 0.5, 0.002), &rec).unwrap())
        .collect();
    assert!(identify::identify(&stuck, &Options::default()).is_err());
    // a staircase in step mode names the file
    let st = simulate(
        "stairs.csv",
        &truth,
        &staircase_volts(&[(0.0, 0.1), (2.0, 0.2), (4.0, 0.2)], 0.002),
        &rec,
    )
    .unwrap();
    let step_only = Options {
        mode: Mode::Step,
        ..Options::default()
    };
    let e = identify::identify(&[st], &step_only).unwrap_err();
    assert!(e.to_string().starts_with("stairs.csv"), "{e}");
    assert!(e.to_string().contains("changes 2 times"), "{e}");
    assert!(identify::identify(&[], &Options::default()).is_err());
}

#[test]
fn speed_opposite_to_voltage_is_refused() {
    let truth = Plant::new(200.0, 0.05, 0.5).unwrap();
    let rec = Recording {
        sample_period_s: 0.002,
        count_size: 0.0,
        speed_noise_rms: 0.0,
        kind: SignalKind::Speed,
        seed: 3,
    };
    let logs: Vec<Log> = [2.0, 4.0]
        .iter()
        .map(|&v| {
            let mut l = simulate("rev.csv", &truth, &step_volts(v, 0.1, 0.5, 0.002), &rec).unwrap();
            l.signal.iter_mut().for_each(|s| *s = -*s);
            l
        })
        .collect();
    let e = identify::identify(&logs, &Options::default()).unwrap_err();
    assert!(e.to_string().contains("sign"), "{e}");
}

fn csv_cell() -> impl Strategy<Value = String> {
    prop_oneof![
        (-1e4f64..1e4).prop_map(|v| format!("{v}")),
        Just("0".to_string()),
        Just("NaN".to_string()),
        Just("inf".to_string()),
        Just("".to_string()),
        Just("1e308".to_string()),
        Just("-1e-320".to_string()),
        "[ -~]{0,6}",
    ]
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 400, ..ProptestConfig::default() })]

    #[test]
    fn garbage_bytes_never_panic(bytes in proptest::collection::vec(any::<u8>(), 0..400)) {
        let _ = Log::parse("g.csv", &bytes, &Columns::default());
        let mut with_header = b"time_s,volts,position\n".to_vec();
        with_header.extend_from_slice(&bytes);
        if let Ok(log) = Log::parse("g.csv", &with_header, &Columns::default()) {
            let _ = identify::identify(&[log], &Options::default());
        }
    }

    #[test]
    fn garbage_csv_never_panics(
        rows in proptest::collection::vec(proptest::collection::vec(csv_cell(), 0..5), 0..40),
        header in prop_oneof![Just("time_s,volts,position"), Just("time_s,volts,speed"), Just("volts,time_s"), Just("time_s,volts,speed,position")],
    ) {
        let mut text = String::from(header);
        text.push('\n');
        for r in &rows {
            text.push_str(&r.join(","));
            text.push('\n');
        }
        match Log::parse("g.csv", text.as_bytes(), &Columns::default()) {
            Ok(log) => {
                for mode in [Mode::Auto, Mode::Step, Mode::Excitation] {
                    let _ = identify::identify(std::slice::from_ref(&log), &Options { mode, unit: String::new() });
                }
            }
            Err(e) => {
                let msg = e.to_string();
                prop_assert!(msg.starts_with("g.csv: line "), "{}", msg);
            }
        }
    }

    #[test]
    fn arbitrary_finite_logs_never_panic(
        n in 2usize..120,
        seed_vals in proptest::collection::vec((-1e6f64..1e6, -20f64..20.0, -1e9f64..1e9), 120),
        dts in proptest::collection::vec(1e-9f64..10.0, 120),
        kind in prop_oneof![Just(SignalKind::Position), Just(SignalKind::Speed)],
        logs_n in 1usize..4,
    ) {
        let mut logs = Vec::new();
        for j in 0..logs_n {
            let mut t = 0.0;
            let mut time = Vec::new();
            let mut volts = Vec::new();
            let mut sig = Vec::new();
            for k in 0..n {
                t += dts[(k + j) % dts.len()];
                time.push(t);
                let (_, v, s) = seed_vals[(k * (j + 1)) % seed_vals.len()];
                volts.push(if k < n / 2 { 0.0 } else { v });
                sig.push(s);
            }
            if let Ok(l) = Log::new("a", time, volts, kind, sig) {
                logs.push(l);
            }
        }
        for mode in [Mode::Auto, Mode::Step, Mode::Excitation] {
            if let Ok(id) = identify::identify(&logs, &Options { mode, unit: "u".into() }) {
                prop_assert!(id.plant.gain > 0.0 && id.plant.time_constant_s > 0.0 && id.plant.bias_volts >= 0.0);
                let _ = serde_json::to_string(&id).unwrap();
            }
        }
        for l in &logs {
            let _ = fit::fit_step(l);
        }
    }
}
