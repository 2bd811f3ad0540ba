//! The design file: one TOML file that says everything the emitter needs to turn a robot's
//! drive into checked firmware constants.
//!
//! The file has the tables `[drive]`, `[supply]`, `[forward]` and `[rotation]` (one per axis,
//! each with `plant`, `loop`, `move` and `stall_guard` sub-tables) and an optional `[checks]`.
//! Every key, its unit and its valid range are listed in [`KEYS`] (and in `docs/emit.md`).
//!
//! Unknown keys are errors, and every error names the file, the line, the key and the valid
//! range:
//!
//! ```
//! use ctrl_design::design_file::DesignFile;
//! let src = "[drive]\nloop_rate_hz = 500\nloop_rate = 1\n";
//! let err = DesignFile::parse_str(src, "rover.toml".as_ref()).unwrap_err();
//! let text = err.to_string();
//! assert!(text.contains("rover.toml:3"), "{text}");
//! assert!(text.contains("loop_rate"), "{text}");
//! ```
//!
//! Distances are in mm on the forward axis and in radians of heading on the rotation axis;
//! the encoder counts per unit of each axis come from the wheel geometry (see
//! [`Drive::counts_per_mm`] and [`Drive::counts_per_rad`]).

use std::collections::BTreeMap;
use std::fmt;
use std::ops::Range;
use std::path::{Path, PathBuf};

use serde::Deserialize;
use toml::Spanned;

use crate::Plant;

/// One key of the design file: its dotted path, unit and valid range (for errors and docs).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct KeyInfo {
    /// Dotted path, with `<axis>` standing for `forward` or `rotation`.
    pub key: &'static str,
    /// Unit of the value.
    pub unit: &'static str,
    /// Valid range or values, in words.
    pub valid: &'static str,
    /// What the key means.
    pub meaning: &'static str,
}

/// Every key the design file accepts. The parser's range checks and the docs use this table.
pub const KEYS: &[KeyInfo] = &[
    KeyInfo { key: "name", unit: "text", valid: "optional; 1 to 64 characters", meaning: "a name for the design, copied into the generated header" },
    KeyInfo { key: "drive.loop_rate_hz", unit: "Hz", valid: "10 to 100000", meaning: "control loop rate (ticks per second)" },
    KeyInfo { key: "drive.wheel_diameter_mm", unit: "mm", valid: "greater than 0, at most 2000", meaning: "wheel diameter" },
    KeyInfo { key: "drive.track_width_mm", unit: "mm", valid: "greater than 0, at most 10000", meaning: "distance between the two wheels' contact points" },
    KeyInfo { key: "drive.encoder_counts_per_rev", unit: "counts", valid: "integer 1 to 1000000", meaning: "encoder counts per wheel revolution (after any quadrature multiplication)" },
    KeyInfo { key: "drive.encoder_counter_bits", unit: "bits", valid: "integer 16 to 32", meaning: "width of the hardware encoder counter (it wraps); ctrl-core reads its low 16 bits, so narrower counters are refused" },
    KeyInfo { key: "drive.invert_left_encoder", unit: "true/false", valid: "optional, default false", meaning: "the left encoder counts down when the left wheel drives the robot forward (mirrored motor mounting)" },
    KeyInfo { key: "drive.invert_right_encoder", unit: "true/false", valid: "optional, default false", meaning: "the right encoder counts down when the right wheel drives the robot forward" },
    KeyInfo { key: "supply.lowest_volts", unit: "V", valid: "greater than 0, at most 100", meaning: "lowest battery voltage the design must work at" },
    KeyInfo { key: "supply.highest_volts", unit: "V", valid: "at least supply.lowest_volts, at most 100", meaning: "highest (full-charge) battery voltage" },
    KeyInfo { key: "<axis>.plant.gain", unit: "unit/s per V", valid: "greater than 0, at most 1e6", meaning: "steady speed per volt above the bias" },
    KeyInfo { key: "<axis>.plant.time_constant_s", unit: "s", valid: "greater than 0, at most 10", meaning: "time constant of the speed response" },
    KeyInfo { key: "<axis>.plant.bias_volts", unit: "V", valid: "0 or more, below supply.lowest_volts", meaning: "friction bias: volts needed before the wheel moves" },
    KeyInfo { key: "<axis>.plant.logs", unit: "paths", valid: "non-empty list of CSV files, directories (meaning their *.csv) or file patterns with * (logs/forward/step_*.csv), relative to the design file; instead of gain/time_constant_s/bias_volts", meaning: "step logs to identify the plant from" },
    KeyInfo { key: "<axis>.plant.position_column", unit: "text", valid: "optional, with logs; default \"position\"", meaning: "name of the logs' position column (in the axis unit)" },
    KeyInfo { key: "<axis>.loop.kind", unit: "text", valid: "\"pd\" or \"lead\"", meaning: "position loop form" },
    KeyInfo { key: "<axis>.loop.damping", unit: "1", valid: "greater than 0, at most 3 (kind = \"pd\")", meaning: "target damping ratio" },
    KeyInfo { key: "<axis>.loop.settling_time_s", unit: "s", valid: "greater than 0, at most 60 (kind = \"pd\")", meaning: "target settling time" },
    KeyInfo { key: "<axis>.loop.band_pct", unit: "%", valid: "2 or 5; optional, default 2 (kind = \"pd\")", meaning: "settling band" },
    KeyInfo { key: "<axis>.loop.crossover_rad_s", unit: "rad/s", valid: "greater than 0, below pi * drive.loop_rate_hz (kind = \"lead\")", meaning: "target gain-crossover frequency" },
    KeyInfo { key: "<axis>.loop.phase_margin_deg", unit: "deg", valid: "greater than 0, below 90 (kind = \"lead\")", meaning: "target phase margin" },
    KeyInfo { key: "<axis>.move.cruise_speed", unit: "unit/s", valid: "greater than 0, at most 1e6", meaning: "cruise speed of a move" },
    KeyInfo { key: "<axis>.move.accel", unit: "unit/s^2", valid: "greater than 0, at most 1e8", meaning: "acceleration and deceleration of a move" },
    KeyInfo { key: "<axis>.stall_guard.max_tracking_error", unit: "unit", valid: "greater than 0, at most 1e6", meaning: "tracking error above which the stall guard starts counting" },
    KeyInfo { key: "<axis>.stall_guard.max_time_s", unit: "s", valid: "greater than 0, at most 10", meaning: "time over max_tracking_error before the stall guard trips" },
    KeyInfo { key: "checks.max_overshoot_pct", unit: "%", valid: "0 to 100; optional, default 25", meaning: "largest overshoot of the discrete loop (with one tick of delay) accepted" },
    KeyInfo { key: "checks.max_chatter_share", unit: "1", valid: "greater than 0, at most 1; optional, default 0.1", meaning: "largest voltage step one encoder count may cause through the derivative term, as a share of supply.lowest_volts" },
    KeyInfo { key: "checks.min_rate_ratio", unit: "1", valid: "at least 2, at most 1000; optional, default 10", meaning: "smallest loop rate / closed-loop bandwidth ratio accepted" },
    KeyInfo { key: "checks.max_quantization_error_pct", unit: "%", valid: "greater than 0, at most 0.1; optional, default 0.1", meaning: "largest relative error a constant may pick up in fixed point" },
];

/// Looks up a key (`forward.plant.gain` or `<axis>.plant.gain`) in [`KEYS`].
pub fn key_info(key: &str) -> Option<&'static KeyInfo> {
    let generic = key
        .strip_prefix("forward.")
        .or_else(|| key.strip_prefix("rotation."))
        .map(|rest| format!("<axis>.{rest}"));
    KEYS.iter()
        .find(|k| k.key == key || Some(k.key) == generic.as_deref())
}

/// One thing wrong with a design file: where, which key, what, and the valid range.
#[derive(Debug, Clone, PartialEq)]
pub struct DesignError {
    /// The design file (or the log file the error is about).
    pub file: PathBuf,
    /// 1-based line, when known.
    pub line: Option<usize>,
    /// Dotted key path (`forward.loop.settling_time_s`), or the table when no key applies.
    pub key: String,
    /// What is wrong.
    pub message: String,
    /// The valid range or values, in words (empty when it does not apply).
    pub valid: String,
}

impl fmt::Display for DesignError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{}", self.file.display())?;
        if let Some(line) = self.line {
            write!(f, ":{line}")?;
        }
        if self.key.is_empty() {
            write!(f, ": {}", self.message)?;
        } else {
            write!(f, ": `{}`: {}", self.key, self.message)?;
        }
        if !self.valid.is_empty() {
            write!(f, " (valid: {})", self.valid)?;
        }
        Ok(())
    }
}

impl std::error::Error for DesignError {}

/// All the errors found in one design file (at least one).
#[derive(Debug, Clone, PartialEq)]
pub struct DesignErrors(pub Vec<DesignError>);

impl fmt::Display for DesignErrors {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        for (i, e) in self.0.iter().enumerate() {
            if i > 0 {
                writeln!(f)?;
            }
            write!(f, "{e}")?;
        }
        Ok(())
    }
}

impl std::error::Error for DesignErrors {}

// ---------------------------------------------------------------------------------------
// Validated design

/// The two axes of a differential drive.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord)]
pub enum Axis {
    /// Forward travel, in mm: (left + right) / 2.
    Forward,
    /// Heading, in radians: (right - left) / track width.
    Rotation,
}

impl Axis {
    /// The table name in the design file (`forward`, `rotation`).
    pub fn name(self) -> &'static str {
        match self {
            Axis::Forward => "forward",
            Axis::Rotation => "rotation",
        }
    }
    /// The axis' distance unit (`mm`, `rad`).
    pub fn unit(self) -> &'static str {
        match self {
            Axis::Forward => "mm",
            Axis::Rotation => "rad",
        }
    }
    /// Both axes, forward first.
    pub const BOTH: [Axis; 2] = [Axis::Forward, Axis::Rotation];
}

/// Wheel geometry, encoder and loop rate (`[drive]`).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Drive {
    /// Loop rate, Hz (ticks per second).
    pub loop_rate_hz: f64,
    /// Wheel diameter, mm.
    pub wheel_diameter_mm: f64,
    /// Track width, mm.
    pub track_width_mm: f64,
    /// Encoder counts per wheel revolution.
    pub encoder_counts_per_rev: u32,
    /// Width of the hardware encoder counter, bits.
    pub encoder_counter_bits: u32,
    /// The left encoder counts down when its wheel drives the robot forward.
    pub invert_left_encoder: bool,
    /// The right encoder counts down when its wheel drives the robot forward.
    pub invert_right_encoder: bool,
}

impl Drive {
    /// Wheel-arc counts per mm of forward travel: `counts_per_rev / (pi * diameter)`.
    pub fn counts_per_mm(&self) -> f64 {
        f64::from(self.encoder_counts_per_rev) / (std::f64::consts::PI * self.wheel_diameter_mm)
    }
    /// Rotation-axis counts per radian of heading: each wheel travels `track / 2` mm per
    /// radian, and the rotation axis is `(right - left) / 2` in wheel-arc counts.
    pub fn counts_per_rad(&self) -> f64 {
        self.counts_per_mm() * self.track_width_mm / 2.0
    }
    /// Counts per unit of `axis` (per mm or per rad).
    pub fn counts_per_unit(&self, axis: Axis) -> f64 {
        match axis {
            Axis::Forward => self.counts_per_mm(),
            Axis::Rotation => self.counts_per_rad(),
        }
    }
    /// Tick length, s.
    pub fn tick_s(&self) -> f64 {
        1.0 / self.loop_rate_hz
    }
}

/// Battery range (`[supply]`).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Supply {
    /// Lowest battery voltage, V.
    pub lowest_volts: f64,
    /// Highest battery voltage, V.
    pub highest_volts: f64,
}

/// Where an axis' plant constants come from.
#[derive(Debug, Clone, PartialEq)]
pub enum PlantSource {
    /// Given as numbers in the file.
    Given(Plant),
    /// Identified from these CSV logs (paths resolved against the design file's folder,
    /// directories expanded to their `*.csv` files in name order).
    Logs {
        /// The log files.
        files: Vec<PathBuf>,
        /// Directories named in the file (watched for new logs by the build script).
        dirs: Vec<PathBuf>,
        /// Name of the position column.
        position_column: String,
    },
}

/// The targets of an axis' position loop (`<axis>.loop`).
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum LoopTarget {
    /// PD by pole placement.
    Pd {
        /// Damping ratio.
        damping: f64,
        /// Settling time, s.
        settling_time_s: f64,
        /// Settling band, % (2 or 5).
        band_pct: f64,
    },
    /// Phase lead from crossover and phase margin.
    Lead {
        /// Crossover, rad/s.
        crossover_rad_s: f64,
        /// Phase margin, deg.
        phase_margin_deg: f64,
    },
}

/// Move limits (`<axis>.move`), in the axis unit.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct MoveLimits {
    /// Cruise speed, unit/s.
    pub cruise_speed: f64,
    /// Acceleration, unit/s².
    pub accel: f64,
}

/// Stall-guard limits (`<axis>.stall_guard`), in the axis unit.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct StallLimits {
    /// Tracking error above which the guard counts, unit.
    pub max_tracking_error: f64,
    /// Time over the limit before it trips, s.
    pub max_time_s: f64,
}

/// Everything about one axis.
#[derive(Debug, Clone, PartialEq)]
pub struct AxisDesign {
    /// Which axis.
    pub axis: Axis,
    /// Plant constants or logs.
    pub plant: PlantSource,
    /// Loop targets.
    pub target: LoopTarget,
    /// Move limits.
    pub moves: MoveLimits,
    /// Stall guard.
    pub stall: StallLimits,
}

/// Limits of the design checks (`[checks]`).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct CheckLimits {
    /// Largest overshoot accepted, %.
    pub max_overshoot_pct: f64,
    /// Largest derivative voltage step per encoder count, share of the lowest supply.
    pub max_chatter_share: f64,
    /// Smallest loop rate / bandwidth ratio.
    pub min_rate_ratio: f64,
    /// Largest quantization error of a constant, %.
    pub max_quantization_error_pct: f64,
}

impl Default for CheckLimits {
    fn default() -> Self {
        CheckLimits {
            max_overshoot_pct: 25.0,
            max_chatter_share: crate::tune::MAX_DERIVATIVE_STEP_SHARE,
            min_rate_ratio: crate::tune::MIN_RATE_PER_BANDWIDTH,
            max_quantization_error_pct: crate::emit::QUANTIZATION_LIMIT_PCT,
        }
    }
}

/// A parsed and range-checked design file.
#[derive(Debug, Clone, PartialEq)]
pub struct DesignFile {
    /// The file it came from.
    pub path: PathBuf,
    /// Optional name.
    pub name: Option<String>,
    /// Geometry, encoder, loop rate.
    pub drive: Drive,
    /// Battery range.
    pub supply: Supply,
    /// Forward axis.
    pub forward: AxisDesign,
    /// Rotation axis.
    pub rotation: AxisDesign,
    /// Check limits.
    pub checks: CheckLimits,
    /// Line of every key present in the file (dotted path -> 1-based line).
    pub lines: BTreeMap<String, usize>,
}

impl DesignFile {
    /// Reads and checks a design file.
    pub fn load(path: &Path) -> Result<DesignFile, DesignErrors> {
        let src = std::fs::read_to_string(path).map_err(|e| {
            DesignErrors(vec![DesignError {
                file: path.to_path_buf(),
                line: None,
                key: String::new(),
                message: format!("cannot read the design file: {e}"),
                valid: String::new(),
            }])
        })?;
        DesignFile::parse_str(&src, path)
    }

    /// Parses and checks design-file text; `path` names the file in errors and is the base
    /// for relative log paths (which must exist).
    pub fn parse_str(src: &str, path: &Path) -> Result<DesignFile, DesignErrors> {
        let raw: RawFile =
            toml::from_str(src).map_err(|e| DesignErrors(vec![toml_error(src, path, &e)]))?;
        let mut v = Validator {
            src,
            path,
            errors: Vec::new(),
            lines: BTreeMap::new(),
        };
        let design = v.validate(raw);
        if v.errors.is_empty() {
            if let Some(d) = design {
                return Ok(d);
            }
        }
        v.errors.sort_by_key(|e| e.line);
        Err(DesignErrors(v.errors))
    }

    /// The axis design for `axis`.
    pub fn axis(&self, axis: Axis) -> &AxisDesign {
        match axis {
            Axis::Forward => &self.forward,
            Axis::Rotation => &self.rotation,
        }
    }

    /// Line of a key (dotted path), when it is in the file.
    pub fn line_of(&self, key: &str) -> Option<usize> {
        self.lines.get(key).copied()
    }

    /// An error about `key` of this file, with its line and the key's valid range from
    /// [`KEYS`] (or `valid` when given).
    pub fn error(
        &self,
        key: &str,
        message: impl Into<String>,
        valid: Option<String>,
    ) -> DesignError {
        DesignError {
            file: self.path.clone(),
            line: self.line_of(key).or_else(|| {
                // A derived quantity: point at its table.
                let table = key.rsplit_once('.').map(|(t, _)| t).unwrap_or(key);
                self.line_of(table)
            }),
            key: key.to_string(),
            message: message.into(),
            valid: valid
                .or_else(|| key_info(key).map(|k| k.valid.to_string()))
                .unwrap_or_default(),
        }
    }

    /// Every log file the design reads, and the directories they came from (for
    /// `cargo:rerun-if-changed`).
    pub fn inputs(&self) -> Vec<PathBuf> {
        let mut out = vec![self.path.clone()];
        for axis in Axis::BOTH {
            if let PlantSource::Logs { files, dirs, .. } = &self.axis(axis).plant {
                out.extend(dirs.iter().cloned());
                out.extend(files.iter().cloned());
            }
        }
        out
    }
}

// ---------------------------------------------------------------------------------------
// Raw serde layer

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawFile {
    name: Option<Spanned<String>>,
    drive: Spanned<RawDrive>,
    supply: Spanned<RawSupply>,
    forward: Spanned<RawAxis>,
    rotation: Spanned<RawAxis>,
    checks: Option<Spanned<RawChecks>>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawDrive {
    loop_rate_hz: Spanned<f64>,
    wheel_diameter_mm: Spanned<f64>,
    track_width_mm: Spanned<f64>,
    encoder_counts_per_rev: Spanned<i64>,
    encoder_counter_bits: Spanned<i64>,
    invert_left_encoder: Option<Spanned<bool>>,
    invert_right_encoder: Option<Spanned<bool>>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawSupply {
    lowest_volts: Spanned<f64>,
    highest_volts: Spanned<f64>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawAxis {
    plant: Spanned<RawPlant>,
    #[serde(rename = "loop")]
    loop_: Spanned<RawLoop>,
    #[serde(rename = "move")]
    move_: Spanned<RawMove>,
    stall_guard: Spanned<RawStall>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawPlant {
    gain: Option<Spanned<f64>>,
    time_constant_s: Option<Spanned<f64>>,
    bias_volts: Option<Spanned<f64>>,
    logs: Option<Spanned<Vec<Spanned<String>>>>,
    position_column: Option<Spanned<String>>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawLoop {
    kind: Spanned<String>,
    damping: Option<Spanned<f64>>,
    settling_time_s: Option<Spanned<f64>>,
    band_pct: Option<Spanned<f64>>,
    crossover_rad_s: Option<Spanned<f64>>,
    phase_margin_deg: Option<Spanned<f64>>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawMove {
    cruise_speed: Spanned<f64>,
    accel: Spanned<f64>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawStall {
    max_tracking_error: Spanned<f64>,
    max_time_s: Spanned<f64>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawChecks {
    max_overshoot_pct: Option<Spanned<f64>>,
    max_chatter_share: Option<Spanned<f64>>,
    min_rate_ratio: Option<Spanned<f64>>,
    max_quantization_error_pct: Option<Spanned<f64>>,
}

/// `true` when `name` matches `pattern`, where each `*` stands for any run of characters.
fn wildcard_match(pattern: &str, name: &str) -> bool {
    let parts: Vec<&str> = pattern.split('*').collect();
    if parts.len() == 1 {
        return pattern == name;
    }
    let (first, last) = (parts[0], parts[parts.len() - 1]);
    if !name.starts_with(first) || name.len() < first.len() + last.len() || !name.ends_with(last) {
        return false;
    }
    let mut rest = &name[first.len()..name.len() - last.len()];
    for mid in &parts[1..parts.len() - 1] {
        match rest.find(mid) {
            Some(i) => rest = &rest[i + mid.len()..],
            None => return false,
        }
    }
    true
}

/// 1-based line of a byte offset.
fn line_of_offset(src: &str, offset: usize) -> usize {
    let end = offset.min(src.len());
    src.as_bytes()[..end]
        .iter()
        .filter(|&&b| b == b'\n')
        .count()
        + 1
}

/// The dotted key at a byte offset, read from the text: the nearest `[table]` header above
/// and the `key =` on the offset's line.
fn key_at(src: &str, offset: usize) -> String {
    let offset = offset.min(src.len());
    let line_start = src[..offset].rfind('\n').map_or(0, |i| i + 1);
    let line_end = src[offset..].find('\n').map_or(src.len(), |i| offset + i);
    let line = &src[line_start..line_end];
    let trimmed = line.trim_start();
    if trimmed.starts_with('[') {
        return trimmed
            .trim_matches(|c| c == '[' || c == ']' || c == ' ')
            .split(']')
            .next()
            .unwrap_or("")
            .trim()
            .to_string();
    }
    let header = src[..line_start]
        .lines()
        .rev()
        .map(str::trim)
        .find(|l| l.starts_with('['))
        .map(|l| {
            l.trim_start_matches('[')
                .split(']')
                .next()
                .unwrap_or("")
                .trim()
                .to_string()
        });
    let key = trimmed
        .split_once('=')
        .map(|(k, _)| k.trim().trim_matches('"').to_string());
    match (header, key) {
        (Some(h), Some(k)) if !h.is_empty() => format!("{h}.{k}"),
        (_, Some(k)) => k,
        (Some(h), None) => h,
        (None, None) => String::new(),
    }
}

fn toml_error(src: &str, path: &Path, e: &toml::de::Error) -> DesignError {
    let span = e.span();
    let line = span.as_ref().map(|s| line_of_offset(src, s.start));
    let mut key = span
        .as_ref()
        .map(|s| key_at(src, s.start))
        .unwrap_or_default();
    let message = e.message().trim().to_string();
    // An unknown field: name it in the key and list what is accepted.
    if let Some(rest) = message.strip_prefix("unknown field `") {
        if let Some((field, _)) = rest.split_once('`') {
            if !key.ends_with(field) {
                key = if key.is_empty() {
                    field.to_string()
                } else {
                    format!("{key}.{field}")
                };
            }
        }
        let valid = message
            .split_once("expected ")
            .map(|(_, v)| format!("one of {}", v.trim_start_matches("one of ")))
            .unwrap_or_default();
        return DesignError {
            file: path.to_path_buf(),
            line,
            key,
            message: "unknown key".to_string(),
            valid,
        };
    }
    if let Some(rest) = message.strip_prefix("missing field `") {
        if let Some((field, _)) = rest.split_once('`') {
            let full = if key.is_empty() {
                field.to_string()
            } else {
                format!("{key}.{field}")
            };
            let valid = key_info(&full)
                .map(|k| format!("{}, in {}", k.valid, k.unit))
                .unwrap_or_else(|| "a table".to_string());
            return DesignError {
                file: path.to_path_buf(),
                line,
                key: full,
                message: "missing".to_string(),
                valid,
            };
        }
    }
    let valid = key_info(&key)
        .map(|k| format!("{}, in {}", k.valid, k.unit))
        .unwrap_or_default();
    DesignError {
        file: path.to_path_buf(),
        line,
        key,
        message,
        valid,
    }
}

struct Validator<'a> {
    src: &'a str,
    path: &'a Path,
    errors: Vec<DesignError>,
    lines: BTreeMap<String, usize>,
}

impl Validator<'_> {
    fn line(&self, span: &Range<usize>) -> usize {
        line_of_offset(self.src, span.start)
    }

    fn mark<T>(&mut self, key: &str, v: &Spanned<T>) {
        let line = self.line(&v.span());
        self.lines.insert(key.to_string(), line);
    }

    fn push(&mut self, key: &str, line: Option<usize>, message: String, valid: Option<&str>) {
        let valid = valid
            .map(str::to_string)
            .or_else(|| key_info(key).map(|k| format!("{}, in {}", k.valid, k.unit)))
            .unwrap_or_default();
        self.errors.push(DesignError {
            file: self.path.to_path_buf(),
            line,
            key: key.to_string(),
            message,
            valid,
        });
    }

    /// A finite number in `lo..=hi` (or `lo < x` when `lo_open`).
    fn num(
        &mut self,
        key: &str,
        v: &Spanned<f64>,
        lo: f64,
        lo_open: bool,
        hi: f64,
        hi_open: bool,
    ) -> f64 {
        self.mark(key, v);
        let x = *v.get_ref();
        let ok = x.is_finite()
            && (if lo_open { x > lo } else { x >= lo })
            && (if hi_open { x < hi } else { x <= hi });
        if !ok {
            let line = Some(self.line(&v.span()));
            self.push(key, line, format!("{x} is out of range"), None);
        }
        x
    }

    /// An optional `true`/`false` key (default `false`); TOML itself refuses other values.
    fn flag(&mut self, key: &str, v: &Option<Spanned<bool>>) -> bool {
        match v {
            Some(v) => {
                self.mark(key, v);
                *v.get_ref()
            }
            None => false,
        }
    }

    fn int(&mut self, key: &str, v: &Spanned<i64>, lo: i64, hi: i64) -> u32 {
        self.mark(key, v);
        let x = *v.get_ref();
        if !(lo..=hi).contains(&x) {
            let line = Some(self.line(&v.span()));
            self.push(key, line, format!("{x} is out of range"), None);
            return lo.max(0) as u32;
        }
        u32::try_from(x).unwrap_or(0)
    }

    fn validate(&mut self, raw: RawFile) -> Option<DesignFile> {
        let name = raw.name.map(|n| {
            self.mark("name", &n);
            let s = n.get_ref().clone();
            if s.is_empty() || s.chars().count() > 64 || s.contains(['\n', '\r']) {
                let line = Some(self.line(&n.span()));
                self.push(
                    "name",
                    line,
                    "must be one line of 1 to 64 characters".into(),
                    None,
                );
            }
            s
        });

        self.mark("drive", &raw.drive);
        let d = raw.drive.get_ref();
        let drive = Drive {
            loop_rate_hz: self.num(
                "drive.loop_rate_hz",
                &d.loop_rate_hz,
                10.0,
                false,
                100_000.0,
                false,
            ),
            wheel_diameter_mm: self.num(
                "drive.wheel_diameter_mm",
                &d.wheel_diameter_mm,
                0.0,
                true,
                2000.0,
                false,
            ),
            track_width_mm: self.num(
                "drive.track_width_mm",
                &d.track_width_mm,
                0.0,
                true,
                10_000.0,
                false,
            ),
            encoder_counts_per_rev: self.int(
                "drive.encoder_counts_per_rev",
                &d.encoder_counts_per_rev,
                1,
                1_000_000,
            ),
            encoder_counter_bits: self.int(
                "drive.encoder_counter_bits",
                &d.encoder_counter_bits,
                16,
                32,
            ),
            invert_left_encoder: self.flag("drive.invert_left_encoder", &d.invert_left_encoder),
            invert_right_encoder: self.flag("drive.invert_right_encoder", &d.invert_right_encoder),
        };

        self.mark("supply", &raw.supply);
        let s = raw.supply.get_ref();
        let lowest = self.num(
            "supply.lowest_volts",
            &s.lowest_volts,
            0.0,
            true,
            100.0,
            false,
        );
        let highest = self.num(
            "supply.highest_volts",
            &s.highest_volts,
            0.0,
            true,
            100.0,
            false,
        );
        if lowest.is_finite() && highest.is_finite() && highest < lowest {
            let line = Some(self.line(&s.highest_volts.span()));
            self.push(
                "supply.highest_volts",
                line,
                format!("{highest} is below supply.lowest_volts = {lowest}"),
                None,
            );
        }
        let supply = Supply {
            lowest_volts: lowest,
            highest_volts: highest,
        };

        let forward = self.axis(Axis::Forward, &raw.forward, &drive, &supply);
        let rotation = self.axis(Axis::Rotation, &raw.rotation, &drive, &supply);

        let mut checks = CheckLimits::default();
        if let Some(c) = &raw.checks {
            self.mark("checks", c);
            let c = c.get_ref();
            if let Some(v) = &c.max_overshoot_pct {
                checks.max_overshoot_pct =
                    self.num("checks.max_overshoot_pct", v, 0.0, false, 100.0, false);
            }
            if let Some(v) = &c.max_chatter_share {
                checks.max_chatter_share =
                    self.num("checks.max_chatter_share", v, 0.0, true, 1.0, false);
            }
            if let Some(v) = &c.min_rate_ratio {
                checks.min_rate_ratio =
                    self.num("checks.min_rate_ratio", v, 2.0, false, 1000.0, false);
            }
            if let Some(v) = &c.max_quantization_error_pct {
                checks.max_quantization_error_pct = self.num(
                    "checks.max_quantization_error_pct",
                    v,
                    0.0,
                    true,
                    crate::emit::QUANTIZATION_LIMIT_PCT,
                    false,
                );
            }
        }

        Some(DesignFile {
            path: self.path.to_path_buf(),
            name,
            drive,
            supply,
            forward: forward?,
            rotation: rotation?,
            checks,
            lines: std::mem::take(&mut self.lines),
        })
    }

    fn axis(
        &mut self,
        axis: Axis,
        raw: &Spanned<RawAxis>,
        drive: &Drive,
        supply: &Supply,
    ) -> Option<AxisDesign> {
        let a = axis.name();
        self.mark(a, raw);
        let r = raw.get_ref();

        // Plant.
        let pk = format!("{a}.plant");
        self.mark(&pk, &r.plant);
        let p = r.plant.get_ref();
        let table_line = Some(self.line(&r.plant.span()));
        let numbers = [&p.gain, &p.time_constant_s, &p.bias_volts];
        let any_number = numbers.iter().any(|n| n.is_some());
        let plant = match (&p.logs, any_number) {
            (Some(logs), true) => {
                let line = Some(self.line(&logs.span()));
                self.push(
                    &format!("{pk}.logs"),
                    line,
                    "give either logs or gain/time_constant_s/bias_volts, not both".into(),
                    Some("logs alone, or all three numbers"),
                );
                None
            }
            (Some(logs), false) => {
                self.mark(&format!("{pk}.logs"), logs);
                let column = match &p.position_column {
                    Some(c) => {
                        self.mark(&format!("{pk}.position_column"), c);
                        c.get_ref().clone()
                    }
                    None => "position".to_string(),
                };
                self.logs(&pk, logs, column)
            }
            (None, _) => {
                if let Some(c) = &p.position_column {
                    let line = Some(self.line(&c.span()));
                    self.push(
                        &format!("{pk}.position_column"),
                        line,
                        "is only used with logs".into(),
                        None,
                    );
                }
                let mut get = |name: &str,
                               v: &Option<Spanned<f64>>,
                               lo: f64,
                               lo_open: bool,
                               hi: f64,
                               hi_open: bool| match v {
                    Some(v) => Some(self.num(&format!("{pk}.{name}"), v, lo, lo_open, hi, hi_open)),
                    None => {
                        self.push(
                            &format!("{pk}.{name}"),
                            table_line,
                            "missing (give logs, or all of gain, time_constant_s and bias_volts)"
                                .into(),
                            None,
                        );
                        None
                    }
                };
                let gain = get("gain", &p.gain, 0.0, true, 1e6, false);
                let tc = get(
                    "time_constant_s",
                    &p.time_constant_s,
                    0.0,
                    true,
                    10.0,
                    false,
                );
                let bias = get(
                    "bias_volts",
                    &p.bias_volts,
                    0.0,
                    false,
                    supply.lowest_volts,
                    true,
                );
                match (gain, tc, bias) {
                    (Some(g), Some(t), Some(b)) => Plant::new(g, t, b).ok().map(PlantSource::Given),
                    _ => None,
                }
            }
        };

        // Loop.
        let lk = format!("{a}.loop");
        self.mark(&lk, &r.loop_);
        let l = r.loop_.get_ref();
        self.mark(&format!("{lk}.kind"), &l.kind);
        let pd_keys: [(&str, &Option<Spanned<f64>>); 3] = [
            ("damping", &l.damping),
            ("settling_time_s", &l.settling_time_s),
            ("band_pct", &l.band_pct),
        ];
        let lead_keys: [(&str, &Option<Spanned<f64>>); 2] = [
            ("crossover_rad_s", &l.crossover_rad_s),
            ("phase_margin_deg", &l.phase_margin_deg),
        ];
        let kind = l.kind.get_ref().as_str();
        let table_line = Some(self.line(&r.loop_.span()));
        let refuse_others = |me: &mut Self, others: &[(&str, &Option<Spanned<f64>>)]| {
            for (name, v) in others {
                if let Some(v) = v {
                    let line = Some(me.line(&v.span()));
                    me.push(
                        &format!("{lk}.{name}"),
                        line,
                        format!("does not apply to kind = \"{kind}\""),
                        None,
                    );
                }
            }
        };
        let target = match kind {
            "pd" => {
                refuse_others(self, &lead_keys);
                let damping = self.required(
                    &lk, "damping", &l.damping, table_line, 0.0, true, 3.0, false,
                );
                let settling = self.required(
                    &lk,
                    "settling_time_s",
                    &l.settling_time_s,
                    table_line,
                    0.0,
                    true,
                    60.0,
                    false,
                );
                let band = match &l.band_pct {
                    Some(v) => {
                        self.mark(&format!("{lk}.band_pct"), v);
                        let b = *v.get_ref();
                        if b != 2.0 && b != 5.0 {
                            let line = Some(self.line(&v.span()));
                            self.push(
                                &format!("{lk}.band_pct"),
                                line,
                                format!("{b} is not a supported band"),
                                None,
                            );
                        }
                        b
                    }
                    None => 2.0,
                };
                match (damping, settling) {
                    (Some(z), Some(ts)) => Some(LoopTarget::Pd {
                        damping: z,
                        settling_time_s: ts,
                        band_pct: band,
                    }),
                    _ => None,
                }
            }
            "lead" => {
                refuse_others(self, &pd_keys);
                // Against an invalid loop rate (already reported) only the lower bound applies.
                let nyquist = if (10.0..=100_000.0).contains(&drive.loop_rate_hz) {
                    std::f64::consts::PI * drive.loop_rate_hz
                } else {
                    f64::INFINITY
                };
                let wc = self.required(
                    &lk,
                    "crossover_rad_s",
                    &l.crossover_rad_s,
                    table_line,
                    0.0,
                    true,
                    nyquist,
                    true,
                );
                let pm = self.required(
                    &lk,
                    "phase_margin_deg",
                    &l.phase_margin_deg,
                    table_line,
                    0.0,
                    true,
                    90.0,
                    true,
                );
                match (wc, pm) {
                    (Some(wc), Some(pm)) => Some(LoopTarget::Lead {
                        crossover_rad_s: wc,
                        phase_margin_deg: pm,
                    }),
                    _ => None,
                }
            }
            other => {
                let line = Some(self.line(&l.kind.span()));
                self.push(
                    &format!("{lk}.kind"),
                    line,
                    format!("\"{other}\" is not a loop kind"),
                    None,
                );
                None
            }
        };

        // Move and stall guard.
        let mk = format!("{a}.move");
        self.mark(&mk, &r.move_);
        let m = r.move_.get_ref();
        let moves = MoveLimits {
            cruise_speed: self.num(
                &format!("{mk}.cruise_speed"),
                &m.cruise_speed,
                0.0,
                true,
                1e6,
                false,
            ),
            accel: self.num(&format!("{mk}.accel"), &m.accel, 0.0, true, 1e8, false),
        };
        let sk = format!("{a}.stall_guard");
        self.mark(&sk, &r.stall_guard);
        let s = r.stall_guard.get_ref();
        let stall = StallLimits {
            max_tracking_error: self.num(
                &format!("{sk}.max_tracking_error"),
                &s.max_tracking_error,
                0.0,
                true,
                1e6,
                false,
            ),
            max_time_s: self.num(
                &format!("{sk}.max_time_s"),
                &s.max_time_s,
                0.0,
                true,
                10.0,
                false,
            ),
        };

        Some(AxisDesign {
            axis,
            plant: plant?,
            target: target?,
            moves,
            stall,
        })
    }

    #[allow(clippy::too_many_arguments)]
    fn required(
        &mut self,
        table: &str,
        name: &str,
        v: &Option<Spanned<f64>>,
        table_line: Option<usize>,
        lo: f64,
        lo_open: bool,
        hi: f64,
        hi_open: bool,
    ) -> Option<f64> {
        let key = format!("{table}.{name}");
        match v {
            Some(v) => {
                let before = self.errors.len();
                let x = self.num(&key, v, lo, lo_open, hi, hi_open);
                (self.errors.len() == before).then_some(x)
            }
            None => {
                let valid = key_info(&key).map(|k| k.valid.to_string());
                self.push(&key, table_line, "missing".into(), valid.as_deref());
                None
            }
        }
    }

    fn logs(
        &mut self,
        pk: &str,
        logs: &Spanned<Vec<Spanned<String>>>,
        column: String,
    ) -> Option<PlantSource> {
        let key = format!("{pk}.logs");
        let base = self.path.parent().unwrap_or(Path::new("")).to_path_buf();
        let mut files = Vec::new();
        let mut dirs = Vec::new();
        if logs.get_ref().is_empty() {
            let line = Some(self.line(&logs.span()));
            self.push(&key, line, "is empty".into(), None);
            return None;
        }
        let before = self.errors.len();
        for entry in logs.get_ref() {
            let line = Some(self.line(&entry.span()));
            let p = base.join(entry.get_ref());
            // A directory means its *.csv files; a `*` in the file name matches any run of
            // characters (`logs/forward/step_*.csv`).
            let pattern = p
                .file_name()
                .map(|n| n.to_string_lossy().into_owned())
                .filter(|n| n.contains('*'));
            let (dir, pattern) = match pattern {
                Some(pat) => (p.parent().unwrap_or(Path::new("")).to_path_buf(), pat),
                None if p.is_dir() => (p.clone(), "*.csv".to_string()),
                None if p.is_file() => {
                    files.push(p);
                    continue;
                }
                None => {
                    self.push(&key, line, format!("{} does not exist", p.display()), None);
                    continue;
                }
            };
            let mut found: Vec<PathBuf> = match std::fs::read_dir(&dir) {
                Ok(rd) => rd
                    .filter_map(|e| e.ok().map(|e| e.path()))
                    .filter(|f| {
                        f.is_file()
                            && f.file_name()
                                .is_some_and(|n| wildcard_match(&pattern, &n.to_string_lossy()))
                    })
                    .collect(),
                Err(e) => {
                    self.push(
                        &key,
                        line,
                        format!("cannot read directory {}: {e}", dir.display()),
                        None,
                    );
                    continue;
                }
            };
            found.sort();
            if found.is_empty() {
                self.push(
                    &key,
                    line,
                    format!("no file in {} matches {pattern}", dir.display()),
                    None,
                );
            }
            dirs.push(dir);
            files.extend(found);
        }
        (self.errors.len() == before).then_some(PlantSource::Logs {
            files,
            dirs,
            position_column: column,
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn wildcards_match_runs_of_characters() {
        assert!(wildcard_match("step_*.csv", "step_1v5.csv"));
        assert!(wildcard_match("*.csv", "a.csv"));
        assert!(wildcard_match("a*b*c", "aXXbYYc"));
        assert!(wildcard_match("a*b*c", "abc"));
        assert!(!wildcard_match("step_*.csv", "staircase.csv"));
        assert!(!wildcard_match("a*a", "a"));
        assert!(!wildcard_match("*.csv", "a.csv.bak"));
        assert!(wildcard_match("x.csv", "x.csv"));
    }

    #[test]
    fn key_at_reads_header_and_key() {
        let src = "[a]\nx = 1\n[b.c]\n  y = 2 # c\n";
        assert_eq!(key_at(src, src.find("1").unwrap()), "a.x");
        assert_eq!(key_at(src, src.find("2").unwrap()), "b.c.y");
        assert_eq!(key_at(src, src.find("[b").unwrap()), "b.c");
        assert_eq!(line_of_offset(src, src.find("2").unwrap()), 4);
    }

    #[test]
    fn documented_defaults_are_the_defaults() {
        let d = CheckLimits::default();
        for (key, v) in [
            ("checks.max_overshoot_pct", d.max_overshoot_pct),
            ("checks.max_chatter_share", d.max_chatter_share),
            ("checks.min_rate_ratio", d.min_rate_ratio),
            (
                "checks.max_quantization_error_pct",
                d.max_quantization_error_pct,
            ),
        ] {
            let info = key_info(key).unwrap();
            assert!(
                info.valid.ends_with(&format!("default {v}")),
                "{key}: {}",
                info.valid
            );
        }
    }

    #[test]
    fn quantization_bound_is_the_emitters() {
        let info = key_info("checks.max_quantization_error_pct").unwrap();
        let bound = crate::emit::QUANTIZATION_LIMIT_PCT;
        assert!(
            info.valid.contains(&format!("at most {bound};")),
            "{}",
            info.valid
        );
    }

    #[test]
    fn every_key_has_info() {
        for k in KEYS {
            assert!(
                key_info(&k.key.replace("<axis>", "rotation")).is_some(),
                "{}",
                k.key
            );
        }
        assert!(key_info("forward.plant.gain").is_some());
        assert!(key_info("sideways.plant.gain").is_none());
    }
}
