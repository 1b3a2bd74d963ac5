//! What a run will cost before it starts: how many ticks, how many trace rows,
//! how much memory and CSV, and about how long, from a short timed probe of
//! the same scenario. A run whose trace would not fit is refused with the
//! setting that fixes it; a large one is announced.

use std::time::Instant;

use crate::scenario::Scenario;
use crate::sim::trace::TracePoint;

/// A trace larger than this in memory is refused, bytes (1 GiB).
pub const MAX_TRACE_BYTES: f64 = 1024.0 * 1024.0 * 1024.0;
/// A run is announced above this much CSV, bytes.
pub const ANNOUNCE_CSV_BYTES: f64 = 100e6;
/// A run is announced above this many seconds.
pub const ANNOUNCE_SECONDS: f64 = 10.0;
/// The CSV's bytes per row, about (seen on the demo: 124 on average).
pub const CSV_BYTES_PER_ROW: f64 = 125.0;
/// Ticks the probe runs.
pub const PROBE_TICKS: u64 = 2000;

/// The estimate.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Plan {
    /// Control ticks in the run.
    pub ticks: f64,
    /// Rows the trace keeps.
    pub rows: f64,
    /// The trace in memory, bytes.
    pub memory_bytes: f64,
    /// The CSV, bytes.
    pub csv_bytes: f64,
    /// About how long the simulation takes, s (from the probe).
    pub seconds: f64,
}

impl Plan {
    /// The estimate for a scenario; runs a short probe of it.
    pub fn of(scenario: &Scenario) -> Self {
        let ticks = (scenario.duration_s / scenario.timing.control_period_s()).round();
        let rows = (ticks / scenario.record_every_ticks as f64).ceil();
        let probe = PROBE_TICKS.min(ticks as u64).max(1);
        let seconds = match scenario.start() {
            Ok((mut cl, runner)) => {
                let mut runner = runner.record_every(u64::MAX);
                let t0 = Instant::now();
                runner.run_ticks(&mut cl, probe);
                t0.elapsed().as_secs_f64() / probe as f64 * ticks
            }
            Err(_) => f64::NAN,
        };
        Self {
            ticks,
            rows,
            memory_bytes: rows * std::mem::size_of::<TracePoint>() as f64,
            csv_bytes: rows * CSV_BYTES_PER_ROW,
            seconds,
        }
    }

    /// Why the run cannot be made, in one sentence, if it cannot.
    pub fn refusal(&self, record_every_ticks: u64) -> Option<String> {
        if self.memory_bytes <= MAX_TRACE_BYTES {
            return None;
        }
        let every = (self.memory_bytes / MAX_TRACE_BYTES * record_every_ticks as f64).ceil();
        Some(format!(
            "this run keeps {:.3e} trace rows, about {:.1} GB in memory and {:.1} GB of CSV, more than the {:.0} GB allowed; set record_every_ticks to {every} or more (or shorten duration_s)",
            self.rows,
            self.memory_bytes / 1e9,
            self.csv_bytes / 1e9,
            MAX_TRACE_BYTES / 1e9
        ))
    }

    /// A line announcing a large run, if it is large.
    pub fn announcement(&self) -> Option<String> {
        (self.csv_bytes > ANNOUNCE_CSV_BYTES || self.seconds > ANNOUNCE_SECONDS).then(|| {
            format!(
                "a long run: {:.3e} ticks, about {:.1} s to simulate, {:.3e} trace rows ({:.0} MB of CSV)",
                self.ticks,
                self.seconds,
                self.rows,
                self.csv_bytes / 1e6
            )
        })
    }
}
