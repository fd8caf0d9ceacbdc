//! Wall-clock time per pipeline stage and the process's peak memory, for `tailpack run --timings` and
//! `tailpack bench`. Recording is a few nanoseconds per stage and always on; nothing here changes a result.
//! Stages of funds built in parallel add up, so their sum can exceed the wall time.

use std::sync::Mutex;
use std::time::{Duration, Instant};

/// The stages in pipeline order, as printed.
pub const STAGES: [&str; 11] = [
    "ingest",
    "scenarios",
    "models",
    "frontier",
    "stress",
    "backtest",
    "bands",
    "charts",
    "typesetting",
    "hashing",
    "writing",
];

static RECORD: Mutex<[Duration; STAGES.len()]> = Mutex::new([Duration::ZERO; STAGES.len()]);

/// Runs `f`, adding its wall time to `stage` (one of [`STAGES`]).
pub fn time<T>(stage: &str, f: impl FnOnce() -> T) -> T {
    let start = Instant::now();
    let out = f();
    add(stage, start.elapsed());
    out
}

/// Adds `d` to `stage`.
pub fn add(stage: &str, d: Duration) {
    let i = STAGES
        .iter()
        .position(|s| *s == stage)
        .unwrap_or_else(|| panic!("unknown stage {stage}"));
    let mut r = RECORD.lock().unwrap_or_else(|e| e.into_inner());
    r[i] += d;
}

/// The time recorded per stage so far, in pipeline order, and resets the record.
pub fn take() -> Vec<(&'static str, Duration)> {
    let mut r = RECORD.lock().unwrap_or_else(|e| e.into_inner());
    let out = STAGES.iter().copied().zip(r.iter().copied()).collect();
    *r = [Duration::ZERO; STAGES.len()];
    out
}

/// The peak resident memory in bytes of this process (`VmHWM` in /proc/self/status; Linux only) or of its
/// largest finished child (the typesetter), whichever is larger.
pub fn peak_memory() -> Option<u64> {
    let status = std::fs::read_to_string("/proc/self/status").ok()?;
    let line = status.lines().find(|l| l.starts_with("VmHWM:"))?;
    let kib: u64 = line.split_whitespace().nth(1)?.parse().ok()?;
    Some((kib * 1024).max(children_peak()))
}

/// The peak resident memory of the largest child this process waited for, in bytes.
#[cfg(target_os = "linux")]
fn children_peak() -> u64 {
    // SAFETY: getrusage fills the zeroed struct it is given and touches nothing else.
    let mut usage: libc::rusage = unsafe { std::mem::zeroed() };
    if unsafe { libc::getrusage(libc::RUSAGE_CHILDREN, &mut usage) } != 0 {
        return 0;
    }
    // Linux reports ru_maxrss in kibibytes.
    u64::try_from(usage.ru_maxrss).unwrap_or(0) * 1024
}

#[cfg(not(target_os = "linux"))]
fn children_peak() -> u64 {
    0
}

/// The stage table printed by `tailpack run --timings`.
pub fn table(stages: &[(&str, Duration)], wall: Duration, peak: Option<u64>) -> String {
    let mut out = String::from("stage timings (wall clock)\n");
    for (name, d) in stages {
        out += &format!("  {name:<12} {:>9.3} s\n", d.as_secs_f64());
    }
    out += &format!("  {:<12} {:>9.3} s\n", "total", wall.as_secs_f64());
    if let Some(bytes) = peak {
        out += &format!("  peak memory  {:>9.1} MB\n", bytes as f64 / 1e6);
    }
    out
}
