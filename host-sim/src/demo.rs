//! The built-in demo: an invented machine, board and application.
//!
//! **All values here are invented for the demo** (no real product is described).
//! The application is the drive of a sample carousel in a bench-top incubator: a
//! 24 V brushed gearmotor ("carousel motor AW-C24") turns the carousel, and its
//! torque, hence its current, is controlled by an invented controller board
//! ("Ampwright bench board, rev A"):
//!
//! | part | value |
//! |---|---|
//! | winding | R = 1.9 ohm, L = 2.4 mH, Ke = 0.031 V s/rad, rated 2.0 A continuous |
//! | bus | 24 V nominal, window 18-30 V |
//! | bridge | 20 kHz PWM, duty at most 95 % |
//! | current sense | 10 mOhm shunt, gain 20 amplifier at mid-scale, 12-bit ADC, 3.3 V reference |
//! | control | 20 kHz (Ts = 50 us), Kp = L * 2 pi 800 Hz, Ti = L / R |
//! | protection | 6 A for 3 samples, I^2t class 10 at 2 A rated, speed limit 1500 rad/s, setpoint +/-4 A, slew 2000 A/s |

use pi_core::{
    BusWindow, ConfigError, CurrentLoop, CurrentSense, DutyMapping, LoopConfig, OutputLimits,
    OvercurrentLimit, PiConfig, PiGains, SetpointLimits, SpeedLimit, SupervisorConfig, ThermalConfig,
    TripClass,
};

use crate::plant::bridge::{Bridge, BridgeParams};
use crate::plant::faults::Injectors;
use crate::plant::motor::{Motor, MotorParams};
use crate::plant::sense_chain::{SenseChain, SenseParams};
use crate::plant::timing::{Timing, TimingParams};
use crate::scenario::{Scenario, ScenarioError};
use crate::sim::runner::{DriveChain, Runner};

/// The demo scenario file, as shipped in `host-sim/scenarios/carousel_step.toml`.
pub const SCENARIO_TOML: &str = include_str!("../scenarios/carousel_step.toml");

/// The repository path of the demo scenario.
pub const SCENARIO_PATH: &str = "host-sim/scenarios/carousel_step.toml";

/// The demo scenario, parsed.
pub fn scenario() -> Result<Scenario, ScenarioError> {
    Scenario::parse(SCENARIO_TOML, "carousel-step")
}

/// Winding resistance, ohm (invented).
pub const RESISTANCE_OHM: f64 = 1.9;
/// Winding inductance, henry (invented).
pub const INDUCTANCE_H: f64 = 2.4e-3;
/// Back-EMF constant, V s/rad (invented).
pub const KE_V_S_PER_RAD: f64 = 0.031;
/// Rated continuous current, amperes (invented).
pub const RATED_A: f32 = 2.0;
/// Nominal bus, volts (invented).
pub const BUS_V: f64 = 24.0;
/// Control period, seconds (20 kHz).
pub const PERIOD_S: f32 = 50e-6;
/// Loop bandwidth the gains aim at, hertz (invented design choice).
pub const BANDWIDTH_HZ: f64 = 800.0;
/// ADC bits.
pub const ADC_BITS: u8 = 12;
/// ADC reference, volts.
pub const VREF_V: f32 = 3.3;
/// Shunt, ohm.
pub const SHUNT_OHM: f32 = 0.010;
/// Sense amplifier gain.
pub const AMP_GAIN: f32 = 20.0;
/// Zero-current reading, counts (mid-scale).
pub const OFFSET_COUNTS: f32 = 2048.0;
/// Largest plausible shaft speed, rad/s: about 1.5 x the no-load speed at the
/// top of the bus window (30 V / 0.031 V s/rad = 968 rad/s), rounded.
pub const MAX_SPEED_RAD_S: f32 = 1500.0;

/// The demo gains: pole-zero cancellation, `Kp = L wc`, `Ti = L / R`.
pub fn gains() -> Result<PiGains, ConfigError> {
    let kp = INDUCTANCE_H * 2.0 * std::f64::consts::PI * BANDWIDTH_HZ;
    PiGains::from_kp_ti(kp as f32, (INDUCTANCE_H / RESISTANCE_OHM) as f32)
}

/// The demo board's current sense calibration.
pub fn sense() -> Result<CurrentSense, ConfigError> {
    CurrentSense::from_shunt(ADC_BITS, VREF_V, SHUNT_OHM, AMP_GAIN, OFFSET_COUNTS)
}

/// The demo board's full loop configuration.
pub fn loop_config() -> Result<LoopConfig, ConfigError> {
    let supervisor = SupervisorConfig::new(OvercurrentLimit::new(6.0, 3)?, BusWindow::new(18.0, 30.0)?)
        .with_thermal(ThermalConfig::from_trip_class(RATED_A, TripClass::Class10)?)
        .with_speed_limit(SpeedLimit::new(MAX_SPEED_RAD_S)?);
    let pi = PiConfig::new(gains()?, PERIOD_S, OutputLimits::symmetric(30.0)?)?;
    LoopConfig::new(
        sense()?,
        SetpointLimits::new(-4.0, 4.0, 2000.0)?,
        supervisor,
        pi,
        DutyMapping::new(0.95, 12.0)?,
    )
}

/// The demo loop, disabled and at rest.
pub fn current_loop() -> Result<CurrentLoop, ConfigError> {
    CurrentLoop::new(loop_config()?)
}

/// The demo board around the motor with its rotor held (no back-EMF), as on a
/// locked-rotor bench test: ideal averaged bridge and ideal sense chain, sample at
/// the start of each period (the classic one-sample delay), no events.
pub fn bench() -> Runner {
    let build = || -> Result<Runner, crate::model_error::ModelError> {
        let chain = DriveChain {
            load: Box::new(Motor::new(MotorParams::rl(RESISTANCE_OHM, INDUCTANCE_H))?),
            bridge: Bridge::new(BridgeParams::ideal(BUS_V, 1.0 / PERIOD_S as f64))?,
            sense: SenseChain::new(SenseParams::ideal(
                SHUNT_OHM as f64,
                AMP_GAIN as f64,
                ADC_BITS,
                VREF_V as f64,
            ))?,
            injectors: Injectors::default(),
            load_profile: Vec::new(),
            speed_feedback: false,
        };
        let timing = Timing::new(TimingParams::one_sample_delay(PERIOD_S as f64), PERIOD_S as f64)?;
        Ok(Runner::new(chain, timing, Vec::new()))
    };
    match build() {
        Ok(r) => r,
        Err(e) => unreachable!("the demo constants are valid: {e}"),
    }
}
