//! A progress bar on standard error, shown only when it is a terminal.

use std::io::{IsTerminal, Write};

/// Draws `label [#####.....]  42 %` in place.
pub struct Progress {
    label: String,
    shown: bool,
    last: i32,
}

impl Progress {
    /// A bar that draws only if stderr is a terminal and `enabled`.
    pub fn new(label: &str, enabled: bool) -> Self {
        Self {
            label: label.to_string(),
            shown: enabled && std::io::stderr().is_terminal(),
            last: -1,
        }
    }

    /// Shows the fraction done.
    pub fn update(&mut self, fraction: f64) {
        if !self.shown {
            return;
        }
        let pct = (fraction.clamp(0.0, 1.0) * 100.0) as i32;
        if pct == self.last {
            return;
        }
        self.last = pct;
        let filled = (pct / 4) as usize;
        let bar = format!("{}{}", "#".repeat(filled), ".".repeat(25 - filled));
        let mut err = std::io::stderr().lock();
        let _ = write!(err, "\r{} [{bar}] {pct:>3} %", self.label);
        let _ = err.flush();
    }

    /// Clears the bar.
    pub fn finish(&mut self) {
        if self.shown && self.last >= 0 {
            let mut err = std::io::stderr().lock();
            let _ = write!(err, "\r{}\r", " ".repeat(self.label.len() + 36));
            let _ = err.flush();
        }
    }
}
