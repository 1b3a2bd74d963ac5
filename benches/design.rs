//! Cost of one design computation on the host: the direct discrete design of
//! the demo winding (f64 and f32, the latter being the device's code path),
//! and the analysis that follows it (closed-loop poles, margins on a
//! 4096-point grid, the largest stable period).
//!
//! ```text
//! cargo bench -p ampwright-benches --bench design
//! ```

// criterion's group and main macros define undocumented public functions.
#![allow(missing_docs)]

use std::hint::black_box;

use criterion::{Criterion, criterion_group, criterion_main};
use pi_core::design::analysis::{self, OpenLoop};
use pi_core::design::{RlPlant, Sampling, Spec, discrete};

fn design(c: &mut Criterion) {
    let mut g = c.benchmark_group("design");
    g.bench_function("direct_discrete_f64", |b| {
        b.iter(|| {
            let plant = RlPlant::new(black_box(1.9f64), black_box(2.4e-3)).unwrap();
            let sampling = Sampling::new(black_box(50e-6f64), 1.0, 0.0).unwrap();
            let spec = Spec::new(black_box(2e-3f64), black_box(0.05)).unwrap();
            discrete::design(&plant, &sampling, &spec).unwrap()
        })
    });
    g.bench_function("direct_discrete_f32", |b| {
        b.iter(|| {
            let plant = RlPlant::new(black_box(1.9f32), black_box(2.4e-3)).unwrap();
            let sampling = Sampling::new(black_box(50e-6f32), 1.0, 0.0).unwrap();
            let spec = Spec::new(black_box(2e-3f32), black_box(0.05)).unwrap();
            discrete::design(&plant, &sampling, &spec).unwrap()
        })
    });
    let plant = RlPlant::new(1.9f64, 2.4e-3).unwrap();
    let sampling = Sampling::new(50e-6f64, 1.0, 0.0).unwrap();
    let gains = discrete::design(&plant, &sampling, &Spec::new(2e-3, 0.05).unwrap()).unwrap();
    g.bench_function("poles_f64", |b| {
        b.iter(|| OpenLoop::new(black_box(&plant), &sampling, &gains).poles())
    });
    g.bench_function("margins_4096_f64", |b| {
        b.iter(|| analysis::margins(&OpenLoop::new(black_box(&plant), &sampling, &gains), 50e-6, 4096))
    });
    g.bench_function("largest_stable_period_f64", |b| {
        b.iter(|| analysis::largest_stable_period(black_box(&plant), &sampling, &gains))
    });
    g.finish();
}

criterion_group!(benches, design);
criterion_main!(benches);
