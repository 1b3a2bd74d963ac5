//! When the firmware samples, computes and updates the PWM.
//!
//! The control tick is triggered by the PWM timer every `pwm_periods_per_tick`
//! PWM periods (so the control period is a whole number of PWM periods, common
//! practice with timer-triggered ADCs). The ADC samples at `sample_phase` of the
//! PWM period that starts the tick (0 = the period's start, 0.5 = its centre).
//! The new duty is ready `computation_delay_s` after the sample, plus optional
//! Gaussian jitter, and the timer's shadow register loads it at the first PWM
//! period start strictly after that. With the sample at the period start and a
//! short computation this is the classic one-sample delay; a computation that
//! overruns a period boundary slips the update by one more PWM period.

use crate::model_error::ModelError;
use crate::plant::noise::Gaussian;

/// The longest computation delay accepted, in control periods.
pub const MAX_DELAY_PERIODS: f64 = 16.0;

/// Timing parameters, seconds.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct TimingParams {
    /// Control period, seconds: a whole multiple of the PWM period.
    pub control_period_s: f64,
    /// Where in the PWM period the ADC samples, as a fraction in `[0, 1)`.
    pub sample_phase: f64,
    /// Time from the sample to the new duty being written, seconds (>= 0).
    pub computation_delay_s: f64,
    /// Rms jitter of that time, seconds (>= 0); a negative draw counts as 0.
    pub jitter_rms_s: f64,
    /// Seed of the jitter.
    pub seed: u64,
}

impl TimingParams {
    /// Sample at the start of each period, compute in no time: the duty of tick
    /// `k` drives the period after it.
    pub fn one_sample_delay(control_period_s: f64) -> Self {
        Self {
            control_period_s,
            sample_phase: 0.0,
            computation_delay_s: 0.0,
            jitter_rms_s: 0.0,
            seed: 1,
        }
    }
}

/// The schedule of one run.
#[derive(Clone, Debug)]
pub struct Timing {
    params: TimingParams,
    pwm_period_s: f64,
    periods_per_tick: u64,
    /// [`Timing::load_period`]'s offset without jitter, computed once.
    nominal_load_periods: u64,
    jitter: Gaussian,
}

impl Timing {
    /// Checks the timing against the PWM period.
    pub fn new(params: TimingParams, pwm_period_s: f64) -> Result<Self, ModelError> {
        let tc = ModelError::positive("timing.control_period_s", params.control_period_s)?;
        let ratio = tc / pwm_period_s;
        let n = ratio.round();
        if n < 1.0 || (ratio - n).abs() > 1e-6 * n {
            return Err(ModelError::new(
                "timing.control_period_s",
                tc,
                format!("a whole number of PWM periods ({pwm_period_s:e} s)"),
            ));
        }
        if !(params.sample_phase.is_finite() && (0.0..1.0).contains(&params.sample_phase)) {
            return Err(ModelError::new(
                "timing.sample_phase",
                params.sample_phase,
                "in [0, 1)",
            ));
        }
        ModelError::non_negative("timing.computation_delay_s", params.computation_delay_s)?;
        ModelError::non_negative("timing.jitter_rms_s", params.jitter_rms_s)?;
        // A loop whose update lands many periods late is not a current loop any more.
        if params.computation_delay_s >= MAX_DELAY_PERIODS * tc {
            return Err(ModelError::new(
                "timing.computation_delay_s",
                params.computation_delay_s,
                format!("shorter than {MAX_DELAY_PERIODS} control periods"),
            ));
        }
        if params.jitter_rms_s >= tc {
            return Err(ModelError::new(
                "timing.jitter_rms_s",
                params.jitter_rms_s,
                "shorter than one control period",
            ));
        }
        let mut timing = Self {
            params,
            pwm_period_s,
            periods_per_tick: n as u64,
            nominal_load_periods: 0,
            jitter: Gaussian::new(params.seed),
        };
        timing.nominal_load_periods = timing.periods_to_load(params.computation_delay_s);
        Ok(timing)
    }

    /// PWM periods per control tick.
    pub fn periods_per_tick(&self) -> u64 {
        self.periods_per_tick
    }

    /// Control period, seconds (exactly `periods_per_tick` PWM periods).
    pub fn control_period_s(&self) -> f64 {
        self.periods_per_tick as f64 * self.pwm_period_s
    }

    /// Offset of the sample into its PWM period, seconds.
    pub fn sample_offset_s(&self) -> f64 {
        self.params.sample_phase * self.pwm_period_s
    }

    /// The PWM period index at which the duty computed from a sample taken in
    /// period `sample_period` is loaded.
    pub fn load_period(&mut self, sample_period: u64) -> u64 {
        let periods = if self.params.jitter_rms_s > 0.0 {
            let delay = self.params.computation_delay_s + self.params.jitter_rms_s * self.jitter.sample();
            self.periods_to_load(delay)
        } else {
            self.nominal_load_periods
        };
        sample_period.saturating_add(periods)
    }

    /// PWM periods from the start of the sample's period to the one that loads
    /// a duty ready `delay_s` after the sample.
    fn periods_to_load(&self, delay_s: f64) -> u64 {
        // Jitter draws beyond the accepted delay are cut there.
        let limit = MAX_DELAY_PERIODS * self.control_period_s();
        let ready = self.sample_offset_s() + delay_s.clamp(0.0, limit);
        // The first period start strictly after `ready` (measured from the sample
        // period's start), with a guard of a part per billion against rounding.
        (ready / self.pwm_period_s * (1.0 + 1e-9)).floor() as u64 + 1
    }

    /// The nominal time from the sample to the new duty reaching the bridge,
    /// seconds (no jitter): what the design models as the loop's delay.
    pub fn sample_to_update_s(&self) -> f64 {
        self.nominal_load_periods as f64 * self.pwm_period_s - self.sample_offset_s()
    }

    /// The parameters.
    pub fn params(&self) -> &TimingParams {
        &self.params
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn sample_at_start_loads_at_the_next_period() {
        let mut t = Timing::new(TimingParams::one_sample_delay(50e-6), 50e-6).unwrap();
        assert_eq!(t.load_period(10), 11);
    }

    #[test]
    fn a_late_computation_slips_one_period() {
        let mut p = TimingParams::one_sample_delay(50e-6);
        p.sample_phase = 0.5;
        p.computation_delay_s = 30e-6; // ready at 55 us
        let mut t = Timing::new(p, 50e-6).unwrap();
        assert_eq!(t.load_period(0), 2);
    }

    #[test]
    fn control_period_must_be_whole_pwm_periods() {
        let e = Timing::new(TimingParams::one_sample_delay(70e-6), 50e-6).unwrap_err();
        assert_eq!(e.field, "timing.control_period_s");
        assert_eq!(
            Timing::new(TimingParams::one_sample_delay(100e-6), 50e-6)
                .unwrap()
                .periods_per_tick(),
            2
        );
    }
}
