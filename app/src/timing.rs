//! Stage timings of a command, printed to standard error when the environment variable
//! `FANMARK_TIMING` is set (for benchmarking whole processes; silent otherwise).

use std::time::Instant;

/// A stopwatch over the named stages of one command.
pub struct Stages {
    on: bool,
    last: Instant,
    start: Instant,
}

impl Stages {
    /// Start timing (reads `FANMARK_TIMING` once).
    pub fn start() -> Stages {
        let now = Instant::now();
        Stages {
            on: std::env::var_os("FANMARK_TIMING").is_some(),
            last: now,
            start: now,
        }
    }

    /// End the stage `name`: print its wall time in seconds since the previous lap.
    pub fn lap(&mut self, name: &str) {
        let now = Instant::now();
        if self.on {
            eprintln!(
                "timing {name:<10} {:.3} s (total {:.3} s)",
                (now - self.last).as_secs_f64(),
                (now - self.start).as_secs_f64()
            );
        }
        self.last = now;
    }
}
