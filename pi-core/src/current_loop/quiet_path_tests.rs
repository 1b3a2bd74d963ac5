//! The quiet path must be invisible: a loop whose ticks may take it and a loop
//! whose ticks always take the full path, fed the same readings and commands,
//! must stay in the same state, bit for bit, after every tick.

use std::format;
use std::vec;
use std::vec::Vec;

use proptest::prelude::*;

use super::*;
use crate::pi::{AntiWindup, IntegratorRule, OutputLimits};
use crate::supervisor::{BusWindow, OvercurrentLimit, SpeedLimit, StuckDetection, ThermalConfig};

/// A configuration drawn from the ranges the test explores (invented values):
/// a 12-bit sense channel, a 1 ms period so that the 10 ms thermal steps come
/// every 10 ticks, and the shortest thermal time constant accepted (1 s), short
/// enough for the heat to cross its rated and trip levels within a run.
#[derive(Clone, Debug)]
struct Setup {
    offset_counts: f32,
    amps_per_count: f32,
    rail_margin: u16,
    threshold_a: f32,
    samples: u16,
    bus_min_v: f32,
    bus_max_v: f32,
    min_bus_v: f32,
    rated_a: Option<f32>,
    stuck: Option<(u16, u16, f32)>,
    feedforward: Option<(f32, f32)>,
    speed_limit: Option<f32>,
    limit_v: f32,
    kp: f32,
    ti_s: f32,
    weight: f32,
    tustin: bool,
    clamping: bool,
}

fn setup() -> impl Strategy<Value = Setup> {
    (
        (
            1800.0f32..2300.0,
            prop_oneof![0.002f32..0.02, -0.02f32..-0.002],
            0u16..20,
            1.0f32..6.0,
            1u16..4,
        ),
        (8.0f32..20.0, 1.0f32..1.5, 0.0f32..1.3),
        (
            proptest::option::of(0.3f32..1.0),
            proptest::option::of((0u16..3, 2u16..6, 0.05f32..0.6)),
        ),
        (
            proptest::option::of((0.0f32..3.0, 0.0f32..0.1)),
            5.0f32..60.0,
            proptest::option::weighted(0.7, 50.0f32..400.0),
        ),
        (
            0.5f32..20.0,
            2e-4f32..5e-2,
            0.0f32..1.0,
            any::<bool>(),
            any::<bool>(),
        ),
    )
        .prop_map(|(s, b, d, f, g)| Setup {
            offset_counts: s.0,
            amps_per_count: s.1,
            rail_margin: s.2,
            threshold_a: s.3,
            samples: s.4,
            bus_min_v: b.0,
            bus_max_v: b.0 * (1.0 + b.1),
            // Below, inside or above the bus window's lower part.
            min_bus_v: b.0 * b.2.max(0.1),
            // Rated at a fraction of the threshold, so that a run can warm the
            // winding past its rated level and sometimes trip it.
            rated_a: d.0.map(|k| k * s.3),
            stuck: d.1,
            feedforward: f.0,
            speed_limit: f.2,
            limit_v: f.1,
            kp: g.0,
            ti_s: g.1,
            weight: g.2,
            tustin: g.3,
            clamping: g.4,
        })
}

/// The loop for a setup, or `None` when the drawn parts do not fit together
/// (the configuration is then refused, which is not what this test is about).
fn build(s: &Setup) -> Option<CurrentLoop> {
    let sense = CurrentSense::new(12, s.offset_counts, s.amps_per_count)
        .ok()?
        .with_rail_margin(s.rail_margin)
        .ok()?;
    let mut supervisor = SupervisorConfig::new(
        OvercurrentLimit::new(s.threshold_a, s.samples).ok()?,
        BusWindow::new(s.bus_min_v, s.bus_max_v).ok()?,
    );
    if let Some(rated) = s.rated_a {
        supervisor = supervisor.with_thermal(ThermalConfig::from_time_constant(rated, 1.0).ok()?);
    }
    if let Some((band, ticks, drive)) = s.stuck {
        supervisor = supervisor.with_stuck_detection(StuckDetection::new(band, ticks, drive).ok()?);
    }
    if let Some(w) = s.speed_limit {
        supervisor = supervisor.with_speed_limit(SpeedLimit::new(w).ok()?);
    }
    let gains = PiGains::from_kp_ti(s.kp, s.ti_s)
        .ok()?
        .with_setpoint_weight(s.weight)
        .ok()?;
    let rule = if s.tustin {
        IntegratorRule::Tustin
    } else {
        IntegratorRule::BackwardEuler
    };
    let aw = if s.clamping {
        AntiWindup::Clamping
    } else {
        AntiWindup::default()
    };
    let pi = PiConfig::new(gains, 1e-3, OutputLimits::symmetric(s.limit_v).ok()?)
        .ok()?
        .with_rule(rule)
        .with_anti_windup(aw)
        .ok()?;
    let max_a = 0.9 * s.threshold_a;
    // One setup in three drives one way (a low-side switch): no negative setpoints.
    let one_way = s.rail_margin.is_multiple_of(3);
    let duty = DutyMapping::new(0.95, s.min_bus_v).ok()?;
    let mut config = LoopConfig::new(
        sense,
        SetpointLimits::new(if one_way { 0.0 } else { -max_a }, max_a, 2000.0).ok()?,
        supervisor,
        pi,
        if one_way { duty.one_direction() } else { duty },
    )
    .ok()?;
    if let Some((r, ke)) = s.feedforward {
        config = config.with_feedforward(Feedforward::new(r, ke).ok()?).ok()?;
    }
    CurrentLoop::new(config).ok()
}

/// A current reading: mostly a fraction of the overcurrent threshold, sometimes
/// the previous reading again (so a stuck detector counts), sometimes anything.
#[derive(Clone, Copy, Debug)]
enum Reading {
    Fraction(f32),
    Held,
    Raw(u16),
}

/// A bus reading: mostly a point of the supervisor's window, sometimes any value
/// or not a number.
#[derive(Clone, Copy, Debug)]
enum Bus {
    Fraction(f32),
    Raw(f32),
}

/// One step of a run: commands (applied before the tick) and the tick's readings.
#[derive(Clone, Debug)]
struct Step {
    commands: Vec<Command>,
    reading: Reading,
    bus: Bus,
    speed_rad_s: Option<f32>,
}

fn commands() -> impl Strategy<Value = Vec<Command>> {
    let one = prop_oneof![
        3 => (-8.0f32..8.0).prop_map(|a| vec![Command::SetCurrent(a)]),
        1 => (0.5f32..20.0, 2e-4f32..5e-2).prop_map(|(kp, ti)| {
            vec![Command::Retune(PiGains::from_kp_ti(kp, ti).unwrap_or_else(|_| unreachable!()))]
        }),
        1 => Just(vec![Command::Disable]),
        4 => Just(vec![Command::ClearFaults, Command::Enable]),
    ];
    proptest::option::weighted(0.04, one).prop_map(Option::unwrap_or_default)
}

fn steps() -> impl Strategy<Value = Vec<Step>> {
    let reading = prop_oneof![
        150 => (-0.8f32..0.8).prop_map(Reading::Fraction),
        4 => (-1.3f32..1.3).prop_map(Reading::Fraction),
        20 => Just(Reading::Held),
        1 => (0u16..=4095).prop_map(Reading::Raw),
    ];
    let bus = prop_oneof![
        150 => (0.0f32..=1.0).prop_map(Bus::Fraction),
        1 => prop_oneof![Just(f32::NAN), Just(-1.0f32), 0.0f32..60.0].prop_map(Bus::Raw),
    ];
    let speed = prop_oneof![
        300 => Just(None),
        200 => (-300.0f32..300.0).prop_map(Some),
        1 => prop_oneof![Just(f32::NAN), Just(f32::INFINITY), Just(1e5f32), Just(-f32::MAX)].prop_map(Some),
    ];
    let step = (commands(), reading, bus, speed).prop_map(|(commands, reading, bus, speed_rad_s)| Step {
        commands,
        reading,
        bus,
        speed_rad_s,
    });
    proptest::collection::vec(step, 100..600)
}

impl Setup {
    /// The readings of a step for this setup; `last` is the previous reading.
    fn input(&self, step: &Step, last: u16) -> TickInput {
        let current_counts = match step.reading {
            Reading::Fraction(f) => {
                let c = self.offset_counts + f * self.threshold_a / self.amps_per_count;
                c.clamp(0.0, 4095.0) as u16
            }
            Reading::Held => last,
            Reading::Raw(c) => c,
        };
        // Inside the supervisor's bus window; where that is below the duty
        // mapping's `min_bus_v` the loop rides through with the bridge off.
        let bus_v = match step.bus {
            Bus::Fraction(g) => self.bus_min_v + g * (self.bus_max_v - self.bus_min_v),
            Bus::Raw(v) => v,
        };
        TickInput {
            current_counts,
            bus_v,
            speed_rad_s: step.speed_rad_s,
        }
    }
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(192))]

    #[test]
    fn quiet_path_gives_the_full_ticks_result(s in setup(), run in steps()) {
        let Some(mut quick) = build(&s) else { return Ok(()) };
        let mut full = quick.clone();
        let mut quiet = 0usize;
        // Start running so that most of the run has a chance to be quiet.
        for cl in [&mut quick, &mut full] {
            let _ = cl.apply(Command::Enable);
            let _ = cl.apply(Command::SetCurrent(0.3 * s.threshold_a));
        }
        let mut last = 2048u16;
        for (k, step) in run.iter().enumerate() {
            for &c in &step.commands {
                prop_assert_eq!(quick.apply(c), full.apply(c), "command at tick {}", k);
            }
            let input = s.input(step, last);
            last = input.current_counts;
            let a = match quick.quiet_tick(&input) {
                Some(command) => {
                    quiet += 1;
                    command
                }
                None => quick.full_tick(&input),
            };
            let b = full.full_tick(&input);
            prop_assert_eq!(format!("{a:?}"), format!("{b:?}"), "command at tick {}", k);
            prop_assert_eq!(format!("{quick:?}"), format!("{full:?}"), "state after tick {}", k);
        }
        // Not a check of the path, a check that the run exercised it.
        prop_assume!(quiet > 0);
    }
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(96))]

    /// The quiet window takes exactly the current readings the full check finds
    /// clear of the rails and within the threshold, every one of a 12-bit ADC.
    #[test]
    fn quiet_window_takes_exactly_the_readings_in_range(s in setup()) {
        let Some(cl) = build(&s) else { return Ok(()) };
        let (sense, thr) = (cl.sense, s.threshold_a);
        let bus_ok = s.bus_max_v;
        for c in 0..=4095u16 {
            let in_range = !sense.at_rail(c) && sense.to_amperes(c).abs() <= thr;
            let taken = cl.quiet_window.is_some_and(|w| w.accepts(c, bus_ok));
            prop_assert_eq!(taken, in_range, "counts {}", c);
        }
    }

    /// ... and exactly the bus readings inside the supervisor's window and at
    /// least the duty mapping's `min_bus_v`, its edges and their neighbours
    /// included.
    #[test]
    fn quiet_window_takes_exactly_the_bus_readings_in_range(s in setup(), g in -0.5f32..1.5) {
        let Some(cl) = build(&s) else { return Ok(()) };
        let Some(w) = cl.quiet_window else { return Ok(()) };
        let low = s.bus_min_v.max(s.min_bus_v);
        let up = |v: f32| f32::from_bits(v.to_bits() + 1);
        let down = |v: f32| f32::from_bits(v.to_bits() - 1);
        let probes = [
            low, up(low), down(low), s.bus_max_v, up(s.bus_max_v), down(s.bus_max_v),
            s.bus_min_v + g * (s.bus_max_v - s.bus_min_v), 0.0, -0.0, -low, f32::NAN, f32::INFINITY,
        ];
        let counts = libm::roundf(s.offset_counts) as u16;
        for v in probes {
            let in_range = v.is_finite() && v >= low && v <= s.bus_max_v;
            prop_assert_eq!(w.accepts(counts, v), in_range, "bus {}", v);
        }
    }
}
