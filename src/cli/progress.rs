//! Stage-by-stage status lines on standard error: `[stage] what ... done in 0.12 s`.

use std::time::{Duration, Instant};

/// Times one stage and prints its status line when finished.
pub struct Stage {
    name: &'static str,
    start: Instant,
}

impl Stage {
    /// Prints the stage's opening line and starts its clock.
    pub fn start(name: &'static str, what: &str) -> Stage {
        eprintln!("[{name}] {what}");
        Stage { name, start: Instant::now() }
    }

    /// Prints the closing line with the elapsed time and a short result, and returns the time.
    pub fn done(self, result: &str) -> Duration {
        let elapsed = self.start.elapsed();
        eprintln!("[{}] {result} ({:.3} s)", self.name, elapsed.as_secs_f64());
        elapsed
    }
}
