//! The fault supervisor: detects, latches and reports faults.
//!
//! Each control tick the supervisor looks at one [`Observation`] and marks every
//! cause whose condition holds now as *present*. A present cause trips (is added to
//! the latched set) at once, except overcurrent, which trips after a configured
//! number of consecutive samples, and a stuck sensor, which trips after a
//! configured number of frozen ticks. The first cause to trip is kept separately
//! ([`Supervisor::first`]); when several trip in the same tick the first is the one
//! listed earliest in [`Fault`].
//!
//! Latched causes stay latched until [`Supervisor::clear`], which is refused while
//! any cause is still present. The assembled loop drives the safe state (bridge
//! disabled, duty 0, integrator reset) whenever anything is latched.
//!
//! While the supervisor is settled (nothing latched, no count running, nothing
//! present but a warm winding), a tick whose readings are all in range changes
//! only the thermal model and the remembered reading; the assembled loop then
//! takes a quiet path that does just that instead of the full [`Supervisor::check`]
//! (see [`crate::current_loop`]).
//!
//! | cause | present while |
//! |---|---|
//! | [`Fault::Overcurrent`] | `|i| > threshold_a` on the latest sample |
//! | [`Fault::Overload`] | the I^2t heat is above the rated steady state ([`thermal`]) |
//! | [`Fault::CurrentInvalid`] | the current is NaN or infinite |
//! | [`Fault::SensorRail`] | the ADC reading is at or beyond a rail |
//! | [`Fault::SensorStuck`] | the reading has not moved by more than the band for the set ticks while the drive is at least the set fraction; with the drive off it cannot be seen, so it counts as gone |
//! | [`Fault::BusUndervoltage`] / [`Fault::BusOvervoltage`] | the bus is outside its window |
//! | [`Fault::BusInvalid`] | the bus reading is NaN or infinite |
//! | [`Fault::SpeedInvalid`] | a speed was given and it is NaN or infinite |
//! | [`Fault::SpeedImplausible`] | a speed was given and its magnitude is above the configured largest speed ([`SpeedLimit`]) |
//!
//! Overcurrent, the bus window and the reading checks (invalid, at a rail) are
//! always on. The I^2t model, stuck-sensor detection and the speed limit are
//! added to the configuration when wanted; [`SupervisorConfig::protections`]
//! says which are on, so a start-up log or a review can show what is off.

pub mod fixed_heat;
pub mod thermal;

use core::fmt;

use crate::error::{ClearRefused, ConfigError, Requirement, finite, positive};
pub use crate::fault::{Fault, FaultSet};
use thermal::QuietHeat;
pub use thermal::{ThermalConfig, ThermalModel, TripClass};

/// Validated overcurrent limit: `|i| > threshold_a` for `samples` consecutive samples trips.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct OvercurrentLimit {
    threshold_a: f32,
    samples: u16,
}

impl OvercurrentLimit {
    /// `threshold_a > 0`, `samples >= 1` (1 trips on the first sample above).
    pub fn new(threshold_a: f32, samples: u16) -> Result<Self, ConfigError> {
        let threshold_a = positive("threshold_a", threshold_a)?;
        if samples == 0 {
            return Err(ConfigError::new("samples", 0.0, Requirement::AtLeastOne));
        }
        Ok(Self { threshold_a, samples })
    }

    /// Threshold in amperes (magnitude).
    pub fn threshold_a(&self) -> f32 {
        self.threshold_a
    }

    /// Consecutive samples above the threshold needed to trip.
    pub fn samples(&self) -> u16 {
        self.samples
    }
}

/// Validated bus-voltage window `min_v < max_v`, `min_v > 0`.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct BusWindow {
    min_v: f32,
    max_v: f32,
}

impl BusWindow {
    /// Under-voltage below `min_v` (> 0), over-voltage above `max_v` (> `min_v`).
    pub fn new(min_v: f32, max_v: f32) -> Result<Self, ConfigError> {
        let min_v = positive("bus_min_v", min_v)?;
        let max_v = finite("bus_max_v", max_v)?;
        if max_v <= min_v {
            return Err(ConfigError::new(
                "bus_max_v",
                max_v,
                Requirement::Above("bus_min_v"),
            ));
        }
        Ok(Self { min_v, max_v })
    }

    /// Lowest good bus voltage, volts.
    pub fn min_v(&self) -> f32 {
        self.min_v
    }

    /// Highest good bus voltage, volts.
    pub fn max_v(&self) -> f32 {
        self.max_v
    }
}

/// Validated stuck-sensor detection.
///
/// Not on unless added ([`SupervisorConfig::with_stuck_detection`]), and there is
/// no default setting: a live sensor is told from a frozen one only by its noise
/// and ripple, which differ from board to board. A quiet ADC at a steady
/// current (a stalled motor, a charger at constant current) legitimately reads
/// the same count for many ticks at a high duty, so a band and count that suit
/// a noisy board trip a quiet one, and a setting loose enough for every board
/// misses the fault on most. Pick them from the board's measured noise (the
/// demo scenario shows how) and check them on a steady high-duty run; while it
/// is off, [`SupervisorConfig::protections`] says so.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct StuckDetection {
    band_counts: u16,
    ticks: u16,
    min_drive: f32,
}

impl StuckDetection {
    /// Trips after `ticks` (>= 1) consecutive ticks in which the reading moved by
    /// `band_counts` or less while the drive magnitude (duty fraction) was at least
    /// `min_drive` (in `(0, 1]`). A real sensor shows noise and ripple of a few
    /// counts, so pick a band below that and enough ticks to span several PWM periods.
    /// Once the fault has latched it stays present, whatever the drive, until the
    /// reading moves by more than the band, so it cannot be cleared while the
    /// sensor is still frozen.
    pub fn new(band_counts: u16, ticks: u16, min_drive: f32) -> Result<Self, ConfigError> {
        if ticks == 0 {
            return Err(ConfigError::new("stuck_ticks", 0.0, Requirement::AtLeastOne));
        }
        let min_drive = crate::error::within("min_drive", min_drive, f32::MIN_POSITIVE, 1.0)?;
        Ok(Self {
            band_counts,
            ticks,
            min_drive,
        })
    }

    /// The band a reading must stay within to count as frozen, ADC counts.
    pub fn band_counts(&self) -> u16 {
        self.band_counts
    }

    /// Consecutive frozen ticks that trip.
    pub fn ticks(&self) -> u16 {
        self.ticks
    }

    /// The least drive magnitude (duty fraction) at which frozen ticks count.
    pub fn min_drive(&self) -> f32 {
        self.min_drive
    }
}

/// Validated speed plausibility limit: a speed reading whose magnitude is above
/// `max_speed_rad_s` latches [`Fault::SpeedImplausible`] on that tick.
///
/// Pick it above the fastest the drive can really turn (the no-load speed at
/// the highest bus, plus what the load can back-drive it to) and below what a
/// broken sensor reports; the back-EMF feedforward needs it, as a wild speed
/// would otherwise ask for a wild voltage.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct SpeedLimit {
    max_speed_rad_s: f32,
}

impl SpeedLimit {
    /// Largest plausible speed magnitude, rad/s (finite, > 0).
    pub fn new(max_speed_rad_s: f32) -> Result<Self, ConfigError> {
        Ok(Self {
            max_speed_rad_s: positive("max_speed_rad_s", max_speed_rad_s)?,
        })
    }

    /// Largest plausible speed magnitude, rad/s.
    pub fn max_speed_rad_s(&self) -> f32 {
        self.max_speed_rad_s
    }
}

/// One protection of the supervisor, for reporting which are on.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[repr(u8)]
pub enum Protection {
    /// Overcurrent trip ([`Fault::Overcurrent`]); always on.
    Overcurrent = 1 << 0,
    /// Bus window ([`Fault::BusUndervoltage`], [`Fault::BusOvervoltage`],
    /// [`Fault::BusInvalid`]); always on.
    BusWindow = 1 << 1,
    /// Current readings NaN, infinite or at a rail ([`Fault::CurrentInvalid`],
    /// [`Fault::SensorRail`]); always on.
    SensorReadings = 1 << 2,
    /// I^2t winding overload ([`Fault::Overload`]); on with [`SupervisorConfig::with_thermal`].
    Overload = 1 << 3,
    /// Frozen current readings ([`Fault::SensorStuck`]); on with
    /// [`SupervisorConfig::with_stuck_detection`].
    SensorStuck = 1 << 4,
    /// Speed readings beyond the largest plausible speed
    /// ([`Fault::SpeedImplausible`]); on with [`SupervisorConfig::with_speed_limit`].
    /// Non-finite speeds ([`Fault::SpeedInvalid`]) latch either way.
    SpeedLimit = 1 << 5,
}

impl Protection {
    /// Every protection, the always-on ones first.
    pub const ALL: [Protection; 6] = [
        Protection::Overcurrent,
        Protection::BusWindow,
        Protection::SensorReadings,
        Protection::Overload,
        Protection::SensorStuck,
        Protection::SpeedLimit,
    ];

    /// A short name for people.
    pub fn describe(self) -> &'static str {
        match self {
            Protection::Overcurrent => "overcurrent trip",
            Protection::BusWindow => "bus voltage window",
            Protection::SensorReadings => "invalid or railed current readings",
            Protection::Overload => "I^2t winding overload",
            Protection::SensorStuck => "stuck current sensor",
            Protection::SpeedLimit => "speed plausibility",
        }
    }

    /// What goes unnoticed while this protection is off.
    pub fn risk_when_off(self) -> &'static str {
        match self {
            Protection::Overcurrent | Protection::BusWindow | Protection::SensorReadings => {
                "nothing: it is always on"
            }
            Protection::Overload => {
                "a current above the winding's rating but below the overcurrent threshold heats it without a trip"
            }
            Protection::SensorStuck => {
                "a frozen current reading lets the true current rise unseen, up to the bus limit"
            }
            Protection::SpeedLimit => {
                "a wild but finite speed reading is taken as true (and drives the back-EMF feedforward)"
            }
        }
    }
}

impl fmt::Display for Protection {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.describe())
    }
}

/// Which protections a configuration has on.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Protections(u8);

impl Protections {
    /// True when `protection` is on.
    pub fn is_on(self, protection: Protection) -> bool {
        self.0 & protection as u8 != 0
    }

    /// The protections that are on, in [`Protection::ALL`] order.
    pub fn on(self) -> impl Iterator<Item = Protection> {
        Protection::ALL.into_iter().filter(move |p| self.is_on(*p))
    }

    /// The protections that are off, in [`Protection::ALL`] order.
    pub fn off(self) -> impl Iterator<Item = Protection> {
        Protection::ALL.into_iter().filter(move |p| !self.is_on(*p))
    }

    /// True when every protection is on.
    pub fn all_on(self) -> bool {
        self.off().next().is_none()
    }
}

/// Validated supervisor configuration.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct SupervisorConfig {
    overcurrent: OvercurrentLimit,
    bus: BusWindow,
    thermal: Option<ThermalConfig>,
    stuck: Option<StuckDetection>,
    speed: Option<SpeedLimit>,
}

impl SupervisorConfig {
    /// Overcurrent and bus window (and the reading checks, always on); no I^2t
    /// model, no stuck detection and no speed limit until added:
    /// [`SupervisorConfig::protections`] lists them as off.
    pub fn new(overcurrent: OvercurrentLimit, bus: BusWindow) -> Self {
        Self {
            overcurrent,
            bus,
            thermal: None,
            stuck: None,
            speed: None,
        }
    }

    /// Adds the I^2t thermal model.
    pub fn with_thermal(self, thermal: ThermalConfig) -> Self {
        Self {
            thermal: Some(thermal),
            ..self
        }
    }

    /// Adds stuck-sensor detection.
    pub fn with_stuck_detection(self, stuck: StuckDetection) -> Self {
        Self {
            stuck: Some(stuck),
            ..self
        }
    }

    /// Adds the speed plausibility limit.
    pub fn with_speed_limit(self, speed: SpeedLimit) -> Self {
        Self {
            speed: Some(speed),
            ..self
        }
    }

    /// Which protections are on.
    pub fn protections(&self) -> Protections {
        let mut on =
            Protection::Overcurrent as u8 | Protection::BusWindow as u8 | Protection::SensorReadings as u8;
        if self.thermal.is_some() {
            on |= Protection::Overload as u8;
        }
        if self.stuck.is_some() {
            on |= Protection::SensorStuck as u8;
        }
        if self.speed.is_some() {
            on |= Protection::SpeedLimit as u8;
        }
        Protections(on)
    }

    /// The overcurrent limit.
    pub fn overcurrent(&self) -> OvercurrentLimit {
        self.overcurrent
    }

    /// The bus window.
    pub fn bus(&self) -> BusWindow {
        self.bus
    }

    /// The thermal model parameters, if enabled.
    pub fn thermal(&self) -> Option<ThermalConfig> {
        self.thermal
    }

    /// The stuck-sensor detection, if enabled.
    pub fn stuck_detection(&self) -> Option<StuckDetection> {
        self.stuck
    }

    /// The speed plausibility limit, if enabled.
    pub fn speed_limit(&self) -> Option<SpeedLimit> {
        self.speed
    }

    /// The largest speed magnitude that is not a fault, rad/s: the limit, or
    /// `f32::MAX` without one (then only non-finite speeds are).
    #[inline]
    pub(crate) fn max_speed_rad_s(&self) -> f32 {
        match self.speed {
            Some(s) => s.max_speed_rad_s,
            None => f32::MAX,
        }
    }
}

/// What the supervisor looks at in one tick.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Observation {
    /// Calibrated current, amperes (positive = forward).
    pub current_a: f32,
    /// The raw ADC reading it came from.
    pub counts: u16,
    /// Whether that reading is at a rail ([`crate::sense::CurrentSense::at_rail`]).
    pub at_rail: bool,
    /// Measured bus voltage, volts.
    pub bus_v: f32,
    /// Measured speed, rad/s, if the application has one.
    pub speed_rad_s: Option<f32>,
    /// Magnitude of the duty applied during the period just measured, 0 to 1.
    pub drive: f32,
}

/// One tick's readings judged against the configuration, before counting and
/// latching: what [`Supervisor::judge`] takes from either arithmetic.
#[derive(Clone, Copy, Debug, PartialEq)]
pub(crate) struct Verdict {
    /// Every cause whose condition holds on this tick's readings, except a
    /// stuck sensor (the supervisor counts that itself): overcurrent on this
    /// sample, a warm winding as overload, invalid readings, a rail, the bus
    /// window, the speed.
    pub present: FaultSet,
    /// The I^2t heat is at the trip level.
    pub hot_trip: bool,
    /// The reading, for the stuck detector.
    pub counts: u16,
    /// The drive is at least the stuck detector's `min_drive` (false without
    /// stuck detection).
    pub driven: bool,
}

/// The running supervisor.
#[derive(Clone, Debug)]
pub struct Supervisor {
    config: SupervisorConfig,
    thermal: Option<ThermalModel>,
    over_count: u16,
    stuck_count: u16,
    /// The last reading; before the first one, a value no reading is within the
    /// stuck band of.
    last_counts: i32,
    /// The stuck band in counts, widened once here for the comparison (-1
    /// without stuck detection, though it is then never read).
    stuck_band: i32,
    present: FaultSet,
    latched: FaultSet,
    first: Option<Fault>,
    /// Nothing latched, no detector counting, no cause present except a warm
    /// winding: a tick whose readings are all in range then changes nothing but
    /// the thermal sum and the last reading (the assembled loop's short path).
    settled: bool,
}

/// A reading no 16-bit reading is within any stuck band of.
const NO_READING: i32 = -0x1_0000;

impl Supervisor {
    /// A supervisor with nothing latched and a cold thermal model, for a control
    /// period of `period_s` seconds.
    pub fn new(config: SupervisorConfig, period_s: f32) -> Result<Self, ConfigError> {
        let thermal = match config.thermal {
            Some(t) => Some(ThermalModel::new(t, period_s)?),
            None => None,
        };
        Ok(Self {
            thermal,
            ..Self::counting(config)
        })
    }

    /// A supervisor that only counts and latches (no float thermal model
    /// of its own): the fixed-point loop keeps its heat itself and passes
    /// the verdict to [`Supervisor::judge`].
    pub(crate) fn counting(config: SupervisorConfig) -> Self {
        let stuck_band = config.stuck.map_or(-1, |s| s.band_counts as i32);
        Self {
            config,
            thermal: None,
            over_count: 0,
            stuck_count: 0,
            last_counts: NO_READING,
            stuck_band,
            present: FaultSet::EMPTY,
            latched: FaultSet::EMPTY,
            first: None,
            settled: true,
        }
    }

    /// Looks at one tick and returns the latched set after it.
    #[inline]
    pub fn check(&mut self, obs: &Observation) -> FaultSet {
        let i = obs.current_a;
        let current_ok = i.is_finite();
        let (hot_trip, still_hot) = match &mut self.thermal {
            Some(model) => {
                model.tick(i);
                (model.tripped(), model.still_hot())
            }
            None => (false, false),
        };
        let bus = obs.bus_v;
        let bus_ok = bus.is_finite();
        let (speed_bad, speed_high) = match obs.speed_rad_s {
            Some(w) => (
                !w.is_finite(),
                w.is_finite() && w.abs() > self.config.max_speed_rad_s(),
            ),
            None => (false, false),
        };
        let over = current_ok && i.abs() > self.config.overcurrent.threshold_a;
        self.judge(&Verdict {
            present: FaultSet::EMPTY
                .with_if(Fault::Overcurrent, over)
                .with_if(Fault::Overload, still_hot || hot_trip)
                .with_if(Fault::CurrentInvalid, !current_ok)
                .with_if(Fault::SensorRail, obs.at_rail)
                .with_if(Fault::BusUndervoltage, bus_ok && bus < self.config.bus.min_v)
                .with_if(Fault::BusOvervoltage, bus_ok && bus > self.config.bus.max_v)
                .with_if(Fault::BusInvalid, !bus_ok)
                .with_if(Fault::SpeedInvalid, speed_bad)
                .with_if(Fault::SpeedImplausible, speed_high),
            hot_trip,
            counts: obs.counts,
            driven: self.config.stuck.is_some_and(|s| obs.drive >= s.min_drive),
        })
    }

    /// Counts, latches and reports one tick's verdict: the part of the check
    /// the float and the fixed-point loops share (each reads its own numbers
    /// into a [`Verdict`]). Returns the latched set after it.
    #[inline(always)]
    pub(crate) fn judge(&mut self, v: &Verdict) -> FaultSet {
        let over = v.present.contains(Fault::Overcurrent);
        self.over_count = if over {
            self.over_count.saturating_add(1)
        } else {
            0
        };
        let over_trip = self.over_count >= self.config.overcurrent.samples;

        let stuck_trip = match self.config.stuck {
            Some(s) => {
                // Once latched, a frozen reading keeps the fault present even with
                // the bridge off (no drive), so it cannot be cleared until the
                // reading moves again.
                let watching = v.driven || self.latched.contains(Fault::SensorStuck);
                self.stuck_count = if self.frozen(v.counts) && watching {
                    self.stuck_count.saturating_add(1)
                } else {
                    0
                };
                self.stuck_count >= s.ticks
            }
            None => false,
        };
        self.last_counts = v.counts as i32;
        self.present = v.present.with_if(Fault::SensorStuck, stuck_trip);

        // Everything present trips at once, except overcurrent (needs its count) and
        // overload (needs the trip level, not just "warm").
        let mut tripped = FaultSet(self.present.0 & !(Fault::Overcurrent as u16 | Fault::Overload as u16));
        tripped = tripped.with_if(Fault::Overcurrent, over_trip);
        tripped = tripped.with_if(Fault::Overload, v.hot_trip);
        if self.latched.is_empty() && !tripped.is_empty() {
            self.first = tripped.earliest();
        }
        self.latched = self.latched.union(tripped);
        self.settle();
        self.latched
    }

    /// Whether the supervisor is settled: nothing latched, no detector counting,
    /// no cause present except a warm winding.
    #[inline(always)]
    pub(crate) fn settled(&self) -> bool {
        self.settled
    }

    /// The short path for a caller that has already found the current, the rail
    /// test, the bus and the speed in range on a settled supervisor: false, and
    /// nothing changed, if the reading would count as frozen or the winding's
    /// heat would reach its trip level; otherwise it does what
    /// [`Supervisor::check`] would (the thermal model takes the tick, the reading
    /// is remembered, a warm winding shows as a present overload) and returns true.
    #[inline(always)]
    pub(crate) fn quiet_tick(&mut self, current_a: f32, counts: u16, drive: f32) -> bool {
        if let Some(stuck) = self.config.stuck
            && drive >= stuck.min_drive
            && self.frozen(counts)
        {
            return false;
        }
        if let Some(model) = &mut self.thermal {
            match model.add_below_trip(current_a) {
                QuietHeat::Unchanged => {}
                QuietHeat::Stepped { still_hot } => {
                    self.present = FaultSet::EMPTY.with_if(Fault::Overload, still_hot);
                }
                QuietHeat::WouldTrip => return false,
            }
        }
        self.last_counts = counts as i32;
        true
    }

    /// The fixed-point loop's short path, for a caller that has found the
    /// reading clear of the rails and the threshold and the bus inside its
    /// window on a settled supervisor, and has ticked its own heat model
    /// below the trip: false, and nothing changed, if the reading would
    /// count as frozen (`driven` says the drive is at least the detector's
    /// `min_drive`, false without stuck detection); otherwise it does what
    /// [`Supervisor::judge`] would (the reading remembered, a warm winding
    /// present as overload) and returns true.
    #[inline(always)]
    pub(crate) fn quiet_counts(&mut self, counts: u16, driven: bool, still_hot: bool) -> bool {
        if driven && self.frozen(counts) {
            return false;
        }
        self.present = FaultSet::EMPTY.with_if(Fault::Overload, still_hot);
        self.last_counts = counts as i32;
        true
    }

    /// Whether a reading has moved by no more than the stuck band since the last;
    /// callers ask only with stuck detection configured.
    #[inline(always)]
    fn frozen(&self, counts: u16) -> bool {
        (counts as i32 - self.last_counts).abs() <= self.stuck_band
    }

    /// Recomputes whether the next tick may take the short path.
    fn settle(&mut self) {
        self.settled = self.latched.is_empty()
            && self.over_count == 0
            && self.stuck_count == 0
            && self.present.0 & !(Fault::Overload as u16) == 0;
    }

    /// Clears the latch, or refuses with the causes still present (the latch then
    /// stays as it was). The thermal model keeps its heat either way, and counts
    /// in progress (samples over the threshold, frozen readings) go on, so
    /// repeated clears cannot hold off a trip.
    pub fn clear(&mut self) -> Result<(), ClearRefused> {
        if !self.present.is_empty() {
            return Err(ClearRefused {
                still_present: self.present,
            });
        }
        // The detection counters stay: a clear while an overcurrent or a frozen
        // reading is still being counted must not postpone its trip.
        self.latched = FaultSet::EMPTY;
        self.first = None;
        self.settle();
        Ok(())
    }

    /// The latched causes.
    pub fn latched(&self) -> FaultSet {
        self.latched
    }

    /// The causes present at the last check.
    pub fn present(&self) -> FaultSet {
        self.present
    }

    /// The first cause that tripped since the last clear.
    pub fn first(&self) -> Option<Fault> {
        self.first
    }

    /// The thermal model, if enabled.
    pub fn thermal(&self) -> Option<&ThermalModel> {
        self.thermal.as_ref()
    }

    /// The thermal model for setting its heat, if enabled.
    /// The next tick then takes the full pass, so a changed heat counts at once.
    pub fn thermal_mut(&mut self) -> Option<&mut ThermalModel> {
        self.settled = false;
        self.thermal.as_mut()
    }

    /// The configuration.
    pub fn config(&self) -> &SupervisorConfig {
        &self.config
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn obs(current_a: f32) -> Observation {
        Observation {
            current_a,
            counts: 2048,
            at_rail: false,
            bus_v: 24.0,
            speed_rad_s: None,
            drive: 0.0,
        }
    }

    fn supervisor(samples: u16) -> Supervisor {
        let cfg = SupervisorConfig::new(
            OvercurrentLimit::new(5.0, samples).unwrap(),
            BusWindow::new(10.0, 30.0).unwrap(),
        );
        Supervisor::new(cfg, 1e-4).unwrap()
    }

    #[test]
    fn overcurrent_trips_on_exactly_the_configured_sample() {
        for n in [1u16, 2, 3, 7, 50] {
            let mut s = supervisor(n);
            for k in 1..n {
                assert!(s.check(&obs(-5.5)).is_empty(), "n={n}, sample {k}");
            }
            assert!(s.check(&obs(-5.5)).contains(Fault::Overcurrent), "n={n}");
            assert_eq!(s.first(), Some(Fault::Overcurrent));
        }
    }

    #[test]
    fn overcurrent_count_restarts_below_threshold() {
        let mut s = supervisor(3);
        s.check(&obs(6.0));
        s.check(&obs(6.0));
        s.check(&obs(5.0)); // at the threshold is not above it
        s.check(&obs(6.0));
        assert!(s.check(&obs(6.0)).is_empty());
        assert!(!s.check(&obs(6.0)).is_empty());
    }

    #[test]
    fn faults_cannot_be_cleared_while_present() {
        let mut s = supervisor(1);
        s.check(&obs(9.0));
        let refused = s.clear().unwrap_err();
        assert!(refused.still_present.contains(Fault::Overcurrent));
        assert!(s.latched().contains(Fault::Overcurrent));
        s.check(&obs(0.0));
        assert!(s.latched().contains(Fault::Overcurrent), "latched until cleared");
        s.clear().unwrap();
        assert!(s.latched().is_empty());
        assert_eq!(s.first(), None);
    }

    #[test]
    fn first_cause_is_kept() {
        let mut s = supervisor(1);
        let mut o = obs(0.0);
        o.bus_v = 5.0;
        s.check(&o);
        s.check(&obs(f32::NAN));
        assert_eq!(s.first(), Some(Fault::BusUndervoltage));
        assert!(s.latched().contains(Fault::CurrentInvalid));
    }

    #[test]
    fn bad_readings_trip_in_one_tick() {
        let cases: [(Observation, Fault); 6] = [
            (obs(f32::NAN), Fault::CurrentInvalid),
            (obs(f32::INFINITY), Fault::CurrentInvalid),
            (
                Observation {
                    at_rail: true,
                    ..obs(0.0)
                },
                Fault::SensorRail,
            ),
            (
                Observation {
                    bus_v: f32::NAN,
                    ..obs(0.0)
                },
                Fault::BusInvalid,
            ),
            (
                Observation {
                    bus_v: 31.0,
                    ..obs(0.0)
                },
                Fault::BusOvervoltage,
            ),
            (
                Observation {
                    speed_rad_s: Some(f32::NEG_INFINITY),
                    ..obs(0.0)
                },
                Fault::SpeedInvalid,
            ),
        ];
        for (o, fault) in cases {
            let mut s = supervisor(3);
            assert!(s.check(&o).contains(fault), "{fault:?}");
        }
    }

    #[test]
    fn stuck_sensor_trips_only_while_driving() {
        let cfg = SupervisorConfig::new(
            OvercurrentLimit::new(5.0, 1).unwrap(),
            BusWindow::new(10.0, 30.0).unwrap(),
        )
        .with_stuck_detection(StuckDetection::new(1, 10, 0.5).unwrap());
        let mut s = Supervisor::new(cfg, 1e-4).unwrap();
        // Frozen reading with the drive off: never trips.
        for _ in 0..100 {
            assert!(s.check(&obs(0.0)).is_empty());
        }
        // Frozen reading at 80 % drive: the first tick compares against the last
        // reading, so the tenth frozen tick trips.
        let driving = Observation {
            drive: 0.8,
            ..obs(0.0)
        };
        for _ in 0..9 {
            assert!(s.check(&driving).is_empty());
        }
        assert!(s.check(&driving).contains(Fault::SensorStuck));
        // In the safe state (drive off) the reading is still frozen: the cause is
        // still present and clearing is refused.
        for _ in 0..20 {
            s.check(&obs(0.0));
        }
        assert!(s.clear().unwrap_err().still_present.contains(Fault::SensorStuck));
        // Once the reading moves again it can be cleared.
        s.check(&Observation {
            counts: 2100,
            ..obs(0.0)
        });
        s.clear().unwrap();
    }

    #[test]
    fn moving_reading_is_not_stuck() {
        let cfg = SupervisorConfig::new(
            OvercurrentLimit::new(5.0, 1).unwrap(),
            BusWindow::new(10.0, 30.0).unwrap(),
        )
        .with_stuck_detection(StuckDetection::new(1, 10, 0.5).unwrap());
        let mut s = Supervisor::new(cfg, 1e-4).unwrap();
        for k in 0..1000u16 {
            let o = Observation {
                counts: 2048 + 2 * (k % 2),
                drive: 0.9,
                ..obs(0.0)
            };
            assert!(s.check(&o).is_empty());
        }
    }

    #[test]
    fn a_clear_while_counting_does_not_postpone_the_trip() {
        let cfg = SupervisorConfig::new(
            OvercurrentLimit::new(5.0, 4).unwrap(),
            BusWindow::new(10.0, 30.0).unwrap(),
        )
        .with_stuck_detection(StuckDetection::new(0, 6, 0.5).unwrap());
        // Overcurrent: three samples over, an accepted-or-refused clear, the fourth trips.
        let mut s = Supervisor::new(cfg, 1e-4).unwrap();
        for _ in 0..3 {
            assert!(s.check(&obs(6.0)).is_empty());
        }
        let _ = s.clear();
        assert!(s.check(&obs(6.0)).contains(Fault::Overcurrent));
        // Stuck: a clear (accepted: nothing present yet) in the middle of the count.
        let mut s = Supervisor::new(cfg, 1e-4).unwrap();
        let driving = Observation {
            drive: 0.8,
            ..obs(0.0)
        };
        for _ in 0..4 {
            assert!(s.check(&driving).is_empty());
        }
        // Four readings: three frozen comparisons counted so far.
        s.clear().unwrap();
        assert!(s.check(&driving).is_empty());
        assert!(s.check(&driving).is_empty());
        assert!(
            s.check(&driving).contains(Fault::SensorStuck),
            "trips on the 6th frozen comparison"
        );
    }

    fn thermal_supervisor(class: TripClass) -> Supervisor {
        let cfg = SupervisorConfig::new(
            OvercurrentLimit::new(20.0, 3).unwrap(),
            BusWindow::new(10.0, 30.0).unwrap(),
        )
        .with_thermal(ThermalConfig::from_trip_class(2.0, class).unwrap());
        Supervisor::new(cfg, 1e-3).unwrap()
    }

    #[test]
    fn an_overload_latches_as_overload_and_comes_first() {
        let mut s = thermal_supervisor(TripClass::Class10A);
        assert!(s.config().protections().is_on(Protection::Overload));
        // 7.2 x rated from cold trips class 10A in the middle of its band, 6 s.
        let mut ticks = 0u32;
        while s.check(&obs(14.4)).is_empty() {
            ticks += 1;
            assert!(ticks < 10_000, "no trip in 10 s");
        }
        assert!((5_900..6_100).contains(&ticks), "{ticks}");
        assert_eq!(s.latched(), FaultSet::EMPTY.with(Fault::Overload));
        assert_eq!(s.first(), Some(Fault::Overload));
        assert_ne!(Fault::Overload as u16, 0);
    }

    #[test]
    fn a_clear_after_an_overload_waits_until_the_winding_has_cooled() {
        // Class 10A: tau = 232.3 s. From the heat at the trip, cooling to the
        // rated steady state (h = 1) takes tau ln(h_trip).
        let mut s = thermal_supervisor(TripClass::Class10A);
        assert!(
            (0..10_000).any(|_| !s.check(&obs(14.4)).is_empty()),
            "no trip in 10 s"
        );
        let h_trip = s.thermal().unwrap().heat() as f64;
        let tau = s.config().thermal().unwrap().tau_s() as f64;
        let cooling_ticks = (tau * h_trip.ln() * 1e3) as u32;
        assert!(cooling_ticks > 60_000, "{cooling_ticks}");
        for _ in 0..cooling_ticks * 95 / 100 {
            s.check(&obs(0.0));
        }
        let refused = s.clear().unwrap_err();
        assert_eq!(refused.still_present, FaultSet::EMPTY.with(Fault::Overload));
        for _ in 0..cooling_ticks / 10 {
            s.check(&obs(0.0));
        }
        s.clear().unwrap();
    }

    #[test]
    fn with_thermal_and_the_hot_start_reach_the_model() {
        let t = ThermalConfig::from_trip_class(2.0, TripClass::Class10).unwrap();
        let base = SupervisorConfig::new(
            OvercurrentLimit::new(20.0, 3).unwrap(),
            BusWindow::new(10.0, 30.0).unwrap(),
        );
        assert_eq!(base.thermal(), None);
        assert!(!base.protections().is_on(Protection::Overload));
        assert_eq!(base.with_thermal(t).thermal(), Some(t));
        // A hot start set through `thermal_mut` counts at the next check.
        let mut s = thermal_supervisor(TripClass::Class10);
        s.thermal_mut()
            .expect("the model is there")
            .set_heat(1.3)
            .unwrap();
        assert_eq!(s.thermal().unwrap().heat(), 1.3);
        assert!(s.check(&obs(0.0)).is_empty());
        assert!(s.present().contains(Fault::Overload), "warm winding present");
        assert!(s.clear().is_err());
    }

    #[test]
    fn the_bus_window_edges_are_good_and_their_neighbours_are_not() {
        let up = |v: f32| f32::from_bits(v.to_bits() + 1);
        let down = |v: f32| f32::from_bits(v.to_bits() - 1);
        for (bus_v, fault) in [
            (10.0, None),
            (30.0, None),
            (down(10.0), Some(Fault::BusUndervoltage)),
            (up(30.0), Some(Fault::BusOvervoltage)),
        ] {
            let mut s = supervisor(1);
            let latched = s.check(&Observation { bus_v, ..obs(0.0) });
            match fault {
                None => assert!(latched.is_empty(), "{bus_v}"),
                Some(f) => assert_eq!(latched, FaultSet::EMPTY.with(f), "{bus_v}"),
            }
        }
    }

    #[test]
    fn the_first_reading_is_never_taken_as_frozen() {
        // No reading before the first: even a reading at the top of a 16-bit
        // ADC, with a band of 1 and a single tick to trip, must not count.
        let cfg = SupervisorConfig::new(
            OvercurrentLimit::new(5.0, 1).unwrap(),
            BusWindow::new(10.0, 30.0).unwrap(),
        )
        .with_stuck_detection(StuckDetection::new(1, 1, 0.5).unwrap());
        for counts in [0u16, 1, 2048, 65_534, 65_535] {
            let mut s = Supervisor::new(cfg, 1e-4).unwrap();
            let o = Observation {
                counts,
                drive: 0.9,
                ..obs(0.0)
            };
            assert!(s.check(&o).is_empty(), "first reading {counts}");
            assert!(
                s.check(&o).contains(Fault::SensorStuck),
                "second reading {counts}"
            );
        }
    }

    #[test]
    fn speed_beyond_the_limit_trips_and_at_the_limit_does_not() {
        let cfg = SupervisorConfig::new(
            OvercurrentLimit::new(5.0, 1).unwrap(),
            BusWindow::new(10.0, 30.0).unwrap(),
        )
        .with_speed_limit(SpeedLimit::new(500.0).unwrap());
        assert!(cfg.protections().is_on(Protection::SpeedLimit));
        assert!(!cfg.protections().all_on());
        for (w, fault) in [
            (500.0, None),
            (-500.0, None),
            (500.1, Some(Fault::SpeedImplausible)),
            (-1e30, Some(Fault::SpeedImplausible)),
            (f32::INFINITY, Some(Fault::SpeedInvalid)),
        ] {
            let mut s = Supervisor::new(cfg, 1e-4).unwrap();
            let latched = s.check(&Observation {
                speed_rad_s: Some(w),
                ..obs(0.0)
            });
            match fault {
                None => assert!(latched.is_empty(), "{w}"),
                Some(f) => assert_eq!(latched, FaultSet::EMPTY.with(f), "{w}"),
            }
        }
        // Without a limit only non-finite speeds are faults.
        let mut s = supervisor(1);
        assert!(
            s.check(&Observation {
                speed_rad_s: Some(f32::MAX),
                ..obs(0.0)
            })
            .is_empty()
        );
    }

    #[test]
    fn protections_list_what_is_off() {
        let base = SupervisorConfig::new(
            OvercurrentLimit::new(5.0, 1).unwrap(),
            BusWindow::new(10.0, 30.0).unwrap(),
        );
        let off: heapless::Vec<Protection, 6> = base.protections().off().collect();
        assert_eq!(
            off,
            [
                Protection::Overload,
                Protection::SensorStuck,
                Protection::SpeedLimit
            ]
        );
        let all = base
            .with_thermal(ThermalConfig::from_trip_class(2.0, TripClass::Class10).unwrap())
            .with_stuck_detection(StuckDetection::new(0, 100, 0.2).unwrap())
            .with_speed_limit(SpeedLimit::new(100.0).unwrap());
        assert!(all.protections().all_on());
        assert_eq!(all.protections().on().count(), 6);
        assert_eq!(all.stuck_detection().unwrap().ticks(), 100);
    }

    #[test]
    fn configuration_reads_back_what_was_built() {
        let oc = OvercurrentLimit::new(5.5, 4).unwrap();
        assert_eq!((oc.threshold_a(), oc.samples()), (5.5, 4));
        let bus = BusWindow::new(11.0, 29.0).unwrap();
        assert_eq!((bus.min_v(), bus.max_v()), (11.0, 29.0));
        let stuck = StuckDetection::new(3, 50, 0.25).unwrap();
        assert_eq!(
            (stuck.band_counts(), stuck.ticks(), stuck.min_drive()),
            (3, 50, 0.25)
        );
        let speed = SpeedLimit::new(321.0).unwrap();
        assert_eq!(speed.max_speed_rad_s(), 321.0);
        let thermal = ThermalConfig::from_time_constant(2.5, 40.0).unwrap();
        assert_eq!(
            (thermal.rated_a(), thermal.tau_s(), thermal.trip_multiple()),
            (2.5, 40.0, 1.15)
        );
        let cfg = SupervisorConfig::new(oc, bus)
            .with_stuck_detection(stuck)
            .with_speed_limit(speed)
            .with_thermal(thermal);
        assert_eq!((cfg.overcurrent(), cfg.bus()), (oc, bus));
        assert_eq!(
            (cfg.stuck_detection(), cfg.speed_limit(), cfg.thermal()),
            (Some(stuck), Some(speed), Some(thermal))
        );
        let set = FaultSet::EMPTY.with(Fault::Overload).with(Fault::SensorRail);
        assert_eq!(set.bits(), 0b1010);
        assert!(!set.is_empty() && FaultSet::EMPTY.is_empty());
        assert_eq!(set.union(FaultSet::EMPTY.with(Fault::Overcurrent)).bits(), 0b1011);
    }

    #[test]
    fn protections_say_what_they_are_and_what_is_lost_without_them() {
        assert_eq!(Protection::Overload.describe(), "I^2t winding overload");
        assert_eq!(Protection::SensorStuck.describe(), "stuck current sensor");
        assert_eq!(Protection::SpeedLimit.describe(), "speed plausibility");
        let mut names = heapless::Vec::<&str, 6>::new();
        for p in Protection::ALL {
            assert!(!names.contains(&p.describe()), "{p:?}");
            names.push(p.describe()).unwrap();
            let mut buf = heapless::String::<48>::new();
            core::fmt::write(&mut buf, format_args!("{p}")).unwrap();
            assert_eq!(buf.as_str(), p.describe());
            let always = matches!(
                p,
                Protection::Overcurrent | Protection::BusWindow | Protection::SensorReadings
            );
            assert_eq!(p.risk_when_off() == "nothing: it is always on", always, "{p:?}");
        }
        assert!(Protection::Overload.risk_when_off().contains("heats"));
        assert!(Protection::SensorStuck.risk_when_off().contains("frozen"));
        assert!(Protection::SpeedLimit.risk_when_off().contains("speed"));
    }
}
