//! `ampwright identify`: R and L of held windings from captures, against the
//! values the captures were made with. The captures come from host-sim's drive
//! chain (the real pi-core loop stepping an invented load on an averaged
//! bridge), or are written here; the loads are invented for these tests, from
//! tens of ohms to well under one.

use host_sim::bench::capture::{self, Columns};
use host_sim::bench::identify::identify_rl;
use host_sim::plant::noise::Gaussian;
use host_sim::results::report;
use host_sim::scenario::Params;
use pi_core::identify::RlIdentifier;

const VALVE: &str = include_str!("../host-sim/captures/valve_coil_bench.toml");
const VALVE_CSV: &str = include_str!("../host-sim/captures/valve_coil_bench.csv");

fn capture_of(text: &str, cols: &Columns) -> capture::Capture {
    capture::read(text.as_bytes(), "capture", cols).unwrap()
}

/// A run of the valve scenario with another load, as a capture (CSV text).
fn bench_run(r: f64, l: f64, step_a: f64, shunt_ohm: f64) -> String {
    bench_run_in(r, l, step_a, shunt_ohm, "averaged")
}

/// The same with the bridge in `mode` (`switching`: the current's PWM ripple
/// is in the capture) and, when switching, an RC anti-aliasing filter of
/// 30 times the winding's corner frequency on the sense chain.
fn bench_run_in(r: f64, l: f64, step_a: f64, shunt_ohm: f64, mode: &str) -> String {
    let tau = l / r;
    let text = ampwright_tests::edited(
        VALVE,
        &[
            ("resistance_ohm", &format!("resistance_ohm = {r}")),
            ("inductance_h", &format!("inductance_h = {l}")),
            ("duration_s", &format!("duration_s = {}", 24.0 * tau)),
            ("shunt_ohm", &format!("shunt_ohm = {shunt_ohm}")),
            ("min_a", &format!("min_a = {}", -2.0 * step_a)),
            ("max_a", &format!("max_a = {}", 2.0 * step_a)),
            (
                "slew_a_per_s",
                &format!("slew_a_per_s = {}", 100.0 * step_a / tau),
            ),
            ("overcurrent_a", &format!("overcurrent_a = {}", 2.5 * step_a)),
            ("settling_time_s", &format!("settling_time_s = {}", 3.0 * tau)),
        ],
    );
    let text = if mode == "switching" {
        let corner_hz = 30.0 * r / l / (2.0 * std::f64::consts::PI);
        text.replace("mode = \"averaged\"", "mode = \"switching\"")
            .replace(
                "seed = 11",
                &format!("seed = 11\n\n[sense.filter]\nkind = \"rc\"\ncutoff_hz = {corner_hz}"),
            )
    } else {
        text
    };
    // Three steps, each left to settle for eight time constants.
    let text = text
        .replace("at_s = 5e-3", &format!("at_s = {}", 0.2 * tau))
        .replace("at_s = 70e-3", &format!("at_s = {}", 8.0 * tau))
        .replace("at_s = 135e-3", &format!("at_s = {}", 16.0 * tau))
        .replace("current_a = 0.3", &format!("current_a = {}", step_a))
        .replace("current_a = 0.6", &format!("current_a = {}", 2.0 * step_a))
        .replace("current_a = -0.2", &format!("current_a = {}", -0.7 * step_a));
    let s = Params::from_toml(&text, "t").unwrap();
    let prepared = host_sim::prepare::prepare(s).unwrap();
    let (trace, _) = report::run(&prepared.scenario, None, &mut |_| {}).unwrap();
    let mut csv = Vec::new();
    trace.write_csv(&mut csv).unwrap();
    String::from_utf8(csv).unwrap()
}

#[test]
fn the_simulators_trace_reads_as_a_capture_and_gives_back_the_coil() {
    // The committed capture is `ampwright simulate`'s trace of the valve test.
    let c = capture_of(VALVE_CSV, &Columns::default());
    assert_eq!(c.voltage_from, "duty x bus_v");
    assert!((c.period_s - 50e-6).abs() < 1e-12);
    let fit = identify_rl(&c, "valve", None).unwrap();
    // The path the current takes includes two switches of 0.02 ohm.
    let r = 18.5 + 2.0 * 0.02;
    println!("{}", fit.table("valve"));
    assert!(
        (fit.resistance_ohm.value - r).abs() < 0.005 * r,
        "{:?}",
        fit.resistance_ohm
    );
    assert!(
        (fit.inductance_h.value - 0.22).abs() < 0.005 * 0.22,
        "{:?}",
        fit.inductance_h
    );
    // (No interval check here: with no noise the interval is as narrow as the
    // CSV's seven digits, and means nothing.)
    assert_eq!(
        fit.delay_samples, 1,
        "the duty reaches the bridge one period late"
    );
}

#[test]
fn the_current_the_controller_read_gives_back_the_coil_too() {
    // ADC steps and noise in the current: the output-error stage is not
    // biased by them, and its 95 % intervals hold the values.
    let cols = Columns {
        current: "measured_a".into(),
        ..Columns::default()
    };
    let c = capture_of(VALVE_CSV, &cols);
    let fit = identify_rl(&c, "valve", None).unwrap();
    let r = 18.5 + 2.0 * 0.02;
    println!("{}", fit.table("valve, measured current"));
    assert_eq!(fit.stage, "output error");
    assert_eq!(fit.delay_samples, 1);
    assert!((fit.resistance_ohm.value - r).abs() < 0.005 * r);
    assert!((fit.inductance_h.value - 0.22).abs() < 0.005 * 0.22);
    assert!(
        fit.resistance_ohm.low <= r && r <= fit.resistance_ohm.high,
        "{:?}",
        fit.resistance_ohm
    );
    assert!(
        fit.inductance_h.low <= 0.22 && 0.22 <= fit.inductance_h.high,
        "{:?}",
        fit.inductance_h
    );
}

#[test]
fn loads_from_tens_of_ohms_to_under_one_are_identified_within_2_percent() {
    // (R ohm, L H, step A, shunt ohm): invented loads.
    for (r, l, step, shunt) in [
        (45.0, 0.6, 0.2, 0.2),
        (3.2, 4e-3, 2.0, 0.02),
        (0.4, 0.3e-3, 12.0, 0.002),
    ] {
        let csv = bench_run(r, l, step, shunt);
        // The true current and the one the controller read (ADC, noise).
        for column in ["current_a", "measured_a"] {
            let cols = Columns {
                current: column.into(),
                ..Columns::default()
            };
            let c = capture_of(&csv, &cols);
            let fit = identify_rl(&c, "bench", None).unwrap();
            let r_path = r + 2.0 * 0.02;
            println!(
                "R {r} (+0.04 in the bridge) L {l}, {column}: {:.5} ohm, {:.6e} H",
                fit.resistance_ohm.value, fit.inductance_h.value
            );
            assert!(
                (fit.resistance_ohm.value - r_path).abs() < 0.02 * r_path,
                "{r}: {:?}",
                fit.resistance_ohm
            );
            assert!(
                (fit.inductance_h.value - l).abs() < 0.02 * l,
                "{l}: {:?}",
                fit.inductance_h
            );
        }
    }
}

/// A clean locked-rotor voltage step, written as a bench capture with a
/// terminal voltage column.
fn clean_step(r: f64, l: f64, ts: f64, n: usize) -> String {
    let mut s = String::from("time_s,voltage_v,current_a\n");
    let (a, b) = ((-r * ts / l).exp(), (1.0 - (-r * ts / l).exp()) / r);
    let mut i = 0.0;
    for k in 0..n {
        let v = if k < 10 { 0.0 } else { 12.0 };
        s.push_str(&format!("{:.12e},{v},{:.12e}\n", k as f64 * ts, i));
        i = a * i + b * v;
    }
    s
}

#[test]
fn a_switching_bridge_with_ripple_and_a_sense_filter_still_gives_r_and_l_within_2_percent() {
    // The full drive chain: PWM ripple in the current, the RC filter's lag,
    // noise and ADC steps on the reading; invented loads.
    for (r, l, step, shunt) in [(12.0, 60e-3, 0.5, 0.1), (1.5, 3e-3, 3.0, 0.01)] {
        let csv = bench_run_in(r, l, step, shunt, "switching");
        let cols = Columns {
            current: "measured_a".into(),
            ..Columns::default()
        };
        let fit = identify_rl(&capture_of(&csv, &cols), "switching", None).unwrap();
        let r_path = r + 2.0 * 0.02;
        println!(
            "R {r} L {l} switching: {:.5} ohm, {:.6e} H, delay {}",
            fit.resistance_ohm.value, fit.inductance_h.value, fit.delay_samples
        );
        assert!(
            (fit.resistance_ohm.value - r_path).abs() < 0.02 * r_path,
            "{:?}",
            fit.resistance_ohm
        );
        assert!(
            (fit.inductance_h.value - l).abs() < 0.02 * l,
            "{:?}",
            fit.inductance_h
        );
    }
}

#[test]
fn the_time_constant_at_63_percent_agrees_with_the_fitted_l_over_r() {
    // Common practice: on a clean step the current reaches 1 - 1/e = 63.2 %
    // of its final value one time constant after the step.
    let (r, l, ts) = (7.5, 9e-3, 20e-6);
    let c = capture_of(&clean_step(r, l, ts, 3000), &Columns::default());
    let fit = identify_rl(&c, "step", None).unwrap();
    let final_a = *c.current_a.last().unwrap();
    let level = final_a * (1.0 - (-1.0f64).exp());
    let k = c.current_a.iter().position(|&i| i >= level).unwrap();
    let f = (level - c.current_a[k - 1]) / (c.current_a[k] - c.current_a[k - 1]);
    let t63 = c.time_s[k - 1] + f * ts - c.time_s[10];
    let tau = fit.inductance_h.value / fit.resistance_ohm.value;
    assert!(
        (t63 - tau).abs() < 0.01 * tau,
        "63 %: {t63} s, fitted L/R: {tau} s"
    );
    assert!((tau - l / r).abs() < 1e-6 * tau);
}

/// A capture of the exact sampled model (the one the fit assumes) under a
/// staircase of voltage steps, with white Gaussian noise of `sd_a` on every
/// current sample, the first included.
fn noisy_staircase(r: f64, l: f64, ts: f64, n: usize, sd_a: f64, seed: u64) -> String {
    let mut g = Gaussian::new(seed);
    let v_max = 2.0 * r; // 2 A at the top step
    let mut s = String::from("time_s,voltage_v,current_a\n");
    let (a, b) = ((-r * ts / l).exp(), -(-r * ts / l).exp_m1() / r);
    let mut i = 0.0;
    for k in 0..n {
        let v = v_max * [0.0, 1.0, 0.35, 1.0, 0.0, 0.7][(k * 6 / n).min(5)];
        s.push_str(&format!(
            "{:.12e},{v:.9},{:.12e}\n",
            k as f64 * ts,
            i + sd_a * g.sample()
        ));
        i = a * i + b * v;
    }
    s
}

#[test]
fn the_95_percent_intervals_hold_the_truth_at_least_90_times_in_100() {
    // Four invented loads, from a 24 ohm coil to a 0.35 ohm winding, 25 seeds
    // each; noise of 1 % of the top current on every sample. The interval's
    // promise is about noise on a model that holds, so the captures come from
    // the exact sampled model; the full drive chain's captures are the
    // accuracy test above.
    let loads = [
        (24.0, 0.3, 200e-6),
        (6.0, 12e-3, 50e-6),
        (1.3, 2.2e-3, 50e-6),
        (0.35, 150e-6, 20e-6),
    ];
    let (mut hits_r, mut hits_l, mut runs) = (0, 0, 0);
    for (r, l, ts) in loads {
        // About twelve time constants per step.
        let n = ((72.0 * l / r / ts) as usize).clamp(600, 20_000);
        for seed in 1..=25 {
            let c = capture_of(&noisy_staircase(r, l, ts, n, 0.02, seed), &Columns::default());
            let fit = identify_rl(&c, "calibration", Some(0)).unwrap();
            assert_eq!(fit.stage, "output error");
            runs += 1;
            hits_r += usize::from(fit.resistance_ohm.low <= r && r <= fit.resistance_ohm.high);
            hits_l += usize::from(fit.inductance_h.low <= l && l <= fit.inductance_h.high);
        }
    }
    assert_eq!(runs, 100);
    println!("95 % intervals holding the truth: R {hits_r} of {runs}, L {hits_l} of {runs}");
    assert!(hits_r >= 90, "R: {hits_r} of {runs} intervals hold the truth");
    assert!(hits_l >= 90, "L: {hits_l} of {runs} intervals hold the truth");
    // And not by being wide: the nominal 95 % should not read as 100 %.
    assert!(
        hits_r < 100 || hits_l < 100,
        "R {hits_r}, L {hits_l}: intervals look too wide"
    );
}

#[test]
fn the_device_identifier_in_f32_is_within_1_percent_of_the_hosts() {
    let c = capture_of(VALVE_CSV, &Columns::default());
    let mut id32 = RlIdentifier::new(c.period_s as f32);
    let mut id64 = RlIdentifier::new(c.period_s);
    for k in 1..c.current_a.len() {
        id32.sample(c.voltage_v[k - 1] as f32, c.current_a[k] as f32);
        id64.sample(c.voltage_v[k - 1], c.current_a[k]);
    }
    let (a, b) = (id32.estimate().unwrap(), id64.estimate().unwrap());
    assert!(
        ((a.resistance_ohm as f64) - b.resistance_ohm).abs() < 0.01 * b.resistance_ohm,
        "{a:?} {b:?}"
    );
    assert!(
        ((a.inductance_h as f64) - b.inductance_h).abs() < 0.01 * b.inductance_h,
        "{a:?} {b:?}"
    );
}

#[test]
fn bad_captures_are_refused_in_one_sentence() {
    let good = clean_step(7.5, 9e-3, 20e-6, 200);
    let lines: Vec<&str> = good.lines().collect();
    let cases: Vec<(String, &str)> = vec![
        (lines[1..].join("\n"), "has no header row"),
        (
            format!("{}\n{}\n{}", lines[0], lines[1..].join("\n"), lines[5]),
            "time does not increase",
        ),
        (
            good.replacen(&lines[50].to_string(), "5e-4,12,NaN", 1),
            "is not a finite number",
        ),
        (lines[..10].join("\n"), "identification needs at least 20"),
        (good.replace(",12,", ",0,"), "never changes"),
        (
            lines
                .iter()
                .enumerate()
                .map(|(k, l)| {
                    if k == 100 {
                        "1.99e-3,12,0.5".to_string()
                    } else {
                        l.to_string()
                    }
                })
                .collect::<Vec<_>>()
                .join("\n"),
            "the sample period wanders",
        ),
        ("t,i\n0,1\n".to_string(), "has no time_s"),
    ];
    for (text, expected) in cases {
        let e = capture::read(text.as_bytes(), "cap.csv", &Columns::default())
            .unwrap_err()
            .to_string();
        assert!(e.contains(expected), "expected {expected:?}: {e}");
        assert!(!e.contains('\n'), "one sentence: {e}");
    }
    // A current held at a rail while the voltage changes.
    let mut clipped = String::from("time_s,voltage_v,current_a\n");
    for k in 0..100 {
        let v = if k < 10 { 0.0 } else { 5.0 + k as f64 * 0.1 };
        let i = if k < 50 { k as f64 * 0.03 } else { 1.5 };
        clipped.push_str(&format!("{},{v},{i}\n", k as f64 * 1e-4));
    }
    let e = capture::read(clipped.as_bytes(), "clip.csv", &Columns::default())
        .unwrap_err()
        .to_string();
    assert!(e.contains("clipped at the sensor's rail"), "{e}");
}

#[test]
fn the_command_prints_the_table_writes_the_section_and_the_picture() {
    let dir = ampwright_tests::temp_dir("identify-cli");
    let path = std::path::PathBuf::from(env!("CARGO_MANIFEST_DIR"))
        .join("../host-sim/captures/valve_coil_bench.csv");
    let args = [
        "ampwright",
        "identify",
        path.to_str().unwrap(),
        "--out",
        dir.to_str().unwrap(),
    ];
    assert_eq!(host_sim::cli::main(args.map(Into::into)), 0);
    let section = std::fs::read_to_string(dir.join("valve_coil_bench-motor.toml")).unwrap();
    let parsed: toml::Table = toml::from_str(&section).unwrap();
    let r = parsed["motor"]["resistance_ohm"].as_float().unwrap();
    assert!((r - 18.54).abs() < 0.1, "{r}");
    let svg = std::fs::read_to_string(dir.join("valve_coil_bench-fit.svg")).unwrap();
    assert!(svg.contains("fitted model") && svg.contains("measured - model"));
    // A scale that makes no sense is bad input.
    let args = [
        "ampwright",
        "identify",
        path.to_str().unwrap(),
        "--current-scale",
        "0",
    ];
    assert_eq!(host_sim::cli::main(args.map(Into::into)), 2);
}

#[derive(serde::Deserialize)]
struct FitReference {
    cases: Vec<FitCase>,
}

#[derive(serde::Deserialize)]
struct FitCase {
    name: String,
    delay_samples: usize,
    resistance_ohm: f64,
    inductance_h: f64,
}

#[test]
fn the_output_error_fit_agrees_with_scipy_least_squares_lm() {
    // tests/reference/identify_reference.py fits the same captures with
    // scipy.optimize.least_squares (method "lm") from its own start.
    let reference: FitReference =
        serde_json::from_str(include_str!("reference/identify_reference.json")).unwrap();
    let files = [
        ("valve_coil_bench", VALVE_CSV),
        (
            "pump_winding",
            include_str!("reference/captures/pump_winding.csv"),
        ),
        ("relay_coil", include_str!("reference/captures/relay_coil.csv")),
    ];
    assert_eq!(reference.cases.len(), files.len());
    let cols = Columns {
        current: "measured_a".into(),
        ..Columns::default()
    };
    let mut worst = 0.0f64;
    for (case, (name, text)) in reference.cases.iter().zip(files) {
        assert_eq!(case.name, name);
        let fit = identify_rl(&capture_of(text, &cols), name, None).unwrap();
        assert_eq!(fit.stage, "output error", "{name}");
        assert_eq!(fit.delay_samples, case.delay_samples, "{name}");
        for (ours, theirs) in [
            (fit.resistance_ohm.value, case.resistance_ohm),
            (fit.inductance_h.value, case.inductance_h),
        ] {
            let rel = (ours - theirs).abs() / theirs.abs();
            worst = worst.max(rel);
            assert!(
                rel < 1e-6,
                "{name}: {ours} here, {theirs} from scipy ({rel:.1e} apart)"
            );
        }
    }
    println!("largest relative difference from scipy's fit: {worst:.1e}");
}

/// An iron-cored winding whose flux linkage saturates,
/// `psi(i) = L0 i_s tanh(i / i_s)`, so its incremental inductance is
/// `d psi / d i = L0 / cosh^2(i / i_s)`; stepped by the voltage a little
/// below and a little above each of several levels, integrated finely
/// (classical fourth-order Runge-Kutta, 20 steps a sample), with noise.
fn saturating_capture(r: f64, l0: f64, i_s: f64, ts: f64, levels: &[f64], delta_a: f64) -> String {
    let l_inc = |i: f64| l0 / (i / i_s).cosh().powi(2);
    let di = |i: f64, v: f64| (v - r * i) / l_inc(i);
    let hold = 40e-3;
    let per_hold = (hold / ts) as usize;
    let mut volts = Vec::new();
    for &level in levels {
        for target in [level - delta_a, level + delta_a] {
            volts.extend(std::iter::repeat_n(r * target, per_hold));
        }
    }
    let mut g = Gaussian::new(21);
    let mut s = String::from("time_s,voltage_v,current_a\n");
    let mut i = 0.0;
    let h = ts / 20.0;
    for (k, &v) in volts.iter().enumerate() {
        s.push_str(&format!(
            "{:.12e},{v:.9},{:.12e}\n",
            k as f64 * ts,
            i + 1e-3 * g.sample()
        ));
        for _ in 0..20 {
            let k1 = di(i, v);
            let k2 = di(i + 0.5 * h * k1, v);
            let k3 = di(i + 0.5 * h * k2, v);
            let k4 = di(i + h * k3, v);
            i += h / 6.0 * (k1 + 2.0 * k2 + 2.0 * k3 + k4);
        }
    }
    s
}

#[test]
fn the_inductance_at_each_level_follows_a_saturating_core() {
    // Invented: 4 ohm, 20 mH unsaturated, saturating around 1.5 A; small
    // steps (0.1 A) around 0.4, 0.8, 1.2 and 1.6 A. A small step sees the
    // incremental inductance at its mean current.
    let (r, l0, i_s) = (4.0, 20e-3, 1.5);
    let c = capture_of(
        &saturating_capture(r, l0, i_s, 50e-6, &[0.4, 0.8, 1.2, 1.6], 0.05),
        &Columns::default(),
    );
    let fit = identify_rl(&c, "saturating", Some(0)).unwrap();
    let small: Vec<_> = fit
        .inductance_by_level
        .iter()
        .filter(|l| l.step_a.abs() < 0.15)
        .collect();
    assert!(small.len() >= 4, "{:?}", fit.inductance_by_level);
    for l in &small {
        let mid = l.current_a - 0.5 * l.step_a;
        let want = l0 / (mid / i_s).cosh().powi(2);
        println!(
            "at {mid:.3} A: {:.4} mH, d psi / d i there {:.4} mH",
            l.inductance_h.value * 1e3,
            want * 1e3
        );
        assert!(
            (l.inductance_h.value - want).abs() < 0.03 * want,
            "{l:?}: want {want}"
        );
    }
    // And the table says so.
    assert!(fit.table("saturating").contains("inductance by current level"));
    assert!(
        fit.warnings.iter().any(|w| w.contains("saturating core")),
        "{:?}",
        fit.warnings
    );
}

#[test]
fn a_transient_of_about_one_sample_is_refused_and_a_prbs_is_fitted() {
    // 7.5 ohm, 30 uH: L/R = 4 us against 20 us samples.
    let fast = clean_step(7.5, 30e-6, 20e-6, 400);
    let c = capture_of(&fast, &Columns::default());
    let e = identify_rl(&c, "fast.csv", None).unwrap_err().to_string();
    assert!(e.contains("too few samples in it to measure L"), "{e}");
    assert!(!e.contains('\n'));
    // A pseudo-random binary sequence (a 9-bit maximal-length LFSR, taps 9
    // and 5, one bit per 4 samples) between -6 V and +6 V on an invented
    // 3.3 ohm, 5 mH winding, noise 1 % of the top current.
    let (r, l, ts): (f64, f64, f64) = (3.3, 5e-3, 50e-6);
    let (a, b) = ((-r * ts / l).exp(), -(-r * ts / l).exp_m1() / r);
    let mut lfsr: u16 = 0x1ff;
    let mut g = Gaussian::new(5);
    let mut text = String::from("time_s,voltage_v,current_a\n");
    let (mut i, mut v) = (0.0, 6.0);
    for k in 0..4000 {
        if k % 4 == 0 {
            let bit = ((lfsr >> 8) ^ (lfsr >> 4)) & 1;
            lfsr = ((lfsr << 1) | bit) & 0x1ff;
            v = if bit == 1 { 6.0 } else { -6.0 };
        }
        text.push_str(&format!(
            "{:.12e},{v},{:.12e}\n",
            k as f64 * ts,
            i + 0.018 * g.sample()
        ));
        i = a * i + b * v;
    }
    let fit = identify_rl(&capture_of(&text, &Columns::default()), "prbs.csv", None).unwrap();
    assert_eq!(fit.delay_samples, 0);
    assert!(
        (fit.resistance_ohm.value - r).abs() < 0.02 * r,
        "{:?}",
        fit.resistance_ohm
    );
    assert!(
        (fit.inductance_h.value - l).abs() < 0.02 * l,
        "{:?}",
        fit.inductance_h
    );
    assert!(fit.resistance_ohm.low <= r && r <= fit.resistance_ohm.high);
}
