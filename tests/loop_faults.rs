//! The assembled loop on the invented demo board: closed-loop tracking, fault
//! reactions within one tick, latching and clearing, the state machine, and the
//! main-loop handoff. Runs the real `pi-core` code; the plant is host-sim's exact
//! locked-rotor motor with the one-sample computation delay.

use host_sim::{Runner, TracePoint, demo};
use pi_core::heapless::spsc::Queue;
use pi_core::{
    Acceptance, Command, CommandError, CurrentLoop, DriveCommand, Fault, LoopState, PiGains, TickInput,
};

fn input(counts: u16) -> TickInput {
    TickInput {
        current_counts: counts,
        bus_v: 24.0,
        speed_rad_s: None,
    }
}

/// One control tick of the demo bench (locked rotor, one-sample delay).
fn tick(bench: &mut Runner, cl: &mut CurrentLoop) -> TracePoint {
    bench.run_ticks(cl, 1);
    *bench.trace().points.last().unwrap()
}

fn running() -> CurrentLoop {
    let mut cl = demo::current_loop().unwrap();
    cl.apply(Command::Enable).unwrap();
    cl
}

/// ADC counts for a current on the demo board (same scale as its calibration).
fn counts_for(current_a: f32) -> u16 {
    let s = demo::sense().unwrap();
    (s.offset_counts() + current_a / s.amps_per_count()).round() as u16
}

fn assert_safe(cl: &CurrentLoop, command: DriveCommand) {
    assert_eq!(command, DriveCommand::SAFE);
    assert_eq!(cl.state(), LoopState::Faulted);
    assert_eq!(cl.pi().integrator_v(), 0.0, "integrator reset in the safe state");
}

#[test]
fn closed_loop_reaches_the_setpoint_and_duty_stays_in_limits() {
    let mut cl = running();
    let mut bench = demo::bench();
    cl.apply(Command::SetCurrent(1.5)).unwrap();
    let mut last = 0.0;
    for _ in 0..4000 {
        let rec = tick(&mut bench, &mut cl);
        assert!(rec.duty >= 0.0 && rec.duty <= 0.95);
        last = rec.current_a;
    }
    // Within one ADC count (4.03 mA) of the setpoint after 200 ms.
    assert!((last - 1.5).abs() < 0.0045, "{last}");
    assert_eq!(cl.state(), LoopState::Running);
}

#[test]
fn overcurrent_trips_on_exactly_the_third_sample_with_safe_output() {
    let mut cl = running();
    let high = counts_for(6.5);
    assert_ne!(cl.tick(&input(high)), DriveCommand::SAFE);
    assert_ne!(cl.tick(&input(high)), DriveCommand::SAFE);
    let third = cl.tick(&input(high));
    assert_safe(&cl, third);
    assert_eq!(cl.status().first_fault, Some(Fault::Overcurrent));
}

#[test]
fn rail_and_invalid_readings_fault_within_one_tick_with_safe_output() {
    let rail_low = TickInput {
        current_counts: 0,
        ..input(0)
    };
    let rail_high = TickInput {
        current_counts: 4095,
        ..input(0)
    };
    let beyond = TickInput {
        current_counts: u16::MAX,
        ..input(0)
    };
    let nan_bus = TickInput {
        bus_v: f32::NAN,
        ..input(2048)
    };
    let inf_bus = TickInput {
        bus_v: f32::INFINITY,
        ..input(2048)
    };
    let low_bus = TickInput {
        bus_v: 9.0,
        ..input(2048)
    };
    let nan_speed = TickInput {
        speed_rad_s: Some(f32::NAN),
        ..input(2048)
    };
    let cases = [
        (rail_low, Fault::SensorRail),
        (rail_high, Fault::SensorRail),
        (beyond, Fault::SensorRail),
        (nan_bus, Fault::BusInvalid),
        (inf_bus, Fault::BusInvalid),
        (low_bus, Fault::BusUndervoltage),
        (nan_speed, Fault::SpeedInvalid),
    ];
    for (bad, fault) in cases {
        let mut cl = running();
        cl.apply(Command::SetCurrent(2.0)).unwrap();
        for _ in 0..20 {
            cl.tick(&input(2100));
        }
        assert_ne!(cl.pi().integrator_v(), 0.0);
        let command = cl.tick(&bad);
        assert_safe(&cl, command);
        assert!(cl.status().latched.contains(fault), "{fault:?}");
        // Nothing lost: the cause is reported, and the next good tick stays safe.
        assert_eq!(cl.tick(&input(2048)), DriveCommand::SAFE);
    }
}

#[test]
fn faults_cannot_be_cleared_while_present_and_clearing_leads_to_disabled() {
    let mut cl = running();
    let rail = TickInput {
        current_counts: 0,
        ..input(0)
    };
    cl.tick(&rail);
    cl.tick(&rail);
    let refused = cl.apply(Command::ClearFaults).unwrap_err();
    match refused {
        CommandError::ClearRefused(r) => assert!(r.still_present.contains(Fault::SensorRail)),
        other => panic!("unexpected {other:?}"),
    }
    assert_eq!(cl.state(), LoopState::Faulted);
    assert!(matches!(cl.apply(Command::Enable), Err(CommandError::Faulted(_))));
    assert!(matches!(
        cl.apply(Command::SetCurrent(1.0)),
        Err(CommandError::Faulted(_))
    ));
    // The sensor comes back; the latch holds until cleared.
    assert_eq!(cl.tick(&input(2048)), DriveCommand::SAFE);
    cl.apply(Command::ClearFaults).unwrap();
    assert_eq!(cl.state(), LoopState::Disabled);
    assert_eq!(cl.tick(&input(2048)), DriveCommand::SAFE);
    cl.apply(Command::Enable).unwrap();
    cl.apply(Command::SetCurrent(1.0)).unwrap();
    assert!(cl.tick(&input(2048)).enabled);
}

#[test]
fn disabled_loop_is_safe_and_still_supervises() {
    let mut cl = demo::current_loop().unwrap();
    cl.apply(Command::SetCurrent(1.0)).unwrap();
    assert_eq!(cl.tick(&input(2048)), DriveCommand::SAFE);
    assert_eq!(cl.state(), LoopState::Disabled);
    cl.tick(&TickInput {
        bus_v: 35.0,
        ..input(2048)
    });
    assert_eq!(cl.state(), LoopState::Faulted);
    assert_eq!(cl.status().first_fault, Some(Fault::BusOvervoltage));
}

#[test]
fn bad_setpoints_are_refused_and_limited_ones_reported() {
    let mut cl = running();
    cl.apply(Command::SetCurrent(1.0)).unwrap();
    assert!(matches!(
        cl.apply(Command::SetCurrent(f32::NAN)),
        Err(CommandError::SetpointNotFinite(_))
    ));
    assert_eq!(cl.status().target_a, 1.0, "the old setpoint stays");
    assert_eq!(
        cl.apply(Command::SetCurrent(9.0)),
        Ok(Acceptance::Limited { applied_a: 4.0 })
    );
}

#[test]
fn retune_mid_run_does_not_bump_the_current() {
    let mut cl = running();
    let mut bench = demo::bench();
    cl.apply(Command::SetCurrent(1.5)).unwrap();
    for _ in 0..400 {
        tick(&mut bench, &mut cl);
    }
    let before = cl.status().commanded_v;
    cl.apply(Command::Retune(PiGains::from_kp_ti(4.0, 2.0e-3).unwrap()))
        .unwrap();
    let mut worst = 0.0f64;
    for _ in 0..400 {
        let rec = tick(&mut bench, &mut cl);
        worst = worst.max((rec.current_a - 1.5).abs());
    }
    let after = cl.status().commanded_v;
    assert!((after - before).abs() < 0.05, "{before} -> {after}");
    // Settled loop: the retune moves the current by less than two ADC counts.
    assert!(worst < 0.009, "{worst}");
}

#[test]
fn commands_reach_the_loop_through_the_lock_free_queue() {
    let mut queue: Queue<Command, 4> = Queue::new();
    let (mut producer, mut consumer) = queue.split();
    let mut cl = demo::current_loop().unwrap();
    producer.enqueue(Command::Enable).unwrap();
    producer.enqueue(Command::SetCurrent(0.5)).unwrap();
    producer.enqueue(Command::Disable).unwrap();
    assert!(producer.enqueue(Command::Enable).is_err(), "capacity N - 1 = 3");
    let mut states = Vec::new();
    while let Some(c) = consumer.dequeue() {
        cl.apply(c).unwrap();
        states.push(cl.state());
    }
    assert_eq!(
        states,
        [LoopState::Running, LoopState::Running, LoopState::Disabled]
    );
    assert_eq!(cl.status().target_a, 0.0, "disable returns the setpoint to 0 A");
}

#[test]
fn feedforward_adds_r_times_setpoint_and_ke_times_speed() {
    let ff = pi_core::Feedforward::new(2.0, 0.031).unwrap();
    let mut cl = CurrentLoop::new(demo::loop_config().unwrap().with_feedforward(ff).unwrap()).unwrap();
    cl.apply(Command::Enable).unwrap();
    // Setpoint 0 A, current 0 A: the PI gives 0 V, so the command is all feedforward:
    // 0.031 V s/rad * 100 rad/s = 3.1 V, duty 3.1 / 24.
    let c = cl.tick(&TickInput {
        speed_rad_s: Some(100.0),
        ..input(2048)
    });
    assert!((c.duty - 3.1 / 24.0).abs() < 1e-6, "{}", c.duty);
    // The first slewed setpoint is 2000 A/s * 50 us = 0.1 A: R term 0.2 V on top.
    cl.apply(Command::SetCurrent(1.0)).unwrap();
    cl.tick(&TickInput {
        speed_rad_s: Some(100.0),
        ..input(2048)
    });
    let pi_v = cl.pi().last_output_v();
    assert!((cl.status().commanded_v - pi_v - 3.3).abs() < 1e-5);
}

#[test]
fn speed_feedforward_needs_a_speed_limit() {
    use pi_core::{BusWindow, OvercurrentLimit, SupervisorConfig};
    let ff = pi_core::Feedforward::new(2.0, 0.031).unwrap();
    let c = demo::loop_config().unwrap();
    let without = pi_core::LoopConfig::new(
        demo::sense().unwrap(),
        pi_core::SetpointLimits::new(-4.0, 4.0, 2000.0).unwrap(),
        SupervisorConfig::new(
            OvercurrentLimit::new(6.0, 3).unwrap(),
            BusWindow::new(18.0, 30.0).unwrap(),
        ),
        *c.pi(),
        *c.duty(),
    )
    .unwrap();
    let e = without.with_feedforward(ff).unwrap_err();
    assert_eq!(e.field, "max_speed_rad_s");
    assert_eq!(
        e.to_string(),
        "max_speed_rad_s is not set but the back-EMF feedforward is on; set it"
    );
    // The resistive term alone needs no speed.
    assert!(
        without
            .with_feedforward(pi_core::Feedforward::new(2.0, 0.0).unwrap())
            .is_ok()
    );
}

#[test]
fn a_speed_beyond_the_limit_latches_on_that_tick() {
    // 1e5 rad/s once drove full duty with 3,070 V commanded and nothing latched;
    // f32::MAX gave a safe output with the loop still running.
    for speed in [1e5f32, -1e5, f32::MAX, demo::MAX_SPEED_RAD_S * 1.0001] {
        let ff = pi_core::Feedforward::new(2.0, 0.031).unwrap();
        let mut cl = CurrentLoop::new(demo::loop_config().unwrap().with_feedforward(ff).unwrap()).unwrap();
        cl.apply(Command::Enable).unwrap();
        cl.apply(Command::SetCurrent(1.0)).unwrap();
        for _ in 0..10 {
            cl.tick(&TickInput {
                speed_rad_s: Some(100.0),
                ..input(2048)
            });
        }
        let c = cl.tick(&TickInput {
            speed_rad_s: Some(speed),
            ..input(2048)
        });
        assert_safe(&cl, c);
        assert_eq!(cl.status().first_fault, Some(Fault::SpeedImplausible), "{speed}");
    }
    // At the limit it is still plausible.
    let mut cl = running();
    let c = cl.tick(&TickInput {
        speed_rad_s: Some(-demo::MAX_SPEED_RAD_S),
        ..input(2048)
    });
    assert!(c.enabled && cl.status().latched.is_empty());
}

#[test]
fn the_feedforward_never_asks_for_more_than_the_bus_gives() {
    // A plausible but high speed: Ke w = 0.2 V s/rad * 1400 rad/s = 280 V from a
    // 24 V bus (0.95 x 24 = 22.8 V available). The sum is held to 22.8 V.
    let ff = pi_core::Feedforward::new(2.0, 0.2).unwrap();
    let mut cl = CurrentLoop::new(demo::loop_config().unwrap().with_feedforward(ff).unwrap()).unwrap();
    cl.apply(Command::Enable).unwrap();
    for speed in [1400.0f32, -1400.0] {
        for _ in 0..20 {
            let c = cl.tick(&TickInput {
                speed_rad_s: Some(speed),
                ..input(2048)
            });
            let v = cl.status().commanded_v;
            assert!(v.abs() <= 0.95 * 24.0 + 1e-4, "{speed} rad/s: {v} V");
            assert!(c.enabled && c.duty <= 0.95);
        }
    }
}
