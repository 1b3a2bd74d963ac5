//! Current sensing: ADC counts to amperes, and the calibrations that set it up.
//!
//! The conversion is `i_a = (counts - offset_counts) * amps_per_count`. Positive
//! amperes mean current in the forward direction of the load. A sense amplifier
//! that inverts is expressed by a negative `amps_per_count`.
//!
//! Readings at or beyond the ADC rails (within `rail_margin_counts` of 0 or of full
//! scale) are flagged by [`CurrentSense::at_rail`]: a shunt amplifier that reads a
//! rail is open, shorted or clipping, and the supervisor faults on it.
//!
//! ```
//! use pi_core::sense::CurrentSense;
//!
//! // 12-bit ADC, 3.3 V reference, 10 mOhm shunt, gain 20 amplifier centred at
//! // mid-scale (invented demo board).
//! let sense = CurrentSense::from_shunt(12, 3.3, 0.010, 20.0, 2048.0)?;
//! let amps = sense.to_amperes(2048 + 248);
//! assert!((amps - 1.0).abs() < 0.01);
//! # Ok::<(), pi_core::ConfigError>(())
//! ```

use crate::error::{ConfigError, Requirement, finite, nonzero, positive, within};

/// Validated counts-to-amperes conversion for one current channel.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct CurrentSense {
    offset_counts: f32,
    amps_per_count: f32,
    full_scale_counts: u16,
    rail_margin_counts: u16,
    /// The lowest reading clear of the rails, `rail_margin_counts + 1`.
    lowest_clear: u16,
    /// How far above it the highest clear reading is, `full_scale - 2 margin - 2`.
    clear_span: u16,
}

impl CurrentSense {
    /// Conversion for an ADC of `adc_bits` (2 to 16) with the given zero-current
    /// offset (counts, inside the ADC range) and scale (A per count, finite, not
    /// zero; negative for an inverting amplifier). The rail margin starts at 0:
    /// only readings of exactly 0 or full scale count as rail readings.
    pub fn new(adc_bits: u8, offset_counts: f32, amps_per_count: f32) -> Result<Self, ConfigError> {
        let full_scale_counts = full_scale(adc_bits)?;
        let offset_counts = within("offset_counts", offset_counts, 0.0, full_scale_counts as f32)?;
        let amps_per_count = nonzero("amps_per_count", amps_per_count)?;
        Ok(Self {
            offset_counts,
            amps_per_count,
            full_scale_counts,
            rail_margin_counts: 0,
            lowest_clear: 1,
            clear_span: full_scale_counts - 2,
        })
    }

    /// Conversion from the physical chain: a shunt of `shunt_ohm`, an amplifier of
    /// voltage gain `amplifier_gain` (negative if inverting) and an ADC of
    /// `adc_bits` with reference `vref_v`, one count being `vref_v / 2^bits`
    /// (common practice for successive-approximation ADCs).
    pub fn from_shunt(
        adc_bits: u8,
        vref_v: f32,
        shunt_ohm: f32,
        amplifier_gain: f32,
        offset_counts: f32,
    ) -> Result<Self, ConfigError> {
        let vref_v = positive("vref_v", vref_v)?;
        let shunt_ohm = positive("shunt_ohm", shunt_ohm)?;
        let gain = nonzero("amplifier_gain", amplifier_gain)?;
        // One count is vref / 2^bits.
        let lsb_v = vref_v / (full_scale(adc_bits)? as f32 + 1.0);
        Self::new(adc_bits, offset_counts, lsb_v / (shunt_ohm * gain))
    }

    /// Two-point gain calibration: two readings taken at two known currents (for
    /// example 0 A and a reference current through a precision meter). The readings
    /// must differ and the currents must differ.
    pub fn from_two_points(adc_bits: u8, first: (u16, f32), second: (u16, f32)) -> Result<Self, ConfigError> {
        let (c1, a1) = first;
        let (c2, a2) = second;
        let a1 = finite("first_current_a", a1)?;
        let a2 = finite("second_current_a", a2)?;
        if c1 == c2 {
            return Err(ConfigError::new(
                "second_counts",
                c2 as f32,
                Requirement::DifferentFrom("first_counts"),
            ));
        }
        if a1 == a2 {
            return Err(ConfigError::new(
                "second_current_a",
                a2,
                Requirement::DifferentFrom("first_current_a"),
            ));
        }
        let amps_per_count = (a2 - a1) / (c2 as f32 - c1 as f32);
        let offset = c1 as f32 - a1 / amps_per_count;
        Self::new(adc_bits, offset, amps_per_count)
    }

    /// The same conversion with a new zero-current offset (counts), for example
    /// from [`OffsetCalibration`].
    pub fn with_offset(self, offset_counts: f32) -> Result<Self, ConfigError> {
        let offset_counts = within("offset_counts", offset_counts, 0.0, self.full_scale_counts as f32)?;
        Ok(Self {
            offset_counts,
            ..self
        })
    }

    /// The same conversion treating readings within `margin` counts of either rail
    /// as rail readings. The margin must be below a quarter of full scale.
    pub fn with_rail_margin(self, margin_counts: u16) -> Result<Self, ConfigError> {
        let limit = self.full_scale_counts / 4;
        if margin_counts >= limit {
            return Err(ConfigError::new(
                "rail_margin_counts",
                margin_counts as f32,
                Requirement::Within {
                    min: 0.0,
                    max: (limit.saturating_sub(1)) as f32,
                },
            ));
        }
        // Below a quarter of full scale, so none of these can overflow.
        Ok(Self {
            rail_margin_counts: margin_counts,
            lowest_clear: margin_counts + 1,
            clear_span: self.full_scale_counts - 2 * margin_counts - 2,
            ..self
        })
    }

    /// Amperes for a reading, positive = forward.
    #[inline]
    pub fn to_amperes(&self, counts: u16) -> f32 {
        (counts as f32 - self.offset_counts) * self.amps_per_count
    }

    /// True when the reading is at or beyond a rail (open or shorted sensor, clipping).
    #[inline]
    pub fn at_rail(&self, counts: u16) -> bool {
        // Clear of both rails is `margin < counts < full_scale - margin`: one
        // unsigned comparison after moving the lowest clear reading to zero.
        counts.wrapping_sub(self.lowest_clear) > self.clear_span
    }

    /// Zero-current offset in counts.
    pub fn offset_counts(&self) -> f32 {
        self.offset_counts
    }

    /// Scale in amperes per count.
    pub fn amps_per_count(&self) -> f32 {
        self.amps_per_count
    }

    /// The readings clear of both rails as `(lowest, span)`: `c` is clear
    /// exactly when `c.wrapping_sub(lowest) <= span` (as [`CurrentSense::at_rail`]).
    pub(crate) fn clear_band(&self) -> (u16, u16) {
        (self.lowest_clear, self.clear_span)
    }

    /// Largest reading the ADC can give (`2^bits - 1`).
    pub fn full_scale_counts(&self) -> u16 {
        self.full_scale_counts
    }

    /// The largest forward (positive) current the channel reads without
    /// reaching a rail: what matters for a one-direction drive, whose current
    /// is never negative.
    pub fn readable_forward_a(&self) -> f32 {
        let lo = (self.rail_margin_counts as f32 + 1.0 - self.offset_counts) * self.amps_per_count;
        let hi = (self.full_scale_counts as f32 - self.rail_margin_counts as f32 - 1.0 - self.offset_counts)
            * self.amps_per_count;
        if lo > hi { lo } else { hi }
    }

    /// The largest current magnitude the channel can read without reaching a rail.
    pub fn readable_a(&self) -> f32 {
        let lo = (self.rail_margin_counts as f32 + 1.0 - self.offset_counts) * self.amps_per_count;
        let hi = (self.full_scale_counts as f32 - self.rail_margin_counts as f32 - 1.0 - self.offset_counts)
            * self.amps_per_count;
        let (lo, hi) = (lo.abs(), hi.abs());
        if lo < hi { lo } else { hi }
    }
}

/// Full-scale reading `2^bits - 1` of an ADC of 2 to 16 bits (one bit leaves no
/// reading clear of the rails).
fn full_scale(adc_bits: u8) -> Result<u16, ConfigError> {
    if !(2..=16).contains(&adc_bits) {
        return Err(ConfigError::new(
            "adc_bits",
            adc_bits as f32,
            Requirement::Within { min: 2.0, max: 16.0 },
        ));
    }
    Ok(((1u32 << adc_bits) - 1) as u16)
}

/// Where an offset calibration stands after a sample.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum OffsetProgress {
    /// Still collecting; `taken` samples so far.
    Collecting {
        /// Samples averaged so far.
        taken: u16,
    },
    /// Finished: the averaged zero-current reading in counts.
    Done {
        /// The new offset, ready for [`CurrentSense::with_offset`].
        offset_counts: f32,
    },
    /// A sample at a rail: the sensor is open or shorted. The average restarts.
    RailSample,
    /// The average lies further from the expected offset than the allowed window:
    /// current is flowing or the amplifier is faulty. The average restarts.
    OutOfWindow {
        /// The average that was refused.
        offset_counts: f32,
    },
}

/// Zero-current offset calibration: average readings taken with the bridge off.
///
/// Take the samples with the bridge disabled and the load at rest, one per control
/// tick, so that switching noise is sampled as in operation.
///
/// ```
/// use pi_core::sense::{CurrentSense, OffsetCalibration, OffsetProgress};
///
/// let sense = CurrentSense::from_shunt(12, 3.3, 0.010, 20.0, 2048.0)?;
/// let mut cal = OffsetCalibration::new(&sense, 64, 100.0)?;
/// let mut result = None;
/// for k in 0..64u16 {
///     if let OffsetProgress::Done { offset_counts } = cal.add(2050 + k % 3) {
///         result = Some(offset_counts);
///     }
/// }
/// let sense = sense.with_offset(result.unwrap())?;
/// assert!((sense.offset_counts() - 2051.0).abs() < 0.1);
/// # Ok::<(), pi_core::ConfigError>(())
/// ```
#[derive(Clone, Debug)]
pub struct OffsetCalibration {
    sense: CurrentSense,
    needed: u16,
    taken: u16,
    sum: u32,
    window_counts: f32,
}

impl OffsetCalibration {
    /// Averages `samples` readings (1 to 65535) and accepts the result only within
    /// `window_counts` of the sense channel's present offset.
    pub fn new(sense: &CurrentSense, samples: u16, window_counts: f32) -> Result<Self, ConfigError> {
        if samples == 0 {
            return Err(ConfigError::new("samples", 0.0, Requirement::AtLeastOne));
        }
        let window_counts = positive("window_counts", window_counts)?;
        Ok(Self {
            sense: *sense,
            needed: samples,
            taken: 0,
            sum: 0,
            window_counts,
        })
    }

    /// Adds one reading. After `Done`, the next call starts a new average.
    pub fn add(&mut self, counts: u16) -> OffsetProgress {
        if self.sense.at_rail(counts) {
            self.restart();
            return OffsetProgress::RailSample;
        }
        // 65535 samples of at most 65535 counts fit in u32.
        self.sum = self.sum.saturating_add(counts as u32);
        self.taken = self.taken.saturating_add(1);
        if self.taken < self.needed {
            return OffsetProgress::Collecting { taken: self.taken };
        }
        let average = self.sum as f32 / self.taken as f32;
        self.restart();
        let shift = average - self.sense.offset_counts;
        if shift.abs() > self.window_counts {
            OffsetProgress::OutOfWindow {
                offset_counts: average,
            }
        } else {
            OffsetProgress::Done {
                offset_counts: average,
            }
        }
    }

    fn restart(&mut self) {
        self.taken = 0;
        self.sum = 0;
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn rail_test_matches_its_definition_on_every_reading() {
        // At a rail: within the margin of 0 or of full scale.
        for bits in [2u8, 3, 8, 12, 16] {
            let base = CurrentSense::new(bits, 1.0, 1e-3).unwrap();
            let fs = base.full_scale_counts();
            for margin in [0u16, 1, 7, (fs / 4).saturating_sub(1)] {
                let Ok(s) = base.with_rail_margin(margin) else {
                    continue;
                };
                for c in 0..=u16::MAX {
                    let expected = c <= margin || c >= fs - margin;
                    assert_eq!(s.at_rail(c), expected, "bits {bits} margin {margin} counts {c}");
                }
            }
        }
    }

    #[test]
    fn shunt_chain_scale() {
        // 3.3 V / 4096 per count / (10 mOhm * 20) = 4.028 mA per count (Ohm's law).
        let s = CurrentSense::from_shunt(12, 3.3, 0.010, 20.0, 2048.0).unwrap();
        assert!((s.amps_per_count() - 3.3 / 4096.0 / 0.2).abs() < 1e-9);
        assert_eq!(s.to_amperes(2048), 0.0);
        assert!(s.to_amperes(1000) < 0.0);
    }

    #[test]
    fn two_point_calibration_recovers_offset_and_gain() {
        // Readings 2000 at -1 A and 2600 at +2 A: 3 A over 600 counts = 5 mA/count,
        // zero at 2000 + 1 / 0.005 = 2200 counts.
        let s = CurrentSense::from_two_points(12, (2000, -1.0), (2600, 2.0)).unwrap();
        assert!((s.amps_per_count() - 0.005).abs() < 1e-9);
        assert!((s.offset_counts() - 2200.0).abs() < 1e-3);
        assert!(CurrentSense::from_two_points(12, (2000, -1.0), (2000, 2.0)).is_err());
        assert!(CurrentSense::from_two_points(12, (2000, 1.0), (2500, 1.0)).is_err());
    }

    #[test]
    fn rails_are_detected() {
        let s = CurrentSense::new(12, 2048.0, 0.004).unwrap();
        assert!(s.at_rail(0) && s.at_rail(4095) && s.at_rail(u16::MAX));
        assert!(!s.at_rail(1) && !s.at_rail(4094));
        let s = s.with_rail_margin(8).unwrap();
        assert!(s.at_rail(8) && s.at_rail(4087));
        assert!(!s.at_rail(9) && !s.at_rail(4086));
        assert!(s.with_rail_margin(1024).is_err());
    }

    #[test]
    fn offset_calibration_restarts_on_rail_and_refuses_a_shifted_zero() {
        let s = CurrentSense::new(12, 2048.0, 0.004).unwrap();
        let mut cal = OffsetCalibration::new(&s, 4, 20.0).unwrap();
        assert_eq!(cal.add(2040), OffsetProgress::Collecting { taken: 1 });
        assert_eq!(cal.add(0), OffsetProgress::RailSample);
        for _ in 0..3 {
            assert!(matches!(cal.add(2300), OffsetProgress::Collecting { .. }));
        }
        assert_eq!(
            cal.add(2300),
            OffsetProgress::OutOfWindow {
                offset_counts: 2300.0
            }
        );
        for _ in 0..3 {
            cal.add(2050);
        }
        assert_eq!(
            cal.add(2054),
            OffsetProgress::Done {
                offset_counts: 2051.0
            }
        );
    }

    #[test]
    fn bad_configuration_is_refused() {
        assert_eq!(CurrentSense::new(0, 0.0, 1.0).unwrap_err().field, "adc_bits");
        assert_eq!(CurrentSense::new(1, 0.0, 1.0).unwrap_err().field, "adc_bits");
        assert_eq!(
            CurrentSense::new(12, 5000.0, 1.0).unwrap_err().field,
            "offset_counts"
        );
        assert_eq!(
            CurrentSense::new(12, 10.0, 0.0).unwrap_err().field,
            "amps_per_count"
        );
        assert_eq!(
            CurrentSense::new(12, 10.0, f32::NAN).unwrap_err().field,
            "amps_per_count"
        );
        assert_eq!(
            CurrentSense::from_shunt(12, 3.3, -0.01, 20.0, 10.0)
                .unwrap_err()
                .field,
            "shunt_ohm"
        );
    }
}
