//! Phase timings for contributors: set `CHROMASIFT_TIMINGS=1` and each workflow prints
//! how long its phases took on standard error. Off by default; never changes a result.

use std::sync::OnceLock;
use std::time::Instant;

/// True when `CHROMASIFT_TIMINGS` is set (and not 0).
pub fn enabled() -> bool {
    static ON: OnceLock<bool> = OnceLock::new();
    *ON.get_or_init(|| std::env::var_os("CHROMASIFT_TIMINGS").is_some_and(|v| v != "0"))
}

/// Stopwatch that reports each phase's duration when timings are on.
pub struct Phases {
    last: Instant,
    workflow: &'static str,
}

impl Phases {
    /// Starts timing `workflow`.
    pub fn start(workflow: &'static str) -> Self {
        Phases {
            last: Instant::now(),
            workflow,
        }
    }
    /// Ends the current phase, named `name`.
    pub fn mark(&mut self, name: &str) {
        if enabled() {
            eprintln!(
                "chromasift: timing: {} {name}: {:.3} s",
                self.workflow,
                self.last.elapsed().as_secs_f64()
            );
        }
        self.last = Instant::now();
    }
}
