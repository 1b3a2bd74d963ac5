//! A run as a scenario file: the original file's text with the run's board
//! values and the firmware's pinned values written in, and its tolerances
//! taken out, so `ampwright simulate` reproduces the run exactly.

use toml::{Table, Value};

use super::Nominal;
use crate::scenario::Params;
use crate::scenario::tolerances::Field;

fn set(table: &mut Table, path: &str, value: Value) {
    let mut parts = path.split('.').peekable();
    let mut t = table;
    while let Some(part) = parts.next() {
        if parts.peek().is_none() {
            t.insert(part.to_string(), value);
            return;
        }
        let entry = t
            .entry(part.to_string())
            .or_insert_with(|| Value::Table(Table::new()));
        if !entry.is_table() {
            *entry = Value::Table(Table::new());
        }
        let Value::Table(inner) = entry else { return };
        t = inner;
    }
}

/// The scenario text of the run with `values`, named `name`; `original` is
/// the scenario file's text, `note` a comment put at the top.
pub fn scenario_text(
    original: &str,
    n: &Nominal,
    values: &[f64],
    name: &str,
    note: &str,
) -> Result<String, String> {
    let p: Params = super::params_of(n, values)?;
    let mut table: Table = original
        .parse()
        .map_err(|e| format!("cannot read the scenario again: {e}"))?;
    table.remove("tolerances");
    set(&mut table, "name", Value::String(name.to_string()));
    // The firmware as it was written: gains, output limit, calibration.
    let c = &p.controller;
    if let Some(g) = c.gains {
        set(&mut table, "controller.kp_v_per_a", Value::Float(g.kp_v_per_a));
        set(&mut table, "controller.ti_s", Value::Float(g.ti_s));
    }
    if let Some(w) = c.setpoint_weight {
        set(&mut table, "controller.setpoint_weight", Value::Float(w));
    }
    for (path, v) in [
        ("controller.output_limit_v", c.output_limit_v),
        ("controller.calibration_shunt_ohm", c.calibration_shunt_ohm),
        (
            "controller.calibration_amplifier_gain",
            c.calibration_amplifier_gain,
        ),
    ] {
        if let Some(v) = v {
            set(&mut table, path, Value::Float(v));
        }
    }
    // The board.
    for v in &n.tolerances.items {
        match v.field {
            Field::WindingC => match p.motor.thermal {
                Some(t) => set(&mut table, "motor.thermal.initial_c", Value::Float(t.initial_c)),
                None => set(
                    &mut table,
                    "motor.resistance_ohm",
                    Value::Float(p.motor.resistance_ohm),
                ),
            },
            Field::BackEmf => {
                set(
                    &mut table,
                    "motor.back_emf_v_s_per_rad",
                    Value::Float(p.motor.back_emf_v_s_per_rad),
                );
                set(
                    &mut table,
                    "motor.torque_n_m_per_a",
                    Value::Float(p.motor.torque_n_m_per_a),
                );
            }
            Field::RdsOnOhm => {
                if let Some(b) = table.get_mut("bridge").and_then(Value::as_table_mut) {
                    b.remove("switch_drop_v");
                }
                set(&mut table, "bridge.rds_on_ohm", Value::Float(v.field.get(&p)));
            }
            f => set(&mut table, f.path(), Value::Float(f.get(&p))),
        }
    }
    let body = toml::to_string(&table).map_err(|e| format!("cannot write the scenario: {e}"))?;
    let comment: String = note.lines().map(|l| format!("# {l}\n")).collect();
    Ok(format!("{comment}\n{body}"))
}
