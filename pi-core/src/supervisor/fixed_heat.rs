//! The I^2t model on integers, for the fixed-point loop: the same model as
//! [`super::thermal`] (the same thermal step, the same step weight
//! `1 - exp(-T / tau)`, the same trip level and cooled level), with the
//! squared current summed exactly and the heat kept in 64 bits.
//!
//! # Numbers
//!
//! * The current is a Q15 reading of the current full scale `I_fs`; its
//!   square (at most `2^30`) is added to a `u64` over the thermal step (at
//!   most 65,535 ticks: below `2^46`, no overflow).
//! * The heat `h` is a `u64` in Q32 (`2^32` is the rated steady state):
//!   resolution `2.3e-10`, finer than the float model's compensated sum
//!   near the trip level, so the longest accepted `tau` still rises.
//! * A step is `h' = (1 - alpha) h + alpha q`, with the mean square
//!   `q = sum rho` (`rho = 4 (I_fs / I_r)^2 / N` in Q32): the step's first
//!   tick takes `(1 - alpha) h` (the heat holds still within a step), its
//!   last adds `sum (alpha rho)`. Each product is a 32-bit mantissa times a
//!   value below `2^52`, taken as 16 x 16 -> 32 multiplies and shifted,
//!   rounded down (no 64-bit library multiply). `h` stays below
//!   `2^32 (I_fs / I_r)^2`, and the configuration refuses `I_fs / I_r` of
//!   1000 or more, so every value stays below `2^52`.
//!
//! It trips on the same thermal step as the float model unless the heat at
//! that step lies within the two models' rounding of the level: the float
//! sums `i^2` in f32 (relative error about `N 2^-24` at worst, far less on
//! average), this one exactly.

use super::ThermalConfig;
use super::thermal::ThermalModel;
use crate::error::{ConfigError, Requirement, non_negative};

/// The integer I^2t model of one winding.
#[derive(Clone, Debug)]
pub struct FixedHeat {
    ticks_per_step: u16,
    countdown: u16,
    /// Sum of the squared Q15 currents of the step so far.
    sum: u64,
    /// The heat, Q32.
    heat: u64,
    /// `(1 - alpha) h`, Q32: what the heat keeps of itself over the step,
    /// computed on the step's first tick (the heat does not change within a
    /// step), so the step's last tick has one product to take, not two.
    kept: u64,
    /// The trip level, Q32 (the float model's f32 level, exactly).
    trip: u64,
    /// `alpha q = sum * kappa_m >> kappa_s`, Q32 (`kappa = alpha rho`).
    kappa_m: u32,
    kappa_s: u32,
    /// `alpha = alpha_m 2^-alpha_s`.
    alpha_m: u32,
    alpha_s: u32,
    /// The heat's two comparisons, kept from the last change of the heat
    /// (a step or a set), so a tick between steps reads two flags.
    tripped: bool,
    still_hot: bool,
}

/// `2^32` as the rated steady state.
const ONE: u64 = 1 << 32;

/// `a * b` in full, from four 16 x 16 -> 32 products (the Cortex-M0's
/// multiply keeps only the low 32 bits; the library's 64-bit multiply
/// takes about 37 instructions).
#[inline(always)]
fn mul_wide(a: u32, b: u32) -> u64 {
    let (a0, a1) = (a & 0xFFFF, a >> 16);
    let (b0, b1) = (b & 0xFFFF, b >> 16);
    let low = a0 * b0;
    // Both middle products are below 2^32; their sum may carry.
    let (mid, carry) = (a0 * b1).overflowing_add(a1 * b0);
    let high = a1 * b1 + ((carry as u32) << 16) + (mid >> 16);
    let (low, c) = low.overflowing_add(mid << 16);
    ((high + c as u32) as u64) << 32 | low as u64
}

/// `x * m / 2^s` rounded down, for `x < 2^56` and results below `2^64`.
#[inline(always)]
fn mul_shift(x: u64, m: u32, s: u32) -> u64 {
    let lo = mul_wide(x as u32, m);
    let hi = mul_wide((x >> 32) as u32, m);
    // x m = hi 2^32 + lo.
    if s >= 32 {
        (hi + (lo >> 32)) >> ((s - 32) & 63)
    } else {
        (hi << ((32 - s) & 63)) + (lo >> (s & 63))
    }
}

/// `value = m 2^-s` with a 32-bit mantissa `m` (top bit set), for `value`
/// in `(0, 2^31)`; `None` when it is outside.
fn mantissa(value: f64) -> Option<(u32, u32)> {
    if value.is_nan() || value <= 0.0 || value >= 2147483648.0 {
        return None;
    }
    let mut s = 0u32;
    let mut v = value;
    while v < 2147483648.0 && s < 95 {
        v *= 2.0;
        s += 1;
    }
    // v in [2^31, 2^32): round, and renormalise if it rounded up to 2^32.
    let m = libm::round(v);
    if m >= 4294967296.0 {
        return Some((1 << 31, s - 1));
    }
    Some((m as u32, s))
}

impl FixedHeat {
    /// The model for readings of `current_full_scale_a` per 32768 and a
    /// control period of `period_s`, with the float model's thermal step,
    /// step weight and trip level. Refused by name as the float model is,
    /// and when the full scale is 1000 rated currents or more
    /// (`rated_a` too small for it).
    pub fn new(config: ThermalConfig, period_s: f32, current_full_scale_a: f32) -> Result<Self, ConfigError> {
        let float = ThermalModel::new(config, period_s)?;
        let ratio = current_full_scale_a as f64 / config.rated_a() as f64;
        if ratio.is_nan() || ratio >= 1000.0 {
            return Err(ConfigError::new(
                "rated_a",
                config.rated_a(),
                Requirement::Above("a thousandth of the current full scale"),
            ));
        }
        let n = float.ticks_per_step() as f64;
        let rho = 4.0 * ratio * ratio / n;
        let too_small = || {
            ConfigError::new(
                "rated_a",
                config.rated_a(),
                Requirement::Below("the current full scale times 2^20"),
            )
        };
        let (kappa_m, kappa_s) = mantissa(rho * float.alpha() as f64).ok_or_else(too_small)?;
        let (alpha_m, alpha_s) = mantissa(float.alpha() as f64).ok_or(ConfigError::new(
            "tau_s",
            config.tau_s(),
            Requirement::Above("the thermal step"),
        ))?;
        // The f32 level is exact in f64, and so is its product with 2^32.
        let trip = libm::ceil(float.trip_level() as f64 * ONE as f64) as u64;
        Ok(Self {
            ticks_per_step: float.ticks_per_step(),
            countdown: float.ticks_per_step(),
            sum: 0,
            heat: 0,
            kept: 0,
            trip,
            kappa_m,
            kappa_s,
            alpha_m,
            alpha_s,
            tripped: false,
            still_hot: false,
        })
    }

    /// Adds one control tick at the Q15 current `current_q15`; true when the
    /// heat is at or above the trip level.
    #[inline(always)]
    pub fn tick(&mut self, current_q15: i16) -> bool {
        let i = current_q15 as i32;
        self.sum += (i * i) as u32 as u64;
        self.countdown = self.countdown.wrapping_sub(1);
        if self.countdown == self.ticks_per_step.wrapping_sub(1) {
            self.keep();
        }
        if self.countdown == 0 {
            self.step();
        }
        self.tripped()
    }

    /// The step's first tick: `(1 - alpha) h`.
    #[inline(never)]
    fn keep(&mut self) {
        self.kept = self.heat - mul_shift(self.heat, self.alpha_m, self.alpha_s);
    }

    /// Ends a thermal step: `h = (1 - alpha) h + alpha q`.
    #[inline(never)]
    fn step(&mut self) {
        if self.ticks_per_step == 1 {
            self.keep();
        }
        self.heat = self.kept + mul_shift(self.sum, self.kappa_m, self.kappa_s);
        self.sum = 0;
        self.countdown = self.ticks_per_step;
        self.compare();
    }

    /// The heat against the trip and cooled levels.
    fn compare(&mut self) {
        self.tripped = self.heat >= self.trip;
        self.still_hot = self.heat > ONE;
    }

    /// True while the heat is at or above the trip level.
    #[inline(always)]
    pub fn tripped(&self) -> bool {
        self.tripped
    }

    /// True while the winding has not cooled to the rated steady state.
    #[inline(always)]
    pub fn still_hot(&self) -> bool {
        self.still_hot
    }

    /// The normalised heat (1 = steady state at rated current), for telemetry.
    pub fn heat(&self) -> f32 {
        (self.heat as f64 / ONE as f64) as f32
    }

    /// The trip level (`trip_multiple^2`), in the units of [`FixedHeat::heat`].
    pub fn trip_level(&self) -> f32 {
        (self.trip as f64 / ONE as f64) as f32
    }

    /// Sets the heat (>= 0), as [`ThermalModel::set_heat`].
    pub fn set_heat(&mut self, heat: f32) -> Result<(), ConfigError> {
        let h = non_negative("heat", heat)?;
        self.heat = libm::round(h as f64 * ONE as f64) as u64;
        self.keep();
        self.compare();
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::supervisor::TripClass;
    use crate::supervisor::thermal::THERMAL_STEP_S as THERMAL_STEP_S_FOR_TEST;

    #[test]
    fn mul_shift_is_the_exact_product_rounded_down() {
        let mut x = 0x1234_5678_9abcu64;
        for k in 0..2000u32 {
            x = x
                .wrapping_mul(6364136223846793005)
                .wrapping_add(1442695040888963407)
                >> 16;
            let m = (x as u32) | 0x8000_0000;
            let s = 16 + k % 48;
            let exact = (x as u128 * m as u128) >> s;
            if exact < (1u128 << 64) {
                assert_eq!(mul_shift(x, m, s) as u128, exact, "{x} {m} {s}");
            }
        }
    }

    #[test]
    fn the_heat_is_the_whole_products_bit_for_bit() {
        // Against the step taken whole at its end in 128-bit arithmetic
        // (the model takes `(1 - alpha) h` on the step's first tick), for
        // steps of 1 to 7 ticks and the 200 of 50 us, under varying
        // currents up to full scale, with the heat set at moments in every
        // part of the step.
        let c = ThermalConfig::from_time_constant(0.5, 1.0).unwrap();
        let mut x = 0x2545_f491_4f6c_dd1du64;
        let mut random = move || {
            x ^= x << 13;
            x ^= x >> 7;
            x ^= x << 17;
            x
        };
        for n in [1u16, 2, 3, 4, 5, 6, 7, 200] {
            let period = THERMAL_STEP_S_FOR_TEST / n as f32;
            let mut model = FixedHeat::new(c, period, 8.0).unwrap();
            assert_eq!(model.ticks_per_step, n);
            let (am, ashift, km, kshift) = (model.alpha_m, model.alpha_s, model.kappa_m, model.kappa_s);
            let whole = |x: u64, m: u32, s: u32| ((x as u128 * m as u128) >> s) as u64;
            let (mut heat, mut sum, mut count) = (0u64, 0u64, 0u16);
            for k in 0..(n as u32 * 30) {
                if random() % 97 == 0 {
                    let h = (random() % 4000) as f32 / 1000.0;
                    model.set_heat(h).unwrap();
                    heat = libm::round(h as f64 * ONE as f64) as u64;
                }
                let q = (random() % 65536) as u16 as i16;
                let tripped = model.tick(q);
                sum += (q as i32 * q as i32) as u64;
                count += 1;
                if count == n {
                    heat = heat - whole(heat, am, ashift) + whole(sum, km, kshift);
                    sum = 0;
                    count = 0;
                }
                assert_eq!(model.heat, heat, "{n} ticks a step, tick {k}");
                assert_eq!(tripped, heat >= model.trip, "{n} ticks a step, tick {k}");
                assert_eq!(model.still_hot(), heat > ONE, "{n} ticks a step, tick {k}");
            }
        }
    }

    /// The tick a model trips at under a steady reading, if within `limit`.
    fn trip_tick(mut tick: impl FnMut() -> bool, limit: u64) -> Option<u64> {
        (1..=limit).find(|_| tick())
    }

    #[test]
    fn the_integer_model_trips_with_the_float_model_within_its_rounding() {
        // Steady multiples of rated current from just above the no-trip
        // ceiling to 7.2 x, on readings the two models see alike (a Q15
        // reading and the amperes it stands for). The float model sums N
        // equal squares in f32, which rounds each sum the same way: its mean
        // square is off by up to N 2^-24 relative, this one's by nothing. Near
        // the trip the heat rises at (m^2 - h) / tau, so the trips may differ
        // by tau N 2^-24 m^2 / (m^2 - L), plus one thermal step; where that is
        // below one step they must trip on the same tick.
        let (rated, fs, period) = (2.0f32, 16.0f32, 50e-6f32);
        for class in [TripClass::Class10A, TripClass::Class10, TripClass::Class30] {
            for multiple in [1.2f32, 1.5, 3.0, 7.2] {
                let c = ThermalConfig::from_trip_class(rated, class).unwrap();
                let mut float = ThermalModel::new(c, period).unwrap();
                let mut fixed = FixedHeat::new(c, period, fs).unwrap();
                let q = libm::roundf(multiple * rated / fs * 32768.0) as i16;
                let amps = q as f32 * fs / 32768.0;
                let limit = (40.0 * c.tau_s() / period) as u64;
                let a = trip_tick(|| float.tick(amps), limit).unwrap();
                let b = trip_tick(|| fixed.tick(q), limit).unwrap();
                let n = float.ticks_per_step() as f64;
                let m2 = (amps / rated) as f64 * (amps / rated) as f64;
                let level = float.trip_level() as f64;
                let drift_s = c.tau_s() as f64 * n * libm::exp2(-24.0) * m2 / (m2 - level);
                let allowed = libm::floor(drift_s / period as f64 / n) as u64 * n as u64;
                std::eprintln!("{class:?} at {multiple} x: float {a}, fixed {b}, allowed {allowed}");
                assert!(
                    a.abs_diff(b) <= allowed,
                    "{class:?} at {multiple} x: float {a}, fixed {b} ticks"
                );
            }
        }
    }

    #[test]
    fn it_cools_back_below_rated_as_the_float_model_does() {
        let c = ThermalConfig::from_time_constant(1.0, 2.0).unwrap();
        let mut float = ThermalModel::new(c, 1e-3).unwrap();
        let mut fixed = FixedHeat::new(c, 1e-3, 8.0).unwrap();
        float.set_heat(1.3).unwrap();
        fixed.set_heat(1.3).unwrap();
        for k in 0..4000 {
            float.tick(0.0);
            fixed.tick(0);
            assert_eq!(float.still_hot(), fixed.still_hot(), "tick {k}");
            assert!((float.heat() - fixed.heat()).abs() < 1e-6);
        }
        assert!(!fixed.still_hot());
    }

    #[test]
    fn a_full_scale_of_a_thousand_rated_currents_is_refused_by_name() {
        let c = ThermalConfig::from_time_constant(0.01, 60.0).unwrap();
        assert_eq!(FixedHeat::new(c, 50e-6, 10.0).unwrap_err().field, "rated_a");
        assert!(FixedHeat::new(c, 50e-6, 9.9).is_ok());
    }
}
