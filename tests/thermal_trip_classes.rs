//! I^2t overload against the IEC 60947-4-1 operating limits, for every trip class.
//!
//! IEC 60947-4-1 (low-voltage contactors and motor-starters), limits of operation
//! of time-delay overload relays with all poles energised, as multiples of the
//! current setting (recalled from memory; check the edition you design to):
//!
//! | test | multiple | start | requirement |
//! |---|---|---|---|
//! | A | 1.05 x | cold | no trip within 2 h |
//! | B | 1.2 x | hot (right after A) | trip within 2 h |
//! | C | 1.5 x | hot (settled at 1.0 x) | trip within 2 min (class 10A), 4 min (10), 8 min (20), 12 min (30) |
//! | D | 7.2 x | cold | trip in 2-10 s (10A), 4-10 s (10), 6-20 s (20), 9-30 s (30) |
//!
//! The model runs through the real code (`ThermalModel::tick`, the call the
//! supervisor makes every tick). Each trip time is also held to the model's
//! closed form `t = tau ln((m^2 - h0) / (m^2 - L))` within 1 %, so a model that
//! passes the limits only by luck fails here.

use pi_core::{ThermalConfig, ThermalModel, TripClass};

const RATED_A: f32 = 2.0;
const TWO_HOURS_S: f64 = 2.0 * 3600.0;

const CLASSES: [TripClass; 4] = [
    TripClass::Class10A,
    TripClass::Class10,
    TripClass::Class20,
    TripClass::Class30,
];

/// IEC 60947-4-1 test C limit at 1.5 x from hot, seconds (from memory).
fn limit_at_1_5_s(class: TripClass) -> f64 {
    match class {
        TripClass::Class10A => 120.0,
        TripClass::Class10 => 240.0,
        TripClass::Class20 => 480.0,
        TripClass::Class30 => 720.0,
    }
}

/// Seconds until the model trips at a constant multiple of rated current, or None
/// within `limit_s`.
fn trip_time_s(model: &mut ThermalModel, multiple: f32, period_s: f32, limit_s: f64) -> Option<f64> {
    let ticks = (limit_s / period_s as f64).round() as u64;
    (1..=ticks)
        .find(|_| model.tick(multiple * RATED_A))
        .map(|k| k as f64 * period_s as f64)
}

/// The first-order model's time from heat `h0` to the level `L` at a steady
/// multiple `m`: `tau ln((m^2 - h0) / (m^2 - L))`.
fn closed_form_s(tau_s: f32, h0: f64, level: f64, m: f64) -> f64 {
    tau_s as f64 * ((m * m - h0) / (m * m - level)).ln()
}

fn model(class: TripClass, period_s: f32) -> (ThermalConfig, ThermalModel) {
    let cfg = ThermalConfig::from_trip_class(RATED_A, class).unwrap();
    (cfg, ThermalModel::new(cfg, period_s).unwrap())
}

#[test]
fn test_d_each_class_trips_inside_its_band_at_7_2_times_from_cold() {
    for class in CLASSES {
        let (cfg, mut m) = model(class, 1e-3);
        let t = trip_time_s(&mut m, 7.2, 1e-3, 60.0).expect("no trip within 60 s");
        let (lo, hi) = class.band_s();
        println!("{class:?}: tripped after {t:.3} s (band {lo}-{hi} s)");
        assert!(
            t > lo as f64 && t <= hi as f64,
            "{class:?}: {t} s outside {lo}-{hi} s"
        );
        // The middle of the band is the design target; the thermal step (10 ms)
        // bounds how far the discrete model may land from it.
        assert!((t - class.target_s() as f64).abs() <= 0.02, "{class:?}: {t} s");
        let expected = closed_form_s(cfg.tau_s(), 0.0, 1.3225, 7.2);
        assert!(
            (t - expected).abs() / expected < 0.01,
            "{class:?}: {t} vs {expected}"
        );
    }
}

#[test]
fn tests_a_and_b_no_trip_at_1_05_times_for_two_hours_then_a_trip_at_1_2_times_within_two_hours() {
    for class in CLASSES {
        let (cfg, mut m) = model(class, 0.01);
        assert_eq!(trip_time_s(&mut m, 1.05, 0.01, TWO_HOURS_S), None, "{class:?}: A");
        // After 2 h (at least 9 tau) the heat is at 1.05^2 = 1.1025.
        let hot = m.heat() as f64;
        assert!((hot - 1.1025).abs() < 1e-3, "{class:?}: {hot}");
        let t = trip_time_s(&mut m, 1.2, 0.01, TWO_HOURS_S).expect("B: no trip within 2 h");
        let expected = closed_form_s(cfg.tau_s(), hot, 1.3225, 1.2);
        println!("{class:?}: B tripped after {t:.1} s");
        assert!(
            (t - expected).abs() / expected < 0.01,
            "{class:?}: {t} vs {expected}"
        );
    }
}

#[test]
fn test_a_holds_from_a_hot_start_too() {
    for class in CLASSES {
        let (_, mut m) = model(class, 0.01);
        m.set_heat(1.0).unwrap();
        assert_eq!(trip_time_s(&mut m, 1.05, 0.01, TWO_HOURS_S), None, "{class:?}");
    }
}

#[test]
fn test_c_trips_at_1_5_times_from_hot_within_the_class_limit() {
    for class in CLASSES {
        let (cfg, mut m) = model(class, 1e-3);
        m.set_heat(1.0).unwrap();
        let limit = limit_at_1_5_s(class);
        let t = trip_time_s(&mut m, 1.5, 1e-3, limit).expect("C: no trip within the class limit");
        let expected = closed_form_s(cfg.tau_s(), 1.0, 1.3225, 1.5);
        println!("{class:?}: C tripped after {t:.1} s (limit {limit} s)");
        assert!(
            (t - expected).abs() / expected < 0.01,
            "{class:?}: {t} vs {expected}"
        );
    }
}

#[test]
fn state_cools_when_current_drops_and_a_hot_start_trips_sooner() {
    let (cfg, mut model) = model(TripClass::Class10, 1e-3);
    trip_time_s(&mut model, 7.2, 1e-3, 60.0).unwrap();
    let tripped_heat = model.heat();
    for _ in 0..60_000 {
        model.tick(0.0);
    }
    // One minute of cooling: h falls by exp(-60 / tau).
    let expected = tripped_heat as f64 * (-60.0 / cfg.tau_s() as f64).exp();
    assert!(
        (model.heat() as f64 - expected).abs() < 1e-3,
        "{} vs {expected}",
        model.heat()
    );

    let mut cold = ThermalModel::new(cfg, 1e-3).unwrap();
    let mut hot = ThermalModel::new(cfg, 1e-3).unwrap();
    hot.set_heat(1.0).unwrap();
    let t_cold = trip_time_s(&mut cold, 7.2, 1e-3, 60.0).unwrap();
    let t_hot = trip_time_s(&mut hot, 7.2, 1e-3, 60.0).unwrap();
    assert!(t_hot < t_cold / 2.0, "hot {t_hot} cold {t_cold}");
}
