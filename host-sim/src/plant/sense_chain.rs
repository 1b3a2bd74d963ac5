//! The current-sense chain: shunt, amplifier, anti-aliasing filter, ADC.
//!
//! ```text
//! i --shunt--> i R_sh --amp--> V_off + e_off + G i R_sh --filter--> v_f --ADC--> counts
//! ```
//!
//! * The amplifier output is its nominal offset `V_off` (what the firmware's
//!   calibration assumes) plus an offset error `e_off` it does not know about.
//! * The filter is none, a first-order RC (`H = 1 / (1 + s / wc)`), or a
//!   second-order low-pass (`H = w0^2 / (s^2 + s w0 / Q + w0^2)`, the response of
//!   a unity-gain active filter). It is advanced exactly with its input taken as
//!   varying linearly between the runner's events (first-order hold), which is
//!   exact for the straight current segments of a switching bridge when `L/R` is
//!   long against a PWM period and close otherwise.
//! * The ADC adds seeded Gaussian noise (rms volts at its input), then converts
//!   `round(v / V_ref * 2^bits)`, limited to `0 ..= 2^bits - 1` (an ideal
//!   mid-tread converter, common practice).
//!
//! The same nominal values give the firmware's calibration
//! ([`SenseChain::nominal_calibration`]), so a chain without errors reads back the
//! true current to within a count.

use pi_core::{ConfigError, CurrentSense};

use crate::model_error::ModelError;
use crate::plant::linear::{Discrete, Recent};
use crate::plant::noise::Gaussian;

/// The anti-aliasing filter.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum SenseFilter {
    /// No filter.
    None,
    /// First-order RC with its -3 dB point at `cutoff_hz` = 1 / (2 pi R C).
    Rc {
        /// -3 dB frequency, hertz.
        cutoff_hz: f64,
    },
    /// Second-order low-pass with natural frequency `cutoff_hz` and quality
    /// factor `q` (0.707 is the maximally flat, Butterworth, choice).
    SecondOrder {
        /// Natural frequency, hertz.
        cutoff_hz: f64,
        /// Quality factor.
        q: f64,
    },
}

impl SenseFilter {
    /// The filter as one first-order lag, seconds: `1 / (2 pi fc)` for the RC,
    /// `1 / (Q w0)` (its group delay at low frequency) for the second order, 0
    /// for none. What the design lumps into the loop.
    pub fn lag_s(&self) -> f64 {
        match *self {
            SenseFilter::None => 0.0,
            SenseFilter::Rc { cutoff_hz } => 1.0 / (2.0 * std::f64::consts::PI * cutoff_hz),
            SenseFilter::SecondOrder { cutoff_hz, q } => 1.0 / (q * 2.0 * std::f64::consts::PI * cutoff_hz),
        }
    }
}

/// Sense chain parameters, SI units.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct SenseParams {
    /// Shunt resistance, ohm (> 0).
    pub shunt_ohm: f64,
    /// Amplifier gain, V/V (> 0).
    pub amplifier_gain: f64,
    /// Amplifier output at zero current, volts (nominal, known to the firmware).
    pub amplifier_offset_v: f64,
    /// Offset error on top of the nominal offset, volts (unknown to the firmware).
    pub offset_error_v: f64,
    /// The anti-aliasing filter.
    pub filter: SenseFilter,
    /// ADC resolution, bits (8 to 16).
    pub adc_bits: u8,
    /// ADC reference (full scale), volts (> 0).
    pub adc_reference_v: f64,
    /// Gaussian noise at the ADC input, rms volts (>= 0).
    pub noise_rms_v: f64,
    /// Seed of the noise generator (the same seed gives the same run).
    pub seed: u64,
}

impl SenseParams {
    /// A chain with the demo board's topology and no errors, noise or filter.
    pub fn ideal(shunt_ohm: f64, amplifier_gain: f64, adc_bits: u8, adc_reference_v: f64) -> Self {
        Self {
            shunt_ohm,
            amplifier_gain,
            amplifier_offset_v: 0.5 * adc_reference_v,
            offset_error_v: 0.0,
            filter: SenseFilter::None,
            adc_bits,
            adc_reference_v,
            noise_rms_v: 0.0,
            seed: 1,
        }
    }
}

/// The chain and its filter state.
#[derive(Clone, Debug)]
pub struct SenseChain {
    params: SenseParams,
    a: [[f64; 2]; 2],
    b: [[f64; 1]; 2],
    states: usize,
    x: [f64; 2],
    input_v: f64,
    noise: Gaussian,
    cache: Recent<u64, Discrete<2, 1>, 4>,
}

impl SenseChain {
    /// A chain at rest (filter settled at the zero-current output).
    pub fn new(params: SenseParams) -> Result<Self, ModelError> {
        ModelError::positive("sense.shunt_ohm", params.shunt_ohm)?;
        ModelError::positive("sense.amplifier_gain", params.amplifier_gain)?;
        ModelError::finite("sense.offset_error_v", params.offset_error_v)?;
        let vref = ModelError::positive("sense.adc_reference_v", params.adc_reference_v)?;
        // The zero-current level must be a reading the ADC can make.
        ModelError::within("sense.amplifier_offset_v", params.amplifier_offset_v, 0.0, vref)?;
        ModelError::non_negative("sense.noise_rms_v", params.noise_rms_v)?;
        if !(8..=16).contains(&params.adc_bits) {
            return Err(ModelError::new(
                "sense.adc_bits",
                params.adc_bits,
                "between 8 and 16",
            ));
        }
        let (a, b, states) = match params.filter {
            SenseFilter::None => ([[0.0; 2]; 2], [[0.0]; 2], 0),
            SenseFilter::Rc { cutoff_hz } => {
                let wc =
                    2.0 * std::f64::consts::PI * ModelError::positive("sense.filter.cutoff_hz", cutoff_hz)?;
                ([[-wc, 0.0], [0.0, 0.0]], [[wc], [0.0]], 1)
            }
            SenseFilter::SecondOrder { cutoff_hz, q } => {
                let w0 =
                    2.0 * std::f64::consts::PI * ModelError::positive("sense.filter.cutoff_hz", cutoff_hz)?;
                let q = ModelError::positive("sense.filter.q", q)?;
                ([[0.0, 1.0], [-w0 * w0, -w0 / q]], [[0.0], [w0 * w0]], 2)
            }
        };
        let mut chain = Self {
            params,
            a,
            b,
            states,
            x: [0.0; 2],
            input_v: 0.0,
            noise: Gaussian::new(params.seed),
            cache: Recent::default(),
        };
        chain.settle(0.0);
        Ok(chain)
    }

    /// The amplifier output for a current, volts.
    pub fn amplifier_v(&self, current_a: f64) -> f64 {
        let p = &self.params;
        p.amplifier_offset_v + p.offset_error_v + p.amplifier_gain * p.shunt_ohm * current_a
    }

    /// Sets the filter to its steady state for a constant current.
    pub fn settle(&mut self, current_a: f64) {
        self.input_v = self.amplifier_v(current_a);
        self.x = [self.input_v, 0.0];
    }

    /// Advances the filter over `dt_s` while the current goes linearly from its
    /// last value to `current_a`.
    pub fn advance(&mut self, current_a: f64, dt_s: f64) {
        let u1 = self.amplifier_v(current_a);
        if self.states > 0 && dt_s > 0.0 {
            let (a, b) = (self.a, self.b);
            let d = self
                .cache
                .get(dt_s.to_bits(), || Discrete::first_order_hold(a, b, dt_s));
            self.x = d.step(&self.x, &[self.input_v], &[u1]);
        }
        self.input_v = u1;
    }

    /// The filter output, volts (the ADC input before noise).
    pub fn filtered_v(&self) -> f64 {
        if self.states == 0 { self.input_v } else { self.x[0] }
    }

    /// Converts the present ADC input: noise, quantisation, limits.
    pub fn convert(&mut self) -> u16 {
        let p = &self.params;
        let mut v = self.filtered_v();
        if p.noise_rms_v > 0.0 {
            v += p.noise_rms_v * self.noise.sample();
        }
        let full = ((1u32 << p.adc_bits) - 1) as f64;
        let counts = (v / p.adc_reference_v * (1u32 << p.adc_bits) as f64).round();
        counts.clamp(0.0, full) as u16
    }

    /// The current the filtered signal stands for under the nominal calibration,
    /// amperes, without noise or quantisation (for linear checks).
    pub fn filtered_a(&self) -> f64 {
        let p = &self.params;
        (self.filtered_v() - p.amplifier_offset_v) / (p.amplifier_gain * p.shunt_ohm)
    }

    /// The calibration the firmware would use for this chain: nominal shunt, gain
    /// and offset (the offset error is unknown to it).
    pub fn nominal_calibration(&self) -> Result<CurrentSense, ConfigError> {
        self.calibration_for(self.params.shunt_ohm, self.params.amplifier_gain)
    }

    /// The calibration of a firmware that assumes `shunt_ohm` and
    /// `amplifier_gain` (a board's parts differ from what its firmware was
    /// written for by their tolerances).
    pub fn calibration_for(&self, shunt_ohm: f64, amplifier_gain: f64) -> Result<CurrentSense, ConfigError> {
        let p = &self.params;
        let offset_counts = p.amplifier_offset_v / p.adc_reference_v * (1u32 << p.adc_bits) as f64;
        CurrentSense::from_shunt(
            p.adc_bits,
            p.adc_reference_v as f32,
            shunt_ohm as f32,
            amplifier_gain as f32,
            offset_counts as f32,
        )
    }

    /// The parameters.
    pub fn params(&self) -> &SenseParams {
        &self.params
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn ideal_chain_reads_back_the_current() {
        let mut c = SenseChain::new(SenseParams::ideal(0.01, 20.0, 12, 3.3)).unwrap();
        let cal = c.nominal_calibration().unwrap();
        for i in [-5.0, -1.0, 0.0, 0.37, 2.0, 6.0] {
            c.advance(i, 1e-6);
            let a = cal.to_amperes(c.convert()) as f64;
            assert!(
                (a - i).abs() <= 0.5 * cal.amps_per_count() as f64 + 1e-6,
                "{i} read {a}"
            );
        }
    }

    #[test]
    fn readings_clip_at_the_rails() {
        let mut c = SenseChain::new(SenseParams::ideal(0.01, 20.0, 12, 3.3)).unwrap();
        c.advance(100.0, 1e-6);
        assert_eq!(c.convert(), 4095);
        c.advance(-100.0, 1e-6);
        assert_eq!(c.convert(), 0);
    }

    #[test]
    fn refuses_a_wide_adc() {
        let mut p = SenseParams::ideal(0.01, 20.0, 12, 3.3);
        p.adc_bits = 24;
        assert_eq!(SenseChain::new(p).unwrap_err().field, "sense.adc_bits");
    }
}
