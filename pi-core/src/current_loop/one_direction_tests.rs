//! A one-direction drive (a low-side switch with a freewheel diode): no
//! negative setpoint range, no negative voltage, and no windup against the
//! 0 V floor.

use std::vec::Vec;

use super::*;
use crate::output::Direction;
use crate::pi::OutputLimits;
use crate::supervisor::{BusWindow, OvercurrentLimit};

/// An invented valve coil on a 12-bit sense channel: 20 ohm, 0.2 H, 24 V.
fn config(min_a: f32) -> Result<LoopConfig, ConfigError> {
    config_with_kp(min_a, 250.0)
}

fn config_with_kp(min_a: f32, kp: f32) -> Result<LoopConfig, ConfigError> {
    LoopConfig::new(
        CurrentSense::new(12, 2048.0, 0.001)?,
        SetpointLimits::new(min_a, 1.0, 1000.0)?,
        SupervisorConfig::new(OvercurrentLimit::new(1.5, 3)?, BusWindow::new(18.0, 30.0)?),
        PiConfig::new(
            PiGains::from_kp_ti(kp, 0.01)?,
            1e-4,
            OutputLimits::symmetric(30.0)?,
        )?,
        DutyMapping::new(0.95, 12.0)?.one_direction(),
    )
}

#[test]
fn a_negative_setpoint_range_is_refused_by_name() {
    assert_eq!(config(-0.5).unwrap_err().field, "setpoint_min_a");
    assert!(config(0.0).is_ok());
}

/// The coil, `L di/dt = v - R i`, with the diode's 0.7 V while the switch is
/// off and the current positive; the current stops at zero (the diode
/// blocks). Stepped exactly over the period.
struct Coil {
    i: f64,
}

impl Coil {
    fn step(&mut self, duty: f64, bus_v: f64) {
        let (r, l, t): (f64, f64, f64) = (20.0, 0.2, 1e-4);
        // The period's mean voltage: the bus while on, minus the diode while off.
        let v = duty * bus_v - (1.0 - duty) * if self.i > 0.0 { 0.7 } else { 0.0 };
        let a = (-r * t / l).exp();
        let next = a * self.i + (1.0 - a) * v / r;
        self.i = next.max(0.0);
    }
}

#[test]
fn the_loop_never_asks_for_a_negative_voltage_and_does_not_wind_up_at_zero() {
    let mut cl = CurrentLoop::new(config(0.0).unwrap()).unwrap();
    cl.apply(Command::Enable).unwrap();
    let mut coil = Coil { i: 0.0 };
    let mut rise = Vec::new();
    for (k, target) in [(0, 0.8f32), (1, 0.0), (2, 0.8)] {
        cl.apply(Command::SetCurrent(target)).unwrap();
        let mut reached = None;
        for tick in 0..3000u32 {
            let counts = (2048.0 + coil.i / 0.001).round() as u16;
            let cmd = cl.tick(&TickInput {
                current_counts: counts,
                bus_v: 24.0,
                speed_rad_s: None,
            });
            assert!(
                cmd.direction == Direction::Forward,
                "step {k}, tick {tick}: {cmd:?}"
            );
            assert!(
                cl.commanded_v() >= 0.0,
                "step {k}, tick {tick}: {} V",
                cl.commanded_v()
            );
            coil.step(cmd.duty as f64, 24.0);
            if target > 0.0 && reached.is_none() && coil.i >= 0.9 * target as f64 {
                reached = Some(tick);
            }
        }
        if target > 0.0 {
            rise.push(reached.expect("the coil reaches 90 % of the step"));
        } else {
            // Held at 0 A for 0.3 s: the integrator rests at the floor, not below.
            assert!(coil.i < 1e-3, "{} A left", coil.i);
            assert!(cl.pi().integrator_v() >= -1e-3, "{} V", cl.pi().integrator_v());
        }
    }
    // The second rise is the first one again: nothing wound up during the hold.
    assert!(rise[0].abs_diff(rise[1]) <= 1, "{rise:?}");
}

#[test]
fn the_fixed_point_loop_keeps_to_one_direction_too() {
    use crate::current_loop::fixed::{FixedCommand, FixedLoop, FixedLoopConfig, FixedTickInput};
    // Kp 60 V/A: the fixed-point PI holds below 8 x 40 V / 4.1 A = 78 V/A.
    let fixed_config = FixedLoopConfig::new(config_with_kp(0.0, 60.0).unwrap(), 12, 40.0 / 4096.0).unwrap();
    let mut fl = FixedLoop::new(fixed_config).unwrap();
    fl.apply(FixedCommand::Enable).unwrap();
    let mut coil = Coil { i: 0.0 };
    for target in [0.8f32, 0.0, 0.8] {
        fl.apply(FixedCommand::SetCurrent(fixed_config.current_q15(target)))
            .unwrap();
        for tick in 0..3000u32 {
            let counts = (2048.0 + coil.i / 0.001).round() as u16;
            let out = fl.tick(FixedTickInput {
                current_counts: counts,
                bus_counts: 2458,
            });
            assert!(
                out.direction == Direction::Forward,
                "{target} A, tick {tick}: {out:?}"
            );
            assert!(fl.commanded().0 >= 0, "{target} A, tick {tick}");
            coil.step(out.to_drive_command().duty as f64, 2458.0 * 40.0 / 4096.0);
        }
        assert!((coil.i - target as f64).abs() < 0.01, "{target} A: {} A", coil.i);
    }
}
