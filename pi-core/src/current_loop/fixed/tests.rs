//! The fixed-point loop against the float loop on the same readings: the same
//! states and faults on the same ticks, and outputs within the quantisation.

use std::vec;
use std::vec::Vec;

use proptest::prelude::*;

use super::*;
use crate::current_loop::{Command, CurrentLoop, TickInput};
use crate::output::DutyMapping;
use crate::pi::{OutputLimits, PiConfig, PiGains};
use crate::sense::CurrentSense;
use crate::setpoint::SetpointLimits;
use crate::supervisor::{BusWindow, OvercurrentLimit, StuckDetection, SupervisorConfig, ThermalConfig};

/// An invented board: 12-bit current sense, 12-bit bus ADC.
#[derive(Clone, Debug)]
struct Board {
    offset_counts: f32,
    amps_per_count: f32,
    rail_margin: u16,
    threshold_a: f32,
    samples: u16,
    bus_min_v: f32,
    bus_max_v: f32,
    min_bus_v: f32,
    bus_v_per_count: f32,
    rated_a: Option<f32>,
    stuck: Option<(u16, u16, f32)>,
    kp: f32,
    ti_s: f32,
    period_s: f32,
    /// The PI's symmetric output limit, volts.
    limit_v: f32,
}

impl Board {
    fn demo() -> Self {
        Board {
            offset_counts: 2048.0,
            amps_per_count: 0.004,
            rail_margin: 8,
            threshold_a: 6.0,
            samples: 3,
            bus_min_v: 18.0,
            bus_max_v: 30.0,
            min_bus_v: 12.0,
            bus_v_per_count: 40.0 / 4096.0,
            rated_a: None,
            stuck: None,
            kp: 3.0,
            ti_s: 1.26e-3,
            period_s: 50e-6,
            limit_v: 30.0,
        }
    }

    fn config(&self) -> LoopConfig {
        let sense = CurrentSense::new(12, self.offset_counts, self.amps_per_count)
            .unwrap()
            .with_rail_margin(self.rail_margin)
            .unwrap();
        let top = 0.8 * self.threshold_a;
        let mut sup = SupervisorConfig::new(
            OvercurrentLimit::new(self.threshold_a, self.samples).unwrap(),
            BusWindow::new(self.bus_min_v, self.bus_max_v).unwrap(),
        );
        if let Some(rated) = self.rated_a {
            sup = sup.with_thermal(ThermalConfig::from_time_constant(rated, 1.0).unwrap());
        }
        if let Some((band, ticks, drive)) = self.stuck {
            sup = sup.with_stuck_detection(StuckDetection::new(band, ticks, drive).unwrap());
        }
        LoopConfig::new(
            sense,
            SetpointLimits::new(-top, top, 2000.0).unwrap(),
            sup,
            PiConfig::new(
                PiGains::from_kp_ti(self.kp, self.ti_s).unwrap(),
                self.period_s,
                OutputLimits::symmetric(self.limit_v).unwrap(),
            )
            .unwrap(),
            DutyMapping::new(0.95, self.min_bus_v).unwrap(),
        )
        .unwrap()
    }

    fn pair(&self) -> (CurrentLoop, FixedLoop) {
        let base = self.config();
        let fixed = FixedLoopConfig::new(base, 12, self.bus_v_per_count).unwrap();
        (CurrentLoop::new(base).unwrap(), FixedLoop::new(fixed).unwrap())
    }
}

/// Runs both loops on the same readings, checking state, latched causes and
/// first cause after every tick; returns the ticks each fault latched on.
fn lockstep(
    float: &mut CurrentLoop,
    fixed: &mut FixedLoop,
    vpc: f32,
    readings: &[(u16, u16)],
) -> Vec<(usize, FaultSet)> {
    let mut latches = Vec::new();
    for (k, &(c, b)) in readings.iter().enumerate() {
        let before = float.supervisor().latched();
        let f = float.tick(&TickInput {
            current_counts: c,
            bus_v: b as f32 * vpc,
            speed_rad_s: None,
        });
        let x = fixed.tick(FixedTickInput {
            current_counts: c,
            bus_counts: b,
        });
        assert_eq!(float.state(), fixed.state(), "tick {k}: reading {c}, bus {b}");
        // The bridge on or off alike (off in every state but running).
        assert_eq!(f.enabled, x.enabled, "tick {k}: reading {c}, bus {b}");
        assert_eq!(
            float.supervisor().latched(),
            fixed.supervisor().latched(),
            "tick {k}: reading {c}, bus {b}"
        );
        assert_eq!(float.supervisor().first(), fixed.supervisor().first(), "tick {k}");
        assert_eq!(
            float.supervisor().present(),
            fixed.supervisor().present(),
            "tick {k}"
        );
        if float.supervisor().latched() != before {
            latches.push((k, float.supervisor().latched()));
        }
    }
    latches
}

fn enable(float: &mut CurrentLoop, fixed: &mut FixedLoop, amps: f32) {
    float.apply(Command::Enable).unwrap();
    fixed.apply(FixedCommand::Enable).unwrap();
    float.apply(Command::SetCurrent(amps)).unwrap();
    let q = fixed.config().current_q15(amps);
    fixed.apply(FixedCommand::SetCurrent(q)).unwrap();
}

#[test]
fn overcurrent_rails_and_the_bus_trip_on_the_same_tick_as_the_float_loop() {
    let board = Board::demo();
    let vpc = board.bus_v_per_count;
    let (mut float, mut fixed) = board.pair();
    enable(&mut float, &mut fixed, 2.0);
    let bus = (24.0 / vpc) as u16;
    // 6 A is 1500 counts from the offset: 5.996 A, then three beyond.
    let mut readings = vec![(2048 + 400, bus); 50];
    readings.extend([
        (2048 + 1499, bus),
        (2048 + 1502, bus),
        (2048 + 1502, bus),
        (2048 + 1502, bus),
    ]);
    readings.extend([(2048, bus); 5]);
    let latches = lockstep(&mut float, &mut fixed, vpc, &readings);
    assert_eq!(latches.len(), 1);
    assert_eq!(latches[0].0, 53, "the third sample beyond 6 A");
    assert!(latches[0].1.contains(Fault::Overcurrent));

    // Each of the rails and the bus window's edges, from a cleared loop.
    for (reading, expect) in [
        ((8u16, bus), Fault::SensorRail),
        ((4095 - 8, bus), Fault::SensorRail),
        ((2048, (18.0 / vpc) as u16 - 1), Fault::BusUndervoltage),
        ((2048, (30.0 / vpc) as u16 + 1), Fault::BusOvervoltage),
    ] {
        let (mut float, mut fixed) = board.pair();
        enable(&mut float, &mut fixed, 1.0);
        let mut readings = vec![(2048 + 100, bus); 10];
        readings.push(reading);
        readings.extend([(2048, bus); 3]);
        let latches = lockstep(&mut float, &mut fixed, vpc, &readings);
        assert_eq!(latches.len(), 1, "{expect:?}");
        assert_eq!(latches[0].0, 10, "{expect:?}");
        assert_eq!(float.supervisor().first(), Some(expect));
        // Cleared alike once the cause is gone.
        assert!(float.apply(Command::ClearFaults).is_ok());
        assert!(fixed.apply(FixedCommand::ClearFaults).is_ok());
        assert_eq!(float.state(), fixed.state());
    }
}

#[test]
fn the_bus_window_edges_are_the_float_loops_readings() {
    // Every bus reading from 0 to full scale: the same fault or none.
    let board = Board::demo();
    let vpc = board.bus_v_per_count;
    for b in 0..4096u16 {
        let (mut float, mut fixed) = board.pair();
        lockstep(&mut float, &mut fixed, vpc, &[(2048, b)]);
    }
}

#[test]
fn every_current_reading_gives_the_float_loops_faults() {
    // Every current reading, an inverting amplifier and a fractional offset.
    for (offset, apc) in [(2048.0, 0.004), (1900.4, -0.0031), (2111.7, 0.0052)] {
        let board = Board {
            offset_counts: offset,
            amps_per_count: apc,
            samples: 1,
            threshold_a: 4.0,
            ..Board::demo()
        };
        let vpc = board.bus_v_per_count;
        for c in 0..4096u16 {
            let (mut float, mut fixed) = board.pair();
            lockstep(&mut float, &mut fixed, vpc, &[(c, 2458)]);
        }
    }
}

#[test]
fn a_stuck_sensor_trips_on_the_same_tick() {
    let board = Board {
        stuck: Some((1, 20, 0.2)),
        ..Board::demo()
    };
    let vpc = board.bus_v_per_count;
    let (mut float, mut fixed) = board.pair();
    enable(&mut float, &mut fixed, 4.0);
    // The reading freezes low while the loop drives hard.
    let mut readings = Vec::new();
    for k in 0..40u16 {
        readings.push((2048 + 100 + 3 * k, 2458));
    }
    readings.extend(vec![(2148, 2458); 40]);
    let latches = lockstep(&mut float, &mut fixed, vpc, &readings);
    assert_eq!(latches.len(), 1);
    assert!(latches[0].1.contains(Fault::SensorStuck));
}

#[test]
fn an_overload_trips_on_the_same_thermal_step() {
    // A 1 s winding at 2 A rated, held at 4 A: the float model trips after
    // -ln(1 - 1.3225 / 4) = 0.40 s.
    let board = Board {
        rated_a: Some(2.0),
        period_s: 1e-3,
        ti_s: 20e-3,
        ..Board::demo()
    };
    let vpc = board.bus_v_per_count;
    let (mut float, mut fixed) = board.pair();
    enable(&mut float, &mut fixed, 4.0);
    let readings = vec![(2048 + 1000, 2458); 1000];
    let latches = lockstep(&mut float, &mut fixed, vpc, &readings);
    assert_eq!(latches.len(), 1);
    assert!(latches[0].1.contains(Fault::Overload));
    let t = (latches[0].0 + 1) as f64 * 1e-3;
    assert!((t - 0.40).abs() < 0.011, "tripped at {t} s");
    // Not cleared while hot, alike.
    assert!(float.apply(Command::ClearFaults).is_err());
    assert!(fixed.apply(FixedCommand::ClearFaults).is_err());
}

/// A held R-L winding, `L di/dt = v - R i`, stepped exactly over one period
/// with the voltage held (zero-order hold), read by the 12-bit sense.
struct Winding {
    a: f64,
    b: f64,
    i: f64,
}

impl Winding {
    fn new(r: f64, l: f64, period_s: f64) -> Self {
        let a = (-r * period_s / l).exp();
        Winding {
            a,
            b: (1.0 - a) / r,
            i: 0.0,
        }
    }
    fn step(&mut self, v: f64) {
        self.i = self.a * self.i + self.b * v;
    }
    fn counts(&self, board: &Board) -> u16 {
        (board.offset_counts as f64 + self.i / board.amps_per_count as f64)
            .round()
            .clamp(0.0, 4095.0) as u16
    }
}

/// Step metrics of a run: overshoot above the final value in points of the
/// step, and the first tick after which the current stays within 2 %.
fn metrics(trace: &[f64], target: f64) -> (f64, usize) {
    // Normalised to the step, so a negative step reads as a positive one.
    let y: Vec<f64> = trace.iter().map(|i| i / target).collect();
    let peak = y.iter().cloned().fold(f64::MIN, f64::max);
    let overshoot = ((peak - 1.0) * 100.0).max(0.0);
    let settle = y
        .iter()
        .rposition(|v| (v - 1.0).abs() > 0.02)
        .map_or(0, |k| k + 1);
    (overshoot, settle)
}

#[test]
fn in_closed_loop_the_fixed_loop_steps_as_the_float_loop_within_the_quantisation() {
    // The invented demo winding (1.9 ohm, 2.4 mH) at 24 V, cancellation gains.
    // Bounds from the quantisation: the fixed PI's output is within a few
    // counts of 30 V / 32768 plus 2^-15 of |P| + |I| of the float's (its own
    // tests), and the duty's division rounds down by under one Q15 count of
    // the bus: well under a millivolt on a 24 V bus, against 1.9 V per ampere
    // of the winding. Stated: overshoot within 0.5 points, settling within one
    // period, the final current within one count of the sense (4 mA).
    let board = Board::demo();
    let (r, l) = (1.9, 2.4e-3);
    let kp = 2.0 * std::f64::consts::PI * 1000.0 * l;
    // Limits of 30 V hold all the bus gives (the bus alone limits the PI);
    // 12 V holds less (the limits intersected on each tick), and the 4.5 A
    // step saturates on them.
    for (limit_v, bus_sets_limits) in [(30.0, true), (12.0, false)] {
        let board = Board {
            kp: kp as f32,
            ti_s: (l / r) as f32,
            limit_v,
            ..board
        };
        steps_alike(&board, r, l, bus_sets_limits);
    }
}

fn steps_alike(board: &Board, r: f64, l: f64, bus_sets_limits: bool) {
    let vpc = board.bus_v_per_count;
    let (mut float, mut fixed) = board.pair();
    assert_eq!(fixed.bus_sets_limits, bus_sets_limits);
    for amps in [2.0f32, -1.5, 4.5] {
        let (mut wf, mut wx) = (Winding::new(r, l, 50e-6), Winding::new(r, l, 50e-6));
        let (mut f_trace, mut x_trace) = (Vec::new(), Vec::new());
        enable(&mut float, &mut fixed, amps);
        let bus = (24.0 / vpc) as u16;
        for _ in 0..400 {
            let cf = float.tick(&TickInput {
                current_counts: wf.counts(board),
                bus_v: bus as f32 * vpc,
                speed_rad_s: None,
            });
            let cx = fixed
                .tick(FixedTickInput {
                    current_counts: wx.counts(board),
                    bus_counts: bus,
                })
                .to_drive_command();
            wf.step(cf.signed_duty() as f64 * bus as f64 * vpc as f64);
            wx.step(cx.signed_duty() as f64 * bus as f64 * vpc as f64);
            f_trace.push(wf.i);
            x_trace.push(wx.i);
        }
        let (of, sf) = metrics(&f_trace, amps as f64);
        let (ox, sx) = metrics(&x_trace, amps as f64);
        std::eprintln!(
            "{} V: {amps} A: overshoot {of:.3} / {ox:.3} %, settling {sf} / {sx} ticks, final {:.4} / {:.4} A",
            board.limit_v,
            wf.i,
            wx.i
        );
        assert!((of - ox).abs() <= 0.5, "{amps} A: overshoot {of} against {ox}");
        assert!(sf.abs_diff(sx) <= 1, "{amps} A: settling {sf} against {sx} ticks");
        let final_error = (wf.i - wx.i).abs();
        assert!(
            final_error <= board.amps_per_count as f64,
            "{amps} A: final {} against {}",
            wf.i,
            wx.i
        );
        float.apply(Command::Disable).unwrap();
        fixed.apply(FixedCommand::Disable).unwrap();
    }
}

#[test]
fn a_retune_while_running_is_bumpless_in_the_fixed_loop_too() {
    let board = Board::demo();
    let vpc = board.bus_v_per_count;
    let (mut float, mut fixed) = board.pair();
    enable(&mut float, &mut fixed, 2.0);
    let input = |c: u16| FixedTickInput {
        current_counts: c,
        bus_counts: 2458,
    };
    let mut before = 0;
    for k in 0..200u16 {
        if k == 100 {
            let gains = PiGains::from_kp_ti(8.0, 3e-3).unwrap();
            float.apply(Command::Retune(gains)).unwrap();
            let retune = fixed.config().retune(gains).unwrap();
            fixed.apply(FixedCommand::Retune(retune)).unwrap();
        }
        let c = 2048 + 400 + k / 4;
        let f = float.tick(&TickInput {
            current_counts: c,
            bus_v: 2458.0 * vpc,
            speed_rad_s: None,
        });
        let x = fixed.tick(input(c)).to_drive_command();
        assert!(
            (f.signed_duty() - x.signed_duty()).abs() < 2e-3,
            "tick {k}: {f:?} against {x:?}"
        );
        if k == 99 {
            before = x.duty_q15_signed();
        }
        if k == 100 {
            // Kp from 3 to 8 V/A on a 0.4 A error would move the duty by 8 %.
            assert!(
                (x.duty_q15_signed() - before).abs() < 300,
                "{before} -> {}",
                x.duty_q15_signed()
            );
        }
    }
}

trait Signed {
    fn duty_q15_signed(&self) -> i32;
}

impl Signed for DriveCommand {
    fn duty_q15_signed(&self) -> i32 {
        (self.signed_duty() * 32768.0) as i32
    }
}

#[test]
fn configurations_the_fixed_loop_cannot_run_are_refused_by_name() {
    let board = Board::demo();
    let base = board.config();
    let field = |r: Result<FixedLoopConfig, ConfigError>| r.unwrap_err().field;
    assert_eq!(field(FixedLoopConfig::new(base, 16, 0.01)), "bus_adc_bits");
    assert_eq!(field(FixedLoopConfig::new(base, 12, -0.01)), "bus_v_per_count");
    // A bus window beyond the bus ADC.
    assert_eq!(field(FixedLoopConfig::new(base, 12, 25.0 / 4096.0)), "max_v");
    // Kp of 5000 V/A on a 16 A sensor and a 40 V bus ADC: 2000 full scales
    // of voltage per full scale of current, beyond 8 x 64.
    let hot = Board {
        kp: 5000.0,
        ..Board::demo()
    }
    .config();
    assert_eq!(field(FixedLoopConfig::new(hot, 12, 40.0 / 4096.0)), "kp_v_per_a");
    let ff = base
        .with_feedforward(crate::Feedforward::new(1.0, 0.0).unwrap())
        .unwrap();
    assert_eq!(
        field(FixedLoopConfig::new(ff, 12, 40.0 / 4096.0)),
        "resistance_ohm"
    );
}

/// Readings drawn around the windows' edges and anywhere.
fn reading() -> impl Strategy<Value = (u16, u16)> {
    (
        prop_oneof![1800u16..2300, 0u16..4096, 600u16..700, 3400u16..3500],
        prop_oneof![1800u16..3100, 0u16..4096],
    )
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(64))]

    #[test]
    fn on_any_readings_and_commands_the_two_loops_latch_alike(
        offset in 1900.0f32..2200.0,
        apc in prop_oneof![0.002f32..0.006, -0.006f32..-0.002],
        samples in 1u16..4,
        readings in proptest::collection::vec(reading(), 1..400),
        commands in proptest::collection::vec((0usize..400, 0u8..4, -5.0f32..5.0), 0..12),
        // Limits holding all the bus gives (the bus alone limits the PI),
        // or narrower (intersected each tick).
        limit_v in prop_oneof![Just(30.0f32), 2.0f32..28.0],
    ) {
        let board = Board {
            limit_v,
            offset_counts: offset,
            amps_per_count: apc,
            samples,
            threshold_a: 1500.0 * apc.abs(),
            // (The stuck detector watches the duty, which the two loops give
            // within a count of each other, not exactly: its own test.)
            stuck: None,
            ..Board::demo()
        };
        let vpc = board.bus_v_per_count;
        let (mut float, mut fixed) = board.pair();
        for (k, &reading) in readings.iter().enumerate() {
            for &(at, what, amps) in &commands {
                if at != k {
                    continue;
                }
                let (a, b) = match what {
                    0 => (float.apply(Command::Enable).is_ok(), fixed.apply(FixedCommand::Enable).is_ok()),
                    1 => (float.apply(Command::Disable).is_ok(), fixed.apply(FixedCommand::Disable).is_ok()),
                    2 => (float.apply(Command::ClearFaults).is_ok(), fixed.apply(FixedCommand::ClearFaults).is_ok()),
                    _ => (
                        float.apply(Command::SetCurrent(amps)).is_ok(),
                        fixed.apply(FixedCommand::SetCurrent(fixed.config().current_q15(amps))).is_ok(),
                    ),
                };
                prop_assert_eq!(a, b, "command {} at tick {}", what, k);
            }
            lockstep(&mut float, &mut fixed, vpc, &[reading]);
        }
    }
}

#[test]
fn the_reciprocal_table_holds_each_interval_s_middle_in_sixteen_bits() {
    // The const evaluation narrows to u16: an entry of 2^16 or more would
    // wrap, so check each against the wide computation.
    for (k, &r) in super::RECIPROCALS.iter().enumerate() {
        let middle = 16384.0 + 64.0 * k as f64 + 32.0;
        let exact = 1_073_741_824.0 / middle;
        assert!((r as f64 - exact).abs() <= 0.5, "entry {k}: {r} against {exact}");
        assert!(r > 32768, "entry {k}: {r}");
    }
}

#[test]
fn the_quotient_without_a_division_is_within_two_to_the_minus_15() {
    // Every divisor, numerators across the range (the duty's quotient is at
    // most 2^15, since |v| never exceeds what the bus gives).
    for b in 1u32..32768 {
        for v in [0u32, 1, 7, 100, b / 3, b / 2, b.saturating_sub(1), b].map(|v| v.min(b)) {
            let exact = (v as u64) << 15;
            let exact = exact as f64 / b as f64;
            let q = quotient_q15(v, b) as f64;
            assert!(
                (exact - q).abs() <= exact * libm::exp2(-15.0) + 1.0,
                "{v} / {b}: {q} against {exact}"
            );
        }
    }
    assert_eq!(quotient_q15(123, 0), 0);
}
