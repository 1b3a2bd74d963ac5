//! Simulated control ticks per second: the demo scenario (the real `pi-core`
//! loop on the carousel motor model) with the bridge averaged and switching.
//! Criterion's throughput line reads in ticks per second ("elem/s").
//!
//! ```text
//! cargo bench -p ampwright-benches --bench sim_ticks
//! ```

// criterion's group and main macros define undocumented public functions.
#![allow(missing_docs)]

use criterion::{Criterion, Throughput, criterion_group, criterion_main};
use host_sim::{Scenario, demo};

const TICKS: u64 = 2000;

fn scenario(mode: &str) -> Scenario {
    let text = demo::SCENARIO_TOML.replace("mode = \"switching\"", &format!("mode = \"{mode}\""));
    let mut s = Scenario::parse(&text, "bench").unwrap();
    s.duration_s = 1.0;
    s
}

fn sim_ticks(c: &mut Criterion) {
    let mut g = c.benchmark_group("simulated_ticks");
    g.throughput(Throughput::Elements(TICKS));
    for mode in ["averaged", "switching"] {
        let s = scenario(mode);
        g.bench_function(mode, |b| {
            b.iter_batched(
                || s.start().unwrap(),
                |(mut cl, mut run)| {
                    run.run_ticks(&mut cl, TICKS);
                    run.trace().points.len()
                },
                criterion::BatchSize::LargeInput,
            )
        });
    }
    g.finish();
}

criterion_group!(benches, sim_ticks);
criterion_main!(benches);
