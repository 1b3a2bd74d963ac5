//! The demo scenario run for a number of control ticks with the bridge
//! averaged or switching, in `runs` fresh runs and nothing else (the shape of
//! `benches/sim_ticks.rs` with `2000` ticks): a fixed workload for profilers
//! (`valgrind --tool=callgrind`) when the simulator's core is tuned.
//!
//! ```text
//! cargo run --release -p ampwright-benches --example demo_ticks -- averaged 2000 100 [dump.bin]
//! ```

use host_sim::{Scenario, TracePoint, demo};

/// The figures of a point that the dump and the digest cover (the fields the
/// older revisions' trace points have too).
fn figures(p: &TracePoint) -> [f64; 7] {
    [
        p.current_a,
        p.measured_a,
        p.duty,
        p.bus_v,
        p.supply_a,
        p.winding_c,
        p.speed_rad_s,
    ]
}

fn main() {
    let mut args = std::env::args().skip(1);
    let mode = args.next().unwrap_or_else(|| "averaged".into());
    let ticks: u64 = args.next().and_then(|a| a.parse().ok()).unwrap_or(200_000);
    let runs: u64 = args.next().and_then(|a| a.parse().ok()).unwrap_or(1);
    // Optionally the last run's figures as little-endian f64s, to compare two
    // builds number by number.
    let dump = args.next();
    let text = demo::SCENARIO_TOML.replace("mode = \"switching\"", &format!("mode = \"{mode}\""));
    let mut s = Scenario::parse(&text, "demo").expect("the demo scenario parses");
    s.duration_s = 1e3;
    let mut last = 0.0;
    let mut digest = 0u64;
    for n in 0..runs {
        let (mut cl, mut run) = s.start().expect("the demo scenario starts");
        run.run_ticks(&mut cl, ticks);
        if n + 1 < runs {
            continue;
        }
        last = run.trace().points.last().map_or(0.0, |p| p.current_a);
        if let Some(path) = &dump {
            let bytes: Vec<u8> = run
                .trace()
                .points
                .iter()
                .flat_map(figures)
                .flat_map(f64::to_le_bytes)
                .collect();
            std::fs::write(path, bytes).expect("the dump file can be written");
        }
        // Every recorded figure's bits folded together: a change of the last
        // bit anywhere in the run changes it.
        digest = run.trace().points.iter().fold(0, |h, p| {
            figures(p)
                .iter()
                .fold(h, |h, v| (h ^ v.to_bits()).wrapping_mul(0x0100_0000_01b3))
        });
    }
    println!("mode {mode} ticks {ticks} runs {runs} final_current_a {last:.9} digest {digest:016x}");
}
