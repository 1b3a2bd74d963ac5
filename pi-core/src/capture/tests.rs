use super::*;
use crate::current_loop::{Command, LoopConfig};
use crate::output::DutyMapping;
use crate::pi::{OutputLimits, PiConfig, PiGains};
use crate::sense::CurrentSense;
use crate::setpoint::SetpointLimits;
use crate::supervisor::{BusWindow, OvercurrentLimit, SupervisorConfig};

/// An invented 24 V board: 12-bit sense around 2048 (4.03 mA per count).
fn running_loop() -> CurrentLoop {
    let config = LoopConfig::new(
        CurrentSense::from_shunt(12, 3.3, 0.010, 20.0, 2048.0).unwrap(),
        SetpointLimits::new(-4.0, 4.0, 2000.0).unwrap(),
        SupervisorConfig::new(
            OvercurrentLimit::new(6.0, 3).unwrap(),
            BusWindow::new(18.0, 30.0).unwrap(),
        ),
        PiConfig::new(
            PiGains::from_kp_ti(3.0, 1.26e-3).unwrap(),
            50e-6,
            OutputLimits::symmetric(30.0).unwrap(),
        )
        .unwrap(),
        DutyMapping::new(0.95, 12.0).unwrap(),
    )
    .unwrap();
    let mut cl = CurrentLoop::new(config).unwrap();
    cl.apply(Command::Enable).unwrap();
    cl
}

/// The reading of `amps` on that board.
fn counts_of(cl: &CurrentLoop, amps: f32) -> u16 {
    let per_count = cl.sense().to_amperes(2049) - cl.sense().to_amperes(2048);
    (2048.0 + amps / per_count).round() as u16
}

fn input(counts: u16) -> TickInput {
    TickInput {
        current_counts: counts,
        bus_v: 24.0,
        speed_rad_s: None,
    }
}

/// Ticks the loop and the capture with a reading from `counts(k)`.
fn run<const N: usize>(
    cl: &mut CurrentLoop,
    cap: &mut Capture<N>,
    ticks: usize,
    counts: impl Fn(usize) -> u16,
) {
    for k in 0..ticks {
        let i = input(counts(k));
        cl.tick(&i);
        cap.record(cl, &i);
    }
}

#[test]
fn immediate_keeps_every_decimated_tick_until_full() {
    let mut cl = running_loop();
    cl.apply(Command::SetCurrent(1.0)).unwrap();
    let mut cap: Capture<16> = Capture::new();
    let spec = CaptureSpec::new(Trigger::Immediate, 3, 5, 16).unwrap();
    cap.arm(spec, 1.0, 0.0).unwrap();
    // A reading that moves by one count per tick, so each sample says which
    // tick it came from.
    let counts = |k: usize| 2048 + k as u16;
    run(&mut cl, &mut cap, 40, counts);
    assert_eq!(cap.state(), CaptureState::Done);
    let s = cap.samples();
    assert_eq!(s.len(), 5);
    for (j, sample) in s.iter().enumerate() {
        let tick = 3 * j;
        let want = cl.sense().to_amperes(counts(tick));
        assert!(
            (sample.current_a - want).abs() < 1e-6,
            "sample {j}: {} against {want}",
            sample.current_a
        );
        assert_eq!(sample.state, LoopState::Running);
        assert_eq!(sample.bus_v, 24.0);
        assert!(sample.signed_duty() > 0.0, "forward drive is a positive duty");
    }
}

#[test]
fn a_setpoint_change_starts_it_and_nothing_before() {
    let mut cl = running_loop();
    let mut cap: Capture<8> = Capture::new();
    let spec = CaptureSpec::new(Trigger::SetpointChange, 1, 8, 8).unwrap();
    let s = cl.status();
    cap.arm(spec, s.target_a, s.current_a).unwrap();
    run(&mut cl, &mut cap, 10, |_| 2048);
    assert_eq!(cap.state(), CaptureState::Armed);
    assert!(cap.samples().is_empty());
    cl.apply(Command::SetCurrent(2.0)).unwrap();
    run(&mut cl, &mut cap, 3, |_| 2048);
    assert_eq!(cap.state(), CaptureState::Filling);
    let s = cap.samples();
    assert_eq!(s.len(), 3);
    // The first sample is the first tick of the ramp: 2000 A/s for 50 us.
    assert!((s[0].setpoint_a - 0.1).abs() < 1e-6, "{}", s[0].setpoint_a);
    assert!((s[2].setpoint_a - 0.3).abs() < 1e-6, "{}", s[2].setpoint_a);
}

#[test]
fn a_level_fires_on_the_crossing_in_its_direction_only() {
    let mut cl = running_loop();
    let mut cap: Capture<4> = Capture::new();
    // Falling through 0.5 A does not fire a rising trigger.
    let spec = CaptureSpec::new(
        Trigger::Level {
            level_a: 0.5,
            rising: true,
        },
        1,
        4,
        4,
    )
    .unwrap();
    cap.arm(spec, 0.0, 1.0).unwrap();
    run(&mut cl, &mut cap, 5, |_| 2048);
    assert_eq!(cap.state(), CaptureState::Armed);
    // 0 A, then 1 A: fires at the tick that reads 1 A.
    let one = counts_of(&cl, 1.0);
    run(&mut cl, &mut cap, 2, |k| if k == 0 { 2048 } else { one });
    assert_eq!(cap.state(), CaptureState::Filling);
    assert_eq!(cap.samples().len(), 1);
    assert!((cap.samples()[0].current_a - 1.0).abs() < 0.02);
}

#[test]
fn rearming_drops_the_old_record_and_cancel_keeps_it_readable() {
    let mut cl = running_loop();
    let mut cap: Capture<4> = Capture::new();
    let spec = CaptureSpec::new(Trigger::Immediate, 1, 4, 4).unwrap();
    cap.arm(spec, 0.0, 0.0).unwrap();
    run(&mut cl, &mut cap, 2, |_| 2048);
    cap.cancel();
    assert_eq!(cap.state(), CaptureState::Idle);
    assert_eq!(cap.samples().len(), 2);
    run(&mut cl, &mut cap, 2, |_| 2048);
    assert_eq!(cap.samples().len(), 2, "an idle capture records nothing");
    cap.arm(spec, 0.0, 0.0).unwrap();
    assert!(cap.samples().is_empty());
}

#[test]
fn bad_specs_are_refused_naming_the_field() {
    let e = CaptureSpec::new(Trigger::Immediate, 0, 4, 4).unwrap_err();
    assert_eq!(e.field, "decimation");
    let e = CaptureSpec::new(Trigger::Immediate, 1, 5, 4).unwrap_err();
    assert_eq!(
        (e.field, e.needs),
        ("samples", Requirement::Within { min: 1.0, max: 4.0 })
    );
    let e = CaptureSpec::new(Trigger::Immediate, 1, 0, 4).unwrap_err();
    assert_eq!(e.field, "samples");
    let nan = Trigger::Level {
        level_a: f32::NAN,
        rising: true,
    };
    assert_eq!(CaptureSpec::new(nan, 1, 1, 4).unwrap_err().field, "level_a");
    // A spec made for a larger capture is refused by a smaller one.
    let big = CaptureSpec::new(Trigger::Immediate, 1, 100, 100).unwrap();
    let mut cap: Capture<4> = Capture::new();
    assert_eq!(cap.arm(big, 0.0, 0.0).unwrap_err().field, "samples");
    assert_eq!(cap.state(), CaptureState::Idle);
}

#[test]
fn a_fault_shows_in_the_record() {
    let mut cl = running_loop();
    cl.apply(Command::SetCurrent(1.0)).unwrap();
    let mut cap: Capture<8> = Capture::new();
    cap.arm(CaptureSpec::new(Trigger::Immediate, 1, 8, 8).unwrap(), 1.0, 0.0)
        .unwrap();
    // 7 A (over the 6 A threshold for 3 samples): faulted on the third.
    let seven = counts_of(&cl, 7.0);
    run(&mut cl, &mut cap, 5, |_| seven);
    let states: std::vec::Vec<LoopState> = cap.samples().iter().map(|s| s.state).collect();
    use LoopState::{Faulted, Running};
    assert_eq!(states, [Running, Running, Faulted, Faulted, Faulted]);
    assert_eq!(cap.samples()[4].signed_duty(), 0.0, "the safe output has no duty");
}

#[test]
fn an_excitation_starts_it_on_its_first_tick() {
    use crate::excitation::{Excitation, Waveform};
    let mut cl = running_loop();
    cl.apply(Command::Disable).unwrap();
    let mut cap: Capture<64> = Capture::new();
    cap.arm(CaptureSpec::new(Trigger::Excitation, 2, 8, 64).unwrap(), 0.0, 0.0)
        .unwrap();
    run(&mut cl, &mut cap, 10, |_| 2048);
    assert_eq!(cap.state(), CaptureState::Armed, "nothing before the excitation");
    let steps = Waveform::Steps {
        low_v: 1.0,
        high_v: 3.0,
        hold_ticks: 4,
    };
    cl.apply(Command::Excite(Excitation::new(steps, 100, 3.0, 50e-6).unwrap()))
        .unwrap();
    run(&mut cl, &mut cap, 16, |_| 2048);
    let s = cap.samples();
    assert_eq!(s.len(), 8);
    // Every second tick from the first: each level change (every 4 ticks)
    // falls on a kept sample.
    let volts: std::vec::Vec<f32> = s.iter().map(|x| x.commanded_v).collect();
    assert_eq!(volts, [1.0, 1.0, 3.0, 3.0, 1.0, 1.0, 3.0, 3.0]);
    assert!(s.iter().all(|x| x.state == LoopState::Exciting));
}
