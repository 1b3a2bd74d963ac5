//! Long runs are faithful: thinning the stored trace changes no figure of the
//! report, the 150 s jam scenario stays small, and steps that something
//! interrupted are reported as such instead of scored. One test per process
//! matters for the memory check, so this suite is its own binary.

use ampwright_tests::edited;
use host_sim::results::metrics::Interruption;
use host_sim::results::report;
use host_sim::scenario::Params;

const JAM: &str = include_str!("../host-sim/scenarios/carousel_jam.toml");
const DEMO: &str = include_str!("../host-sim/scenarios/carousel_step.toml");

fn run(text: &str) -> (host_sim::Trace, report::Report) {
    let p = Params::from_toml(text, "t").unwrap();
    let s = p.build().unwrap();
    report::run(&s, None, &mut |_| {}).unwrap()
}

/// The jam scenario shortened to 3 s with a 1 s I^2t time constant, so that it
/// trips inside the window; kept whole and kept one tick in 200.
#[test]
fn thinning_the_trace_changes_no_figure_of_the_report() {
    let short = |every: &str| {
        edited(
            JAM,
            &[
                ("duration_s", "duration_s = 3.0"),
                ("record_every_ticks", &format!("record_every_ticks = {every}")),
                ("trip_class", "thermal_time_constant_s = 1.0"),
                ("trip_after_s", ""),
                ("trip_before_s", ""),
            ],
        )
    };
    let (full_trace, full) = run(&short("1"));
    let (thin_trace, thin) = run(&short("200"));
    assert_eq!(full_trace.points.len(), 60_000);
    assert_eq!(thin_trace.points.len(), 300);
    assert!(full.first_fault.is_some(), "the shortened jam must trip");
    assert_eq!(full.json(), thin.json());
    // The figures the thinned trace alone would get wrong are right.
    let peak_duty_in_thin_trace = thin_trace.points.iter().map(|p| p.duty.abs()).fold(0.0, f64::max);
    println!(
        "peak duty {} (the thinned trace alone says {peak_duty_in_thin_trace}), first fault {:?}",
        thin.peak_duty, thin.first_fault
    );
}

#[test]
fn the_jam_run_writes_a_small_trace_and_trips_when_stated() {
    let (trace, rep) = run(JAM);
    let mut csv = Vec::new();
    trace.write_csv(&mut csv).unwrap();
    println!("{} rows, {} bytes of CSV", trace.points.len(), csv.len());
    assert!(csv.len() < 5_000_000, "{} bytes", csv.len());
    let (what, t) = rep.first_fault.clone().unwrap();
    assert!(what.contains("I^2t"), "{what}");
    // The scenario's own statement: class 10 trips it at 115.9 s.
    assert!((t - 115.9).abs() < 0.05, "{t}");
    assert!((rep.peak_duty - 0.95).abs() < 1e-6, "{}", rep.peak_duty);
    assert_eq!(rep.pass, Some(true), "{}", rep.table());
}

/// The jam run alone in a process of its own (this test binary, asked to run
/// only the ignored test below), so that its peak memory is its own.
#[test]
fn the_jam_run_stays_under_40_mb() {
    let out = std::process::Command::new(std::env::current_exe().unwrap())
        .args([
            "jam_alone",
            "--exact",
            "--ignored",
            "--nocapture",
            "--test-threads=1",
        ])
        .output()
        .unwrap();
    let text = String::from_utf8_lossy(&out.stdout);
    assert!(out.status.success(), "{text}");
    let Some(kb) = text
        .lines()
        .find_map(|l| l.split("peak resident kB ").nth(1))
        .and_then(|v| v.trim().parse::<u64>().ok())
    else {
        println!("no /proc/self/status here: memory not measured");
        return;
    };
    println!("the jam run's process peaked at {kb} kB");
    assert!(kb < 40_000, "{kb} kB");
}

#[test]
#[ignore = "run in its own process by the_jam_run_stays_under_40_mb"]
fn jam_alone() {
    let (trace, _) = run(JAM);
    let mut csv = Vec::new();
    trace.write_csv(&mut csv).unwrap();
    if let Ok(status) = std::fs::read_to_string("/proc/self/status")
        && let Some(kb) = status
            .lines()
            .find(|l| l.starts_with("VmHWM:"))
            .and_then(|l| l.split_whitespace().nth(1))
    {
        println!("peak resident kB {kb}");
    }
}

#[test]
fn a_bus_dip_interrupts_the_step_it_falls_in() {
    // The demo with the bus sagging to 20 V (inside the window: no fault) for
    // 1 ms right after the first step.
    let text = format!(
        "{DEMO}\n[[faults]]\nkind = \"bus_level\"\nsupply_v = 20.0\nstart_s = 1.2e-3\nend_s = 2.2e-3\n"
    );
    let (_, rep) = run(&text);
    assert_eq!(rep.steps[0].interrupted, Some(Interruption::BusEvent));
    assert_eq!(rep.steps[1].interrupted, None);
    assert!(rep.checks.iter().all(|c| c.step == 1), "{:?}", rep.checks);
    assert!(
        rep.table()
            .contains("interrupted, not scored: the bus left its nominal level")
    );
}

#[test]
fn a_sensor_fault_interrupts_the_step_and_a_retune_too() {
    let text = format!(
        "{DEMO}\n[[faults]]\nkind = \"sensor_shorted\"\nstart_s = 12e-3\n\n[[events]]\nat_s = 2.0e-3\naction = \"retune\"\nkp_v_per_a = 10.0\nti_s = 1.2e-3\n"
    );
    let (_, rep) = run(&text);
    assert_eq!(rep.steps[0].interrupted, Some(Interruption::Retune));
    assert_eq!(rep.steps[1].interrupted, Some(Interruption::Fault));
    assert!(rep.checks.is_empty(), "nothing left to score: {:?}", rep.checks);
}

#[test]
fn a_run_that_ends_before_the_step_settles_says_so() {
    let text = edited(DEMO, &[("duration_s", "duration_s = 10.2e-3")]);
    let (_, rep) = run(&text);
    assert_eq!(rep.steps[1].interrupted, Some(Interruption::EndOfRun));
}

#[test]
fn a_request_beyond_the_setpoint_limits_is_measured_to_the_limit_and_marked() {
    let text = DEMO.replace("current_a = 1.5", "current_a = 6.5");
    let (_, rep) = run(&text);
    let s = &rep.steps[0];
    assert!(s.clamped);
    assert_eq!(s.to_a, 4.0);
    assert!(
        rep.table()
            .contains("* the scenario asked for more than the setpoint limits allow")
    );
}

#[test]
fn a_run_whose_trace_would_not_fit_is_refused_with_the_setting_that_fixes_it() {
    let huge = edited(
        DEMO,
        &[
            ("duration_s", "duration_s = 5000.0"),
            ("mode", "mode = \"averaged\""),
        ],
    );
    let s = Params::from_toml(&huge, "t").unwrap().build().unwrap();
    let plan = host_sim::results::plan::Plan::of(&s);
    assert_eq!(plan.ticks, 1e8);
    let why = plan.refusal(1).unwrap();
    let suggested: u64 = why
        .split("set record_every_ticks to ")
        .nth(1)
        .and_then(|r| r.split(' ').next())
        .and_then(|n| n.parse().ok())
        .unwrap_or_else(|| panic!("{why}"));
    // The suggested setting fits, and one less does not.
    let with_every = |every: u64| {
        let text = edited(
            &huge,
            &[(
                "duration_s",
                &format!("duration_s = 5000.0\nrecord_every_ticks = {every}"),
            )],
        );
        let s = Params::from_toml(&text, "t").unwrap().build().unwrap();
        host_sim::results::plan::Plan::of(&s).refusal(every)
    };
    assert_eq!(with_every(suggested), None);
    assert!(with_every(suggested - 1).is_some());
    // On the command line: exit 2, before anything runs.
    let dir = ampwright_tests::temp_dir("huge-run");
    let path = dir.join("huge.toml");
    std::fs::write(&path, &huge).unwrap();
    let args = [
        "ampwright",
        "simulate",
        path.to_str().unwrap(),
        "--out",
        dir.to_str().unwrap(),
        "--quiet",
    ];
    assert_eq!(host_sim::cli::main(args.map(Into::into)), 2);
    assert!(!dir.join("t.csv").exists() && !dir.join("huge.csv").exists());
}
