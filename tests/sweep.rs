//! `ampwright sweep`: the tolerances drawn as their distributions say, a
//! yield that matches the normal distribution's probability, corners at
//! the analytic extremes, the copper coefficient and a perturbed
//! inductance showing as the textbook says, the same result on one thread
//! or two, and each worst case written as a scenario that reproduces it.
//!
//! `AMPWRIGHT_SWEEP_RUNS` raises the number of runs of the statistical
//! checks (default 400).

use host_sim::scenario::Params;
use host_sim::scenario::tolerances::{Field, Spread, Tolerances, Varied};
use host_sim::sweep::reduce::{Metric, reduce, wilson};
use host_sim::sweep::{self, Nominal, Origin};

fn runs() -> u64 {
    std::env::var("AMPWRIGHT_SWEEP_RUNS")
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(400)
}

fn template() -> String {
    std::fs::read_to_string(
        std::path::PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("../host-sim/scenarios/carousel_step.toml"),
    )
    .unwrap()
}

/// An invented 2 ohm, 2 mH held winding on an averaged bridge, sensed
/// without noise or offset by a 16-bit ADC, stepped to 1 A and held; the
/// firmware's gains fixed. `tolerances` is the section's text.
fn winding(spec: &str, tolerances: &str) -> String {
    format!(
        r#"name = "held-winding"
duration_s = 0.03

[motor]
resistance_ohm = 2.0
inductance_h = 2.0e-3
locked_rotor = true

[bridge]
supply_v = 24.0
pwm_frequency_hz = 20000.0
mode = "averaged"

[sense]
shunt_ohm = 0.01
amplifier_gain = 20.0
adc_bits = 16
adc_reference_v = 3.3

[timing]
control_period_s = 50e-6

[controller]
kp_v_per_a = 6.0
ti_s = 1.0e-3
max_duty = 0.95
min_bus_v = 12.0

[controller.setpoint]
min_a = -4.0
max_a = 4.0
slew_a_per_s = 1.0e6

[controller.protection]
overcurrent_a = 6.0
overcurrent_samples = 3
bus_min_v = 10.0
bus_max_v = 40.0

[spec]
{spec}

[[events]]
at_s = 0.0
action = "enable"

[[events]]
at_s = 1.0e-3
action = "set_current"
current_a = 1.0

{tolerances}
"#
    )
}

#[test]
fn the_drawn_spreads_have_their_published_mean_and_deviation() {
    // Standard deviations (Evans, Hastings and Peacock, "Statistical
    // Distributions"; cited from memory): uniform on +/-a: a / sqrt(3);
    // symmetric triangular on +/-a: a / sqrt(6); normal: sigma. The sample
    // mean is within 4 standard errors; the sample variance within 4 of its
    // own standard errors, sqrt((mu4 - sigma^4 (n - 3) / (n - 1)) / n), with
    // the fourth central moment mu4 = 9 a^4 / 5 (uniform, that is 1.8
    // sigma^4), 2.4 sigma^4 (triangular), 3 sigma^4 (normal).
    let params = Params::from_toml(&winding("", ""), "t").unwrap();
    let n = 20_000u64;
    for (spread, sigma_rel, kurtosis) in [
        (Spread::UniformPct(10.0), 0.10 / 3f64.sqrt(), 1.8),
        (Spread::TriangularPct(10.0), 0.10 / 6f64.sqrt(), 2.4),
        (Spread::NormalSigmaPct(5.0), 0.05, 3.0),
    ] {
        let t = Tolerances {
            runs: n as u32,
            seed: 7,
            items: vec![Varied {
                field: Field::InductanceH,
                spread,
            }],
        };
        let x: Vec<f64> = (0..n).map(|k| t.draw(&params, k)[0] / 2.0e-3 - 1.0).collect();
        let nf = n as f64;
        let mean = x.iter().sum::<f64>() / nf;
        let var = x.iter().map(|v| (v - mean).powi(2)).sum::<f64>() / (nf - 1.0);
        let s2 = sigma_rel * sigma_rel;
        assert!(
            mean.abs() < 4.0 * sigma_rel / nf.sqrt(),
            "{spread:?}: mean {mean}"
        );
        let mu4 = kurtosis * s2 * s2;
        let se_var = ((mu4 - s2 * s2 * (nf - 3.0) / (nf - 1.0)) / nf).sqrt();
        assert!(
            (var - s2).abs() < 4.0 * se_var,
            "{spread:?}: variance {var} against {s2}"
        );
    }
}

/// The shunt's tolerance as a gain error the loop cannot see: it holds the
/// measured current at the setpoint, so the true current is the setpoint
/// times `k0 / k`, `k` the board's shunt over the one the firmware assumes.
fn shunt_case(spread: &str) -> Nominal {
    let text = winding(
        "steady_state_error_a = 0.02",
        &format!("[tolerances]\nseed = 3\n\n[[tolerances.vary]]\nfield = \"sense.shunt_ohm\"\n{spread}\n"),
    );
    Nominal::new(Params::from_toml(&text, "t").unwrap()).unwrap()
}

#[test]
fn the_yield_of_a_normal_shunt_is_the_normal_probability() {
    // Pass when |1 - 1 / k| <= 0.02, i.e. 1 / 1.02 <= k <= 1 / 0.98, with
    // k = 1 + 0.01 z, z standard normal: the probability
    // Phi((1/0.98 - 1) / 0.01) - Phi((1/1.02 - 1) / 0.01).
    let n = shunt_case("normal_sigma_pct = 1.0");
    let plan = sweep::plan(&n, runs(), None);
    let r = reduce(&sweep::sweep(&n, &plan, &|| {}));
    let phi = |z: f64| 0.5 * erfc(-z / 2f64.sqrt());
    let expected = phi((1.0 / 0.98 - 1.0) / 0.01) - phi((1.0 / 1.02 - 1.0) / 0.01);
    let (lo, hi) = wilson(r.passed, r.runs, 2.575_829_303_548_901);
    eprintln!("yield {} of {} against {expected:.4}", r.passed, r.runs);
    assert!(
        lo <= expected && expected <= hi,
        "{expected} outside [{lo}, {hi}]"
    );
}

/// The complementary error function (Numerical Recipes' `erfcc`, a
/// Chebyshev fit good to 1.2e-7; cited from memory).
fn erfc(x: f64) -> f64 {
    let z = x.abs();
    let t = 1.0 / (1.0 + 0.5 * z);
    let r = t
        * (-z * z - 1.265_512_23
            + t * (1.000_023_68
                + t * (0.374_091_96
                    + t * (0.096_784_18
                        + t * (-0.186_288_06
                            + t * (0.278_868_07
                                + t * (-1.135_203_98
                                    + t * (1.488_515_87 + t * (-0.822_152_23 + t * 0.170_872_77)))))))))
            .exp();
    if x >= 0.0 { r } else { 2.0 - r }
}

#[test]
fn the_corners_of_a_monotonic_case_are_its_analytic_extremes() {
    // A shunt 3 % high or low: the true current settles at 1 / 1.03 or
    // 1 / 0.97 A, so the steady-state errors are 1 - 1/1.03 = 0.0291 A and
    // 1/0.97 - 1 = 0.0309 A; the worst is the low shunt's.
    let n = shunt_case("uniform_pct = 3.0");
    let plan = sweep::plan(&n, 0, Some(false));
    assert_eq!(plan.len(), 2);
    let runs = sweep::sweep(&n, &plan, &|| {});
    let sse: Vec<f64> = runs
        .iter()
        .map(|r| Metric::SteadyStateError.of(r.outcome.as_ref().unwrap()).unwrap())
        .collect();
    assert!((sse[0] - (1.0 / 0.97 - 1.0)).abs() < 2e-4, "{sse:?}");
    assert!((sse[1] - (1.0 - 1.0 / 1.03)).abs() < 2e-4, "{sse:?}");
    let w = reduce(&runs);
    let worst = w
        .worst
        .iter()
        .find(|w| w.metric == Metric::SteadyStateError)
        .unwrap();
    assert_eq!(worst.origin, Origin::Corner(0));
    assert_eq!(runs[0].values, vec![0.0097]);
}

#[test]
fn a_hot_winding_has_copper_s_resistance_and_settles_slower() {
    // Copper's coefficient, 0.393 %/K at 20 C (IEC 60028, the International
    // Annealed Copper Standard; cited from memory): at 120 C the winding has
    // 1.393 times its resistance at 20 C. With the gains fixed for the cold
    // winding (Ti = L / R at 20 C), the PI zero no longer cancels the hot
    // winding's pole, and the step's tail settles later.
    let text = winding(
        "settling_time_s = 5e-3",
        "[tolerances]\nwinding_c = [20.0, 120.0]\n",
    );
    let n = Nominal::new(Params::from_toml(&text, "t").unwrap()).unwrap();
    let plan = sweep::plan(&n, 0, Some(false));
    let hot = sweep::params_of(&n, &plan[1].1).unwrap();
    assert!((hot.motor.resistance_ohm / 2.0 - 1.393).abs() < 1e-12);
    let runs = sweep::sweep(&n, &plan, &|| {});
    let settle: Vec<f64> = runs
        .iter()
        .map(|r| Metric::SettlingTime.of(r.outcome.as_ref().unwrap()).unwrap())
        .collect();
    eprintln!(
        "settling at 20 C {:.3} ms, at 120 C {:.3} ms",
        settle[0] * 1e3,
        settle[1] * 1e3
    );
    assert!(settle[1] > 1.2 * settle[0], "{settle:?}");
}

#[test]
fn pole_zero_cancellation_gains_on_another_inductance_follow_the_perturbed_loop() {
    // Gains from a cancellation on the nominal winding (R = 2 ohm, L0 = 2 mH):
    // Ti = L0 / R puts the PI zero on the winding's pole, Kp = wc L0 with
    // wc = 12500 rad/s. On a winding of inductance L the loop is no longer
    // first order; by block-diagram algebra (Ogata, "Modern Control
    // Engineering", closed-loop transfer function of a unity-feedback loop)
    //   T(s) = Kp (R + s L0) / (L0 L s^2 + L0 (R + Kp) s + Kp R),
    // whose step response is 1 + sum over the poles p of
    // N(p) exp(p t) / (p D'(p)). Its 10-90 % rise time, found on that
    // formula, is what the sweep's runs must show, up to the sampled loop's
    // small delay (a 2 us period against an 80 us time constant).
    let n = Nominal::new(Params::from_toml(
        &cancellation(
            "",
            "[tolerances]\nruns = 6\n\n[[tolerances.vary]]\nfield = \"motor.inductance_h\"\nwithin = [1.6e-3, 2.4e-3]\n",
        ),
        "t",
    )
    .unwrap())
    .unwrap();
    let plan = sweep::plan(&n, 6, Some(false));
    let runs = sweep::sweep(&n, &plan, &|| {});
    let ratios: Vec<f64> = runs
        .iter()
        .map(|run| {
            let l = run.values[0];
            let measured = Metric::RiseTime.of(run.outcome.as_ref().unwrap()).unwrap();
            let ratio = measured / analytic_rise(l);
            eprintln!(
                "L {:.3} mH: rise {:.2} us, analytic {:.2} us",
                l * 1e3,
                measured * 1e6,
                analytic_rise(l) * 1e6
            );
            ratio
        })
        .collect();
    let (lo, hi) = ratios
        .iter()
        .fold((f64::INFINITY, 0.0f64), |(a, b), &x| (a.min(x), b.max(x)));
    // Seen: 0.998 to 1.015.
    assert!(lo > 0.98 && hi < 1.02, "{ratios:?}");
    // The inductance moves the rise time by the perturbed loop's amount.
    assert!(analytic_rise(2.4e-3) / analytic_rise(1.6e-3) > 1.3);
}

#[test]
fn one_thread_or_two_give_the_same_sweep() {
    let text = template();
    let n = Nominal::new(Params::from_toml(&text, "t").unwrap()).unwrap();
    let plan = sweep::plan(&n, 24, Some(true));
    let on = |threads: usize| {
        rayon::ThreadPoolBuilder::new()
            .num_threads(threads)
            .build()
            .unwrap()
            .install(|| sweep::sweep(&n, &plan, &|| {}))
    };
    let (one, two) = (on(1), on(2));
    assert_eq!(one, two);
    assert_eq!(sweep::report::csv(&n, &one), sweep::report::csv(&n, &two));
}

#[test]
fn each_worst_case_is_a_scenario_that_reproduces_its_run() {
    let text = template();
    let n = Nominal::new(Params::from_toml(&text, "t").unwrap()).unwrap();
    let plan = sweep::plan(&n, 16, Some(true));
    let runs = sweep::sweep(&n, &plan, &|| {});
    let r = reduce(&runs);
    for w in r
        .worst
        .iter()
        .filter(|w| matches!(w.metric, Metric::Overshoot | Metric::SettlingTime))
    {
        let run = &runs[w.run];
        let body = sweep::worst::scenario_text(&text, &n, &run.values, "worst", "a test").unwrap();
        let again = Params::from_toml(&body, "worst").unwrap();
        assert!(again.tolerances.is_none());
        let scenario = again.build().unwrap();
        let (_, report) = host_sim::results::report::run(&scenario, None, &mut |_| {}).unwrap();
        let want = &run.outcome.as_ref().unwrap().steps;
        assert_eq!(report.steps.len(), want.len());
        for (a, b) in report.steps.iter().zip(want) {
            assert_eq!(
                (a.overshoot_pct, a.rise_time_s, a.steady_state_error_a),
                (b.overshoot_pct, b.rise_time_s, b.steady_state_error_a),
                "{:?}",
                w.metric
            );
        }
    }
}

#[test]
fn bad_tolerances_are_refused_naming_the_entry() {
    let base = template();
    let cut = &base[..base.find("[tolerances]").unwrap()];
    for (section, expected) in [
        (
            "[tolerances]\n[[tolerances.vary]]\nfield = \"motor.colour\"\nuniform_pct = 5.0\n",
            "tolerances.vary[1].field = \"motor.colour\" must be one of motor.resistance_ohm",
        ),
        (
            "[tolerances]\n[[tolerances.vary]]\nfield = \"motor.inductance_h\"\nuniform_pct = 5.0\nwithin = [1e-3, 2e-3]\n",
            "tolerances.vary[1] =  must be exactly one of",
        ),
        (
            "[tolerances]\n[[tolerances.vary]]\nfield = \"motor.inductance_h\"\nnormal_sigma_pct = 40.0\n",
            "tolerances.vary[1].normal_sigma_pct = 40 must be between",
        ),
        (
            "[tolerances]\nwinding_c = [120.0, 20.0]\n",
            "tolerances.winding_c = [120, 20] must be two finite values, the lower first",
        ),
        (
            "[tolerances]\nruns = 5\n",
            "tolerances = (nothing varied) must be at least one",
        ),
        (
            "[tolerances]\n[[tolerances.vary]]\nfield = \"motor.resistance_ohm\"\nwithin = [-1.0, 2.0]\n",
            "tolerances = motor.resistance_ohm = -1 must be extremes the model accepts",
        ),
    ] {
        let e = Params::from_toml(&format!("{cut}{section}"), "t")
            .unwrap_err()
            .to_string();
        assert!(e.contains(expected), "expected {expected:?} in {e:?}");
    }
}

/// The cancellation case of the test above: R = 2 ohm, L0 = 2 mH, Kp = 25
/// V/A, Ti = L0 / R, sampled every 2 us; `motor` is added to `[motor]`.
fn cancellation(motor: &str, tolerances: &str) -> String {
    winding("", tolerances)
        .replace("locked_rotor = true", &format!("locked_rotor = true\n{motor}"))
        .replace("kp_v_per_a = 6.0", "kp_v_per_a = 25.0")
        .replace("control_period_s = 50e-6", "control_period_s = 2e-6")
        .replace("pwm_frequency_hz = 20000.0", "pwm_frequency_hz = 500000.0")
        .replace("duration_s = 0.03", "duration_s = 0.006")
}

/// The 10-90 % rise time of that loop on a winding of inductance `l`, from
/// its transfer function (see the test above).
fn analytic_rise(l: f64) -> f64 {
    let (r, l0, kp) = (2.0f64, 2.0e-3f64, 25.0f64);
    let (a, b, c) = (l0 * l, l0 * (r + kp), kp * r);
    let disc = (b * b - 4.0 * a * c).sqrt();
    let poles = [(-b + disc) / (2.0 * a), (-b - disc) / (2.0 * a)];
    let y = |t: f64| {
        1.0 + poles
            .iter()
            .map(|&p| kp * (r + p * l0) * (p * t).exp() / (p * (2.0 * a * p + b)))
            .sum::<f64>()
    };
    let cross = |level: f64| {
        let (mut lo, mut hi) = (0.0, 5e-3);
        for _ in 0..100 {
            let mid = 0.5 * (lo + hi);
            if y(mid) < level { lo = mid } else { hi = mid }
        }
        lo
    };
    cross(0.9) - cross(0.1)
}

#[test]
fn a_saturating_winding_rises_as_its_lower_inductance_says() {
    // A curve at half the inductance everywhere is a winding of L0 / 2: the
    // same run as the winding given as 1 mH, and the rise the perturbed
    // loop's at L0 / 2 (this faster loop sampled every 1 us, so that the
    // sampling's share stays under 2 %).
    let rise = |motor: &str, period: &str| {
        let text = cancellation(motor, "")
            .replace("control_period_s = 2e-6", period)
            .replace(
                "pwm_frequency_hz = 500000.0",
                if period.contains("1e-6") {
                    "pwm_frequency_hz = 1000000.0"
                } else {
                    "pwm_frequency_hz = 500000.0"
                },
            );
        let p = Params::from_toml(&text, "t").unwrap();
        let (_, report) = host_sim::results::report::run(&p.build().unwrap(), None, &mut |_| {}).unwrap();
        report.steps[0]
    };
    let half = "[motor.saturation]\ncurrent_a = [0.0, 10.0]\ninductance_share = [0.5, 0.5]\n";
    let flat = rise(half, "control_period_s = 1e-6");
    let given = {
        let text = cancellation("", "").replace("inductance_h = 2.0e-3", "inductance_h = 1.0e-3");
        let p = Params::from_toml(
            &text
                .replace("control_period_s = 2e-6", "control_period_s = 1e-6")
                .replace("pwm_frequency_hz = 500000.0", "pwm_frequency_hz = 1000000.0"),
            "t",
        )
        .unwrap();
        host_sim::results::report::run(&p.build().unwrap(), None, &mut |_| {})
            .unwrap()
            .1
            .steps[0]
    };
    assert_eq!(flat, given);
    let flat = flat.rise_time_s.unwrap();
    assert!(
        (flat / analytic_rise(1.0e-3) - 1.0).abs() < 0.02,
        "{flat} against {}",
        analytic_rise(1.0e-3)
    );
    let rise = |motor: &str| rise(motor, "control_period_s = 2e-6").rise_time_s.unwrap();
    let none = rise("");
    let knee = rise("[motor.saturation]\ncurrent_a = [0.0, 0.5, 1.0]\ninductance_share = [1.0, 1.0, 0.6]\n");
    eprintln!(
        "rise: {:.1} us unsaturated, {:.1} us with the knee, {:.1} us at half",
        none * 1e6,
        knee * 1e6,
        flat * 1e6
    );
    assert!(knee < 0.97 * none && knee > analytic_rise(1.2e-3), "{knee}");
    // A bad curve is refused by name.
    let e = Params::from_toml(
        &cancellation(
            "[motor.saturation]\ncurrent_a = [0.0, 2.0, 1.0]\ninductance_share = [1.0, 0.8, 0.6]\n",
            "",
        ),
        "t",
    )
    .unwrap_err()
    .to_string();
    assert!(
        e.starts_with("motor.saturation.current_a = 1 must be rising currents"),
        "{e}"
    );
}

#[test]
fn the_command_exits_1_under_the_minimum_yield_and_writes_its_files() {
    let dir = ampwright_tests::temp_dir("sweep-command");
    let scenario =
        std::path::PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("../host-sim/scenarios/carousel_step.toml");
    let run = |extra: &[&str]| {
        let mut args = vec![
            "ampwright",
            "sweep",
            scenario.to_str().unwrap(),
            "--runs",
            "40",
            "--quiet",
        ];
        args.extend_from_slice(extra);
        args.extend(["--out", dir.to_str().unwrap()]);
        host_sim::cli::main(args.iter().map(Into::into))
    };
    // The demo's yield is about a third.
    assert_eq!(run(&["--min-yield-pct", "90"]), 1);
    assert_eq!(run(&["--min-yield-pct", "5"]), 0);
    assert_eq!(run(&["--min-yield-pct", "150"]), 2);
    let csv = std::fs::read_to_string(dir.join("carousel-step-sweep.csv")).unwrap();
    assert_eq!(csv.lines().count(), 41, "a header and one line a run");
    for m in Metric::ALL {
        assert!(
            dir.join(format!("carousel-step-worst-{}.toml", m.name()))
                .exists(),
            "{}",
            m.name()
        );
    }
}
