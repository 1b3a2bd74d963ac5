use super::*;
use crate::pi::{OutputLimits, PiController, PiGains};

/// A small deterministic generator (SplitMix64).
struct Rng(u64);

impl Rng {
    fn next(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }
    fn i16(&mut self) -> i16 {
        self.next() as i16
    }
    fn unit(&mut self) -> f32 {
        (self.next() >> 40) as f32 / (1u64 << 24) as f32
    }
}

#[test]
fn a_coefficient_is_within_two_to_the_minus_15_of_its_value() {
    let mut rng = Rng(3);
    for _ in 0..10_000 {
        // Up to 8 (excluded), down to 2^-21.
        let k = (rng.unit() - 0.5) * libm::exp2f(rng.unit() * 24.0 - 20.0);
        let g = FixedGain::new(k).unwrap();
        // Relative 2^-15, or below 2^-28 rounded to 0.
        let allowed = (k.abs() * libm::exp2f(-15.0) * 1.0001).max(libm::exp2f(-28.0));
        assert!((g.value() - k).abs() <= allowed, "{k} -> {g:?}");
    }
    assert_eq!(FixedGain::new(0.0).unwrap().value(), 0.0);
    assert!(FixedGain::new(8.0).is_none() && FixedGain::new(f32::NAN).is_none());
}

/// The invented demo board's loop: 2.4 mH cancellation gains, 50 us, +/-24 V;
/// full scales 8 A and 32 V.
fn pair(anti_windup: AntiWindup, weight: f32) -> (PiController, FixedPi, FixedScale) {
    let gains = PiGains::from_kp_ti(12.06, 1.263e-3)
        .unwrap()
        .with_setpoint_weight(weight)
        .unwrap();
    let config = PiConfig::new(gains, 50e-6, OutputLimits::symmetric(24.0).unwrap())
        .unwrap()
        .with_anti_windup(anti_windup)
        .unwrap();
    let scale = FixedScale::new(8.0, 32.0).unwrap();
    (
        PiController::new(config),
        FixedPi::new(config, scale).unwrap(),
        scale,
    )
}

#[test]
fn the_fixed_law_follows_the_float_law_within_its_quantisation() {
    // The fixed output differs from the float one on the same Q15 inputs by
    // the coefficients' relative error (at most 2^-15 each, on P and on
    // every integral step, so on |P| + |I| twice over), the integrator's
    // truncation (one Q27 unit a step), and the output's rounding down to
    // Q15 (one count): in volts,
    //   |du| <= 2^-15 (2 (|P| + |I|)) + k 2^-27 V_fs + V_fs / 2^15,
    // with one more count for the float's own rounding.
    for (aw, b) in [
        (
            AntiWindup::BackCalculation {
                tracking_time_s: None,
            },
            1.0,
        ),
        (AntiWindup::Clamping, 1.0),
        (
            AntiWindup::BackCalculation {
                tracking_time_s: None,
            },
            0.5,
        ),
    ] {
        let (mut float, mut fixed, scale) = pair(aw, b);
        let mut rng = Rng(11);
        let (amp, volt) = (scale.amperes_per_count(), scale.volts_per_count());
        let mut r = 0i16;
        let mut worst = 0.0f32;
        for k in 1..=4000u32 {
            if k % 400 == 1 {
                r = rng.i16() / 8; // up to 1 A
            }
            let y = (rng.i16() / 8).saturating_add(r / 2);
            let u_float = float.update(r as f32 * amp, y as f32 * amp);
            let u_fixed = fixed.update(r, y) as f32 * volt;
            let p = (float.last_demand_v() - float.integrator_v()).abs();
            let bound = libm::exp2f(-15.0) * 2.0 * (p + float.integrator_v().abs())
                + k as f32 * libm::exp2f(-27.0) * 32.0
                + 2.0 * volt;
            worst = worst.max((u_fixed - u_float).abs() / bound);
            assert!(
                (u_fixed - u_float).abs() <= bound,
                "{aw:?} b = {b}, step {k}: fixed {u_fixed} against float {u_float} (bound {bound})"
            );
        }
        std::eprintln!("{aw:?} b = {b}: largest difference {worst:.3} of the bound");
    }
}

#[test]
fn every_input_of_the_full_range_gives_a_defined_output() {
    // Readings from the rails and anywhere between, gains far beyond any
    // loop's, tiny full scales: the law saturates, never overflows (this
    // runs with overflow checks on). The one-product proportional part of
    // a weight of 1 multiplies a 17-bit difference by a mantissa of at most
    // 32767: at most 65535 x 32767 < 2^31.
    let mut rng = Rng(5);
    let mut refused = 0;
    for case in 0..200 {
        let kp = libm::exp2f(rng.unit() * 30.0 - 10.0);
        let ti = libm::exp2f(rng.unit() * 30.0 - 25.0);
        // A weight of exactly 1 in a quarter of the cases: the common path's
        // one product `Kp (r - y)` over rail-to-rail differences.
        let weight = if case % 4 == 1 { 1.0 } else { rng.unit() };
        let gains = PiGains::from_kp_ti(kp, ti)
            .unwrap()
            .with_setpoint_weight(weight)
            .unwrap();
        let aw = if case % 2 == 0 {
            AntiWindup::Clamping
        } else {
            AntiWindup::BackCalculation {
                tracking_time_s: None,
            }
        };
        let rule = if case % 3 == 0 {
            IntegratorRule::Tustin
        } else {
            IntegratorRule::BackwardEuler
        };
        let config = PiConfig::new(gains, 50e-6, OutputLimits::symmetric(24.0).unwrap())
            .unwrap()
            .with_rule(rule)
            .with_anti_windup(aw)
            .unwrap();
        let scale = FixedScale::new(libm::exp2f(rng.unit() * 10.0 - 5.0), 24.0).unwrap();
        let Ok(mut pi) = FixedPi::new(config, scale) else {
            refused += 1;
            continue;
        };
        let (lo, hi) = (pi.min.to_q15(), pi.max.to_q15());
        for _ in 0..500 {
            let pick = |rng: &mut Rng| match rng.next() % 4 {
                0 => i16::MIN,
                1 => i16::MAX,
                _ => rng.i16(),
            };
            let (r, y) = (pick(&mut rng), pick(&mut rng));
            let u = pi.update(r, y);
            assert!(u >= lo && u <= hi, "case {case}: {u} outside [{lo}, {hi}]");
        }
    }
    // Gains past 8 full scales are refused at construction; most run.
    assert!(refused < 150, "{refused} of 200 refused");
}

#[test]
fn output_limits_beyond_sixteen_full_scales_are_refused_by_name() {
    let config = PiConfig::new(
        PiGains::from_kp_ti(1.0, 1e-3).unwrap(),
        50e-6,
        OutputLimits::symmetric(24.0).unwrap(),
    )
    .unwrap();
    let e = FixedPi::new(config, FixedScale::new(8.0, 1.0).unwrap()).unwrap_err();
    assert_eq!(e.field, "voltage_full_scale_v");
    assert!(FixedScale::new(0.0, 1.0).is_err());
    // Kp = 1 V/A with 240 A of current full scale over 24 V: 10 full scales.
    let e = FixedPi::new(config, FixedScale::new(240.0, 24.0).unwrap()).unwrap_err();
    assert_eq!(e.field, "voltage_full_scale_v");
}

#[test]
fn a_retune_and_a_track_follow_the_float_controller_within_the_same_bound() {
    // The float controller's retune is bumpless (its own tests); the fixed one
    // hands over at the same update with the same rule, so it stays within the
    // quantisation bound of the test above through the retune, and a track
    // lands on the float's integrator within it too.
    let (mut float, mut fixed, scale) = pair(
        AntiWindup::BackCalculation {
            tracking_time_s: None,
        },
        0.6,
    );
    let base = *float.config();
    let new = PiGains::from_kp_ti(5.0, 2.0e-3)
        .unwrap()
        .with_setpoint_weight(0.8)
        .unwrap();
    let retune = FixedRetune::new(&base, new, &scale).unwrap();
    let mut rng = Rng(5);
    let (amp, volt) = (scale.amperes_per_count(), scale.volts_per_count());
    let r = 4000i16; // 0.98 A
    let mut before_handover = 0.0;
    for k in 1..=3000u32 {
        if k == 1000 {
            float.retune(new);
            fixed.retune(&retune);
            assert_eq!(fixed.config().gains(), new);
        }
        if k == 2000 {
            float.track(3.0, r as f32 * amp, 3900.0 * amp).unwrap();
            fixed.track((3.0 / volt) as i16, r, 3900);
            assert!((fixed.integrator().0 as f32 / 4096.0 * volt - float.integrator_v()).abs() < 2.0 * volt);
        }
        let y = 3900 + rng.i16() / 256;
        let u_float = float.update(r as f32 * amp, y as f32 * amp);
        let u_fixed = fixed.update(r, y) as f32 * volt;
        let p = (float.last_demand_v() - float.integrator_v()).abs();
        let bound = libm::exp2f(-15.0) * 2.0 * (p + float.integrator_v().abs())
            + k as f32 * libm::exp2f(-27.0) * 32.0
            + 2.0 * volt;
        assert!(
            (u_fixed - u_float).abs() <= bound,
            "step {k}: fixed {u_fixed} against float {u_float} (bound {bound})"
        );
        if k == 999 {
            before_handover = u_fixed;
        }
        if k == 1000 {
            // Bumpless: the output moved by about one integral step, not by
            // the change of Kp (from 12.06 to 5 V/A on a 0.4 A error).
            assert!(
                (u_fixed - before_handover).abs() < 0.3,
                "{before_handover} -> {u_fixed}"
            );
        }
    }
}

#[test]
fn update_within_intersects_with_the_configured_limits_as_the_float_one_does() {
    let (mut float, mut fixed, scale) = pair(AntiWindup::Clamping, 1.0);
    let (amp, volt) = (scale.amperes_per_count(), scale.volts_per_count());
    for (lo, hi) in [
        (-5.0, 5.0),
        (-40.0, 40.0),
        (10.0, -10.0),
        (30.0, 31.0),
        (-31.0, -30.0),
    ] {
        let u_float = float.update_within(3000.0 * amp, 0.0, lo, hi);
        let q = |v: f32| (v / volt).clamp(-32768.0, 32767.0) as i16;
        let u_fixed = fixed.update_within(3000, 0, q(lo), q(hi)) as f32 * volt;
        assert!(
            (u_fixed - u_float).abs() <= 2.0 * volt,
            "[{lo}, {hi}]: {u_fixed} against {u_float}"
        );
    }
}
