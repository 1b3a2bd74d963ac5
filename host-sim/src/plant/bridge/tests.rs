//! The bridge's patterns, mixes and outputs against hand-worked cases.

use super::*;

fn cmd(duty: f32, direction: Direction) -> DriveCommand {
    DriveCommand {
        duty,
        direction,
        enabled: true,
    }
}

#[test]
fn slow_decay_pattern_is_centred_with_dead_time_after_each_edge() {
    let mut p = BridgeParams::ideal(24.0, 20e3);
    p.dead_time_s = 1e-6;
    let b = Bridge::new(p).unwrap();
    let pat = b.pattern(&cmd(0.5, Direction::Forward));
    let states: Vec<_> = pat.intervals().iter().map(|iv| iv.state).collect();
    use BridgeState::*;
    assert_eq!(states, [Recirculate, Dead, Drive, Dead, Recirculate]);
    let iv = pat.intervals();
    assert!((iv[0].end_s - 12.5e-6).abs() < 1e-15);
    assert!((iv[2].start_s - 13.5e-6).abs() < 1e-15 && (iv[2].end_s - 37.5e-6).abs() < 1e-15);
    assert!((iv[4].end_s - 50e-6).abs() < 1e-15);
}

#[test]
fn drops_and_diodes_act_against_the_current() {
    let mut p = BridgeParams::ideal(24.0, 20e3);
    p.switch = SwitchDrop::OnResistance(0.1);
    p.diode_drop_v = 0.7;
    p.source_resistance_ohm = 0.5;
    let b = Bridge::new(p).unwrap();
    let on = b.output(BridgeState::Drive, 1.0, 2.0);
    assert!((on.bus_v - 23.0).abs() < 1e-12 && (on.terminal_v - (23.0 - 0.4)).abs() < 1e-12);
    let rev = b.output(BridgeState::Drive, -1.0, -2.0);
    assert!((rev.terminal_v + 22.6).abs() < 1e-12 && rev.supply_a == 2.0);
    let dead = b.output(BridgeState::Dead, 1.0, 2.0);
    assert!((dead.terminal_v - (-0.7 - 0.2)).abs() < 1e-12);
    let off = b.output(BridgeState::AllOff, 1.0, 2.0);
    assert_eq!(off.supply_a, -2.0);
    assert!((off.terminal_v + (25.0 + 1.4)).abs() < 1e-12);
}

#[test]
fn refuses_dead_time_of_half_a_period() {
    let mut p = BridgeParams::ideal(24.0, 20e3);
    p.dead_time_s = 25e-6;
    assert_eq!(Bridge::new(p).unwrap_err().field, "bridge.dead_time_s");
}

#[test]
fn the_mix_holds_each_state_for_its_time_in_the_pattern() {
    // 20 kHz (50 us), 1 us dead time, duty 0.5 in slow decay: 24 us driven,
    // two dead times, 24 us recirculating (worked by hand from the pattern).
    let mut p = BridgeParams::ideal(24.0, 20e3);
    p.dead_time_s = 1e-6;
    p.diode_drop_v = 0.7;
    let b = Bridge::new(p).unwrap();
    let mix = b.mix(&cmd(0.5, Direction::Reverse));
    let share = |s| mix.shares().find(|(st, _)| *st == s).map_or(0.0, |(_, w)| w);
    assert!((share(BridgeState::Drive) - 0.48).abs() < 1e-12);
    assert!((share(BridgeState::Dead) - 0.04).abs() < 1e-12);
    assert!((share(BridgeState::Recirculate) - 0.48).abs() < 1e-12);
    assert_eq!(share(BridgeState::AllOff), 0.0);
    assert_eq!(mix.sign, -1.0);
    assert!(!mix.diode_clamped());
    // The mean output is the pattern's outputs weighted by their durations.
    for decay in [Decay::Slow, Decay::Fast] {
        for duty in [0.0, 0.3, 1.0] {
            for enabled in [true, false] {
                let mut p = p;
                p.decay = decay;
                p.source_resistance_ohm = 0.05;
                let b = Bridge::new(p).unwrap();
                let c = DriveCommand {
                    enabled,
                    ..cmd(duty, Direction::Forward)
                };
                let (pattern, mix) = (b.pattern(&c), b.mix(&c));
                for i in [-2.0, 0.0, 1.5] {
                    let mean = b.mean_output(&mix, i);
                    let (mut v, mut supply, mut bus) = (0.0, 0.0, 0.0);
                    for iv in pattern.intervals() {
                        let w = (iv.end_s - iv.start_s) / b.pwm_period_s();
                        let out = b.output(iv.state, pattern.sign, i);
                        (v, supply, bus) = (
                            v + out.terminal_v * w,
                            supply + out.supply_a * w,
                            bus + out.bus_v * w,
                        );
                    }
                    assert!(
                        (mean.terminal_v - v).abs() < 1e-12,
                        "{decay:?} {duty} {enabled} {i}"
                    );
                    assert!((mean.supply_a - supply).abs() < 1e-12 && (mean.bus_v - bus).abs() < 1e-12);
                }
                let clamped = pattern.intervals().iter().all(|iv| iv.state.diode_clamped());
                assert_eq!(mix.diode_clamped(), clamped);
            }
        }
    }
}

#[test]
fn a_low_side_switch_drives_one_way_and_freewheels_through_its_diode() {
    let mut p = BridgeParams::ideal(24.0, 20e3);
    p.topology = Topology::LowSide;
    p.switch = SwitchDrop::OnResistance(0.1);
    p.diode_drop_v = 0.7;
    p.source_resistance_ohm = 0.5;
    let b = Bridge::new(p).unwrap();
    assert!(b.one_way());
    // Centred pulse, the freewheel diode either side, no dead time.
    let pat = b.pattern(&cmd(0.5, Direction::Forward));
    let states: Vec<_> = pat.intervals().iter().map(|iv| iv.state).collect();
    use BridgeState::*;
    assert_eq!(states, [AllOff, Drive, AllOff]);
    // A reverse command leaves the switch off all period.
    let states: Vec<_> = b
        .pattern(&cmd(0.5, Direction::Reverse))
        .intervals()
        .iter()
        .map(|iv| iv.state)
        .collect();
    assert_eq!(states, [AllOff]);
    // On: the bus (23 V at 2 A through 0.5 ohm) less one switch's drop.
    let on = b.output(Drive, 1.0, 2.0);
    assert!((on.bus_v - 23.0).abs() < 1e-12 && (on.terminal_v - 22.8).abs() < 1e-12 && on.supply_a == 2.0);
    // Off: the diode's drop against a forward current, no supply current.
    let off = b.output(AllOff, 1.0, 2.0);
    assert!((off.terminal_v + 0.7).abs() < 1e-12 && off.supply_a == 0.0 && off.bus_v == 24.0);
    // Off with no current: nothing; a current driven backward returns to
    // the supply through the switch's body diode.
    assert_eq!(b.output(AllOff, 1.0, 0.0).terminal_v, 0.0);
    let back = b.output(AllOff, 1.0, -1.0);
    assert!((back.terminal_v - (24.5 + 0.7)).abs() < 1e-12 && back.supply_a == -1.0);
    // One switch in series, not two.
    assert_eq!(p.series_resistance_ohm(), 0.1);
    // Dead time has no meaning for one switch.
    p.dead_time_s = 1e-6;
    assert_eq!(Bridge::new(p).unwrap_err().field, "bridge.dead_time_s");
}
