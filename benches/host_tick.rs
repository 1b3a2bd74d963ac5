//! Host cost of one control update, in ns per tick (criterion).
//!
//! * `bare_pi`: `PiController::update`, default configuration.
//! * `naive_pi`: a textbook PI written here as the baseline (clamp the output,
//!   clamp the integrator, no checks).
//! * `assembled_tick`: `CurrentLoop::tick` on the invented demo board, running.
//!
//! Inputs change every iteration and pass through `black_box`, so nothing folds.
//! Compare `bare_pi` and `assembled_tick` against `naive_pi` in the report.

use std::hint::black_box;

use criterion::{Criterion, criterion_group, criterion_main};
use host_sim::demo;
use pi_core::{Command, OutputLimits, PiConfig, PiController, TickInput};

/// The baseline: what a PI looks like with no anti-windup logic and no checks.
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

fn ticks(c: &mut Criterion) {
    let gains = demo::gains().unwrap();
    let mut group = c.benchmark_group("tick");

    let cfg = PiConfig::new(gains, demo::PERIOD_S, OutputLimits::symmetric(22.8).unwrap()).unwrap();
    let mut pi = PiController::new(cfg);
    let mut k = 0u32;
    group.bench_function("bare_pi", |b| {
        b.iter(|| {
            k = k.wrapping_add(1);
            let y = (k & 0xff) as f32 * 0.01;
            black_box(pi.update(black_box(1.5), black_box(y)))
        })
    });

    let mut naive = NaivePi {
        kp: gains.kp_v_per_a(),
        ki_ts: gains.ki_v_per_a_s() * demo::PERIOD_S,
        integ: 0.0,
        lo: -22.8,
        hi: 22.8,
    };
    group.bench_function("naive_pi", |b| {
        b.iter(|| {
            k = k.wrapping_add(1);
            let y = (k & 0xff) as f32 * 0.01;
            black_box(naive.update(black_box(1.5), black_box(y)))
        })
    });

    let mut cl = demo::current_loop().unwrap();
    cl.apply(Command::Enable).unwrap();
    cl.apply(Command::SetCurrent(1.5)).unwrap();
    group.bench_function("assembled_tick", |b| {
        b.iter(|| {
            k = k.wrapping_add(1);
            let input = TickInput {
                current_counts: 2300 + (k & 0xff) as u16,
                bus_v: 24.0,
                speed_rad_s: None,
            };
            black_box(cl.tick(black_box(&input)))
        })
    });
    group.finish();
}

criterion_group!(benches, ticks);
criterion_main!(benches);
