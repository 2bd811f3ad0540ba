//! Cross-crate tests live in `tests/tests/`; this library holds what they share: where the
//! demo lives, how to build the demo firmware with cargo, and how to run it under QEMU.

use std::io::Read;
use std::path::{Path, PathBuf};
use std::process::{Command, Output, Stdio};
use std::time::{Duration, Instant};

/// The repository root.
pub fn repo_root() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .parent()
        .expect("tests/ has a parent")
        .to_path_buf()
}

/// `examples/greenhouse-rover/`: the demo's design files, logs and committed constants.
pub fn rover_dir() -> PathBuf {
    repo_root().join("examples/greenhouse-rover")
}

/// `examples/demo-firmware/`: the demo firmware crate (its own workspace).
pub fn firmware_dir() -> PathBuf {
    repo_root().join("examples/demo-firmware")
}

/// A target folder for firmware builds, inside the workspace's target folder
/// (`$CARGO_TARGET_DIR` or `target/`). The must-fail and QEMU tests share one: switching
/// `CTRL_DESIGN_FILE` reruns only the build script and the firmware crate, not its
/// dependencies.
pub fn firmware_target_dir(name: &str) -> PathBuf {
    let base = std::env::var_os("CARGO_TARGET_DIR")
        .map(PathBuf::from)
        .unwrap_or_else(|| repo_root().join("target"));
    base.join("demo-firmware").join(name)
}

/// A core the demo firmware builds for, and the QEMU machine that runs it.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct FirmwareCore {
    /// The Rust target triple (`--target`).
    pub target: &'static str,
    /// `qemu-system-arm` arguments that pick the machine (and CPU) for that target.
    pub qemu_machine: &'static [&'static str],
}

/// The Cortex-M3 of QEMU's `lm3s6965evb`: the firmware's default target
/// (its `.cargo/config.toml`).
pub const CORTEX_M3: FirmwareCore = FirmwareCore {
    target: "thumbv7m-none-eabi",
    qemu_machine: &["-cpu", "cortex-m3", "-machine", "lm3s6965evb"],
};

/// The Cortex-M0 (nRF51822) of QEMU's `microbit` (the machine fixes its CPU).
pub const CORTEX_M0: FirmwareCore = FirmwareCore {
    target: "thumbv6m-none-eabi",
    qemu_machine: &["-machine", "microbit"],
};

/// Builds the demo firmware (release, thumbv7m-none-eabi from its `.cargo/config.toml`)
/// into `target_dir`, with `design` as its design file (`CTRL_DESIGN_FILE`) or the default
/// `rover.toml`. Returns cargo's output; the caller judges success.
pub fn build_firmware(design: Option<&Path>, target_dir: &Path) -> Output {
    build_firmware_for(CORTEX_M3, design, target_dir)
}

/// [`build_firmware`] for `core` (`--target core.target`).
pub fn build_firmware_for(core: FirmwareCore, design: Option<&Path>, target_dir: &Path) -> Output {
    let cargo = std::env::var_os("CARGO").unwrap_or_else(|| "cargo".into());
    let mut cmd = Command::new(cargo);
    cmd.current_dir(firmware_dir())
        .args([
            "build",
            "--release",
            "--target",
            core.target,
            "--target-dir",
        ])
        .arg(target_dir)
        // The firmware's target is chosen here; the host's must not leak in.
        .env_remove("CARGO_BUILD_TARGET")
        .env_remove("CARGO_TARGET_DIR");
    match design {
        Some(d) => cmd.env("CTRL_DESIGN_FILE", d),
        None => cmd.env_remove("CTRL_DESIGN_FILE"),
    };
    cmd.output().expect("cargo can be started")
}

/// The firmware image a thumbv7m-none-eabi release build in `target_dir` produces.
pub fn firmware_elf(target_dir: &Path) -> PathBuf {
    firmware_elf_for(CORTEX_M3, target_dir)
}

/// The firmware image a release build for `core` in `target_dir` produces.
pub fn firmware_elf_for(core: FirmwareCore, target_dir: &Path) -> PathBuf {
    target_dir.join(core.target).join("release/demo-firmware")
}

/// The Rust target the demo firmware builds for by default (its `.cargo/config.toml`).
pub const FIRMWARE_TARGET: &str = CORTEX_M3.target;

/// `true` when the firmware's default target is installed in the toolchain that runs the
/// tests (`rustc --print target-libdir --target thumbv7m-none-eabi` holds `core`).
pub fn firmware_target_installed() -> bool {
    target_installed(FIRMWARE_TARGET)
}

/// `true` when `target`'s `core` library is installed in the toolchain running the tests.
pub fn target_installed(target: &str) -> bool {
    let rustc = std::env::var_os("RUSTC").unwrap_or_else(|| "rustc".into());
    Command::new(rustc)
        .args(["--print", "target-libdir", "--target", target])
        .output()
        .ok()
        .filter(|o| o.status.success())
        .map(|o| {
            // rustc prints the folder even when the target is not installed: look for core.
            let dir = String::from_utf8_lossy(&o.stdout).trim().to_string();
            std::fs::read_dir(&dir)
                .map(|mut d| {
                    d.any(|e| {
                        e.is_ok_and(|e| e.file_name().to_string_lossy().starts_with("libcore-"))
                    })
                })
                .unwrap_or(false)
        })
        .unwrap_or(false)
}

/// Whether a firmware test can run here: the firmware target must be installed, and with
/// `need_qemu` also `qemu-system-arm`. When something is missing the test should skip
/// (this prints why and returns `false`), unless `CTRL_REQUIRE_QEMU=1` (set by CI), which
/// turns the skip into a failure.
pub fn firmware_prerequisites(need_qemu: bool) -> bool {
    firmware_prerequisites_for(CORTEX_M3, need_qemu)
}

/// [`firmware_prerequisites`] for `core`'s target.
pub fn firmware_prerequisites_for(core: FirmwareCore, need_qemu: bool) -> bool {
    let target = core.target;
    let mut missing = Vec::new();
    if !target_installed(target) {
        missing.push(format!(
            "the Rust target {target} (rustup target add {target})"
        ));
    }
    if need_qemu && !qemu_available() {
        missing.push("qemu-system-arm (apt-get install qemu-system-arm)".to_string());
    }
    if missing.is_empty() {
        return true;
    }
    let required = std::env::var("CTRL_REQUIRE_QEMU").is_ok_and(|v| v == "1");
    assert!(
        !required,
        "missing {}, and CTRL_REQUIRE_QEMU=1 says the firmware tests must run",
        missing.join(" and ")
    );
    eprintln!(
        "skip: missing {} (set CTRL_REQUIRE_QEMU=1 to fail instead)",
        missing.join(" and ")
    );
    false
}

/// `true` when `qemu-system-arm` can be started.
pub fn qemu_available() -> bool {
    Command::new("qemu-system-arm")
        .arg("--version")
        .stdout(Stdio::null())
        .stderr(Stdio::null())
        .status()
        .map(|s| s.success())
        .unwrap_or(false)
}

/// What a QEMU run gave: the exit status (the firmware's semihosting exit code) and what it
/// printed on the semihosting console.
#[derive(Debug)]
pub struct QemuRun {
    /// Exit code of qemu-system-arm (0 for `EXIT_SUCCESS`, 1 for `EXIT_FAILURE`).
    pub code: Option<i32>,
    /// Semihosting output.
    pub stdout: String,
    /// QEMU's own messages.
    pub stderr: String,
}

/// Runs `elf` on the emulated LM3S6965 (Cortex-M3) with semihosting; kills it after
/// `timeout` and panics then (a firmware that never exits is a failure).
pub fn run_qemu(elf: &Path, timeout: Duration) -> QemuRun {
    run_qemu_on(CORTEX_M3, elf, timeout)
}

/// [`run_qemu`] on `core`'s QEMU machine.
pub fn run_qemu_on(core: FirmwareCore, elf: &Path, timeout: Duration) -> QemuRun {
    let mut child = Command::new("qemu-system-arm")
        .args(core.qemu_machine)
        .arg("-nographic")
        .args(["-semihosting-config", "enable=on,target=native", "-kernel"])
        .arg(elf)
        .stdin(Stdio::null())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .expect("qemu-system-arm starts");
    let mut out = child.stdout.take().expect("piped");
    let mut err = child.stderr.take().expect("piped");
    let reader = std::thread::spawn(move || {
        let mut s = String::new();
        let _ = out.read_to_string(&mut s);
        s
    });
    let err_reader = std::thread::spawn(move || {
        let mut s = String::new();
        let _ = err.read_to_string(&mut s);
        s
    });
    let start = Instant::now();
    let status = loop {
        if let Some(st) = child.try_wait().expect("wait on qemu") {
            break st;
        }
        if start.elapsed() > timeout {
            let _ = child.kill();
            let _ = child.wait();
            panic!(
                "the firmware did not exit within {timeout:?}; output so far:\n{}",
                reader.join().unwrap_or_default()
            );
        }
        std::thread::sleep(Duration::from_millis(20));
    };
    QemuRun {
        code: status.code(),
        stdout: reader.join().unwrap_or_default(),
        stderr: err_reader.join().unwrap_or_default(),
    }
}

/// One `MOVE` line of the firmware's report, as `key=value` pairs.
#[derive(Debug, Clone, PartialEq)]
pub struct MoveReport {
    /// 1-based index on the route.
    pub index: usize,
    /// The `key=value` fields in order.
    pub fields: Vec<(String, String)>,
}

impl MoveReport {
    /// The value of `key`, if present.
    pub fn get(&self, key: &str) -> Option<&str> {
        self.fields
            .iter()
            .find(|(k, _)| k == key)
            .map(|(_, v)| v.as_str())
    }

    /// The value of `key` as a number (panics with the line when absent or not a number).
    pub fn num(&self, key: &str) -> f64 {
        self.get(key)
            .and_then(|v| v.parse().ok())
            .unwrap_or_else(|| {
                panic!(
                    "move {}: no numeric `{key}` in {:?}",
                    self.index, self.fields
                )
            })
    }
}

/// Parses the `MOVE <i> key=value ...` lines of the firmware's output.
pub fn parse_moves(stdout: &str) -> Vec<MoveReport> {
    stdout
        .lines()
        .filter_map(|l| l.strip_prefix("MOVE "))
        .filter_map(|rest| {
            let mut it = rest.split_whitespace();
            let index = it.next()?.parse().ok()?;
            let fields = it
                .filter_map(|kv| kv.split_once('='))
                .map(|(k, v)| (k.to_string(), v.to_string()))
                .collect();
            Some(MoveReport { index, fields })
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn move_lines_parse() {
        let m = parse_moves("x\nMOVE 3 axis=forward final_error_counts=-0.5 ok=1\nROUTE ok=1\n");
        assert_eq!(m.len(), 1);
        assert_eq!(m[0].index, 3);
        assert_eq!(m[0].get("axis"), Some("forward"));
        assert_eq!(m[0].num("final_error_counts"), -0.5);
    }
}

#[cfg(test)]
mod target_check {
    use super::target_installed;

    #[test]
    fn target_check_tells_installed_from_missing() {
        // The host target is always installed (the tests run on it); a made-up one never is.
        let host = std::process::Command::new("rustc")
            .args(["-vV"])
            .output()
            .expect("rustc runs");
        let host = String::from_utf8_lossy(&host.stdout)
            .lines()
            .find_map(|l| l.strip_prefix("host: ").map(str::to_string))
            .expect("rustc -vV names the host");
        assert!(target_installed(&host), "{host}");
        assert!(!target_installed("armv0-nowhere-none-eabi"));
    }
}
