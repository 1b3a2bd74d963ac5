//! Link-time proof that the control path cannot panic.
//!
//! `_start` builds a loop and runs ticks and commands on inputs the compiler cannot
//! see through (`black_box`), so every branch of the control path stays in the
//! binary. The panic handler calls a function that exists nowhere: if any panic
//! remains reachable after optimisation, the link fails naming
//! `control_path_reached_a_panic`.

#![no_std]
#![no_main]

use core::hint::black_box;
use core::panic::PanicInfo;

use pi_core::prelude::*;

unsafe extern "C" {
    fn control_path_reached_a_panic() -> !;
}

#[panic_handler]
fn panic(_: &PanicInfo) -> ! {
    // SAFETY: never defined; a reachable call is a link error, which is the check.
    unsafe { control_path_reached_a_panic() }
}

/// What firmware does at start-up, with values the optimiser cannot fold.
fn build() -> Option<CurrentLoop> {
    let sense =
        CurrentSense::from_shunt(12, black_box(3.3), black_box(0.010), black_box(20.0), 2048.0).ok()?;
    let thermal = ThermalConfig::from_trip_class(black_box(2.0), TripClass::Class10).ok()?;
    let supervisor = SupervisorConfig::new(
        OvercurrentLimit::new(black_box(6.0), black_box(3)).ok()?,
        BusWindow::new(black_box(18.0), black_box(30.0)).ok()?,
    )
    .with_thermal(thermal)
    .with_stuck_detection(StuckDetection::new(0, 400, 0.5).ok()?);
    let gains = PiGains::from_kp_ti(black_box(3.0), black_box(1.26e-3)).ok()?;
    let pi = PiConfig::new(gains, black_box(50e-6), OutputLimits::symmetric(30.0).ok()?)
        .ok()?
        .with_rule(if black_box(true) {
            IntegratorRule::Tustin
        } else {
            IntegratorRule::BackwardEuler
        })
        .with_anti_windup(AntiWindup::BackCalculation {
            tracking_time_s: None,
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
    .with_feedforward(Feedforward::new(black_box(1.9), black_box(0.031)).ok()?);
    CurrentLoop::new(config).ok()
}

#[unsafe(no_mangle)]
pub extern "C" fn _start() -> ! {
    let Some(mut cl) = build() else {
        loop {
            core::hint::spin_loop();
        }
    };
    let gains = PiGains::from_kp_ti(black_box(2.5), black_box(1.3e-3));
    loop {
        let command = match black_box(0u8) {
            0 => Command::Enable,
            1 => Command::Disable,
            2 => Command::SetCurrent(black_box(1.0)),
            3 => Command::ClearFaults,
            _ => match gains {
                Ok(g) => Command::Retune(g),
                Err(_) => Command::Disable,
            },
        };
        black_box(cl.apply(command).is_ok());
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
        black_box(out);
        black_box(cl.status());
    }
}
