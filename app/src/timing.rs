//! Stage timings of a command, printed to standard error when the environment variable
//! `FANMARK_TIMING` is set (for benchmarking whole processes; silent otherwise): wall time and,
//! on Linux, the CPU time of all the process's threads (which a busy machine disturbs less).

use std::time::Instant;

/// A stopwatch over the named stages of one command.
pub struct Stages {
    on: bool,
    last: Instant,
    start: Instant,
    last_cpu: f64,
}

/// CPU seconds (user + system, all threads) used by this process so far; NaN off Linux.
fn cpu_seconds() -> f64 {
    let Ok(stat) = std::fs::read_to_string("/proc/self/stat") else {
        return f64::NAN;
    };
    // Fields after the parenthesised command name; utime and stime are fields 14 and 15.
    let Some(rest) = stat.rsplit_once(')').map(|(_, r)| r) else {
        return f64::NAN;
    };
    let f: Vec<&str> = rest.split_whitespace().collect();
    let ticks = |i: usize| f.get(i).and_then(|v| v.parse::<f64>().ok());
    match (ticks(11), ticks(12)) {
        // Linux reports these in clock ticks of 1/100 s (USER_HZ).
        (Some(u), Some(s)) => (u + s) / 100.0,
        _ => f64::NAN,
    }
}

impl Stages {
    /// Start timing (reads `FANMARK_TIMING` once).
    pub fn start() -> Stages {
        let now = Instant::now();
        Stages {
            on: std::env::var_os("FANMARK_TIMING").is_some(),
            last: now,
            start: now,
            last_cpu: cpu_seconds(),
        }
    }

    /// End the stage `name`: print its wall time in seconds since the previous lap.
    pub fn lap(&mut self, name: &str) {
        let now = Instant::now();
        if self.on {
            let cpu = cpu_seconds();
            eprintln!(
                "timing {name:<10} {:.3} s wall, {:.2} s CPU (total {:.3} s wall)",
                (now - self.last).as_secs_f64(),
                cpu - self.last_cpu,
                (now - self.start).as_secs_f64()
            );
            self.last_cpu = cpu;
        }
        self.last = now;
    }
}
