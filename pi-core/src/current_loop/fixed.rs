//! The assembled current loop on integers, for cores without an FPU: the
//! float loop's configuration, states, commands and fault rules, with every
//! per-tick step in integer arithmetic.
//!
//! [`FixedLoop::tick`] takes the current ADC's reading and the bus ADC's
//! reading, both raw counts, and returns a [`FixedDrive`] (duty in Q15). In
//! order, as in [`crate::current_loop`]:
//!
//! 1. calibration: counts to a Q15 current, `(counts - offset) * 2^(15 - bits)`
//!    (the offset kept to 1 / 2^(15 - bits) of a count): exact, so the current's
//!    full scale is the sensor's own, `|amps_per_count| 2^bits`;
//! 2. supervision in counts: the overcurrent threshold, the rails and the bus
//!    window are bands of readings found once, at construction, with the float
//!    loop's own expressions, so each trips on the same reading as the float
//!    loop; the stuck detector is the same integer code; the I^2t model is
//!    [`FixedHeat`] (its trip tick against the float model's is in its
//!    module notes); the counting and latching are the float supervisor's own
//!    ([`crate::supervisor::Supervisor`]);
//! 3. setpoint: limited and slewed in Q27 of the current full scale;
//! 4. PI: [`FixedPi`], the float PI's law on integers, limited to what the bus
//!    gives now (`max_duty * bus`) intersected with the configured limits;
//! 5. volts to duty: `|v| / bus` by one integer division, limited to the
//!    duty range; a bus below the duty mapping's `min_bus_v` gives the safe
//!    command.
//!
//! The voltage's full scale is the bus ADC's (`bus_v_per_count 2^bus_bits`),
//! so the duty is a ratio of two numbers on one scale; for a large `Kp` it
//! is doubled (up to [`MAX_VOLT_SHIFT`] times) until every coefficient of
//! the PI is below 8 full scales.
//!
//! What the float loop has and this one has not, refused by name when
//! configured: feedforward, a speed reading (and so the speed checks), and
//! excitations. No reading is ever "no number" here, so the invalid-reading
//! causes cannot occur.
//!
//! Commands carry integers ([`FixedCommand`]): the setpoint in Q15
//! ([`FixedLoopConfig::current_q15`]) and gains converted ahead of time
//! ([`FixedLoopConfig::retune`]), so the interrupt that applies them does no
//! float arithmetic.

use crate::error::{CommandError, ConfigError, Requirement, positive};
use crate::fault::{Fault, FaultSet};
use crate::output::{Direction, DriveCommand};
use crate::pi::PiGains;
use crate::pi::fixed::{Fixed, FixedPi, FixedRetune, FixedScale, GUARD_BITS};
use crate::supervisor::fixed_heat::FixedHeat;
use crate::supervisor::{Supervisor, Verdict};

use super::{LoopConfig, LoopState, count_band, quiet_band};

/// The float loop's validated configuration with the bus ADC's scale, and
/// the integer constants derived from them.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct FixedLoopConfig {
    base: LoopConfig,
    scale: FixedScale,
    bus_v_per_count: f32,
    /// `2^(15 - bits)` of each ADC.
    current_shift: u32,
    bus_shift: u32,
    /// The PI's voltage full scale is the bus ADC's times `2^volt_shift`.
    volt_shift: u32,
}

/// The most the PI's voltage full scale is doubled over the bus ADC's (to
/// hold a large `Kp`): its output then moves in steps of 1/512 of the bus
/// ADC's full scale, still a fiftieth of a percent of the duty at most.
pub const MAX_VOLT_SHIFT: u32 = 6;

impl FixedLoopConfig {
    /// The float configuration `base` run on integers, with a bus ADC of
    /// `bus_adc_bits` (2 to 15) reading `bus_v_per_count` volts per count.
    ///
    /// Refused by name: a current ADC of 16 bits (`adc_bits`), feedforward
    /// (`resistance_ohm`, `back_emf_v_s_per_rad`), a speed limit
    /// (`max_speed_rad_s`: this loop reads no speed), a bus window beyond the
    /// bus ADC (`max_v`), and gains too large for the fixed-point PI
    /// (`kp_v_per_a`: every coefficient must be below 8 voltage full scales
    /// per current full scale).
    pub fn new(base: LoopConfig, bus_adc_bits: u8, bus_v_per_count: f32) -> Result<Self, ConfigError> {
        let sense = base.sense();
        let fs = sense.full_scale_counts() as u32 + 1;
        let bits = fs.trailing_zeros();
        if bits > 15 {
            return Err(ConfigError::new(
                "adc_bits",
                bits as f32,
                Requirement::Within { min: 2.0, max: 15.0 },
            ));
        }
        if !(2..=15).contains(&bus_adc_bits) {
            return Err(ConfigError::new(
                "bus_adc_bits",
                bus_adc_bits as f32,
                Requirement::Within { min: 2.0, max: 15.0 },
            ));
        }
        let bus_v_per_count = positive("bus_v_per_count", bus_v_per_count)?;
        let ff = base.feedforward();
        if ff.resistance_ohm() != 0.0 {
            return Err(ConfigError::new(
                "resistance_ohm",
                ff.resistance_ohm(),
                Requirement::Within { min: 0.0, max: 0.0 },
            ));
        }
        if ff.back_emf_v_s_per_rad() != 0.0 {
            return Err(ConfigError::new(
                "back_emf_v_s_per_rad",
                ff.back_emf_v_s_per_rad(),
                Requirement::Within { min: 0.0, max: 0.0 },
            ));
        }
        if let Some(limit) = base.supervisor().speed_limit() {
            return Err(ConfigError::new(
                "max_speed_rad_s",
                limit.max_speed_rad_s(),
                Requirement::Within { min: 0.0, max: 0.0 },
            ));
        }
        let bus_fs_counts = (1u32 << bus_adc_bits) - 1;
        let bus_max_v = base.supervisor().bus().max_v();
        if bus_max_v >= bus_fs_counts as f32 * bus_v_per_count {
            return Err(ConfigError::new(
                "max_v",
                bus_max_v,
                Requirement::Below("the bus ADC's full scale, bus_v_per_count x (2^bus_adc_bits - 1)"),
            ));
        }
        let current_fs_a = libm::fabsf(sense.amps_per_count()) * fs as f32;
        let bus_fs_v = bus_v_per_count * (1u32 << bus_adc_bits) as f32;
        // The PI's voltage full scale: the bus ADC's, doubled until every
        // coefficient is below 8 full scales (a high-inductance coil under a
        // fast loop has a large Kp), at most MAX_VOLT_SHIFT times.
        let mut volt_shift = 0;
        let config = loop {
            let config = Self {
                base,
                scale: FixedScale::new(current_fs_a, bus_fs_v * (1u32 << volt_shift) as f32)?,
                bus_v_per_count,
                current_shift: 15 - bits,
                bus_shift: 15 - bus_adc_bits as u32,
                volt_shift,
            };
            match FixedPi::new(config.base.pi_as_run(), config.scale) {
                Ok(_) => break config,
                Err(e) if e.field == "voltage_full_scale_v" && volt_shift < MAX_VOLT_SHIFT => volt_shift += 1,
                Err(e) => return Err(config.gain_error(e)),
            }
        };
        if let Some(t) = base.supervisor().thermal() {
            FixedHeat::new(t, base.period_s(), current_fs_a)?;
        }
        Ok(config)
    }

    fn pi(&self) -> Result<FixedPi, ConfigError> {
        FixedPi::new(self.base.pi_as_run(), self.scale).map_err(|e| self.gain_error(e))
    }

    /// A coefficient too large names the gain (the full scales are the ADCs').
    fn gain_error(&self, e: ConfigError) -> ConfigError {
        if e.field == "voltage_full_scale_v" {
            ConfigError::new(
                "kp_v_per_a",
                self.base.pi().gains().kp_v_per_a(),
                Requirement::Below("8 x 64 x the bus ADC's full scale over the current sensor's full scale"),
            )
        } else {
            e
        }
    }

    /// The float configuration it was made from.
    pub fn base(&self) -> &LoopConfig {
        &self.base
    }

    /// The full scales: the current sensor's and the bus ADC's.
    pub fn scale(&self) -> &FixedScale {
        &self.scale
    }

    /// Volts of one bus ADC count.
    pub fn bus_v_per_count(&self) -> f32 {
        self.bus_v_per_count
    }

    /// A current in Q15 of the current full scale, saturated to `i16`
    /// (for [`FixedCommand::SetCurrent`], outside the interrupt).
    #[allow(clippy::manual_clamp)]
    pub fn current_q15(&self, current_a: f32) -> i16 {
        let q = libm::roundf(current_a / self.scale.current_full_scale_a() * 32768.0);
        // A NaN becomes 0.
        if q.is_nan() {
            0
        } else {
            q.max(i16::MIN as f32).min(i16::MAX as f32) as i16
        }
    }

    /// New gains converted ahead of time for [`FixedCommand::Retune`];
    /// refused as [`FixedLoopConfig::new`] refuses gains.
    pub fn retune(&self, gains: PiGains) -> Result<FixedRetune, ConfigError> {
        FixedRetune::new(&self.base.pi_as_run(), gains, &self.scale).map_err(|e| self.gain_error(e))
    }
}

/// The inputs of one tick: raw ADC readings.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct FixedTickInput {
    /// The current-sense ADC reading.
    pub current_counts: u16,
    /// The bus-voltage ADC reading.
    pub bus_counts: u16,
}

/// A drive command with the duty in Q15.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct FixedDrive {
    /// Duty, Q15 (32768 would be 1; at most the mapping's `max_duty`).
    pub duty_q15: u16,
    /// Polarity.
    pub direction: Direction,
    /// Bridge enabled.
    pub enabled: bool,
}

impl FixedDrive {
    /// Bridge disabled, duty 0.
    pub const SAFE: FixedDrive = FixedDrive {
        duty_q15: 0,
        direction: Direction::Forward,
        enabled: false,
    };

    /// The duty as a compare value for a PWM timer counting to `period`
    /// (rounded down).
    #[inline(always)]
    pub fn compare(&self, period: u16) -> u16 {
        ((self.duty_q15 as u32 * period as u32) >> 15) as u16
    }

    /// The same command with the duty as a fraction (for simulation and
    /// telemetry, where floats are cheap).
    pub fn to_drive_command(&self) -> DriveCommand {
        DriveCommand {
            duty: self.duty_q15 as f32 / 32768.0,
            direction: self.direction,
            enabled: self.enabled,
        }
    }
}

/// A request from the main loop, in integers.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum FixedCommand {
    /// New target current, Q15 of the current full scale; limited and slewed.
    /// Refused while faulted.
    SetCurrent(i16),
    /// New gains, applied bumplessly at the next tick.
    Retune(FixedRetune),
    /// Start closed-loop control; refused while faults are latched.
    Enable,
    /// Stop: safe command, PI reset, setpoint 0.
    Disable,
    /// Clear latched faults (refused while a cause is present); leads to `Disabled`.
    ClearFaults,
}

/// Whether a setpoint was taken as asked or limited.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum FixedAcceptance {
    /// Taken as asked.
    Exact,
    /// Limited to the setpoint range.
    Limited {
        /// The target applied, Q15.
        applied_q15: i16,
    },
}

/// The assembled fixed-point loop.
#[derive(Clone, Debug)]
// Laid out hot fields first: a Cortex-M0 load reaches only 124 bytes past
// its base register (62 for a halfword), so the fields every tick reads sit
// at the front and the configuration at the back.
#[repr(C)]
pub struct FixedLoop {
    /// `q15 = counts * count_step - offset_q` (the sign of the amplifier in both).
    count_step: i32,
    offset_q: i32,
    max_duty_q15: u32,
    /// The stuck detector's `min_drive` in Q15 (above any duty without it).
    stuck_drive_q15: u32,
    sp_min: Fixed,
    sp_max: Fixed,
    sp_step: Fixed,
    target: Fixed,
    setpoint: Fixed,
    last_volts: Fixed,
    /// Readings within the overcurrent threshold: `c.wrapping_sub(low) <= span`.
    over_low: u16,
    over_span: u16,
    /// Readings clear of the rails, likewise (the sensor's own band).
    rail_low: u16,
    rail_span: u16,
    /// Bus readings inside the window.
    bus_low: u16,
    bus_high: u16,
    /// The lowest bus reading the duty mapping drives on.
    min_bus: u16,
    /// What a tick may take the short path with: current readings clear of
    /// the rails and within the threshold, bus readings inside the window
    /// and at least `min_bus` (`c.wrapping_sub(low) <= span`); `quiet` is
    /// false when either set is empty.
    quiet_low: u16,
    quiet_span: u16,
    bus_quiet_low: u16,
    bus_quiet_span: u16,
    quiet: bool,
    /// `quiet`, running, and the supervisor settled: the conditions of the
    /// short path that change only with a command or a full check, kept
    /// as one flag for it.
    ready: bool,
    /// A reversing drive whose PI limits hold what the bus gives at the top
    /// of its window: the bus alone sets the PI's limits each tick.
    bus_sets_limits: bool,
    /// `bus_q15 = counts << bus_shift`; the PI's volts are the bus ADC's
    /// scaled down by `2^volt_shift`.
    bus_shift: u32,
    volt_shift: u32,
    last_current_q15: i16,
    last: FixedDrive,
    state: LoopState,
    pi: FixedPi,
    heat: Option<FixedHeat>,
    supervisor: Supervisor,
    config: FixedLoopConfig,
}

/// `2^30 / b'` at the middle of each 64-count interval of `b'` in `[2^14,
/// 2^15)`, rounded: `RECIPROCALS[k]` for `b'` in `[2^14 + 64 k, 2^14 + 64 (k
/// + 1))`. Every entry lies in `(2^15, 2^16)`, so 512 bytes of flash.
static RECIPROCALS: [u16; 256] = {
    let mut table = [0u16; 256];
    let mut k = 0;
    while k < 256 {
        let middle = (1u32 << 14) + 64 * k as u32 + 32;
        table[k] = (((1u32 << 30) + middle / 2) / middle) as u16;
        k += 1;
    }
    table
};

/// `v 2^15 / b` for `v <= b < 2^15`, within 2^-15 of the exact quotient
/// relative plus one count, without a division (the Cortex-M0 has none; the
/// library's takes about 140 instructions): `b` shifted left by `s` into
/// `[2^14, 2^15)`, `R = 2^30 / b'` from [`RECIPROCALS`] (relative error at
/// most 1/513 plus its rounding: half an interval over the interval's
/// middle), one Newton step (error below `(1/513)^2 = 3.8e-6` before
/// rounding; `R` itself, an integer near 2^16, rounds to 1.5e-5: at most
/// 1.6e-5 over every `b'`), then `v R >> (15 - s)` (the tests run every
/// divisor). `b = 0` gives 0.
#[inline(always)]
pub(crate) fn quotient_q15(v: u32, b: u32) -> u32 {
    if b == 0 {
        return 0;
    }
    let (mut b, mut s) = (b, 0u32);
    while b < 1 << 14 {
        b <<= 1;
        s += 1;
    }
    // b < 2^15 by the contract, so the index is below 256; `& 255` keeps
    // the lookup free of a bounds check.
    let r = RECIPROCALS[((b >> 6) & 255) as usize] as i32;
    // e = 2^30 - b' R, at most 2^30 / 513 + 2^14 <= 2^22 in size (b' R <
    // 2^31); R += R e / 2^30, with e taken to 2^-22 (|R e / 2^8| below
    // 2^16 2^14 = 2^30).
    let e = (1i32 << 30).wrapping_sub((b * r as u32) as i32);
    let r = (r + ((r * ((e + (1 << 7)) >> 8) + (1 << 21)) >> 22)) as u32;
    (v * r) >> ((15 - s) & 31)
}

impl FixedLoop {
    /// A disabled loop with nothing latched.
    pub fn new(config: FixedLoopConfig) -> Result<Self, ConfigError> {
        let base = &config.base;
        let sense = base.sense();
        let sup = base.supervisor();
        let period_s = base.period_s();
        let step = (1i32 << config.current_shift) * if sense.amps_per_count() < 0.0 { -1 } else { 1 };
        let offset_q = libm::roundf(sense.offset_counts() * step as f32) as i32;
        let threshold = sup.overcurrent().threshold_a();
        let (over_low, over_span) =
            count_band(sense, |c| sense.to_amperes(c).abs() <= threshold).ok_or(ConfigError::new(
                "threshold_a",
                threshold,
                Requirement::Above("the current the sensor reads at its offset"),
            ))?;
        // The bus readings the float loop would see as `counts * bus_v_per_count`.
        let vpc = config.bus_v_per_count;
        let first = |ok: &dyn Fn(u16) -> bool| -> u16 {
            let (mut lo, mut hi) = (0u16, u16::MAX);
            while lo < hi {
                let mid = lo + (hi - lo) / 2;
                if ok(mid) {
                    hi = mid;
                } else {
                    lo = mid + 1;
                }
            }
            lo
        };
        let window = sup.bus();
        let bus_low = first(&|c| c as f32 * vpc >= window.min_v());
        let bus_high = first(&|c| c as f32 * vpc > window.max_v()) - 1;
        let duty = base.duty();
        let min_bus = first(&|c| c as f32 * vpc >= duty.min_bus_v());
        let q15 = |x: f32| libm::roundf(x * 32768.0) as u32;
        let stuck_drive_q15 = sup.stuck_detection().map_or(u32::MAX, |s| {
            // The least Q15 duty at or above min_drive.
            libm::ceilf(s.min_drive() * 32768.0) as u32
        });
        let scale = config.scale;
        let limits = base.setpoint();
        let sp_min = scale.amperes_inward(limits.min_a(), true)?;
        let sp_max = scale.amperes_inward(limits.max_a(), false)?;
        let slew = limits.slew_a_per_s() * period_s / scale.current_full_scale_a() * (1u32 << 27) as f32;
        // The setpoint stays inside the sensor's range (its limits are below
        // the overcurrent threshold, which the sensor reads): below one full
        // scale, 2^27. A step of 2^30 crosses that range four times over in
        // one tick, so a larger one changes nothing, and with it the slew's
        // sum and difference stay below 2^31 with no saturation.
        if sp_min.0 <= -(1 << 29) || sp_max.0 >= 1 << 29 {
            return Err(ConfigError::new(
                "setpoint_max_a",
                limits.max_magnitude_a(),
                Requirement::Below("the current sensor's full scale"),
            ));
        }
        let sp_step = Fixed(if slew >= (1u32 << 30) as f32 {
            1 << 30
        } else if slew < 1.0 {
            1
        } else {
            libm::roundf(slew) as i32
        });
        let heat = match sup.thermal() {
            Some(t) => Some(FixedHeat::new(t, period_s, scale.current_full_scale_a())?),
            None => None,
        };
        let quiet_counts = quiet_band(sense, threshold);
        let bus_quiet_low = bus_low.max(min_bus);
        let quiet = quiet_counts.is_some() && bus_quiet_low <= bus_high;
        let (quiet_low, quiet_span) = quiet_counts.unwrap_or((0, 0));
        let max_duty_q15 = q15(duty.max_duty()).min(32767);
        let pi = config.pi()?;
        // What the bus gives at the top of its window (run's expression; a
        // running tick never sees a bus above the window).
        let widest = ((((bus_high as u32) << config.bus_shift) * max_duty_q15) >> (15 + config.volt_shift))
            << GUARD_BITS;
        let (pi_min, pi_max) = pi.limits_q27();
        let bus_sets_limits = duty.reverses() && pi_min.0 <= -(widest as i32) && pi_max.0 >= widest as i32;
        Ok(Self {
            supervisor: Supervisor::counting(*sup),
            heat,
            pi,
            state: LoopState::Disabled,
            count_step: step,
            offset_q,
            rail_low: sense.clear_band().0,
            rail_span: sense.clear_band().1,
            over_low,
            over_span,
            bus_low,
            bus_high,
            min_bus,
            quiet_low,
            quiet_span,
            bus_quiet_low,
            bus_quiet_span: bus_high.wrapping_sub(bus_quiet_low),
            quiet,
            ready: false,
            bus_shift: config.bus_shift,
            volt_shift: config.volt_shift,
            max_duty_q15,
            bus_sets_limits,
            stuck_drive_q15,
            sp_min,
            sp_max,
            sp_step,
            target: Fixed(0),
            setpoint: Fixed(0),
            last: FixedDrive::SAFE,
            last_current_q15: 0,
            last_volts: Fixed(0),
            config,
        })
    }

    /// One control tick; call it once per control period from the interrupt.
    /// Never panics, allocates or blocks; no float arithmetic.
    pub fn tick(&mut self, input: FixedTickInput) -> FixedDrive {
        let c = input.current_counts;
        let i = (c as i32 * self.count_step - self.offset_q)
            .max(i16::MIN as i32)
            .min(i16::MAX as i32) as i16;
        self.last_current_q15 = i;
        let b = input.bus_counts;
        let (hot_trip, still_hot) = match &mut self.heat {
            Some(h) => (h.tick(i), h.still_hot()),
            None => (false, false),
        };
        let driven = self.last.duty_q15 as u32 >= self.stuck_drive_q15;
        // The short path: running, every reading in range, nothing counting,
        // no trip; the same result as the full check below (tests hold them
        // side by side).
        let quiet = self.ready
            && !hot_trip
            && c.wrapping_sub(self.quiet_low) <= self.quiet_span
            && b.wrapping_sub(self.bus_quiet_low) <= self.bus_quiet_span
            && self.supervisor.quiet_counts(c, driven, still_hot);
        if !quiet {
            let latched = self.supervisor.judge(&Verdict {
                present: FaultSet::EMPTY
                    .with_if(Fault::Overcurrent, c.wrapping_sub(self.over_low) > self.over_span)
                    .with_if(Fault::Overload, still_hot || hot_trip)
                    .with_if(Fault::SensorRail, c.wrapping_sub(self.rail_low) > self.rail_span)
                    .with_if(Fault::BusUndervoltage, b < self.bus_low)
                    .with_if(Fault::BusOvervoltage, b > self.bus_high),
                hot_trip,
                counts: c,
                driven,
            });
            if !latched.is_empty() {
                if self.state != LoopState::Faulted {
                    self.stop();
                    self.state = LoopState::Faulted;
                }
                self.ready = false;
                self.last = FixedDrive::SAFE;
                return FixedDrive::SAFE;
            }
            if self.state != LoopState::Running {
                self.ready = false;
                self.last = FixedDrive::SAFE;
                return FixedDrive::SAFE;
            }
            self.ready = self.quiet && self.supervisor.settled();
        }
        // One running step for both paths.
        let command = self.run(i, b);
        self.last = command;
        command
    }

    /// The running tick: setpoint, PI within what the bus gives, duty.
    #[inline(always)]
    fn run(&mut self, current_q15: i16, bus_counts: u16) -> FixedDrive {
        // Slew toward the target (the setpoint and the target stay within
        // 2^29 and the step within 2^30, so no sum wraps: see `new`).
        let mut r = self.setpoint.0;
        if r != self.target.0 {
            r = self
                .target
                .0
                .max(r.wrapping_sub(self.sp_step.0))
                .min(r.wrapping_add(self.sp_step.0));
            self.setpoint = Fixed(r);
        }
        let bus_q15 = (bus_counts as u32) << (self.bus_shift & 31);
        let good_bus = bus_counts >= self.min_bus;
        // What the bus gives now, Q27 of the PI's voltage full scale (0 below
        // min_bus_v, as the float mapping).
        let available = if good_bus {
            ((bus_q15 * self.max_duty_q15) >> ((15 + self.volt_shift) & 31)) << GUARD_BITS
        } else {
            0
        } as i32;
        let (r, y) = (Fixed(r), Fixed::from_q15(current_q15));
        let v = if self.bus_sets_limits {
            // Inside the configured range, and at most what the bus gives
            // (below 2^27): its Q15 needs no saturation.
            let v = self.pi.step(r, y, Fixed(-available), Fixed(available));
            self.last_volts = v;
            v.0 >> GUARD_BITS
        } else {
            let v = self.pi.step_within(r, y, Fixed(-available), Fixed(available));
            self.last_volts = v;
            v.to_q15() as i32
        };
        if !good_bus {
            return FixedDrive::SAFE;
        }
        // |v| 2^volt_shift is at most what the bus gives, below bus_q15.
        let duty = (quotient_q15(v.unsigned_abs() << (self.volt_shift & 31), bus_q15)).min(self.max_duty_q15);
        FixedDrive {
            duty_q15: duty as u16,
            direction: if v < 0 {
                Direction::Reverse
            } else {
                Direction::Forward
            },
            enabled: true,
        }
    }

    fn stop(&mut self) {
        self.pi.reset();
        self.target = Fixed(0);
        self.setpoint = Fixed(0);
        self.last_volts = Fixed(0);
    }

    /// Carries out a command from the main loop. On error nothing changed.
    pub fn apply(&mut self, command: FixedCommand) -> Result<FixedAcceptance, CommandError> {
        let reply = self.carry_out(command);
        self.ready = self.quiet && self.state == LoopState::Running && self.supervisor.settled();
        reply
    }

    fn carry_out(&mut self, command: FixedCommand) -> Result<FixedAcceptance, CommandError> {
        match command {
            FixedCommand::SetCurrent(q) => {
                self.state.takes_setpoint(self.supervisor.latched())?;
                let asked = Fixed::from_q15(q);
                let applied = asked.0.max(self.sp_min.0).min(self.sp_max.0);
                self.target = Fixed(applied);
                if applied == asked.0 {
                    Ok(FixedAcceptance::Exact)
                } else {
                    Ok(FixedAcceptance::Limited {
                        applied_q15: Fixed(applied).to_q15(),
                    })
                }
            }
            FixedCommand::Retune(retune) => {
                self.pi.retune(&retune);
                Ok(FixedAcceptance::Exact)
            }
            FixedCommand::Enable => {
                let (state, from_rest) = self.state.enabled(self.supervisor.latched())?;
                if from_rest {
                    self.pi.reset();
                }
                self.state = state;
                Ok(FixedAcceptance::Exact)
            }
            FixedCommand::Disable => {
                if self.state == LoopState::Running {
                    self.stop();
                    self.state = LoopState::Disabled;
                    self.last = FixedDrive::SAFE;
                }
                Ok(FixedAcceptance::Exact)
            }
            FixedCommand::ClearFaults => {
                self.supervisor.clear()?;
                self.state = self.state.cleared();
                Ok(FixedAcceptance::Exact)
            }
        }
    }

    /// The present state.
    pub fn state(&self) -> LoopState {
        self.state
    }

    /// The supervisor (present and latched causes, the first one).
    pub fn supervisor(&self) -> &Supervisor {
        &self.supervisor
    }

    /// The I^2t model, if configured.
    pub fn heat(&self) -> Option<&FixedHeat> {
        self.heat.as_ref()
    }

    /// The I^2t model for setting its heat after a reset, if configured.
    pub fn heat_mut(&mut self) -> Option<&mut FixedHeat> {
        self.heat.as_mut()
    }

    /// The PI controller.
    pub fn pi(&self) -> &FixedPi {
        &self.pi
    }

    /// The configuration.
    pub fn config(&self) -> &FixedLoopConfig {
        &self.config
    }

    /// The last reading as Q15 of the current full scale.
    pub fn last_current_q15(&self) -> i16 {
        self.last_current_q15
    }

    /// The slewed setpoint the PI saw at the last tick, Q27 of the current
    /// full scale.
    pub fn setpoint(&self) -> Fixed {
        self.setpoint
    }

    /// The target the setpoint approaches, Q27 of the current full scale.
    pub fn target(&self) -> Fixed {
        self.target
    }

    /// The volts asked for at the last tick, Q27 of the voltage full scale.
    pub fn commanded(&self) -> Fixed {
        self.last_volts
    }

    /// The last drive command.
    pub fn last_command(&self) -> FixedDrive {
        self.last
    }
}

#[cfg(test)]
mod tests;
