//! Sweep throughput: simulated control ticks per second over all threads,
//! one thread against two, side by side in one run. The boards are the
//! demo scenario's tolerances on its averaged bridge (400 ticks a run).
//! Criterion's throughput line reads in ticks per second ("elem/s"); the
//! ratio of the two lines is what two cores give over one.
//!
//! ```text
//! cargo bench -p ampwright-benches --bench sweep
//! ```

// criterion's group and main macros define undocumented public functions.
#![allow(missing_docs)]

use criterion::{Criterion, Throughput, criterion_group, criterion_main};
use host_sim::scenario::Params;
use host_sim::sweep::{self, Nominal};

/// Runs per measured sweep.
const RUNS: u64 = 64;

fn nominal() -> Nominal {
    let text = host_sim::demo::SCENARIO_TOML.replace("mode = \"switching\"", "mode = \"averaged\"");
    Nominal::new(Params::from_toml(&text, "bench").unwrap()).unwrap()
}

fn sweep_ticks(c: &mut Criterion) {
    let n = nominal();
    let plan = sweep::plan(&n, RUNS, None);
    let ticks_per_run = (n.params.duration_s / n.params.timing.control_period_s).round() as u64;
    let mut g = c.benchmark_group("sweep_ticks");
    g.throughput(Throughput::Elements(RUNS * ticks_per_run));
    g.sample_size(20);
    for threads in [1usize, 2] {
        let pool = rayon::ThreadPoolBuilder::new()
            .num_threads(threads)
            .build()
            .unwrap();
        g.bench_function(format!("threads_{threads}"), |b| {
            b.iter(|| pool.install(|| sweep::sweep(&n, &plan, &|| {})).len())
        });
    }
    g.finish();
}

criterion_group!(benches, sweep_ticks);
criterion_main!(benches);
