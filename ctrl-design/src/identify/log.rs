//! Logged tests: the CSV format, its parser and the checks every log must pass.
//!
//! A log is a CSV file with a header row. The columns used are the time (seconds, strictly
//! increasing), the commanded voltage (volts, held from its row until the next row) and either
//! the position (any distance unit, typically encoder-derived and quantized) or the speed (that
//! unit per second). Other columns are ignored, and so are their cells. Fields are separated by
//! commas; spaces around a field and double quotes around a whole field are stripped; blank
//! lines are skipped (but still counted for line numbers). There are no comment lines.

use std::fmt;

/// Names of the columns to read. The defaults are `time_s`, `volts`, `position`, `speed`.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Columns {
    /// Time column, seconds.
    pub time: String,
    /// Command voltage column, volts.
    pub volts: String,
    /// Position column, distance units.
    pub position: String,
    /// Speed column, distance units per second.
    pub speed: String,
    /// Which of position/speed to use when a file has both (default: position).
    pub prefer: SignalKind,
}

impl Default for Columns {
    fn default() -> Self {
        Columns {
            time: "time_s".into(),
            volts: "volts".into(),
            position: "position".into(),
            speed: "speed".into(),
            prefer: SignalKind::Position,
        }
    }
}

/// Which quantity a log records besides time and voltage.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "snake_case")]
pub enum SignalKind {
    /// Position, distance units.
    Position,
    /// Speed, distance units per second.
    Speed,
}

impl fmt::Display for SignalKind {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(match self {
            SignalKind::Position => "position",
            SignalKind::Speed => "speed",
        })
    }
}

/// A column of a CSV file: its header name and its 1-based index.
#[derive(Debug, Clone, PartialEq, Eq, Default)]
pub struct Column {
    /// Header name.
    pub name: String,
    /// 1-based position in the row.
    pub index: usize,
}

/// Why identification was refused.
#[derive(Debug, Clone, PartialEq)]
pub enum IdentifyError {
    /// A log file could not be read at all.
    Read {
        /// The file.
        file: String,
        /// What the operating system said.
        message: String,
    },
    /// A log is malformed or cannot support a fit: where and what.
    Input {
        /// The file (or the log's name).
        file: String,
        /// 1-based line number in the file (the header is line 1), when one line is at fault.
        line: Option<usize>,
        /// The column at fault, when one column is.
        column: Option<Column>,
        /// What is wrong and what is valid.
        problem: String,
    },
    /// The logs parse, but together they cannot determine gain, time constant and bias.
    Unidentifiable {
        /// Why, and what data would do.
        message: String,
    },
}

impl fmt::Display for IdentifyError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            IdentifyError::Read { file, message } => write!(f, "{file}: cannot read: {message}"),
            IdentifyError::Input {
                file,
                line,
                column,
                problem,
            } => {
                write!(f, "{file}")?;
                if let Some(line) = line {
                    write!(f, ": line {line}")?;
                }
                if let Some(c) = column {
                    write!(f, ", column {} \"{}\"", c.index, c.name)?;
                }
                write!(f, ": {problem}")
            }
            IdentifyError::Unidentifiable { message } => write!(f, "cannot identify: {message}"),
        }
    }
}

impl std::error::Error for IdentifyError {}

/// One logged test, checked: at least two rows, finite values, strictly increasing time and
/// at least one change of voltage.
#[derive(Debug, Clone, PartialEq)]
pub struct Log {
    /// Name used in messages and output (the file path for files).
    pub name: String,
    /// Sample times, seconds, strictly increasing.
    pub time_s: Vec<f64>,
    /// Commanded voltage at each row, volts, held until the next row.
    pub volts: Vec<f64>,
    /// What the third column records.
    pub kind: SignalKind,
    /// The recorded position (distance units) or speed (units/s) at each row.
    pub signal: Vec<f64>,
    /// Line number in the source file of each row (header = line 1).
    pub lines: Vec<usize>,
    /// The columns the values came from: time, volts, signal.
    pub columns: [Column; 3],
}

fn input_err(
    file: &str,
    line: Option<usize>,
    column: Option<&Column>,
    problem: String,
) -> IdentifyError {
    IdentifyError::Input {
        file: file.to_string(),
        line,
        column: column.cloned(),
        problem,
    }
}

fn strip_field(s: &str) -> &str {
    let t = s.trim();
    if t.len() >= 2 && t.starts_with('"') && t.ends_with('"') {
        t[1..t.len() - 1].trim()
    } else {
        t
    }
}

impl Log {
    /// Builds a log from vectors already in memory and checks it like a parsed file
    /// (row `i` is reported as line `i + 2`, as if a header came first).
    pub fn new(
        name: &str,
        time_s: Vec<f64>,
        volts: Vec<f64>,
        kind: SignalKind,
        signal: Vec<f64>,
    ) -> Result<Log, IdentifyError> {
        let n = time_s.len();
        if volts.len() != n || signal.len() != n {
            return Err(input_err(
                name,
                None,
                None,
                format!(
                    "columns differ in length: {n} times, {} voltages, {} {kind} values",
                    volts.len(),
                    signal.len()
                ),
            ));
        }
        let col = |name: &str, index| Column {
            name: name.to_string(),
            index,
        };
        let log = Log {
            name: name.to_string(),
            time_s,
            volts,
            kind,
            signal,
            lines: (0..n).map(|i| i + 2).collect(),
            columns: [col("time_s", 1), col("volts", 2), col(&kind.to_string(), 3)],
        };
        for (k, c) in [(&log.time_s, 0), (&log.volts, 1), (&log.signal, 2)] {
            if let Some(i) = k.iter().position(|v| !v.is_finite()) {
                return Err(input_err(
                    name,
                    Some(i + 2),
                    Some(&log.columns[c]),
                    format!(
                        "{} is not finite; every value must be a finite number",
                        k[i]
                    ),
                ));
            }
        }
        log.check()?;
        Ok(log)
    }

    /// Reads and parses a CSV log file; the log's name is the path as given.
    pub fn from_file(path: &std::path::Path, columns: &Columns) -> Result<Log, IdentifyError> {
        let name = path.display().to_string();
        let bytes = std::fs::read(path).map_err(|e| IdentifyError::Read {
            file: name.clone(),
            message: e.to_string(),
        })?;
        Log::parse(&name, &bytes, columns)
    }

    /// Parses CSV text (any bytes: invalid UTF-8 is reported, never a panic).
    pub fn parse(name: &str, bytes: &[u8], columns: &Columns) -> Result<Log, IdentifyError> {
        let text = match std::str::from_utf8(bytes) {
            Ok(t) => t,
            Err(e) => {
                let good = &bytes[..e.valid_up_to()];
                let line = 1 + good.iter().filter(|&&b| b == b'\n').count();
                return Err(input_err(
                    name,
                    Some(line),
                    None,
                    "the file is not UTF-8 text; a log must be a plain-text CSV file".into(),
                ));
            }
        };
        let text = text.strip_prefix('\u{feff}').unwrap_or(text);
        let mut lines = text.lines().enumerate().map(|(i, l)| (i + 1, l));
        let header = lines.find(|(_, l)| !l.trim().is_empty());
        let Some((header_line, header)) = header else {
            return Err(input_err(
                name,
                Some(1),
                None,
                format!(
                    "the file is empty; expected a header row with columns {}, {} and {} or {}",
                    columns.time, columns.volts, columns.position, columns.speed
                ),
            ));
        };
        let names: Vec<&str> = header.split(',').map(strip_field).collect();
        let find = |want: &str| {
            names.iter().position(|n| *n == want).map(|i| Column {
                name: want.to_string(),
                index: i + 1,
            })
        };
        let found: Vec<String> = names.iter().map(|n| format!("\"{n}\"")).collect();
        let missing = |want: &str| {
            input_err(
                name,
                Some(header_line),
                None,
                format!(
                    "missing column \"{want}\" in the header (found {}); rename with the column flags if the log uses another name",
                    found.join(", ")
                ),
            )
        };
        let time_c = find(&columns.time).ok_or_else(|| missing(&columns.time))?;
        let volts_c = find(&columns.volts).ok_or_else(|| missing(&columns.volts))?;
        let pos_c = find(&columns.position);
        let speed_c = find(&columns.speed);
        let (kind, sig_c) = match (pos_c, speed_c) {
            (Some(p), Some(s)) => match columns.prefer {
                SignalKind::Position => (SignalKind::Position, p),
                SignalKind::Speed => (SignalKind::Speed, s),
            },
            (Some(p), None) => (SignalKind::Position, p),
            (None, Some(s)) => (SignalKind::Speed, s),
            (None, None) => {
                return Err(missing(&format!(
                    "{}\" or \"{}",
                    columns.position, columns.speed
                )))
            }
        };
        let cols = [time_c, volts_c, sig_c];
        let mut time_s = Vec::new();
        let mut volts = Vec::new();
        let mut signal = Vec::new();
        let mut row_lines = Vec::new();
        for (line_no, line) in lines {
            if line.trim().is_empty() {
                continue;
            }
            let mut vals = [0.0f64; 3];
            let need = cols.iter().map(|c| c.index).max().unwrap_or(0);
            let mut got = 0usize;
            for (i, cell) in line.split(',').enumerate().take(need) {
                got = i + 1;
                for (slot, c) in cols.iter().enumerate() {
                    if c.index == i + 1 {
                        vals[slot] = parse_cell(name, line_no, c, strip_field(cell))?;
                    }
                }
            }
            if got < need {
                let c = cols.iter().find(|c| c.index > got).unwrap_or(&cols[0]);
                return Err(input_err(
                    name,
                    Some(line_no),
                    Some(c),
                    format!(
                        "the row has {got} cells, so this column is missing; every row needs at least {need}"
                    ),
                ));
            }
            time_s.push(vals[0]);
            volts.push(vals[1]);
            signal.push(vals[2]);
            row_lines.push(line_no);
        }
        if time_s.is_empty() {
            return Err(input_err(
                name,
                Some(header_line),
                None,
                "the log has a header but no data rows; it needs at least two rows".into(),
            ));
        }
        let log = Log {
            name: name.to_string(),
            time_s,
            volts,
            kind,
            signal,
            lines: row_lines,
            columns: cols,
        };
        log.check()?;
        Ok(log)
    }

    /// Number of rows.
    pub fn len(&self) -> usize {
        self.time_s.len()
    }

    /// Never true for a checked log (kept for the usual pairing with `len`).
    pub fn is_empty(&self) -> bool {
        self.time_s.is_empty()
    }

    fn line(&self, row: usize) -> Option<usize> {
        self.lines.get(row).copied()
    }

    /// Indices of rows where the voltage differs from the previous row.
    pub fn voltage_changes(&self) -> Vec<usize> {
        (1..self.volts.len())
            .filter(|&k| self.volts[k] != self.volts[k - 1])
            .collect()
    }

    fn check(&self) -> Result<(), IdentifyError> {
        let n = self.len();
        if n == 0 {
            return Err(input_err(
                &self.name,
                None,
                None,
                "the log has a header but no data rows; it needs at least two rows".into(),
            ));
        }
        if n == 1 {
            return Err(input_err(
                &self.name,
                self.line(0),
                None,
                "the log has a single data row; it needs at least two rows (in practice hundreds)"
                    .into(),
            ));
        }
        for k in 1..n {
            if self.time_s[k] <= self.time_s[k - 1] {
                return Err(input_err(
                    &self.name,
                    self.line(k),
                    Some(&self.columns[0]),
                    format!(
                        "time {} s does not increase (previous row, line {}, has {} s); time must be strictly increasing",
                        self.time_s[k],
                        self.line(k - 1).unwrap_or(0),
                        self.time_s[k - 1]
                    ),
                ));
            }
        }
        if self.voltage_changes().is_empty() {
            return Err(input_err(
                &self.name,
                self.line(0),
                Some(&self.columns[1]),
                format!(
                    "the voltage never changes (every row, lines {}-{}, has {} V); a log needs at least one step of voltage",
                    self.line(0).unwrap_or(0),
                    self.line(n - 1).unwrap_or(0),
                    self.volts[0]
                ),
            ));
        }
        Ok(())
    }
}

fn parse_cell(file: &str, line: usize, c: &Column, cell: &str) -> Result<f64, IdentifyError> {
    if cell.is_empty() {
        return Err(input_err(
            file,
            Some(line),
            Some(c),
            "the cell is empty; expected a finite number".into(),
        ));
    }
    let shown: String = cell.chars().take(40).collect();
    match cell.parse::<f64>() {
        Ok(v) if v.is_finite() => Ok(v),
        Ok(v) => Err(input_err(
            file,
            Some(line),
            Some(c),
            format!("\"{shown}\" is {v}; expected a finite number"),
        )),
        Err(_) => Err(input_err(
            file,
            Some(line),
            Some(c),
            format!("\"{shown}\" is not a number; expected a finite decimal number such as 0.25"),
        )),
    }
}
