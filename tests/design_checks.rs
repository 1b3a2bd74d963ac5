//! pi-core's design math against outside truths: the second-order relations of
//! Ogata, *Modern Control Engineering* (transient-response chapter; cited from
//! memory), and values computed by python-control 0.10.2, numpy and scipy in
//! `tests/reference/design_reference.py` (committed with its output). Also: the
//! analysis agrees with host-sim's simulation of the same loop, a one-sample
//! delay near the stability limit turns a few percent of overshoot into tens,
//! and the f32 device path stays within 0.5 % of f64 on every method.

use ampwright_tests::cases;
use host_sim::plant::bridge::{Bridge, BridgeParams};
use host_sim::plant::faults::Injectors;
use host_sim::plant::motor::{Motor, MotorParams};
use host_sim::plant::sense_chain::{SenseChain, SenseParams};
use host_sim::plant::timing::{Timing, TimingParams};
use host_sim::{DriveChain, Event, LinearPi, Runner};
use pi_core::design::analysis::{self, OpenLoop};
use pi_core::design::poly::Complex;
use pi_core::design::{
    DesignError, Gains, RlPlant, Sampling, Spec, cancellation, discrete, modulus_optimum, root_locus,
};
use pi_core::{Command, DutyMapping, OutputLimits, PiConfig, PiController};
use proptest::prelude::*;

#[test]
fn ogata_second_order_relations() {
    for mp in [0.01, 0.043, 0.1, 0.3, 0.6] {
        let s = Spec::new(1e-3, mp).unwrap();
        let z = s.damping();
        // Mp = exp(-zeta pi / sqrt(1 - zeta^2)) inverts zeta(Mp).
        let back = (-z * std::f64::consts::PI / (1.0 - z * z).sqrt()).exp();
        assert!((back - mp).abs() < 1e-12, "{mp}: {back}");
        // 2 % settling time ts = 4 / (zeta wn).
        assert!((4.0 / (z * s.natural_frequency()) - 1e-3).abs() < 1e-15);
    }
}

#[derive(serde::Deserialize)]
struct Reference {
    cases: Vec<Case>,
}

#[derive(serde::Deserialize)]
struct Case {
    name: String,
    r: f64,
    l: f64,
    ts: f64,
    /// Sample-to-update delay, periods.
    delay: f64,
    tau: f64,
    settling: f64,
    overshoot: f64,
    root_locus_continuous_poles: Option<Vec<[f64; 2]>>,
    designs: std::collections::BTreeMap<String, Design>,
}

#[derive(serde::Deserialize)]
struct Design {
    kp: f64,
    ti: f64,
    discrete_poles: Vec<[f64; 2]>,
    gain_margin: Option<f64>,
    phase_margin_deg: Option<f64>,
    crossover_hz: Option<f64>,
    largest_stable_period_s: f64,
    step_b1: StepRef,
    step_b0: StepRef,
}

#[derive(serde::Deserialize)]
struct StepRef {
    overshoot: f64,
    settling_time_s: f64,
    rise_time_s: f64,
}

fn close(a: f64, b: f64, rel: f64) -> bool {
    (a - b).abs() <= rel * a.abs().max(b.abs())
}

/// Every reference pole is matched by one of ours within `tol` (absolute in z).
fn same_poles(ours: &[Complex<f64>], theirs: &[[f64; 2]], tol: f64) -> bool {
    ours.len() == theirs.len()
        && theirs.iter().all(|[re, im]| {
            ours.iter()
                .any(|z| (z.re - re).abs() <= tol && (z.im - im).abs() <= tol)
        })
}

#[test]
fn designs_and_analysis_match_python_control() {
    let reference: Reference = serde_json::from_str(include_str!("reference/design_reference.json")).unwrap();
    // The worst agreement seen, printed for the record (`--nocapture`).
    let (mut worst_gain, mut worst_pole) = (0.0f64, 0.0f64);
    for c in &reference.cases {
        let plant = RlPlant::new(c.r, c.l).unwrap();
        let sampling = Sampling::new(c.ts, c.delay, c.tau).unwrap();
        let spec = Spec::new(c.settling, c.overshoot).unwrap();
        let mut ours: Vec<(&str, Gains<f64>)> = Vec::new();
        match (root_locus::design(&plant, &spec), &c.root_locus_continuous_poles) {
            (Ok(g), Some(poles)) => {
                // Continuous closed loop L s^2 + (R + Kp) s + Kp / Ti.
                let p =
                    pi_core::design::poly::Poly::new(&[c.l, c.r + g.kp_v_per_a, g.ki_v_per_a_s()]).unwrap();
                let scale = spec.natural_frequency();
                assert!(
                    same_poles(&p.roots()[..2], poles, 1e-7 * scale),
                    "{}: continuous poles",
                    c.name
                );
                ours.push(("root_locus", g));
            }
            (Err(DesignError::SettlingTooSlow { .. }), None) => {}
            (other, reference) => panic!("{}: root locus {other:?} vs reference {reference:?}", c.name),
        }
        ours.push((
            "modulus_optimum",
            modulus_optimum::design(&plant, &sampling).unwrap(),
        ));
        if c.tau == 0.0 {
            ours.push((
                "direct_discrete",
                discrete::design(&plant, &sampling, &spec).unwrap(),
            ));
        } else {
            assert_eq!(
                discrete::design(&plant, &sampling, &spec),
                Err(DesignError::FilterUnsupported)
            );
        }
        assert_eq!(ours.len(), c.designs.len(), "{}: the same methods apply", c.name);
        for (method, g) in ours {
            let r = &c.designs[method];
            let what = format!("{} {method}", c.name);
            worst_gain = worst_gain
                .max((g.kp_v_per_a - r.kp).abs() / r.kp.abs())
                .max((g.ti_s - r.ti).abs() / r.ti.abs());
            assert!(
                close(g.kp_v_per_a, r.kp, 1e-6) && close(g.ti_s, r.ti, 1e-6),
                "{what}: gains {g:?} vs {} {}",
                r.kp,
                r.ti
            );
            let open = OpenLoop::new(&plant, &sampling, &g);
            let (poles, n) = open.poles();
            for [re, im] in &r.discrete_poles {
                let nearest = poles[..n]
                    .iter()
                    .map(|z| (z.re - re).abs().max((z.im - im).abs()))
                    .fold(f64::INFINITY, f64::min);
                worst_pole = worst_pole.max(nearest);
            }
            assert!(
                same_poles(&poles[..n], &r.discrete_poles, 1e-6),
                "{what}: poles {:?} vs {:?}",
                &poles[..n],
                r.discrete_poles
            );
            let m = analysis::margins(&open, c.ts, 8192);
            let pm = m.phase_margin_deg.unwrap();
            assert!(
                (pm - r.phase_margin_deg.unwrap()).abs() < 0.05,
                "{what}: phase margin {pm} vs {:?}",
                r.phase_margin_deg
            );
            assert!(
                close(m.crossover_hz.unwrap(), r.crossover_hz.unwrap(), 1e-3),
                "{what}: crossover"
            );
            match (m.gain_margin, r.gain_margin) {
                // Without the delay the phase reaches -180 degrees exactly at the
                // Nyquist frequency, where python-control 0.10.2 reports a gain
                // margin of about 3e-15 (or none); the true one is 1 / |L(-1)|.
                (Some(gm), reference) if c.delay == 0.0 => {
                    let exact = 1.0 / open.eval(Complex::real(-1.0)).abs();
                    assert!(
                        close(gm, exact, 1e-6),
                        "{what}: gain margin {gm} vs exact {exact} (library said {reference:?})"
                    );
                }
                (Some(gm), Some(reference)) => assert!(
                    close(gm, reference, 5e-3),
                    "{what}: gain margin {gm} vs {reference}"
                ),
                (ours, theirs) => panic!("{what}: gain margin {ours:?} vs {theirs:?}"),
            }
            // The predicted step against forced_response / step_info, for both
            // setpoint weights: overshoot closely, settling and rise to a sample
            // (step_info reports sample times, we interpolate the rise).
            let steps = (6.0 * c.settling / c.ts) as usize;
            for (b, r) in [(1.0, &r.step_b1), (0.0, &r.step_b0)] {
                let p = analysis::predict_step(&open, c.ts, steps, b);
                assert!(
                    (p.overshoot - r.overshoot).abs() < 1e-6,
                    "{what} b {b}: overshoot {} vs {}",
                    p.overshoot,
                    r.overshoot
                );
                let ts = p.settling_time_s.unwrap();
                assert!(
                    (ts - r.settling_time_s).abs() <= c.ts * 1.0001,
                    "{what} b {b}: settling {ts} vs {}",
                    r.settling_time_s
                );
                if let Some(rise) = p.rise_time_s {
                    assert!(
                        (rise - r.rise_time_s).abs() <= c.ts * 1.0001,
                        "{what} b {b}: rise {rise} vs {}",
                        r.rise_time_s
                    );
                }
            }
            let ts_max = analysis::largest_stable_period(&plant, &sampling, &g).unwrap();
            assert!(
                close(ts_max, r.largest_stable_period_s, 2e-4),
                "{what}: largest period {ts_max} vs {}",
                r.largest_stable_period_s
            );
        }
    }
    println!(
        "worst agreement with python-control: gains {worst_gain:.1e} relative, poles {worst_pole:.1e} in z"
    );
    assert!(worst_gain < 1e-6 && worst_pole < 1e-6);
}

#[test]
fn direct_discrete_design_places_the_poles_exactly() {
    let plant = RlPlant::new(1.9, 2.4e-3).unwrap();
    let spec = Spec::new(1.5e-3, 0.08).unwrap();
    for delay in [0.0, 0.25, 0.5, 0.75, 1.0] {
        let sampling = Sampling::new(50e-6, delay, 0.0).unwrap();
        let g = discrete::design(&plant, &sampling, &spec).unwrap();
        let (re, im) = discrete::target_pole(&spec, 50e-6);
        let p = OpenLoop::new(&plant, &sampling, &g).characteristic().unwrap();
        let v = p.eval(Complex::new(re, im));
        assert!(v.abs() < 1e-12, "delay {delay}: char(p) = {v:?}");
    }
}

/// host-sim's closed loop (the real PiController, averaged ideal bridge, RL
/// winding, one-sample delay) for a unit step.
fn simulate(plant: (f64, f64), ts: f64, g: &Gains<f64>, ticks: u64) -> Vec<f64> {
    let chain = DriveChain {
        load: Box::new(Motor::new(MotorParams::rl(plant.0, plant.1)).unwrap()),
        bridge: Bridge::new(BridgeParams::ideal(48.0, 1.0 / ts)).unwrap(),
        sense: SenseChain::new(SenseParams::ideal(0.01, 20.0, 12, 3.3)).unwrap(),
        injectors: Injectors::default(),
        load_profile: Vec::new(),
        speed_feedback: false,
    };
    let timing = Timing::new(TimingParams::one_sample_delay(ts), ts).unwrap();
    let events = vec![Event {
        at_s: 0.0,
        command: Command::SetCurrent(1.0),
    }];
    let mut run = Runner::new(chain, timing, events);
    let cfg = PiConfig::new(
        g.to_pi_gains().unwrap(),
        ts as f32,
        OutputLimits::symmetric(1000.0).unwrap(),
    )
    .unwrap();
    let mut pi = LinearPi::new(PiController::new(cfg), DutyMapping::new(1.0, 1.0).unwrap());
    run.run_ticks(&mut pi, ticks);
    run.trace().points.iter().map(|p| p.current_a).collect()
}

#[test]
fn predicted_step_agrees_with_the_simulator() {
    let plant = RlPlant::new(1.9, 2.4e-3).unwrap();
    let sampling = Sampling::new(50e-6, 1.0, 0.0).unwrap();
    let spec = Spec::new(1.5e-3, 0.08).unwrap();
    let g = discrete::design(&plant, &sampling, &spec).unwrap();
    let open = OpenLoop::new(&plant, &sampling, &g);
    let pred = analysis::predict_step(&open, 50e-6, 400, 1.0);
    let sim = simulate((1.9, 2.4e-3), 50e-6, &g, 400);
    let peak = sim.iter().cloned().fold(0.0, f64::max);
    assert!(
        (pred.overshoot - (peak - 1.0).max(0.0)).abs() < 1e-5,
        "{} vs {}",
        pred.overshoot,
        peak - 1.0
    );
    let last_out = sim.iter().rposition(|i| (i - 1.0).abs() > 0.02).unwrap();
    // The prediction interpolates the entry into the band between the last
    // sample outside and the next one.
    let t = pred.settling_time_s.unwrap();
    assert!(
        t > last_out as f64 * 50e-6 && t <= (last_out + 1) as f64 * 50e-6,
        "{t}"
    );
    // The placed poles give the asked response once the PI zero is taken out of
    // the setpoint path (b = 0); with b = 1 the zero adds overshoot.
    let zero_free = analysis::predict_step(&open, 50e-6, 400, 0.0);
    println!(
        "direct design for 8 %, 1.5 ms: b = 1 {:.1} % {:?} s, b = 0 {:.1} % {:?} s",
        pred.overshoot * 100.0,
        pred.settling_time_s,
        zero_free.overshoot * 100.0,
        zero_free.settling_time_s
    );
    assert!(pred.overshoot > zero_free.overshoot);
    assert!(
        (zero_free.overshoot - 0.08).abs() < 0.02,
        "{}",
        zero_free.overshoot
    );
    assert!((zero_free.settling_time_s.unwrap() - 1.5e-3).abs() < 0.3e-3);
}

#[test]
fn a_one_sample_delay_near_the_limit_turns_a_few_percent_into_tens() {
    // A continuous root-locus design for 3 % overshoot, the PI zero taken out of
    // the setpoint path (b = 0). Without the delay and with a short period the
    // sampled loop overshoots a few percent, as designed; with the delay at a
    // period near its stability limit, tens.
    let plant = RlPlant::new(1.9, 2.4e-3).unwrap();
    let spec = Spec::new(2e-3, 0.03).unwrap();
    let g = root_locus::design(&plant, &spec).unwrap();
    let fast = Sampling::new(5e-6, 0.0, 0.0).unwrap();
    let few = analysis::predict_step(&OpenLoop::new(&plant, &fast, &g), 5e-6, 4000, 0.0).overshoot;
    let delayed = Sampling::new(50e-6, 1.0, 0.0).unwrap();
    let limit = analysis::largest_stable_period(&plant, &delayed, &g).unwrap();
    let near = Sampling::new(0.85 * limit, 1.0, 0.0).unwrap();
    let open = OpenLoop::new(&plant, &near, &g);
    let tens = analysis::predict_step(&open, 0.85 * limit, 4000, 0.0).overshoot;
    println!(
        "overshoot {:.1} % fast, {:.1} % with the delay at 0.85 x the {:.0} us limit",
        few * 100.0,
        tens * 100.0,
        limit * 1e6
    );
    assert!(few > 0.02 && few < 0.04, "{few}");
    assert!(tens > 0.20, "{tens}");
    let m = analysis::margins(&open, 0.85 * limit, 4096);
    assert!(
        m.phase_margin_deg.unwrap() < 30.0,
        "the margins show it too: {m:?}"
    );
}

fn relative(a: f32, b: f64) -> f64 {
    ((a as f64) - b).abs() / b.abs()
}

proptest! {
    #![proptest_config(ProptestConfig { cases: cases(256), ..ProptestConfig::default() })]

    /// The device path (f32, libm) against the host path (f64) on every method.
    #[test]
    fn f32_gains_are_within_half_a_percent_of_f64(
        r in 0.1f64..100.0,
        l_exp in -5.0f64..-1.0,
        ts in prop::sample::select(vec![10e-6, 25e-6, 50e-6, 100e-6, 200e-6]),
        delay in 0.0f64..=1.0,
        settling_periods in 15.0f64..400.0,
        overshoot in 0.005f64..0.4,
        bw_div in 10.0f64..50.0,
    ) {
        let l = 10f64.powf(l_exp);
        let settling = settling_periods * ts;
        let p64 = RlPlant::new(r, l).unwrap();
        let p32 = RlPlant::new(r as f32, l as f32).unwrap();
        let s64 = Sampling::new(ts, delay, 0.0).unwrap();
        let s32 = Sampling::new(ts as f32, delay as f32, 0.0).unwrap();
        let sp64 = Spec::new(settling, overshoot).unwrap();
        let sp32 = Spec::new(settling as f32, overshoot as f32).unwrap();
        let check = |a: Result<Gains<f32>, DesignError<f32>>, b: Result<Gains<f64>, DesignError<f64>>, what: &str| -> Result<(), TestCaseError> {
            if let (Ok(a), Ok(b)) = (a, b) {
                prop_assert!(relative(a.kp_v_per_a, b.kp_v_per_a) < 0.005, "{what} Kp {a:?} vs {b:?}");
                prop_assert!(relative(a.ti_s, b.ti_s) < 0.005, "{what} Ti {a:?} vs {b:?}");
            }
            Ok(())
        };
        check(root_locus::design(&p32, &sp32), root_locus::design(&p64, &sp64), "root locus")?;
        let f = 1.0 / (ts * bw_div);
        check(cancellation::design(&p32, f as f32), cancellation::design(&p64, f), "cancellation")?;
        check(modulus_optimum::design(&p32, &s32), modulus_optimum::design(&p64, &s64), "modulus optimum")?;
        // Direct design: only where f64 finds it comfortably feasible (gains
        // clear of zero, where a relative bound means little).
        if let Ok(b) = discrete::design(&p64, &s64, &sp64) {
            let kp_floor = 0.02 * (2.0 * sp64.sigma() * l);
            if b.kp_v_per_a > kp_floor && b.ti_s.is_finite() {
                check(discrete::design(&p32, &s32, &sp32), Ok(b), "direct discrete")?;
                prop_assert!(discrete::design(&p32, &s32, &sp32).is_ok(), "f32 fails where f64 succeeds");
            }
        }
    }
}

#[test]
fn design_command_on_the_demo_writes_gains_json_and_both_pictures() {
    let dir = ampwright_tests::temp_dir("design-ok");
    let scenario =
        std::path::PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("../host-sim/scenarios/carousel_step.toml");
    let args = [
        "ampwright",
        "design",
        scenario.to_str().unwrap(),
        "--out",
        dir.to_str().unwrap(),
    ];
    assert_eq!(host_sim::cli::main(args.map(Into::into)), 0);
    let snippet = std::fs::read_to_string(dir.join("carousel-step-gains.rs")).unwrap();
    let value = |name: &str| -> f32 {
        let line = snippet
            .lines()
            .find(|l| l.contains(&format!("const {name}")))
            .unwrap();
        line.split('=')
            .nth(1)
            .unwrap()
            .trim()
            .trim_end_matches(';')
            .parse()
            .unwrap()
    };
    // The constants are what pi-core accepts.
    pi_core::PiGains::from_kp_ti(value("KP_V_PER_A"), value("TI_S"))
        .unwrap()
        .with_setpoint_weight(value("SETPOINT_WEIGHT"))
        .unwrap();
    let json: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.join("carousel-step-design.json")).unwrap())
            .unwrap();
    assert!(json["chosen"].is_u64());
    for svg in [
        "carousel-step-root-locus.svg",
        "carousel-step-frequency-response.svg",
    ] {
        let text = std::fs::read_to_string(dir.join(svg)).unwrap();
        assert!(text.starts_with("<svg") && text.contains("polyline"), "{svg}");
    }
}

#[test]
fn a_spec_no_method_meets_strictly_exits_1_and_names_the_nearest_feasible_one() {
    let dir = ampwright_tests::temp_dir("design-bad");
    let scenario =
        std::path::PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("../host-sim/scenarios/carousel_step.toml");
    let s = scenario.to_str().unwrap();
    let out = dir.to_str().unwrap();
    let args = [
        "ampwright",
        "design",
        s,
        "--out",
        out,
        "--settling-time-s",
        "0.2e-3",
    ];
    assert_eq!(host_sim::cli::main(args.map(Into::into)), 1);
    // The reason names the nearest feasible spec.
    let params = host_sim::scenario::Params::load(&scenario).unwrap();
    let overrides = host_sim::prepare::Overrides {
        settling_time_s: Some(0.2e-3),
        ..Default::default()
    };
    let report = host_sim::prepare::design(&params, &overrides).unwrap();
    assert!(report.chosen().is_none());
    let why = report.infeasible();
    assert!(why.contains("nearest feasible settling time"), "{why}");
    // An overshoot outside [0, 100) is bad input, named by its option.
    let args = ["ampwright", "design", s, "--out", out, "--overshoot-pct", "150"];
    assert_eq!(host_sim::cli::main(args.map(Into::into)), 2);
    let e = host_sim::prepare::design(
        &params,
        &host_sim::prepare::Overrides {
            overshoot_pct: Some(150.0),
            ..Default::default()
        },
    )
    .unwrap_err()
    .to_string();
    assert!(e.starts_with("--overshoot-pct = 150 must be from 0 up to"), "{e}");
}

#[test]
fn designed_gains_meet_the_demo_spec_in_the_full_nonlinear_simulation() {
    // The demo scenario without its gains: simulate designs them from [spec]
    // and runs the real loop on the switching bridge, the moving rotor, the
    // noisy sensor, with the design's own setpoint weight. Every measured step
    // meets the spec. The demo's 4 A steps need more than the bus gives (the
    // design warns), so a measured step is slower than the linear prediction,
    // never faster.
    let text: String = host_sim::demo::SCENARIO_TOML
        .lines()
        .filter(|l| !(l.starts_with("kp_v_per_a") || l.starts_with("ti_s")))
        .collect::<Vec<_>>()
        .join("\n");
    let params = host_sim::scenario::Params::from_toml(&text, "designed").unwrap();
    let prepared = host_sim::prepare::prepare(params).unwrap();
    let designed = prepared.designed.clone().unwrap();
    assert!(!designed.weight_from_scenario);
    let (_, report) =
        host_sim::results::report::run(&prepared.scenario, Some(&designed), &mut |_| {}).unwrap();
    assert!(report.table().contains("the design's prediction"));
    let p = designed.predicted;
    for step in &report.steps {
        println!(
            "{}: measured {:.2} % {:?} s, predicted {:.2} % {:?} s",
            designed.method, step.overshoot_pct, step.settling_time_s, p.overshoot_pct, p.settling_time_s
        );
        let ts = step.settling_time_s.unwrap();
        let predicted = p.settling_time_s.unwrap();
        assert!(ts >= 0.9 * predicted, "{ts} vs {predicted}");
    }
    assert_eq!(report.pass, Some(true), "{}", report.table());
}
