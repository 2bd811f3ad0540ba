//! The crate's step figures, margins and discrete poles against python-control 0.10.2
//! (committed output of `reference/design/make_reference.py`; versions are recorded in
//! `reference/design/expected.json`, the date in `provenance.json`).
//!
//! Tolerances (from the issue): times within 1 % relative or 1 ms, overshoot within 1 %
//! relative or 0.01 percentage point, margins within 0.5 deg and 0.2 dB, crossover
//! frequencies within 0.1 %, discrete pole magnitudes within 1e-6.

use ctrl_design::analysis::{self, DerivativeOn, LoopFigures, SettlingBand};
use ctrl_design::tune;
use ctrl_design::Plant;
use serde_json::Value;

fn expected() -> Value {
    let path = concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/../reference/design/expected.json"
    );
    let text = std::fs::read_to_string(path).expect("reference/design/expected.json is committed");
    serde_json::from_str(&text).expect("valid JSON")
}

fn num(v: &Value, key: &str) -> f64 {
    v[key].as_f64().unwrap_or_else(|| panic!("{key} missing"))
}

fn opt(v: &Value, key: &str) -> Option<f64> {
    v.get(key).and_then(|x| x.as_f64())
}

struct Checker {
    failures: Vec<String>,
    checked: usize,
}

impl Checker {
    fn close(&mut self, what: &str, got: Option<f64>, want: Option<f64>, rel: f64, abs: f64) {
        self.checked += 1;
        match (got, want) {
            (None, None) => {}
            (Some(g), Some(w)) => {
                if (g - w).abs() > (rel * w.abs()).max(abs) {
                    self.failures
                        .push(format!("{what}: got {g}, python-control {w}"));
                }
            }
            _ => self
                .failures
                .push(format!("{what}: got {got:?}, python-control {want:?}")),
        }
    }

    fn block(&mut self, what: &str, f: &LoopFigures, r: &Value, discrete: bool) {
        assert_eq!(
            f.stable,
            r["stable"].as_bool().unwrap(),
            "{what}: stability"
        );
        if f.stable {
            let t = |s: &mut Self, k: &str, got| {
                s.close(&format!("{what} {k}"), got, opt(r, k), 0.01, 1e-3)
            };
            t(self, "peak_time_s", f.peak_time_s);
            t(self, "rise_time_s", f.rise_time_s);
            t(self, "settling_time_s", f.settling_time_s);
            self.close(
                &format!("{what} overshoot"),
                f.overshoot_pct,
                opt(r, "overshoot_pct"),
                0.01,
                0.01,
            );
        }
        self.close(
            &format!("{what} gain margin dB"),
            f.gain_margin_db,
            opt(r, "gain_margin_db"),
            0.0,
            0.2,
        );
        self.close(
            &format!("{what} phase margin"),
            f.phase_margin_deg,
            opt(r, "phase_margin_deg"),
            0.0,
            0.5,
        );
        self.close(
            &format!("{what} phase crossover"),
            f.phase_crossover_rad_s,
            opt(r, "phase_crossover_rad_s"),
            1e-3,
            0.0,
        );
        self.close(
            &format!("{what} gain crossover"),
            f.gain_crossover_rad_s,
            opt(r, "gain_crossover_rad_s"),
            1e-3,
            0.0,
        );
        if discrete {
            let mut mine: Vec<f64> = f.poles.iter().map(|p| p.abs()).collect();
            mine.sort_by(|a, b| b.partial_cmp(a).unwrap());
            let theirs: Vec<f64> = r["pole_magnitudes"]
                .as_array()
                .unwrap()
                .iter()
                .map(|x| x.as_f64().unwrap())
                .collect();
            if mine.len() != theirs.len() {
                self.failures.push(format!(
                    "{what}: {} poles, python-control {}",
                    mine.len(),
                    theirs.len()
                ));
            } else {
                for (i, (a, b)) in mine.iter().zip(&theirs).enumerate() {
                    self.close(&format!("{what} |pole {i}|"), Some(*a), Some(*b), 0.0, 1e-6);
                }
            }
        }
    }

    /// Scaling the loop by its gain margin must put a closed-loop pole on the unit
    /// circle: the definition of the gain margin, checked on whichever figure we report.
    fn gain_margin_is_marginal(
        &mut self,
        what: &str,
        lp: &analysis::DiscreteLoop,
        gm_db: Option<f64>,
    ) {
        if let Some(gm) = gm_db {
            let g = 10f64.powf(gm / 20.0);
            let mut scaled = lp.clone();
            scaled.controller.c.iter_mut().for_each(|c| *c *= g);
            let rho = scaled
                .closed_loop()
                .den
                .roots()
                .iter()
                .map(|p| p.abs())
                .fold(0.0, f64::max);
            self.close(
                &format!("{what} |pole| at gain margin"),
                Some(rho),
                Some(1.0),
                0.0,
                1e-6,
            );
        }
    }

    fn finish(self, name: &str) {
        assert!(
            self.checked > 100,
            "{name}: only {} figures checked",
            self.checked
        );
        assert!(
            self.failures.is_empty(),
            "{name}: {} of {} figures differ from python-control:\n{}",
            self.failures.len(),
            self.checked,
            self.failures.join("\n")
        );
    }
}

fn plant_of(c: &Value) -> Plant {
    Plant::new(num(c, "gain"), num(c, "time_constant_s"), 0.0).unwrap()
}

fn parse_key(key: &str) -> (f64, bool) {
    let delayed = key.ends_with("_delayed");
    (key.trim_end_matches("_delayed").parse().unwrap(), delayed)
}

#[test]
fn pd_figures_match_python_control() {
    let e = expected();
    let band = SettlingBand::TWO_PERCENT;
    let mut ck = Checker {
        failures: vec![],
        checked: 0,
    };
    for c in e["pd"].as_array().unwrap() {
        let p = plant_of(c);
        let (kp, kd) = (num(c, "kp"), num(c, "kd"));
        // The design formulas give the same gains.
        let d = tune::design_pd(&p, num(c, "damping"), num(c, "settling_time_s"), band).unwrap();
        ck.close("kp", Some(d.kp), Some(kp), 1e-12, 0.0);
        ck.close("kd", Some(d.kd), Some(kd), 1e-9, 1e-15);
        for (form, on) in [
            ("error", DerivativeOn::Error),
            ("measurement", DerivativeOn::Measurement),
        ] {
            let r = &c["forms"][form];
            let name = format!("{} zeta {} form {form}", c["plant"], c["damping"]);
            let f = analysis::pd_continuous(&p, kp, kd, on).figures(band);
            ck.block(&format!("{name} continuous"), &f, &r["continuous"], false);
            for (key, rb) in r["discrete"].as_object().unwrap() {
                let (rate, delayed) = parse_key(key);
                let lp = analysis::pd_discrete(&p, kp, kd, on, rate, delayed);
                let f = lp.figures(band);
                ck.block(&format!("{name} {key}"), &f, rb, true);
                ck.gain_margin_is_marginal(&format!("{name} {key}"), &lp, f.gain_margin_db);
            }
        }
    }
    ck.finish("pd");
}

#[test]
fn lead_designs_and_figures_match_python_control() {
    let e = expected();
    let band = SettlingBand::TWO_PERCENT;
    let mut ck = Checker {
        failures: vec![],
        checked: 0,
    };
    for c in e["lead"].as_array().unwrap() {
        let p = plant_of(c);
        let wc = num(c, "crossover_rad_s");
        let d = tune::design_lead(&p, wc, num(c, "phase_margin_deg")).unwrap();
        for (k, got) in [
            ("kc", d.kc),
            ("alpha", d.alpha),
            ("t1", d.t1),
            ("lead_deg", d.lead_deg),
        ] {
            ck.close(k, Some(got), Some(num(c, k)), 1e-9, 0.0);
        }
        let name = format!("{} lead wc {wc}", c["plant"]);
        let f = analysis::lead_continuous(&p, d.kc, d.alpha, d.t1).figures(band);
        ck.block(&format!("{name} continuous"), &f, &c["continuous"], false);
        // The design meets its own specification (python-control's margin of the design).
        ck.close(
            &format!("{name} designed phase margin"),
            f.phase_margin_deg,
            Some(num(c, "phase_margin_deg")),
            0.0,
            1e-6,
        );
        for (key, rb) in c["discrete"].as_object().unwrap() {
            let (rate, delayed) = parse_key(key);
            let co = d.discretize(rate).unwrap();
            let rc = &rb["coefficients"];
            for (k, got) in [("b0", co.b0), ("b1", co.b1), ("a1", co.a1)] {
                ck.close(
                    &format!("{name} {key} {k}"),
                    Some(got),
                    Some(num(rc, k)),
                    1e-9,
                    1e-12,
                );
            }
            let lp = analysis::lead_discrete(&p, &co, delayed);
            let f = lp.figures(band);
            ck.block(&format!("{name} {key}"), &f, rb, true);
            ck.gain_margin_is_marginal(&format!("{name} {key}"), &lp, f.gain_margin_db);
        }
    }
    ck.finish("lead");
}

#[test]
fn pi_designs_and_figures_match_python_control() {
    let e = expected();
    let band = SettlingBand::TWO_PERCENT;
    let mut ck = Checker {
        failures: vec![],
        checked: 0,
    };
    for c in e["pi"].as_array().unwrap() {
        let p = plant_of(c);
        let d = tune::design_pi(&p, num(c, "bandwidth_rad_s"), num(c, "damping")).unwrap();
        ck.close("pi kp", Some(d.kp), Some(num(c, "kp")), 1e-6, 0.0);
        ck.close("pi ki", Some(d.ki), Some(num(c, "ki")), 1e-6, 0.0);
        let (kp, ki) = (num(c, "kp"), num(c, "ki"));
        let name = format!("{} pi bw {}", c["plant"], c["bandwidth_rad_s"]);
        let f = analysis::pi_continuous(&p, kp, ki).figures(band);
        ck.block(&format!("{name} continuous"), &f, &c["continuous"], false);
        ck.close(
            &format!("{name} bandwidth"),
            f.bandwidth_rad_s,
            Some(num(c, "measured_bandwidth_rad_s")),
            1e-6,
            0.0,
        );
        for (key, rb) in c["discrete"].as_object().unwrap() {
            let (rate, delayed) = parse_key(key);
            let lp = analysis::pi_discrete(&p, kp, ki, rate, delayed);
            let f = lp.figures(band);
            ck.block(&format!("{name} {key}"), &f, rb, true);
            ck.gain_margin_is_marginal(&format!("{name} {key}"), &lp, f.gain_margin_db);
        }
    }
    ck.finish("pi");
}
