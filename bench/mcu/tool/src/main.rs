//! Host side of the MCU bench: builds the bench firmware for each core, runs it under
//! QEMU with one instruction per translation block and every block execution logged,
//! counts the executed instructions between the firmware's marker functions, measures
//! the `.text` the two-axis tick adds, scans the release builds for core panicking
//! functions, and checks the results against `bench/mcu/limits.toml`.
//!
//! Every count printed is *instructions executed* (QEMU's `-d exec` lines with one
//! instruction per block), not cycles.
//!
//! Usage: `bench-mcu-tool [--check] [--dir <bench/mcu>] [--core <triple>]... [--keep-logs]`

use std::collections::BTreeMap;
use std::fmt::Write as _;
use std::fs;
use std::io::{BufRead, BufReader};
use std::path::{Path, PathBuf};
use std::process::{Command, ExitCode, Stdio};
use std::time::{Duration, Instant};

use object::{Object, ObjectSection, ObjectSymbol, SymbolKind};

/// A core to measure: its Rust target and the QEMU machine that emulates it.
struct Core {
    triple: &'static str,
    machine: &'static str,
    label: &'static str,
}

const CORES: &[Core] = &[
    Core {
        triple: "thumbv6m-none-eabi",
        machine: "microbit",
        label: "Cortex-M0 (QEMU microbit, nRF51)",
    },
    Core {
        triple: "thumbv7em-none-eabihf",
        machine: "mps2-an386",
        label: "Cortex-M4F (QEMU mps2-an386)",
    },
];

/// Firmware builds: (name, cargo feature arguments).
const BUILDS: &[(&str, &[&str])] = &[
    ("paths", &[]),
    ("base", &["--no-default-features"]),
    (
        "tick",
        &["--no-default-features", "--features", "size-tick"],
    ),
    (
        "tick-f32",
        &["--no-default-features", "--features", "size-tick-f32"],
    ),
];

/// Longest a QEMU run may take before it is killed.
const QEMU_TIMEOUT: Duration = Duration::from_secs(300);
/// Largest execution log allowed (about 100 bytes per instruction); a firmware that runs
/// away is stopped before it fills the disk.
const LOG_LIMIT_BYTES: u64 = 2 << 30;

struct Options {
    check: bool,
    dir: PathBuf,
    cores: Vec<String>,
    keep_logs: bool,
}

fn parse_args() -> Result<Options, String> {
    let mut o = Options {
        check: false,
        dir: PathBuf::from(env!("CARGO_MANIFEST_DIR")).join(".."),
        cores: Vec::new(),
        keep_logs: false,
    };
    let mut args = std::env::args().skip(1);
    while let Some(a) = args.next() {
        match a.as_str() {
            "--check" => o.check = true,
            "--keep-logs" => o.keep_logs = true,
            "--dir" => o.dir = PathBuf::from(args.next().ok_or("--dir needs a path")?),
            "--core" => {
                let c = args.next().ok_or("--core needs a target triple")?;
                if !CORES.iter().any(|k| k.triple == c) {
                    return Err(format!(
                        "--core {c}: unknown; valid: {}",
                        CORES
                            .iter()
                            .map(|k| k.triple)
                            .collect::<Vec<_>>()
                            .join(", ")
                    ));
                }
                o.cores.push(c);
            }
            "-h" | "--help" => {
                println!(
                    "bench-mcu-tool [--check] [--dir <bench/mcu>] [--core <triple>]... [--keep-logs]"
                );
                std::process::exit(0);
            }
            other => return Err(format!("unknown argument `{other}` (try --help)")),
        }
    }
    Ok(o)
}

/// Everything measured on one core.
struct CoreResult {
    triple: &'static str,
    label: &'static str,
    n: u64,
    k: u64,
    /// (path name, instructions in the N run, instructions in the 2N run)
    windows: Vec<(String, u64, u64)>,
    /// `.text` bytes per build name.
    text: BTreeMap<&'static str, u64>,
    /// Panic findings per build name.
    panics: Vec<(String, Vec<String>)>,
    /// Sizes of the larger functions in the `tick` build that are absent from `base`.
    tick_functions: Vec<(String, u64)>,
}

impl CoreResult {
    fn raw(&self, name: &str) -> Option<(u64, u64)> {
        self.windows
            .iter()
            .find(|w| w.0 == name)
            .map(|w| (w.1, w.2))
    }
    /// Instructions per tick of a path, net of the `empty` path, as (numerator over N).
    fn per_tick(&self, name: &str) -> Option<f64> {
        let (a, b) = self.raw(name)?;
        let (ea, eb) = self.raw("empty")?;
        let path = b as i64 - a as i64;
        let empty = eb as i64 - ea as i64;
        Some((path - empty) as f64 / self.n as f64)
    }
}

fn main() -> ExitCode {
    let opts = match parse_args() {
        Ok(o) => o,
        Err(e) => {
            eprintln!("bench-mcu-tool: {e}");
            return ExitCode::from(2);
        }
    };
    match real_main(&opts) {
        Ok(true) => ExitCode::SUCCESS,
        Ok(false) => ExitCode::from(1),
        Err(e) => {
            eprintln!("bench-mcu-tool: error: {e}");
            ExitCode::from(1)
        }
    }
}

fn real_main(opts: &Options) -> Result<bool, String> {
    let dir = fs::canonicalize(&opts.dir)
        .map_err(|e| format!("firmware dir {}: {e}", opts.dir.display()))?;
    let limits_path = dir.join("limits.toml");
    let limits = Limits::load(&limits_path)?;
    let qemu = QemuFlavour::detect()?;
    let out_dir = dir.join("target").join("bench");
    fs::create_dir_all(&out_dir).map_err(|e| format!("{}: {e}", out_dir.display()))?;

    let mut results = Vec::new();
    for core in CORES {
        if !opts.cores.is_empty() && !opts.cores.iter().any(|c| c == core.triple) {
            continue;
        }
        results.push(measure_core(core, &dir, &out_dir, &qemu, opts.keep_logs)?);
    }

    let mut report = render(&results);
    report.push_str(&provenance(&dir, &qemu));
    print!("{report}");
    let _ = fs::write(out_dir.join("report.md"), &report);

    let mut failures = check(&results, &limits);
    for core in CORES {
        if results.iter().any(|r| r.triple == core.triple) {
            failures.extend(self_test(core, &dir, &out_dir, &qemu)?);
        }
    }
    if failures.is_empty() {
        println!(
            "\nall checks passed (calibration exact, no panic symbols, limits from {})",
            limits_path.display()
        );
    } else {
        println!("\nFAILED checks:");
        for f in &failures {
            println!("  - {f}");
        }
    }
    Ok(!opts.check || failures.is_empty())
}

/// Shows that both external checks can fail: the panic scan must find the planted
/// bounds check (and name its caller), and counting without one instruction per block
/// must miss the calibration loop's known count.
fn self_test(
    core: &Core,
    dir: &Path,
    out_dir: &Path,
    qemu: &QemuFlavour,
) -> Result<Vec<String>, String> {
    let mut failures = Vec::new();
    let elf = build(
        core,
        dir,
        out_dir,
        "panic-probe",
        &["--no-default-features", "--features", "panic-probe"],
    )?;
    let data = fs::read(&elf).map_err(|e| format!("{}: {e}", elf.display()))?;
    let file = object::File::parse(&*data).map_err(|e| format!("{}: {e}", elf.display()))?;
    let found = scan_panics(&file);
    let named = found.iter().any(|(sym, callers)| {
        sym.contains("panic_bounds_check") && callers.iter().any(|c| c.contains("panic_probe"))
    });
    if !named {
        failures.push(format!(
            "{}: self-test: the panic scan did not find the planted bounds check in bench_mcu::panic_probe (found: {found:?})",
            core.triple
        ));
    }
    // Counting with chained multi-instruction blocks must disagree with the known loop.
    let plain = QemuFlavour {
        one_insn: Vec::new(),
        version: format!("{} (self-test: blocks, not instructions)", qemu.version),
    };
    let paths = out_dir.join(format!("{}-paths.elf", core.triple));
    let (n, k, windows) = run_qemu(core, &paths, out_dir, &plain, false)?;
    let r = CoreResult {
        triple: core.triple,
        label: core.label,
        n,
        k,
        windows,
        text: BTreeMap::new(),
        panics: Vec::new(),
        tick_functions: Vec::new(),
    };
    let calib = r.per_tick("calib_loop");
    if calib == Some((2 * k + 1) as f64) {
        failures.push(format!(
            "{}: self-test: counting block executions (not instructions) still gave the exact calibration count; the check could not fail",
            core.triple
        ));
    }
    eprintln!(
        "self-test {}: planted panic found and named: {named}; block-count calibration = {:?} (instructions: {})",
        core.triple,
        calib,
        2 * k + 1
    );
    Ok(failures)
}

/// Where the figures came from: commit, whether ctrl-core or the bench had local changes,
/// QEMU and rustc versions.
fn provenance(dir: &Path, qemu: &QemuFlavour) -> String {
    let git = |args: &[&str]| -> Option<String> {
        let out = Command::new("git")
            .current_dir(dir)
            .args(args)
            .output()
            .ok()?;
        out.status
            .success()
            .then(|| String::from_utf8_lossy(&out.stdout).trim().to_string())
    };
    let commit = git(&["rev-parse", "--short", "HEAD"]).unwrap_or_else(|| "unknown".into());
    let dirty = git(&["status", "--porcelain", "--", "../../ctrl-core", "."])
        .map(|s| {
            if s.is_empty() {
                "clean".to_string()
            } else {
                format!("local changes:\n{s}")
            }
        })
        .unwrap_or_else(|| "unknown".into());
    let rustc = Command::new("rustc")
        .arg("--version")
        .output()
        .ok()
        .map(|o| String::from_utf8_lossy(&o.stdout).trim().to_string())
        .unwrap_or_else(|| "unknown".into());
    format!(
        "\n## Provenance\n\n- commit {commit}; ctrl-core and bench/mcu: {dirty}\n- {rustc}; qemu-system-arm {}\n",
        qemu.version
    )
}

fn measure_core(
    core: &Core,
    dir: &Path,
    out_dir: &Path,
    qemu: &QemuFlavour,
    keep_logs: bool,
) -> Result<CoreResult, String> {
    let mut elfs = BTreeMap::new();
    for (name, features) in BUILDS {
        let elf = build(core, dir, out_dir, name, features)?;
        elfs.insert(*name, elf);
    }
    let mut text = BTreeMap::new();
    let mut panics = Vec::new();
    for (name, elf) in &elfs {
        let data = fs::read(elf).map_err(|e| format!("{}: {e}", elf.display()))?;
        let file = object::File::parse(&*data).map_err(|e| format!("{}: {e}", elf.display()))?;
        let t = file
            .section_by_name(".text")
            .map(|s| s.size())
            .ok_or_else(|| format!("{}: no .text section", elf.display()))?;
        text.insert(*name, t);
        for finding in scan_panics(&file) {
            panics.push((format!("{name}: {}", finding.0), finding.1));
        }
    }
    let tick_functions = added_functions(&elfs["base"], &elfs["tick"])?;

    let (n, k, windows) = run_qemu(core, &elfs["paths"], out_dir, qemu, keep_logs)?;
    Ok(CoreResult {
        triple: core.triple,
        label: core.label,
        n,
        k,
        windows,
        text,
        panics,
        tick_functions,
    })
}

fn build(
    core: &Core,
    dir: &Path,
    out_dir: &Path,
    name: &str,
    features: &[&str],
) -> Result<PathBuf, String> {
    let target_dir = dir.join("target");
    let mut cmd = Command::new(std::env::var("CARGO").unwrap_or_else(|_| "cargo".into()));
    cmd.current_dir(dir)
        .args(["build", "--release", "--quiet", "--target", core.triple])
        .args(features)
        .env("CARGO_TARGET_DIR", &target_dir)
        // A RUSTFLAGS from the environment would apply to every build; keep builds as
        // the firmware's own config says.
        .env_remove("RUSTFLAGS")
        .env_remove("CARGO_ENCODED_RUSTFLAGS")
        .env_remove("CARGO_BUILD_TARGET");
    eprintln!("building {} ({name}) ...", core.triple);
    let status = cmd
        .status()
        .map_err(|e| format!("cannot start cargo: {e}"))?;
    if !status.success() {
        return Err(format!("firmware build {} ({name}) failed", core.triple));
    }
    let built = target_dir
        .join(core.triple)
        .join("release")
        .join("bench-mcu");
    let copy = out_dir.join(format!("{}-{name}.elf", core.triple));
    fs::copy(&built, &copy)
        .map_err(|e| format!("{} -> {}: {e}", built.display(), copy.display()))?;
    Ok(copy)
}

/// QEMU option spelling for one instruction per translation block.
struct QemuFlavour {
    one_insn: Vec<&'static str>,
    version: String,
}

impl QemuFlavour {
    fn detect() -> Result<Self, String> {
        let out = Command::new("qemu-system-arm")
            .arg("--version")
            .output()
            .map_err(|e| {
                format!("cannot run qemu-system-arm (apt-get install qemu-system-arm): {e}")
            })?;
        let text = String::from_utf8_lossy(&out.stdout).to_string();
        let version = text
            .split_whitespace()
            .skip_while(|w| *w != "version")
            .nth(1)
            .unwrap_or("")
            .to_string();
        let mut parts = version.split('.').map(|p| p.parse::<u32>().unwrap_or(0));
        let major = parts.next().unwrap_or(0);
        let minor = parts.next().unwrap_or(0);
        // `-singlestep` became `-accel tcg,one-insn-per-tb=on` in QEMU 8.1.
        let one_insn = if (major, minor) >= (8, 1) {
            vec!["-accel", "tcg,one-insn-per-tb=on"]
        } else {
            vec!["-singlestep"]
        };
        Ok(QemuFlavour { one_insn, version })
    }
}

type Windows = Vec<(String, u64, u64)>;

fn symbol_address(file: &object::File, name: &str) -> Option<u64> {
    file.symbols()
        .find(|s| s.name() == Ok(name))
        .map(|s| s.address() & !1)
}

fn run_qemu(
    core: &Core,
    elf: &Path,
    out_dir: &Path,
    qemu: &QemuFlavour,
    keep_logs: bool,
) -> Result<(u64, u64, Windows), String> {
    let data = fs::read(elf).map_err(|e| format!("{}: {e}", elf.display()))?;
    let file = object::File::parse(&*data).map_err(|e| format!("{}: {e}", elf.display()))?;
    let begin = symbol_address(&file, "bench_marker_begin")
        .ok_or_else(|| format!("{}: no symbol bench_marker_begin", elf.display()))?;
    let end = symbol_address(&file, "bench_marker_end")
        .ok_or_else(|| format!("{}: no symbol bench_marker_end", elf.display()))?;

    let log = out_dir.join(format!("{}-exec.log", core.triple));
    let _ = fs::remove_file(&log);
    let mut cmd = Command::new("qemu-system-arm");
    cmd.args(["-machine", core.machine, "-nographic"])
        .args(["-semihosting-config", "enable=on,target=native"])
        .args(&qemu.one_insn)
        .args(["-d", "exec,nochain", "-D"])
        .arg(&log)
        .arg("-kernel")
        .arg(elf)
        .stdin(Stdio::null())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped());
    eprintln!(
        "running {} under qemu-system-arm {} -machine {} ...",
        core.triple, qemu.version, core.machine
    );
    let started = Instant::now();
    let mut child = cmd
        .spawn()
        .map_err(|e| format!("cannot start qemu-system-arm: {e}"))?;
    let status = loop {
        match child.try_wait() {
            Ok(Some(s)) => break s,
            Ok(None) if started.elapsed() > QEMU_TIMEOUT => {
                let _ = child.kill();
                let _ = child.wait();
                return Err(format!(
                    "{}: qemu did not exit within {QEMU_TIMEOUT:?}",
                    core.triple
                ));
            }
            Ok(None) => {
                let size = fs::metadata(&log).map(|m| m.len()).unwrap_or(0);
                if size > LOG_LIMIT_BYTES {
                    let _ = child.kill();
                    let _ = child.wait();
                    let _ = fs::remove_file(&log);
                    return Err(format!(
                        "{}: execution log passed {LOG_LIMIT_BYTES} bytes; firmware runs away (stopped)",
                        core.triple
                    ));
                }
                std::thread::sleep(Duration::from_millis(50))
            }
            Err(e) => return Err(format!("waiting for qemu: {e}")),
        }
    };
    let output = child
        .wait_with_output()
        .map_err(|e| format!("qemu output: {e}"))?;
    let stdout = String::from_utf8_lossy(&output.stdout).to_string();
    if !status.success() {
        return Err(format!(
            "{}: firmware exited with {status} (a panic exits with failure)\nstdout:\n{stdout}\nstderr:\n{}",
            core.triple,
            String::from_utf8_lossy(&output.stderr)
        ));
    }

    // Protocol lines from the firmware.
    let mut n = None;
    let mut k = None;
    let mut names = Vec::new();
    for line in stdout.lines() {
        let line = line.trim();
        if let Some(rest) = line.strip_prefix("bench-mcu ") {
            for kv in rest.split_whitespace() {
                if let Some(v) = kv.strip_prefix("N=") {
                    n = v.parse::<u64>().ok();
                }
                if let Some(v) = kv.strip_prefix("K=") {
                    k = v.parse::<u64>().ok();
                }
            }
        } else if let Some(name) = line.strip_prefix("path ") {
            names.push(name.to_string());
        }
    }
    let n = n.ok_or_else(|| {
        format!(
            "{}: no `bench-mcu N=` line in firmware output:\n{stdout}",
            core.triple
        )
    })?;
    let k = k.ok_or_else(|| format!("{}: no `K=` in firmware output", core.triple))?;

    let counts = count_windows(&log, begin, end)?;
    if !keep_logs {
        let _ = fs::remove_file(&log);
    }
    if counts.len() != 2 * names.len() {
        return Err(format!(
            "{}: {} counted windows for {} paths (expected two per path)",
            core.triple,
            counts.len(),
            names.len()
        ));
    }
    let windows = names
        .into_iter()
        .enumerate()
        .map(|(i, name)| (name, counts[2 * i], counts[2 * i + 1]))
        .collect();
    Ok((n, k, windows))
}

/// Counts `Trace` lines (one per executed instruction under one-instruction blocks and
/// `nochain`) from each entry to `begin` up to the next entry to `end`.
fn count_windows(log: &Path, begin: u64, end: u64) -> Result<Vec<u64>, String> {
    let f = fs::File::open(log).map_err(|e| format!("{}: {e}", log.display()))?;
    let mut counts = Vec::new();
    let mut current: Option<u64> = None;
    let mut line = String::new();
    let mut reader = BufReader::with_capacity(1 << 20, f);
    loop {
        line.clear();
        let got = reader
            .read_line(&mut line)
            .map_err(|e| format!("{}: {e}", log.display()))?;
        if got == 0 {
            break;
        }
        if !line.starts_with("Trace ") {
            continue;
        }
        // "Trace 0: 0x7f.. [cs_base/pc/flags/cflags] symbol"
        let pc = line
            .split_once('[')
            .and_then(|(_, r)| r.split('/').nth(1))
            .and_then(|h| u64::from_str_radix(h, 16).ok());
        let Some(pc) = pc else {
            return Err(format!(
                "{}: cannot read pc from log line `{}`",
                log.display(),
                line.trim_end()
            ));
        };
        if pc == end {
            if let Some(c) = current.take() {
                counts.push(c);
            }
        }
        if pc == begin {
            if current.is_some() {
                return Err(format!("{}: nested bench_marker_begin", log.display()));
            }
            current = Some(0);
        }
        if let Some(c) = current.as_mut() {
            *c += 1;
        }
    }
    if current.is_some() {
        return Err(format!(
            "{}: window not closed at end of log",
            log.display()
        ));
    }
    Ok(counts)
}

/// Demangled names that mean a path to a core panic exists.
fn is_panic_symbol(demangled: &str) -> bool {
    const PATTERNS: &[&str] = &[
        "core::panicking",
        "panic_bounds_check",
        "panic_const_",
        "panic_fmt",
        "panic_nounwind",
        "unwrap_failed",
        "expect_failed",
        "slice_index_fail",
        "slice_end_index_len_fail",
        "slice_start_index_len_fail",
        "slice_index_order_fail",
        "slice_error_fail",
        "assert_failed",
        "rust_begin_unwind",
    ];
    PATTERNS.iter().any(|p| demangled.contains(p))
}

fn demangle(name: &str) -> String {
    format!("{:#}", rustc_demangle::demangle(name))
}

/// Function symbols as (start, end, demangled name), sorted by start.
fn functions(file: &object::File) -> Vec<(u64, u64, String)> {
    let mut v: Vec<_> = file
        .symbols()
        .filter(|s| s.kind() == SymbolKind::Text && s.size() > 0)
        .filter_map(|s| {
            let a = s.address() & !1;
            Some((a, a + s.size(), demangle(s.name().ok()?)))
        })
        .collect();
    v.sort();
    v
}

/// Returns (panic symbol, functions that call it) for every core panicking function in
/// the image. Callers are found by decoding every 32-bit Thumb `BL`/`B.W` in `.text` and
/// every literal-pool word that holds the symbol's address (for `ldr rX, =f; blx rX`).
fn scan_panics(file: &object::File) -> Vec<(String, Vec<String>)> {
    let funcs = functions(file);
    let text = file.section_by_name(".text");
    let (text_addr, text_bytes) = match &text {
        Some(s) => (s.address(), s.data().unwrap_or(&[]).to_vec()),
        None => (0, Vec::new()),
    };
    let mut out = Vec::new();
    for s in file.symbols() {
        let Ok(name) = s.name() else { continue };
        let d = demangle(name);
        if !is_panic_symbol(&d) {
            continue;
        }
        let target = s.address() & !1;
        let mut callers = Vec::new();
        let mut add = |at: u64, how: &str| {
            let owner = funcs
                .iter()
                .find(|f| f.0 <= at && at < f.1)
                .map(|f| f.2.clone())
                .unwrap_or_else(|| format!("<unknown at {at:#x}>"));
            let entry = format!("{owner} ({how} at {at:#x})");
            if !callers.contains(&entry) {
                callers.push(entry);
            }
        };
        let mut i = 0;
        while i + 4 <= text_bytes.len() {
            let at = text_addr + i as u64;
            let h1 = u16::from_le_bytes([text_bytes[i], text_bytes[i + 1]]) as u32;
            let h2 = u16::from_le_bytes([text_bytes[i + 2], text_bytes[i + 3]]) as u32;
            if h1 >> 11 == 0b11110 && (h2 >> 15) == 1 && (h2 >> 12) & 1 == 1 {
                // BL (second halfword 11J1J...) or B.W encoding T4 (10J1J...)
                let s_bit = (h1 >> 10) & 1;
                let j1 = (h2 >> 13) & 1;
                let j2 = (h2 >> 11) & 1;
                let i1 = !(j1 ^ s_bit) & 1;
                let i2 = !(j2 ^ s_bit) & 1;
                let imm = (s_bit << 24)
                    | (i1 << 23)
                    | (i2 << 22)
                    | ((h1 & 0x3ff) << 12)
                    | ((h2 & 0x7ff) << 1);
                let offset = ((imm << 7) as i32) >> 7;
                let dest = (at as i64 + 4 + offset as i64) as u64;
                if dest == target {
                    add(at, if (h2 >> 14) & 1 == 1 { "bl" } else { "b.w" });
                }
            }
            if i % 4 == 0 {
                let w = u32::from_le_bytes([
                    text_bytes[i],
                    text_bytes[i + 1],
                    text_bytes[i + 2],
                    text_bytes[i + 3],
                ]) as u64;
                if w == (target | 1) {
                    add(at, "address in literal pool");
                }
            }
            i += 2;
        }
        out.push((d, callers));
    }
    out
}

/// Function symbols present in `tick` but not in `base`, with their sizes, largest first.
fn added_functions(base: &Path, tick: &Path) -> Result<Vec<(String, u64)>, String> {
    let read = |p: &Path| -> Result<Vec<(String, u64)>, String> {
        let data = fs::read(p).map_err(|e| format!("{}: {e}", p.display()))?;
        let file = object::File::parse(&*data).map_err(|e| format!("{}: {e}", p.display()))?;
        Ok(functions(&file)
            .into_iter()
            .map(|(a, b, n)| (n, b - a))
            .collect())
    };
    let b = read(base)?;
    let t = read(tick)?;
    let mut added: Vec<_> = t
        .into_iter()
        .filter(|(n, _)| !b.iter().any(|(bn, _)| bn == n))
        .collect();
    added.sort_by_key(|x| std::cmp::Reverse(x.1));
    Ok(added)
}

/// Regression limits from `limits.toml`.
struct Limits {
    /// (triple, path) -> max instructions per tick
    instructions: Vec<(String, String, f64)>,
    /// (triple, stem) -> max ratio `<stem>_fixed` / `<stem>_f32`
    ratio: Vec<(String, String, f64)>,
    /// (triple, build) -> max bytes of `.text` added over `base`
    text: Vec<(String, String, f64)>,
}

impl Limits {
    fn load(path: &Path) -> Result<Self, String> {
        let src = fs::read_to_string(path).map_err(|e| format!("{}: {e}", path.display()))?;
        let table: toml::Table = src
            .parse()
            .map_err(|e| format!("{}: {e}", path.display()))?;
        let mut l = Limits {
            instructions: Vec::new(),
            ratio: Vec::new(),
            text: Vec::new(),
        };
        for (section, dest) in [
            ("instructions", &mut l.instructions),
            ("ratio", &mut l.ratio),
            ("text", &mut l.text),
        ] {
            let Some(v) = table.get(section) else {
                continue;
            };
            let per_core = v.as_table().ok_or_else(|| {
                format!("{}: [{section}] must be a table of cores", path.display())
            })?;
            for (triple, entries) in per_core {
                if !CORES.iter().any(|c| c.triple == triple) {
                    return Err(format!(
                        "{}: [{section}.{triple}]: unknown core; valid: {}",
                        path.display(),
                        CORES
                            .iter()
                            .map(|c| c.triple)
                            .collect::<Vec<_>>()
                            .join(", ")
                    ));
                }
                let entries = entries.as_table().ok_or_else(|| {
                    format!("{}: [{section}.{triple}] must be a table", path.display())
                })?;
                for (key, val) in entries {
                    let x = val
                        .as_float()
                        .or_else(|| val.as_integer().map(|i| i as f64))
                        .filter(|x| x.is_finite() && *x > 0.0)
                        .ok_or_else(|| {
                            format!(
                                "{}: [{section}.{triple}] {key}: must be a positive number, got {val:?}",
                                path.display()
                            )
                        })?;
                    dest.push((triple.clone(), key.clone(), x));
                }
            }
        }
        Ok(l)
    }
}

fn check(results: &[CoreResult], limits: &Limits) -> Vec<String> {
    let mut f = Vec::new();
    for r in results {
        // External check of the counting method.
        match r.per_tick("calib_loop") {
            Some(x) if x == (2 * r.k + 1) as f64 => {}
            Some(x) => f.push(format!(
                "{}: calibration loop measured {x} instructions, expected exactly {} (2 K + 1, K = {})",
                r.triple,
                2 * r.k + 1,
                r.k
            )),
            None => f.push(format!("{}: calibration path missing", r.triple)),
        }
        for (what, callers) in &r.panics {
            f.push(format!(
                "{}: panic symbol `{what}` present; referenced from: {}",
                r.triple,
                if callers.is_empty() {
                    "(no direct caller found)".to_string()
                } else {
                    callers.join("; ")
                }
            ));
        }
        for (triple, path, max) in &limits.instructions {
            if triple != r.triple {
                continue;
            }
            match r.per_tick(path) {
                Some(x) if x <= *max => {}
                Some(x) => f.push(format!(
                    "{triple}: {path} = {x} instructions/tick > limit {max}"
                )),
                None => f.push(format!(
                    "{triple}: {path}: limited in limits.toml but not measured"
                )),
            }
        }
        for (triple, stem, max) in &limits.ratio {
            if triple != r.triple {
                continue;
            }
            let fixed = r.per_tick(&format!("{stem}_fixed"));
            let float = r.per_tick(&format!("{stem}_f32"));
            match (fixed, float) {
                (Some(a), Some(b)) if b > 0.0 && a / b <= *max => {}
                (Some(a), Some(b)) => f.push(format!(
                    "{triple}: {stem} fixed/f32 = {a}/{b} = {:.3} > limit {max}",
                    a / b
                )),
                _ => f.push(format!(
                    "{triple}: {stem}: ratio limited but {stem}_fixed/{stem}_f32 not measured"
                )),
            }
        }
        for (triple, build, max) in &limits.text {
            if triple != r.triple {
                continue;
            }
            match (r.text.get(build.as_str()), r.text.get("base")) {
                (Some(t), Some(b)) if (*t as f64 - *b as f64) <= *max => {}
                (Some(t), Some(b)) => f.push(format!(
                    "{triple}: .text added by `{build}` = {} bytes > limit {max}",
                    *t as i64 - *b as i64
                )),
                _ => f.push(format!("{triple}: text limit for unknown build `{build}`")),
            }
        }
    }
    f
}

fn fmt_count(x: Option<f64>) -> String {
    match x {
        Some(x) if x.fract() == 0.0 => format!("{x:.0}"),
        Some(x) => format!("{x:.2}"),
        None => "-".into(),
    }
}

fn render(results: &[CoreResult]) -> String {
    let mut s = String::new();
    let _ = writeln!(
        s,
        "## Instructions per tick (instruction counts under QEMU, not cycles)\n"
    );
    for r in results {
        let _ = writeln!(
            s,
            "- {}: `{}`, N = {}, 2N = {}",
            r.label,
            r.triple,
            r.n,
            2 * r.n
        );
    }
    let _ = writeln!(s);
    // Path names in first-seen order.
    let mut names: Vec<String> = Vec::new();
    for r in results {
        for w in &r.windows {
            if !names.contains(&w.0) {
                names.push(w.0.clone());
            }
        }
    }
    let _ = write!(s, "| path |");
    for r in results {
        let _ = write!(s, " {} |", r.triple);
    }
    let _ = writeln!(s);
    let _ = write!(s, "| --- |");
    for _ in results {
        let _ = write!(s, " ---: |");
    }
    let _ = writeln!(s);
    for name in &names {
        let _ = write!(s, "| {name} |");
        for r in results {
            let v = if name == "empty" {
                // The harness overhead itself, per tick.
                r.raw("empty").map(|(a, b)| (b - a) as f64 / r.n as f64)
            } else {
                r.per_tick(name)
            };
            let _ = write!(s, " {} |", fmt_count(v));
        }
        let _ = writeln!(s);
    }
    let _ = writeln!(
        s,
        "\n`empty` is the harness overhead per tick (loop, indirect call, return); every other row \
         is net of it. `calib_loop` must equal 2 K + 1 = {}.\n",
        results.first().map(|r| 2 * r.k + 1).unwrap_or(0)
    );

    // fixed vs f32 pairs
    let stems: Vec<String> = names
        .iter()
        .filter_map(|n| n.strip_suffix("_fixed").map(str::to_string))
        .filter(|st| names.contains(&format!("{st}_f32")))
        .collect();
    if !stems.is_empty() {
        let _ = writeln!(
            s,
            "### fixed point against the f32 baseline (fixed / f32)\n"
        );
        let _ = write!(s, "| path |");
        for r in results {
            let _ = write!(s, " {} |", r.triple);
        }
        let _ = writeln!(s);
        let _ = write!(s, "| --- |");
        for _ in results {
            let _ = write!(s, " ---: |");
        }
        let _ = writeln!(s);
        for st in &stems {
            let _ = write!(s, "| {st} |");
            for r in results {
                match (
                    r.per_tick(&format!("{st}_fixed")),
                    r.per_tick(&format!("{st}_f32")),
                ) {
                    (Some(a), Some(b)) if b > 0.0 => {
                        let _ = write!(
                            s,
                            " {} / {} = {:.3} |",
                            fmt_count(Some(a)),
                            fmt_count(Some(b)),
                            a / b
                        );
                    }
                    _ => {
                        let _ = write!(s, " - |");
                    }
                }
            }
            let _ = writeln!(s);
        }
        let _ = writeln!(s);
    }

    let _ = writeln!(s, "## Code size (`.text` bytes, release build)\n");
    let _ = write!(s, "| build |");
    for r in results {
        let _ = write!(s, " {} |", r.triple);
    }
    let _ = writeln!(s);
    let _ = write!(s, "| --- |");
    for _ in results {
        let _ = write!(s, " ---: |");
    }
    let _ = writeln!(s);
    for (b, _) in BUILDS {
        let _ = write!(s, "| {b} |");
        for r in results {
            let _ = write!(
                s,
                " {} |",
                r.text.get(b).map(|x| x.to_string()).unwrap_or("-".into())
            );
        }
        let _ = writeln!(s);
    }
    for b in ["tick", "tick-f32"] {
        let _ = write!(s, "| {b} - base |");
        for r in results {
            match (r.text.get(b), r.text.get("base")) {
                (Some(t), Some(base)) => {
                    let _ = write!(s, " **{}** |", *t as i64 - *base as i64);
                }
                _ => {
                    let _ = write!(s, " - |");
                }
            }
        }
        let _ = writeln!(s);
    }
    let _ = writeln!(s);
    for r in results {
        if r.tick_functions.is_empty() {
            continue;
        }
        let _ = writeln!(
            s,
            "Functions the `tick` build adds on `{}` (bytes):",
            r.triple
        );
        for (n, sz) in r.tick_functions.iter().take(12) {
            let _ = writeln!(s, "- {sz} `{n}`");
        }
        let _ = writeln!(s);
    }

    let _ = writeln!(s, "## Panic-free scan (release thumb builds)\n");
    for r in results {
        if r.panics.is_empty() {
            let _ = writeln!(
                s,
                "- `{}`: no core panicking symbol in any of the {} builds",
                r.triple,
                BUILDS.len()
            );
        } else {
            for (what, callers) in &r.panics {
                let _ = writeln!(
                    s,
                    "- `{}`: FOUND `{what}`, referenced from: {}",
                    r.triple,
                    callers.join("; ")
                );
            }
        }
    }
    s
}
