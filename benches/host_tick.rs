//! Host cost of one control update, in ns per tick (criterion).
//!
//! * `bare_pi`: `PiController::update`, default configuration (the demo gains).
//! * `naive_pi`: a textbook PI written here as the baseline (clamp the output,
//!   clamp the integrator, no checks).
//! * `assembled_tick`: `CurrentLoop::tick` on the invented demo board, running.
//!
//! Each replays, from the same starting state every time, 1024 ticks of inputs:
//!
//! * `demo_run`: recorded from the demo scenario (51.2 ms of the carousel motor
//!   on the demo board, averaged bridge, sense noise): the loop enabled at 0,
//!   a step to 1.5 A at 1 ms and to -1.0 A at 10 ms. The everyday case: the PI
//!   mostly inside its limits, briefly saturated after each step.
//! * `sweep`: the reading sweeps 0 to 2.55 A four times against a 1.5 A setpoint
//!   with no plant, so the PI keeps running into its limits.
//!
//! Criterion reports the time of the 1024 ticks and, through its throughput
//! line, ticks per second; ns per tick is the time over 1024. Inputs pass
//! through `black_box`, so nothing folds. Compare `bare_pi` and
//! `assembled_tick` against `naive_pi` on the same stream.

use std::hint::black_box;

use criterion::{BatchSize, Criterion, Throughput, criterion_group, criterion_main};
use host_sim::demo;
use pi_core::{Command, OutputLimits, PiConfig, PiController, TickInput};

/// Ticks per replay.
const N: usize = 1024;

/// The baseline: what a PI looks like with no anti-windup logic and no checks.
#[derive(Clone)]
struct NaivePi {
    kp: f32,
    ki_ts: f32,
    integ: f32,
    lo: f32,
    hi: f32,
}

impl NaivePi {
    #[inline]
    fn update(&mut self, r: f32, y: f32) -> f32 {
        let e = r - y;
        self.integ = (self.integ + self.ki_ts * e).clamp(self.lo, self.hi);
        (self.kp * e + self.integ).clamp(self.lo, self.hi)
    }
}

/// One replayed tick: the setpoint the PI saw, the loop's readings, and the
/// setpoint command the main loop sent before it (if any).
#[derive(Clone, Copy)]
struct Tick {
    setpoint_a: f32,
    measured_a: f32,
    input: TickInput,
    request: Option<f32>,
}

/// The first 1024 ticks of the demo scenario.
fn demo_run() -> Vec<Tick> {
    let text = demo::SCENARIO_TOML.replace("mode = \"switching\"", "mode = \"averaged\"");
    let mut s = host_sim::Scenario::parse(&text, "bench").unwrap();
    s.duration_s = 1.0;
    let (mut cl, mut run) = s.start().unwrap();
    run.run_ticks(&mut cl, N as u64);
    let mut last_request = f64::NAN;
    run.trace()
        .points
        .iter()
        .map(|p| {
            let request = (p.request_a != last_request).then_some(p.request_a as f32);
            last_request = p.request_a;
            Tick {
                setpoint_a: p.setpoint_a as f32,
                measured_a: p.measured_a as f32,
                input: TickInput {
                    current_counts: p.counts,
                    bus_v: p.bus_v as f32,
                    speed_rad_s: None,
                },
                request,
            }
        })
        .collect()
}

/// 1024 ticks sweeping the reading over 0 to 2.55 A against 1.5 A.
fn sweep() -> Vec<Tick> {
    let sense = demo::sense().unwrap();
    (0..N)
        .map(|k| {
            let counts =
                (sense.offset_counts() + (k % 256) as f32 * 0.01 / sense.amps_per_count()).round() as u16;
            Tick {
                setpoint_a: 1.5,
                measured_a: sense.to_amperes(counts),
                input: TickInput {
                    current_counts: counts,
                    bus_v: 24.0,
                    speed_rad_s: None,
                },
                request: (k == 0).then_some(1.5),
            }
        })
        .collect()
}

fn ticks(c: &mut Criterion) {
    let gains = demo::gains().unwrap();
    let mut group = c.benchmark_group("tick");
    group.throughput(Throughput::Elements(N as u64));
    for (stream, ticks) in [("demo_run", demo_run()), ("sweep", sweep())] {
        let cfg = PiConfig::new(gains, demo::PERIOD_S, OutputLimits::symmetric(22.8).unwrap()).unwrap();
        let pi = PiController::new(cfg);
        group.bench_function(format!("bare_pi/{stream}"), |b| {
            b.iter_batched_ref(
                || pi.clone(),
                |pi| {
                    for t in &ticks {
                        black_box(pi.update(black_box(t.setpoint_a), black_box(t.measured_a)));
                    }
                },
                BatchSize::SmallInput,
            )
        });

        let naive = NaivePi {
            kp: gains.kp_v_per_a(),
            ki_ts: gains.ki_v_per_a_s() * demo::PERIOD_S,
            integ: 0.0,
            lo: -22.8,
            hi: 22.8,
        };
        group.bench_function(format!("naive_pi/{stream}"), |b| {
            b.iter_batched_ref(
                || naive.clone(),
                |pi| {
                    for t in &ticks {
                        black_box(pi.update(black_box(t.setpoint_a), black_box(t.measured_a)));
                    }
                },
                BatchSize::SmallInput,
            )
        });

        let mut cl = demo::current_loop().unwrap();
        cl.apply(Command::Enable).unwrap();
        group.bench_function(format!("assembled_tick/{stream}"), |b| {
            b.iter_batched_ref(
                || cl.clone(),
                |cl| {
                    for t in &ticks {
                        if let Some(a) = t.request {
                            let _ = cl.apply(Command::SetCurrent(a));
                        }
                        black_box(cl.tick(black_box(&t.input)));
                    }
                },
                BatchSize::SmallInput,
            )
        });
    }
    group.finish();
}

criterion_group!(benches, ticks);
criterion_main!(benches);
