//! I^2t overload against the IEC 60947-4-1 trip-class bands.
//!
//! IEC 60947-4-1 (low-voltage contactors and motor-starters), overload relay
//! trip classes: from cold at 7.2 x the current setting, class 10A trips in more
//! than 2 s and at most 10 s, class 10 in 4-10 s, class 20 in 6-20 s, class 30 in
//! 9-30 s; at 1.05 x it must not trip within 2 h, and at 1.2 x it must trip within
//! 2 h. The model runs here at a 1 ms control period through the real supervisor
//! code (`ThermalModel::tick`, the same call the supervisor makes every tick).

use pi_core::{ThermalConfig, ThermalModel, TripClass};

const PERIOD_S: f32 = 1e-3;
const RATED_A: f32 = 2.0;
const TWO_HOURS_TICKS: u64 = 2 * 3600 * 1000;

/// Ticks until the model trips at a constant current, or None within `max_ticks`.
fn ticks_to_trip(model: &mut ThermalModel, current_a: f32, max_ticks: u64) -> Option<u64> {
    (1..=max_ticks).find(|_| model.tick(current_a))
}

#[test]
fn each_class_trips_inside_its_band_at_7_2_times_rated_from_cold() {
    for class in [
        TripClass::Class10A,
        TripClass::Class10,
        TripClass::Class20,
        TripClass::Class30,
    ] {
        let cfg = ThermalConfig::from_trip_class(RATED_A, class).unwrap();
        let mut model = ThermalModel::new(cfg, PERIOD_S).unwrap();
        let ticks = ticks_to_trip(&mut model, 7.2 * RATED_A, 60_000).expect("no trip within 60 s");
        let t = ticks as f32 * PERIOD_S;
        let (lo, hi) = class.band_s();
        println!("{class:?}: tripped after {t:.3} s (band {lo}-{hi} s)");
        assert!(t > lo && t <= hi, "{class:?}: {t} s outside {lo}-{hi} s");
        // The middle of the band is the design target; the thermal step (10 ms)
        // bounds how far the discrete model may land from it.
        assert!(
            (t - class.target_s()).abs() <= 0.02,
            "{class:?}: {t} s, target {}",
            class.target_s()
        );
    }
}

#[test]
fn never_trips_at_1_05_times_rated_for_two_hours_from_cold_or_hot() {
    for class in [TripClass::Class10A, TripClass::Class30] {
        let cfg = ThermalConfig::from_trip_class(RATED_A, class).unwrap();
        for start_heat in [0.0, 1.0] {
            let mut model = ThermalModel::new(cfg, PERIOD_S).unwrap();
            model.set_heat(start_heat).unwrap();
            assert_eq!(
                ticks_to_trip(&mut model, 1.05 * RATED_A, TWO_HOURS_TICKS),
                None,
                "{class:?} from heat {start_heat}"
            );
            // Approaches 1.05^2 = 1.1025 but stays below the 1.15^2 trip level.
            assert!((model.heat() - 1.1025).abs() < 0.01, "{}", model.heat());
        }
    }
}

#[test]
fn trips_at_1_2_times_rated_within_two_hours() {
    let cfg = ThermalConfig::from_trip_class(RATED_A, TripClass::Class30).unwrap();
    let mut model = ThermalModel::new(cfg, PERIOD_S).unwrap();
    let ticks = ticks_to_trip(&mut model, 1.2 * RATED_A, TWO_HOURS_TICKS).expect("no trip at 1.2 x");
    // Closed form from cold: t = -tau ln(1 - 1.15^2 / 1.2^2).
    let expected = -cfg.tau_s() as f64 * (1.0 - 1.3225 / 1.44f64).ln();
    let t = ticks as f64 * PERIOD_S as f64;
    assert!((t - expected).abs() / expected < 0.01, "{t} vs {expected}");
}

#[test]
fn state_cools_when_current_drops_and_a_hot_start_trips_sooner() {
    let cfg = ThermalConfig::from_trip_class(RATED_A, TripClass::Class10).unwrap();
    let mut model = ThermalModel::new(cfg, PERIOD_S).unwrap();
    ticks_to_trip(&mut model, 7.2 * RATED_A, 60_000).unwrap();
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

    let mut cold = ThermalModel::new(cfg, PERIOD_S).unwrap();
    let mut hot = ThermalModel::new(cfg, PERIOD_S).unwrap();
    hot.set_heat(1.0).unwrap();
    let t_cold = ticks_to_trip(&mut cold, 7.2 * RATED_A, 60_000).unwrap();
    let t_hot = ticks_to_trip(&mut hot, 7.2 * RATED_A, 60_000).unwrap();
    assert!(t_hot < t_cold / 2, "hot {t_hot} cold {t_cold}");
}
