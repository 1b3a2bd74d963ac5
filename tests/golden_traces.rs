//! Golden traces: a few small runs whose per-tick CSV is kept in the repository,
//! so that any change in the simulator or in `pi-core` that moves a trace shows
//! up. Each `tests/golden/<name>.toml` scenario is run and compared with
//! `tests/golden/<name>.csv`: counts, enable and state exactly, and every other
//! column within 1e-6 (absolute, or relative above 1).
//!
//! After an intended change, look at the difference, then re-bless:
//!
//! ```text
//! AMPWRIGHT_BLESS=1 cargo test -p ampwright-tests --test golden_traces
//! ```

use std::path::{Path, PathBuf};

use host_sim::Scenario;

const NAMES: [&str; 4] = [
    "demo-step-switching",
    "sensor-short",
    "bus-dip-averaged",
    "demo-step-fixed",
];
const TOLERANCE: f64 = 1e-6;

fn golden_dir() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("golden")
}

fn run(name: &str) -> String {
    let s = Scenario::load(&golden_dir().join(format!("{name}.toml"))).unwrap();
    let (trace, _) = host_sim::results::report::run(&s, None, &mut |_| {}).unwrap();
    let mut out = Vec::new();
    trace.write_csv(&mut out).unwrap();
    String::from_utf8(out).unwrap()
}

fn close(a: f64, b: f64) -> bool {
    (a - b).abs() <= TOLERANCE * a.abs().max(b.abs()).max(1.0)
}

#[test]
fn traces_match_the_golden_files() {
    let bless = std::env::var_os("AMPWRIGHT_BLESS").is_some();
    for name in NAMES {
        let fresh = run(name);
        let path = golden_dir().join(format!("{name}.csv"));
        if bless {
            std::fs::write(&path, &fresh).unwrap();
            println!("blessed {}", path.display());
            continue;
        }
        let kept = std::fs::read_to_string(&path)
            .unwrap_or_else(|e| panic!("{}: {e}; bless it with AMPWRIGHT_BLESS=1", path.display()));
        let (fresh_lines, kept_lines): (Vec<_>, Vec<_>) = (fresh.lines().collect(), kept.lines().collect());
        assert_eq!(fresh_lines.len(), kept_lines.len(), "{name}: row count");
        assert_eq!(fresh_lines[0], kept_lines[0], "{name}: header");
        let header: Vec<&str> = kept_lines[0].split(',').collect();
        let exact = ["counts", "enabled", "fault_bits", "state"];
        for (row, (f, k)) in fresh_lines.iter().zip(&kept_lines).enumerate().skip(1) {
            for ((col, fv), kv) in header.iter().zip(f.split(',')).zip(k.split(',')) {
                let (a, b): (f64, f64) = (fv.parse().unwrap(), kv.parse().unwrap());
                let same = if exact.contains(col) { a == b } else { close(a, b) };
                assert!(
                    same,
                    "{name} row {row} column {col}: {fv} now, {kv} in the golden file"
                );
            }
        }
    }
}

#[test]
fn golden_runs_show_what_they_are_for() {
    // The sensor short trips on the first shorted reading, with the bridge off.
    let csv = run("sensor-short");
    let header: Vec<&str> = host_sim::sim::trace::CSV_HEADER.split(',').collect();
    let col = |name: &str| header.iter().position(|h| *h == name).unwrap();
    let rows: Vec<Vec<&str>> = csv.lines().skip(1).map(|l| l.split(',').collect()).collect();
    let first_faulted = rows.iter().position(|r| r[col("state")] == "2").unwrap();
    let t: f64 = rows[first_faulted][col("t_s")].parse().unwrap();
    assert!((t - 2.025e-3).abs() < 1e-9, "first sample after 2 ms: {t}");
    assert_eq!(rows[first_faulted][col("counts")], "0", "the shorted reading");
    assert_eq!(rows[first_faulted][col("enabled")], "0", "bridge off");
}
