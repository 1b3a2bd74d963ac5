use super::*;

/// An invented cell: open-circuit voltage rising linearly from 3.6 V by
/// 0.6 V over its 36 C (10 mAh), 0.1 ohm in series; the current loop taken
/// as ideal (the setpoint flows).
struct Cell {
    charge_c: f32,
}

impl Cell {
    fn terminal_v(&self, i: f32) -> f32 {
        3.6 + 0.6 * self.charge_c / 36.0 + 0.1 * i
    }
}

fn config(time_limit_s: f32) -> ChargeConfig {
    // 1 A constant current to 4.2 V, taper at 50 mA; the outer PI at 1 kHz
    // with 2 A/V and a 5 ms integral.
    ChargeConfig::new(
        1.0,
        4.2,
        0.05,
        time_limit_s,
        PiGains::from_kp_ti(2.0, 5e-3).unwrap(),
        1e-3,
    )
    .unwrap()
}

#[test]
fn constant_current_then_constant_voltage_then_the_taper_ends_it() {
    let mut c = ChargeLimit::new(config(1000.0));
    let mut cell = Cell { charge_c: 0.0 };
    let mut i = 0.0;
    let mut cv_at = None;
    for k in 0..200_000 {
        let v = cell.terminal_v(i);
        i = c.update(v);
        match c.phase() {
            ChargePhase::ConstantCurrent => assert_eq!(i, 1.0, "tick {k}"),
            ChargePhase::ConstantVoltage => {
                cv_at.get_or_insert(k);
                // Held at the set voltage (the PI's integral carries the
                // cell's rising open-circuit voltage): within 5 mV once the
                // handover has settled.
                if k > cv_at.unwrap() + 200 {
                    assert!(
                        (cell.terminal_v(i) - 4.2).abs() < 5e-3,
                        "tick {k}: {} V",
                        cell.terminal_v(i)
                    );
                }
            }
            ChargePhase::Ended(why) => {
                assert_eq!(why, ChargeEnd::Taper);
                break;
            }
        }
        cell.charge_c += i * 1e-3;
    }
    assert_eq!(c.phase(), ChargePhase::Ended(ChargeEnd::Taper));
    // Constant current until the terminal voltage reaches 4.2 V: at 1 A the
    // open-circuit voltage is 4.1 V, at 30 C.
    let cv_at = cv_at.expect("a constant-voltage phase") as f32 * 1e-3;
    assert!((cv_at - 30.0).abs() < 0.01, "constant voltage from {cv_at} s");
    // Ended on the taper: the current 50 mA at 4.2 V means the open-circuit
    // voltage is 4.195 V, a charge of 0.595 / 0.6 x 36 = 35.70 C.
    assert!((cell.charge_c - 35.70).abs() < 0.02, "{} C", cell.charge_c);
    assert_eq!(c.update(4.0), 0.0, "no current after the end");
}

#[test]
fn the_time_limit_ends_a_charge_that_has_not_tapered() {
    let mut c = ChargeLimit::new(config(10.0));
    let mut last = 1.0;
    for _ in 0..20_000 {
        last = c.update(3.9);
        if let ChargePhase::Ended(_) = c.phase() {
            break;
        }
    }
    assert_eq!(c.phase(), ChargePhase::Ended(ChargeEnd::TimeLimit));
    assert_eq!(last, 0.0);
    assert!((c.elapsed_s() - 10.0).abs() < 2e-3, "{}", c.elapsed_s());
}

#[test]
fn a_voltage_reading_that_is_no_number_ends_it_with_no_current() {
    let mut c = ChargeLimit::new(config(100.0));
    assert_eq!(c.update(3.0), 1.0);
    assert_eq!(c.update(f32::NAN), 0.0);
    assert_eq!(c.phase(), ChargePhase::Ended(ChargeEnd::BadReading));
    assert_eq!(c.update(3.9), 0.0);
}

#[test]
fn settings_that_cannot_charge_are_refused_by_name() {
    let g = PiGains::from_kp_ti(2.0, 5e-3).unwrap();
    let field = |r: Result<ChargeConfig, ConfigError>| r.unwrap_err().field;
    assert_eq!(
        field(ChargeConfig::new(0.0, 4.2, 0.05, 10.0, g, 1e-3)),
        "charge_current_a"
    );
    assert_eq!(
        field(ChargeConfig::new(1.0, -1.0, 0.05, 10.0, g, 1e-3)),
        "charge_voltage_v"
    );
    assert_eq!(
        field(ChargeConfig::new(1.0, 4.2, 1.5, 10.0, g, 1e-3)),
        "taper_current_a"
    );
    assert_eq!(
        field(ChargeConfig::new(1.0, 4.2, 0.05, 0.0, g, 1e-3)),
        "time_limit_s"
    );
}

#[test]
fn a_charge_below_the_voltage_starts_at_the_full_current_and_one_above_it_from_nothing() {
    let mut low = ChargeLimit::new(config(1000.0));
    assert_eq!(low.update(3.7), 1.0);
    assert_eq!(low.phase(), ChargePhase::ConstantCurrent);
    // At the set voltage already: the error is zero, the integral starts
    // empty, nothing flows and the phase is constant voltage (it then ends
    // on the taper at once: the cell is full).
    let mut full = ChargeLimit::new(config(1000.0));
    assert_eq!(full.update(4.2), 0.0);
    assert_eq!(full.phase(), ChargePhase::Ended(ChargeEnd::Taper));
    // Just below it: the full current on the first update, and the
    // proportional part takes it down as soon as the voltage arrives.
    let mut near = ChargeLimit::new(config(1000.0));
    assert_eq!(near.update(4.19), 1.0);
    let next = near.update(4.21);
    assert!(next < 1.0 && next > 0.9, "{next}");
}
