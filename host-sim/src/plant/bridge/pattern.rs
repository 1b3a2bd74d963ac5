//! A PWM period laid out as intervals of bridge states.

use super::BridgeState;

/// One interval of a PWM period.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Interval {
    /// Start, seconds from the start of the period.
    pub start_s: f64,
    /// End, seconds from the start of the period.
    pub end_s: f64,
    /// The bridge's state.
    pub state: BridgeState,
}

/// The intervals of one PWM period, in order (at most five).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Pattern {
    pub(super) intervals: [Interval; 5],
    pub(super) len: usize,
    /// +1 forward, -1 reverse.
    pub sign: f64,
}

impl Pattern {
    /// The intervals.
    pub fn intervals(&self) -> &[Interval] {
        &self.intervals[..self.len]
    }

    pub(super) fn push(&mut self, start_s: f64, end_s: f64, state: BridgeState) {
        if end_s > start_s && self.len < self.intervals.len() {
            self.intervals[self.len] = Interval {
                start_s,
                end_s,
                state,
            };
            self.len += 1;
        }
    }

    /// The interval containing time `t_s` into the period.
    pub fn state_at(&self, t_s: f64) -> BridgeState {
        self.intervals()
            .iter()
            .find(|iv| t_s < iv.end_s)
            .or(self.intervals().last())
            .map_or(BridgeState::AllOff, |iv| iv.state)
    }
}
