//! Link-time proof that the calls a firmware makes cannot panic.
//!
//! `_start` builds a loop and runs everything a firmware calls on it, on inputs
//! the compiler cannot see through (`black_box`), so every branch stays in the
//! binary: start-up (every constructor, the offset calibration, `set_sense`, a
//! hot start through the supervisor), the main loop (commands through the
//! handoff queue (an excitation among them), telemetry, the on-device design of new gains), the control
//! interrupt (`tick`, both HAL adapters, the capture), the bench link's
//! handler fed opaque bytes in the main loop (over pi-core's `LoopBoard`), and the bare PI, the supervisor, the
//! setpoint shaper and the duty mapping on their own. The panic
//! handler calls a function that exists nowhere: if any panic remains reachable
//! after optimisation, the link fails naming `control_path_reached_a_panic`.
//! `check.sh` links it for Cortex-M4F and for Cortex-M0.

#![no_std]
#![no_main]

use core::hint::black_box;
use core::panic::PanicInfo;

use embedded_hal::digital::{ErrorKind as PinErrorKind, ErrorType as PinErrorType, OutputPin};
use embedded_hal::pwm::{ErrorKind as PwmErrorKind, ErrorType as PwmErrorType, SetDutyCycle};
use pi_core::capture::Capture;
use pi_core::charge::{ChargeConfig, ChargeLimit};
use pi_core::current_loop::fixed::{FixedCommand, FixedLoop, FixedLoopConfig, FixedTickInput};
use pi_core::design::{RlPlant, Sampling, Spec, analysis::OpenLoop, discrete};
use pi_core::excitation::{Excitation, Waveform};
use pi_core::heapless::spsc::Queue;
use pi_core::link::{Link, LoopBoard};
use pi_core::pi::fixed::{FixedPi, FixedRetune, FixedScale};
use pi_core::prelude::*;
use pi_core::{Observation, OffsetCalibration, OffsetProgress, SetpointShaper, Supervisor};

unsafe extern "C" {
    fn control_path_reached_a_panic() -> !;
}

#[panic_handler]
fn panic(_: &PanicInfo) -> ! {
    // SAFETY: never defined; a reachable call is a link error, which is the check.
    unsafe { control_path_reached_a_panic() }
}

/// A hardware error the optimiser cannot rule out.
#[derive(Debug, Clone, Copy)]
struct Failed;

impl embedded_hal::pwm::Error for Failed {
    fn kind(&self) -> PwmErrorKind {
        PwmErrorKind::Other
    }
}

impl embedded_hal::digital::Error for Failed {
    fn kind(&self) -> PinErrorKind {
        PinErrorKind::Other
    }
}

/// A PWM channel whose range and result are opaque.
struct Pwm;

impl PwmErrorType for Pwm {
    type Error = Failed;
}

impl SetDutyCycle for Pwm {
    fn max_duty_cycle(&self) -> u16 {
        black_box(4199)
    }
    fn set_duty_cycle(&mut self, duty: u16) -> Result<(), Failed> {
        if black_box(duty) == black_box(0xffff) {
            Err(Failed)
        } else {
            Ok(())
        }
    }
}

/// A pin whose result is opaque.
struct Pin;

impl PinErrorType for Pin {
    type Error = Failed;
}

impl OutputPin for Pin {
    fn set_low(&mut self) -> Result<(), Failed> {
        if black_box(false) { Err(Failed) } else { Ok(()) }
    }
    fn set_high(&mut self) -> Result<(), Failed> {
        if black_box(false) { Err(Failed) } else { Ok(()) }
    }
}

/// What firmware does at start-up, with values the optimiser cannot fold.
fn build() -> Option<CurrentLoop> {
    let sense =
        CurrentSense::from_shunt(12, black_box(3.3), black_box(0.010), black_box(20.0), 2048.0).ok()?;
    let thermal = ThermalConfig::from_trip_class(black_box(2.0), TripClass::Class10).ok()?;
    let thermal = if black_box(false) {
        ThermalConfig::from_time_constant(black_box(2.0), black_box(300.0))
            .ok()?
            .with_trip_multiple(black_box(1.2))
            .ok()?
    } else {
        thermal
    };
    let supervisor = SupervisorConfig::new(
        OvercurrentLimit::new(black_box(6.0), black_box(3)).ok()?,
        BusWindow::new(black_box(18.0), black_box(30.0)).ok()?,
    )
    .with_thermal(thermal)
    .with_stuck_detection(StuckDetection::new(0, 400, 0.5).ok()?)
    .with_speed_limit(SpeedLimit::new(black_box(1500.0)).ok()?);
    let gains = PiGains::from_kp_ti(black_box(3.0), black_box(1.26e-3))
        .ok()?
        .with_setpoint_weight(black_box(0.5))
        .ok()?;
    let pi = PiConfig::new(gains, black_box(50e-6), OutputLimits::symmetric(30.0).ok()?)
        .ok()?
        .with_rule(if black_box(true) {
            IntegratorRule::Tustin
        } else {
            IntegratorRule::BackwardEuler
        })
        .with_anti_windup(if black_box(true) {
            AntiWindup::BackCalculation {
                tracking_time_s: None,
            }
        } else {
            AntiWindup::Clamping
        })
        .ok()?;
    let config = LoopConfig::new(
        sense,
        SetpointLimits::new(-4.0, 4.0, black_box(2000.0)).ok()?,
        supervisor,
        pi,
        DutyMapping::new(0.95, 12.0).ok()?,
    )
    .ok()?
    .with_feedforward(Feedforward::new(black_box(1.9), black_box(0.031)).ok()?)
    .ok()?;
    black_box(config.protections().all_on());
    let mut cl = CurrentLoop::new(config).ok()?;
    // Offset calibration with the bridge off, then the new calibration.
    let mut cal = OffsetCalibration::new(cl.sense(), black_box(64), black_box(40.0)).ok()?;
    loop {
        match cal.add(black_box(2050)) {
            OffsetProgress::Done { offset_counts } => {
                if let Ok(s) = cl.sense().with_offset(offset_counts) {
                    black_box(cl.set_sense(s).is_ok());
                }
                break;
            }
            OffsetProgress::Collecting { .. } => {}
            _ => break,
        }
    }
    // A hot start after a reset: assume the winding at its rated heat.
    if let Some(t) = cl.supervisor_mut().thermal_mut() {
        black_box(t.set_heat(black_box(1.0)).is_ok());
    }
    Some(cl)
}

/// New gains designed on the device from a bench command, checked before use.
fn design_gains() -> Option<PiGains> {
    let plant = RlPlant::new(black_box(1.9f32), black_box(2.4e-3)).ok()?;
    let sampling = Sampling::new(black_box(50e-6f32), black_box(1.0), black_box(0.0)).ok()?;
    let spec = Spec::new(black_box(2e-3f32), black_box(0.05)).ok()?;
    let g = discrete::design(&plant, &sampling, &spec).ok()?;
    if !OpenLoop::new(&plant, &sampling, &g).is_stable() {
        return None;
    }
    g.to_pi_gains().ok()
}

/// The board identifying its own winding during an excitation.
fn identify_winding() {
    let mut id = pi_core::identify::RlIdentifier::new(black_box(50e-6f32));
    for k in 0..black_box(64u32) {
        let v = if k < 32 { 2.0 } else { 6.0 };
        id.sample(black_box(v), black_box(0.01 * k as f32));
    }
    if let Ok(e) = id.estimate() {
        black_box(e.resistance_ohm);
        black_box(e.inductance_sd_h);
    }
}

/// The bare PI on its own, as a firmware with its own supervision would use it.
fn bare_pi() {
    let Ok(gains) = PiGains::from_kp_ti(black_box(3.0), black_box(1.26e-3)) else {
        return;
    };
    let Ok(limits) = OutputLimits::new(black_box(-24.0), black_box(24.0)) else {
        return;
    };
    let Ok(config) = PiConfig::new(gains, black_box(50e-6), limits) else {
        return;
    };
    let mut pi = PiController::new(config);
    black_box(pi.update(black_box(1.0), black_box(0.2)));
    black_box(pi.update_within(black_box(1.0), black_box(0.2), black_box(-5.0), black_box(5.0)));
    black_box(pi.retune_kp_ti(black_box(2.0), black_box(1e-3)).is_ok());
    black_box(pi.track(black_box(3.0), black_box(1.0), black_box(0.5)).is_ok());
    black_box(pi.saturation());
    pi.reset();
    // The fixed-point PI on the same configuration (every rule and scheme:
    // the configuration is opaque), built at start-up, updated in the
    // interrupt on opaque Q15 readings.
    let Ok(config) = config
        .with_rule(if black_box(true) {
            IntegratorRule::Tustin
        } else {
            IntegratorRule::BackwardEuler
        })
        .with_anti_windup(if black_box(true) {
            AntiWindup::Clamping
        } else {
            AntiWindup::default()
        })
    else {
        return;
    };
    let Ok(scale) = FixedScale::new(black_box(8.0), black_box(32.0)) else {
        return;
    };
    if let Ok(mut fixed) = FixedPi::new(config, scale) {
        black_box(fixed.update(black_box(6144), black_box(-32768)));
        black_box(fixed.update(black_box(i16::MAX), black_box(i16::MIN)));
        black_box(fixed.update_within(black_box(100), black_box(-7), black_box(9), black_box(-9)));
        if let Ok(retune) = FixedRetune::new(&config, black_box(config.gains()), &scale) {
            fixed.retune(&retune);
        }
        black_box(fixed.update(black_box(6144), black_box(-32768)));
        fixed.track(black_box(300), black_box(i16::MIN), black_box(i16::MAX));
        fixed.reset();
    }
}

/// The fixed-point loop as a Cortex-M0 firmware runs it: built at start-up
/// from a float configuration, commands prepared in the main loop, the tick
/// on opaque ADC readings.
fn fixed_loop() {
    let Some(cl) = build() else {
        return;
    };
    let base = *cl.config();
    // The float configuration without its feedforward and speed limit (the
    // fixed loop refuses them), rebuilt from its parts.
    let Some(sup) = (|| {
        let s = base.supervisor();
        let mut c = SupervisorConfig::new(s.overcurrent(), s.bus());
        if let Some(t) = s.thermal() {
            c = c.with_thermal(t);
        }
        if let Some(st) = s.stuck_detection() {
            c = c.with_stuck_detection(st);
        }
        Some(c)
    })() else {
        return;
    };
    let Ok(plain) = LoopConfig::new(*base.sense(), *base.setpoint(), sup, *base.pi(), *base.duty()) else {
        return;
    };
    let Ok(config) = FixedLoopConfig::new(plain, black_box(12), black_box(40.0 / 4096.0)) else {
        return;
    };
    let Ok(mut fl) = FixedLoop::new(config) else {
        return;
    };
    let retune = config.retune(base.pi().gains()).ok();
    for k in 0..black_box(1000u32) {
        let command = match black_box(k % 6) {
            0 => FixedCommand::Enable,
            1 => FixedCommand::SetCurrent(config.current_q15(black_box(1.5))),
            2 => FixedCommand::ClearFaults,
            3 => FixedCommand::Disable,
            _ => match retune {
                Some(r) => FixedCommand::Retune(r),
                None => FixedCommand::Disable,
            },
        };
        black_box(fl.apply(command).is_ok());
        let out = fl.tick(FixedTickInput {
            current_counts: black_box(2100),
            bus_counts: black_box(2458),
        });
        black_box(out.compare(black_box(2399)));
        black_box(fl.state());
        black_box(fl.supervisor().latched());
    }
    if let Some(h) = fl.heat_mut() {
        black_box(h.set_heat(black_box(1.1)).is_ok());
    }
}

/// A charger's outer voltage limit, as a main loop runs it.
fn charge_limit() {
    let Ok(gains) = PiGains::from_kp_ti(black_box(2.0), black_box(5e-3)) else {
        return;
    };
    let Ok(config) = ChargeConfig::new(
        black_box(1.0),
        black_box(4.2),
        black_box(0.05),
        black_box(3600.0),
        gains,
        black_box(1e-3),
    ) else {
        return;
    };
    let mut c = ChargeLimit::new(config);
    for _ in 0..black_box(100u32) {
        black_box(c.update(black_box(3.9)));
        black_box(c.phase());
    }
}

/// The other pieces on their own, as a firmware that assembles its own loop
/// would use them: two-point calibration, the supervisor, the setpoint shaper,
/// the duty mapping.
fn parts_alone() {
    if let Ok(sense) = CurrentSense::from_two_points(12, (black_box(1024), -2.0), (black_box(3072), 2.0)) {
        black_box(sense.to_amperes(black_box(2000)));
        black_box(sense.at_rail(black_box(4095)));
    }
    if let (Ok(oc), Ok(bus)) = (
        OvercurrentLimit::new(black_box(6.0), black_box(2)),
        BusWindow::new(black_box(18.0), black_box(30.0)),
    ) && let Ok(mut supervisor) = Supervisor::new(SupervisorConfig::new(oc, bus), black_box(50e-6))
    {
        let latched = supervisor.check(&Observation {
            current_a: black_box(1.0),
            counts: black_box(2100),
            at_rail: black_box(false),
            bus_v: black_box(24.0),
            speed_rad_s: black_box(None),
            drive: black_box(0.3),
        });
        black_box(latched.earliest());
        black_box(supervisor.clear().is_ok());
    }
    if let Ok(limits) = SetpointLimits::new(black_box(-4.0), black_box(4.0), black_box(2000.0)) {
        let mut shaper = SetpointShaper::new(limits, black_box(50e-6));
        black_box(shaper.request(black_box(9.0)).is_ok());
        black_box(shaper.advance());
    }
    if let Ok(duty) = DutyMapping::new(black_box(0.95), black_box(12.0)) {
        black_box(duty.command(black_box(5.0), black_box(24.0)));
        black_box(duty.available_v(black_box(24.0)));
    }
}

/// The samples the probe's capture holds.
const CAPTURE: usize = 256;

#[unsafe(no_mangle)]
pub extern "C" fn _start() -> ! {
    let Some(mut cl) = build() else {
        loop {
            core::hint::spin_loop();
        }
    };
    bare_pi();
    fixed_loop();
    charge_limit();
    identify_winding();
    parts_alone();
    let mut queue: Queue<Command, 8> = Queue::new();
    let (mut to_isr, mut from_main) = queue.split();
    let mut sign_magnitude = SignMagnitude::new(Pwm, Pin, Pin);
    let mut two_pwm = TwoPwm::new(Pwm, Pwm, NoPin);
    let designed = design_gains();
    let mut link = Link::new();
    let mut capture: Capture<CAPTURE> = Capture::new();
    loop {
        // Main loop: bytes from the bench link (a reply is sent, here dropped).
        // The link's way to the loop, as a single-context firmware writes it.
        let mut board = LoopBoard {
            cl: &cl,
            capture: &mut capture,
            send: |c| to_isr.enqueue(c).is_ok(),
        };
        for _ in 0..black_box(4) {
            if let Some(reply) = link.receive(black_box(0u8), &mut board) {
                black_box(reply);
            }
        }
        // Main loop: a command through the handoff queue.
        let command = match black_box(0u8) {
            0 => Command::Enable,
            1 => Command::Disable,
            2 => Command::SetCurrent(black_box(1.0)),
            3 => Command::ClearFaults,
            4 => match Excitation::new(
                Waveform::Prbs {
                    offset_v: black_box(0.0),
                    amplitude_v: black_box(3.0),
                    order: black_box(9),
                    bit_ticks: black_box(2),
                },
                black_box(2000),
                black_box(2.0),
                black_box(50e-6),
            ) {
                Ok(e) => Command::Excite(e),
                Err(_) => Command::Disable,
            },
            5 => match Excitation::new(
                Waveform::Chirp {
                    offset_v: black_box(0.0),
                    amplitude_v: black_box(3.0),
                    f0_hz: black_box(10.0),
                    f1_hz: black_box(2000.0),
                },
                black_box(2000),
                black_box(2.0),
                black_box(50e-6),
            ) {
                Ok(e) => Command::Excite(e),
                Err(_) => Command::Disable,
            },
            _ => match designed {
                Some(g) => Command::Retune(g),
                None => Command::Disable,
            },
        };
        black_box(to_isr.enqueue(command).is_ok());
        // Control interrupt: drain the queue, tick, write the pins.
        while let Some(c) = from_main.dequeue() {
            black_box(cl.apply(c).is_ok());
        }
        let input = TickInput {
            current_counts: black_box(2100),
            bus_v: black_box(24.0),
            speed_rad_s: if black_box(true) {
                Some(black_box(10.0))
            } else {
                None
            },
        };
        let out = cl.tick(&input);
        capture.record(&cl, &input);
        let written = if black_box(true) {
            sign_magnitude.apply(&out).is_ok()
        } else {
            two_pwm.apply(&out).is_ok()
        };
        if !written {
            black_box(cl.apply(Command::Disable).is_ok());
        }
        // Telemetry.
        black_box(cl.status());
        black_box(cl.state());
        black_box(cl.supervisor().present());
        black_box(cl.supervisor().first());
        black_box(cl.pi().integrator_v());
    }
}
