//! Bench firmware: runs each measured path for N and 2N ticks between two marker
//! functions, so that `bench/mcu/tool` can count the executed instructions in a QEMU
//! `-singlestep -d exec,nochain` log and report instructions per tick from the difference.
//!
//! The counts are *instructions executed*, not cycles.
//!
//! Protocol (read by the tool):
//! - before any measurement the firmware prints `bench-mcu N=<n>` and one line
//!   `path <name>` per measured path, in run order, on the semihosting console;
//! - for every path it runs a fresh state for N ticks, then a fresh state for 2N ticks,
//!   each run bracketed by a call to [`bench_marker_begin`] and one to [`bench_marker_end`]
//!   (both inside the one function [`window`], so every window has the same overhead);
//! - the tool counts the log lines from the first instruction of `bench_marker_begin` up to
//!   (not including) the first instruction of `bench_marker_end` of each window.
#![no_std]
#![no_main]

use core::hint::black_box;
use core::sync::atomic::{AtomicU32, Ordering};

use cortex_m_rt::{entry, exception, ExceptionFrame};
use cortex_m_semihosting::{debug, hprintln};

mod calib;
#[cfg(feature = "paths")]
mod paths;
#[cfg(any(feature = "paths", feature = "size-tick", feature = "size-tick-f32"))]
mod rover;
#[cfg(any(feature = "size-tick", feature = "size-tick-f32"))]
mod size;

/// Ticks in the short run; the long run has twice as many.
pub const N: u32 = 8;

/// What the markers last wrote (1 = inside a window, 2 = outside); keeps the two
/// markers distinct so they cannot be merged into one address. Read back at the end so
/// the stores (and so the calls) are not optimised away.
static MARK: AtomicU32 = AtomicU32::new(0);

/// Start of a counted window. Its first instruction is the window's first line.
#[no_mangle]
#[inline(never)]
pub extern "C" fn bench_marker_begin() {
    MARK.store(1, Ordering::Relaxed);
}

/// End of a counted window. Its first instruction ends the window (not counted).
#[no_mangle]
#[inline(never)]
pub extern "C" fn bench_marker_end() {
    MARK.store(2, Ordering::Relaxed);
}

/// The state of every path, copied from one template (outside the counted window) before
/// each run.
#[derive(Clone)]
pub struct Bench {
    /// Calibration paths need nothing; this keeps the struct non-empty.
    pub calls: u32,
    /// The ctrl-core paths.
    #[cfg(feature = "paths")]
    pub p: paths::State,
}

impl Bench {
    fn fresh() -> Self {
        Bench {
            calls: 0,
            #[cfg(feature = "paths")]
            p: paths::State::fresh(),
        }
    }
}

/// A measured path.
pub struct Path {
    /// Name printed for the tool.
    pub name: &'static str,
    /// One tick of the path.
    pub tick: fn(&mut Bench),
}

/// The harness loop. Every path runs through this same machine code (the tick is an
/// indirect call), so the loop overhead is the same for every path and is removed by
/// subtracting the `empty` path.
#[inline(never)]
fn run(state: &mut Bench, tick: fn(&mut Bench), n: u32) {
    let tick = black_box(tick);
    let n = black_box(n);
    let mut i = 0;
    while i < n {
        tick(state);
        i += 1;
    }
}

/// One counted window: the same machine code for every path and both run lengths, so
/// its fixed overhead cancels in the N / 2N difference.
#[inline(never)]
fn window(state: &mut Bench, tick: fn(&mut Bench), n: u32) {
    bench_marker_begin();
    run(state, tick, n);
    bench_marker_end();
}

/// Runs one path for N and for 2N ticks, each from a copy of the same fresh state.
fn measure(p: &Path, template: &Bench) {
    for n in [N, 2 * N] {
        let mut state = template.clone();
        window(&mut state, p.tick, n);
        black_box(&mut state);
    }
}

fn announce(paths: &[Path]) {
    for p in paths {
        hprintln!("path {}", p.name);
    }
}

#[entry]
fn main() -> ! {
    hprintln!("bench-mcu N={} K={}", N, calib::K);
    announce(calib::PATHS);
    #[cfg(feature = "paths")]
    announce(paths::PATHS);
    let template = Bench::fresh();
    hprintln!("begin");
    for p in calib::PATHS {
        measure(p, &template);
    }
    #[cfg(feature = "paths")]
    for p in paths::PATHS {
        measure(p, &template);
    }
    #[cfg(any(feature = "size-tick", feature = "size-tick-f32"))]
    size::once();
    #[cfg(feature = "panic-probe")]
    panic_probe(black_box(3));
    hprintln!("end {}", MARK.load(Ordering::Relaxed));
    debug::exit(debug::EXIT_SUCCESS);
    #[allow(clippy::empty_loop)]
    loop {}
}

/// A bench setup step failed (outside any counted window): say so and exit with failure.
#[cfg(feature = "paths")]
pub fn report_setup_error(what: &str) {
    hprintln!("setup error: {}", what);
    debug::exit(debug::EXIT_FAILURE);
}

/// Self-test of the panic scan: an index the compiler cannot prove in bounds, so the
/// build references `core::panicking::panic_bounds_check` from this function.
#[cfg(feature = "panic-probe")]
#[inline(never)]
fn panic_probe(i: usize) {
    let table = black_box([1u8, 2, 3, 4]);
    black_box(table[i]);
}

/// A fault (for example a stack overflow) ends the run with failure instead of spinning,
/// so the tool does not wait for its timeout while the execution log grows.
#[exception]
unsafe fn HardFault(_frame: &ExceptionFrame) -> ! {
    debug::exit(debug::EXIT_FAILURE);
    #[allow(clippy::empty_loop)]
    loop {}
}

/// Any other exception: the same.
#[exception]
unsafe fn DefaultHandler(_irq: i16) {
    debug::exit(debug::EXIT_FAILURE);
}

/// On panic: report failure through semihosting. The panic-free scan checks that nothing
/// in the release build references `core::panicking`; this handler must still exist.
#[panic_handler]
fn panic(_: &core::panic::PanicInfo) -> ! {
    debug::exit(debug::EXIT_FAILURE);
    #[allow(clippy::empty_loop)]
    loop {}
}
