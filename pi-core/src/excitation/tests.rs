use std::vec::Vec;

use super::*;

const TS: f32 = 50e-6;

fn run(e: Excitation) -> Vec<f32> {
    let mut g = Generator::new(e, TS);
    let mut out = Vec::new();
    while let Some(v) = g.next() {
        out.push(v);
    }
    out
}

#[test]
fn every_register_gives_a_maximal_length_sequence() {
    // An m-sequence of order n repeats every 2^n - 1 shifts, visits every
    // non-zero state once, and holds 2^(n-1) ones per period (Golomb, Shift
    // Register Sequences, the randomness postulates).
    for order in 5..=16u8 {
        let period = (1u32 << order) - 1;
        let mut state = 1u16;
        let mut ones = 0u32;
        let mut back_at = None;
        for k in 1..=period {
            ones += (state & 1) as u32;
            state = lfsr_step(state, order);
            if state == 1 {
                back_at = Some(k);
                break;
            }
        }
        assert_eq!(back_at, Some(period), "order {order}: period");
        assert_eq!(ones, 1 << (order - 1), "order {order}: ones per period");
    }
}

#[test]
fn a_prbs_holds_each_bit_and_swings_about_its_offset() {
    let e = Excitation::new(
        Waveform::Prbs {
            offset_v: 1.0,
            amplitude_v: 2.0,
            order: 7,
            bit_ticks: 3,
        },
        3 * 127,
        5.0,
        TS,
    )
    .unwrap();
    let v = run(e);
    assert_eq!(v.len(), 381);
    assert!(v.iter().all(|&x| x == 3.0 || x == -1.0));
    for bit in v.chunks(3) {
        assert!(bit.iter().all(|&x| x == bit[0]), "a bit changed inside its hold");
    }
    // One period: 64 ones and 63 zeros.
    assert_eq!(v.chunks(3).filter(|b| b[0] == 3.0).count(), 64);
}

#[test]
fn steps_alternate_and_the_excitation_ends_by_itself() {
    let e = Excitation::new(
        Waveform::Steps {
            low_v: 0.0,
            high_v: 6.0,
            hold_ticks: 4,
        },
        10,
        5.0,
        TS,
    )
    .unwrap();
    assert_eq!(run(e), [0.0, 0.0, 0.0, 0.0, 6.0, 6.0, 6.0, 6.0, 0.0, 0.0]);
}

#[test]
fn a_chirp_sweeps_from_its_first_to_its_last_frequency() {
    // 100 Hz to 1 kHz over 1 s: the mean frequency is 550 Hz, so 1100 zero
    // crossings of the sine (the phase of a linear chirp is the integral of
    // its frequency).
    let n = (1.0 / TS) as u32;
    let e = Excitation::new(
        Waveform::Chirp {
            offset_v: 0.0,
            amplitude_v: 1.0,
            f0_hz: 100.0,
            f1_hz: 1000.0,
        },
        n,
        5.0,
        TS,
    )
    .unwrap();
    let v = run(e);
    let crossings = v.windows(2).filter(|w| (w[0] < 0.0) != (w[1] < 0.0)).count();
    assert!((crossings as i32 - 1100).abs() <= 2, "{crossings}");
    // The first and last tenth: about 2 x (100 + 190) / 2 x 0.1 = 29 and
    // 2 x (910 + 1000) / 2 x 0.1 = 191 crossings.
    let tenth = v.len() / 10;
    let count = |s: &[f32]| s.windows(2).filter(|w| (w[0] < 0.0) != (w[1] < 0.0)).count() as i32;
    assert!((count(&v[..tenth]) - 29).abs() <= 2);
    assert!((count(&v[v.len() - tenth..]) - 191).abs() <= 2);
    assert!(v.iter().all(|x| x.abs() <= 1.0));
}

#[test]
fn bad_excitations_are_refused_naming_the_field() {
    let steps = Waveform::Steps {
        low_v: 1.0,
        high_v: 1.0,
        hold_ticks: 4,
    };
    assert_eq!(Excitation::new(steps, 10, 1.0, TS).unwrap_err().field, "high_v");
    let ok = Waveform::Steps {
        low_v: 0.0,
        high_v: 1.0,
        hold_ticks: 4,
    };
    assert_eq!(
        Excitation::new(ok, 0, 1.0, TS).unwrap_err().field,
        "duration_ticks"
    );
    assert_eq!(
        Excitation::new(ok, 10, 0.0, TS).unwrap_err().field,
        "current_limit_a"
    );
    let prbs = Waveform::Prbs {
        offset_v: 0.0,
        amplitude_v: 1.0,
        order: 4,
        bit_ticks: 1,
    };
    assert_eq!(Excitation::new(prbs, 10, 1.0, TS).unwrap_err().field, "order");
    let chirp = Waveform::Chirp {
        offset_v: 0.0,
        amplitude_v: 1.0,
        f0_hz: 10.0,
        f1_hz: 10_000.0,
    };
    let e = Excitation::new(chirp, 10, 1.0, TS).unwrap_err();
    assert_eq!(
        (e.field, e.needs),
        ("f1_hz", Requirement::Below("half the control rate"))
    );
}

mod in_the_loop {
    use super::*;
    use crate::current_loop::{Command, CurrentLoop, LoopConfig, LoopState, TickInput};
    use crate::error::CommandError;
    use crate::output::DutyMapping;
    use crate::pi::{OutputLimits, PiConfig, PiGains};
    use crate::sense::CurrentSense;
    use crate::setpoint::SetpointLimits;
    use crate::supervisor::{BusWindow, OvercurrentLimit, SupervisorConfig};

    /// An invented 24 V board (12-bit sense, 4.03 mA per count), PI limits
    /// +/-10 V.
    fn board() -> CurrentLoop {
        let config = LoopConfig::new(
            CurrentSense::from_shunt(12, 3.3, 0.010, 20.0, 2048.0).unwrap(),
            SetpointLimits::new(-4.0, 4.0, 2000.0).unwrap(),
            SupervisorConfig::new(
                OvercurrentLimit::new(6.0, 3).unwrap(),
                BusWindow::new(18.0, 30.0).unwrap(),
            ),
            PiConfig::new(
                PiGains::from_kp_ti(3.0, 1.26e-3).unwrap(),
                TS,
                OutputLimits::symmetric(10.0).unwrap(),
            )
            .unwrap(),
            DutyMapping::new(0.95, 12.0).unwrap(),
        )
        .unwrap();
        CurrentLoop::new(config).unwrap()
    }

    fn counts(cl: &CurrentLoop, amps: f32) -> u16 {
        let per = cl.sense().to_amperes(2049) - cl.sense().to_amperes(2048);
        (2048.0 + amps / per).round() as u16
    }

    fn tick(cl: &mut CurrentLoop, amps: f32, bus_v: f32) -> crate::DriveCommand {
        let c = counts(cl, amps);
        cl.tick(&TickInput {
            current_counts: c,
            bus_v,
            speed_rad_s: None,
        })
    }

    fn steps(low_v: f32, high_v: f32, ticks: u32, limit_a: f32) -> Excitation {
        Excitation::new(
            Waveform::Steps {
                low_v,
                high_v,
                hold_ticks: 2,
            },
            ticks,
            limit_a,
            TS,
        )
        .unwrap()
    }

    #[test]
    fn it_drives_the_duty_mapping_open_loop_and_ends_by_itself() {
        let mut cl = board();
        cl.apply(Command::Excite(steps(-3.0, 6.0, 6, 2.0))).unwrap();
        assert_eq!(cl.state(), LoopState::Exciting);
        let duties: Vec<f32> = (0..6).map(|_| tick(&mut cl, 0.5, 24.0).signed_duty()).collect();
        assert_eq!(duties, [-0.125, -0.125, 0.25, 0.25, -0.125, -0.125]);
        assert_eq!(cl.status().commanded_v, -3.0);
        let after = tick(&mut cl, 0.5, 24.0);
        assert_eq!(after, crate::DriveCommand::SAFE);
        assert_eq!(cl.state(), LoopState::Disabled);
        assert_eq!(cl.excitation_end(), Some(ExcitationEnd::Completed));
    }

    #[test]
    fn its_voltage_is_held_to_the_pi_limits_and_the_bus() {
        let mut cl = board();
        // 40 V asked: the PI's limit is 10 V.
        cl.apply(Command::Excite(steps(40.0, 0.0, 4, 2.0))).unwrap();
        assert_eq!(tick(&mut cl, 0.0, 24.0).duty, 10.0 / 24.0);
        // On a sagging 9 V bus (below the supervisor's window: it faults).
        let d = tick(&mut cl, 0.0, 9.0);
        assert_eq!(d, crate::DriveCommand::SAFE);
        assert_eq!(cl.state(), LoopState::Faulted);
        assert_eq!(cl.excitation_end(), Some(ExcitationEnd::Fault));
    }

    #[test]
    fn a_current_above_its_limit_ends_it_safely() {
        let mut cl = board();
        cl.apply(Command::Excite(steps(0.0, 6.0, 100, 1.0))).unwrap();
        assert!(tick(&mut cl, 0.5, 24.0).enabled);
        assert_eq!(tick(&mut cl, 1.2, 24.0), crate::DriveCommand::SAFE);
        assert_eq!(cl.state(), LoopState::Disabled);
        assert_eq!(cl.excitation_end(), Some(ExcitationEnd::CurrentLimit));
        // Nothing latched: the loop may be enabled again.
        cl.apply(Command::Enable).unwrap();
    }

    #[test]
    fn it_starts_only_from_disabled_and_a_disable_stops_it() {
        let mut cl = board();
        cl.apply(Command::Enable).unwrap();
        let e = steps(0.0, 6.0, 100, 1.0);
        assert_eq!(cl.apply(Command::Excite(e)), Err(CommandError::NotWhileRunning));
        cl.apply(Command::Disable).unwrap();
        cl.apply(Command::Excite(e)).unwrap();
        assert_eq!(cl.apply(Command::Excite(e)), Err(CommandError::Exciting));
        assert_eq!(cl.apply(Command::SetCurrent(1.0)), Err(CommandError::Exciting));
        assert_eq!(cl.apply(Command::Enable), Err(CommandError::Exciting));
        tick(&mut cl, 0.0, 24.0);
        cl.apply(Command::Disable).unwrap();
        assert_eq!(cl.state(), LoopState::Disabled);
        assert_eq!(cl.excitation_end(), Some(ExcitationEnd::Disabled));
        assert_eq!(tick(&mut cl, 0.0, 24.0), crate::DriveCommand::SAFE);
        // Faulted: refused.
        tick(&mut cl, 0.0, 5.0);
        assert!(matches!(
            cl.apply(Command::Excite(e)),
            Err(CommandError::Faulted(_))
        ));
    }
}
