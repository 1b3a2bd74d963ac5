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
//! line, ticks per second; at the end the bench prints ns per tick and the
//! ratio of `bare_pi` and `assembled_tick` to `naive_pi` on the same stream,
//! from this run's estimates. Inputs pass through `black_box`, so nothing folds.

// criterion's group and main macros define undocumented public functions.
#![allow(missing_docs)]

use std::hint::black_box;

use criterion::{BatchSize, Criterion, Throughput, criterion_group};
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

/// Times `update` over every tick of `ticks`, each batch from a copy of `start`.
/// A macro and not a function: through a closure argument the update is not
/// inlined into the loop, which adds a call to every tick and is not what
/// firmware does.
macro_rules! replay {
    ($group:expr, $name:expr, $start:expr, $ticks:expr, |$state:ident, $t:ident| $update:block) => {
        $group.bench_function($name, |b| {
            b.iter_batched_ref(
                || $start.clone(),
                |$state| {
                    for $t in $ticks {
                        $update
                    }
                },
                BatchSize::SmallInput,
            )
        })
    };
}

fn ticks(c: &mut Criterion) {
    let gains = demo::gains().unwrap();
    let mut group = c.benchmark_group("tick");
    group.throughput(Throughput::Elements(N as u64));
    for (stream, ticks) in [("demo_run", demo_run()), ("sweep", sweep())] {
        let cfg = PiConfig::new(gains, demo::PERIOD_S, OutputLimits::symmetric(22.8).unwrap()).unwrap();
        let pi = PiController::new(cfg);
        replay!(group, format!("bare_pi/{stream}"), pi, &ticks, |pi, t| {
            black_box(pi.update(black_box(t.setpoint_a), black_box(t.measured_a)));
        });

        let naive = NaivePi {
            kp: gains.kp_v_per_a(),
            ki_ts: gains.ki_v_per_a_s() * demo::PERIOD_S,
            integ: 0.0,
            lo: -22.8,
            hi: 22.8,
        };
        replay!(group, format!("naive_pi/{stream}"), naive, &ticks, |pi, t| {
            black_box(pi.update(black_box(t.setpoint_a), black_box(t.measured_a)));
        });

        let mut cl = demo::current_loop().unwrap();
        cl.apply(Command::Enable).unwrap();
        replay!(group, format!("assembled_tick/{stream}"), cl, &ticks, |cl, t| {
            if let Some(a) = t.request {
                let _ = cl.apply(Command::SetCurrent(a));
            }
            black_box(cl.tick(black_box(&t.input)));
        });
    }
    group.finish();
}

/// The ratios to the naive PI from this run's estimates (criterion writes them
/// under the workspace's `target/criterion`, or `$CARGO_TARGET_DIR/criterion`).
fn print_ratios() {
    let target = std::env::var_os("CARGO_TARGET_DIR")
        .map(std::path::PathBuf::from)
        .unwrap_or_else(|| std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("../target"));
    let mean_ns = |name: &str| -> Option<f64> {
        let path = target
            .join("criterion/tick")
            .join(name)
            .join("new/estimates.json");
        let v: serde_json::Value = serde_json::from_str(&std::fs::read_to_string(path).ok()?).ok()?;
        v["mean"]["point_estimate"].as_f64().map(|t| t / N as f64)
    };
    println!("\nns per tick (mean) and ratio to the naive PI on the same stream:");
    for stream in ["demo_run", "sweep"] {
        let Some(naive) = mean_ns(&format!("naive_pi_{stream}")) else {
            continue;
        };
        for what in ["bare_pi", "assembled_tick"] {
            if let Some(t) = mean_ns(&format!("{what}_{stream}")) {
                println!(
                    "  {stream:<9} {what:<15} {t:6.2} ns  {:.2}x (naive {naive:.2} ns)",
                    t / naive
                );
            }
        }
    }
}

criterion_group!(benches, ticks);

fn main() {
    benches();
    Criterion::default().configure_from_args().final_summary();
    print_ratios();
}
