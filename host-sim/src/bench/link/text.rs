//! The link's figures in words and as a capture CSV.

use pi_core::link::{Needs, Refusal};

use super::BoardCapture;

/// A refusal in words: the field, its value, what it needs.
pub fn refusal_text(r: &Refusal) -> String {
    let needs = match r.needs {
        Needs::Finite => "a finite number".to_string(),
        Needs::Positive => "a value above 0".to_string(),
        Needs::NonNegative => "a value of 0 or more".to_string(),
        Needs::Within { min, max } => format!("a value from {min} to {max}"),
        Needs::Above(other) => format!("a value above {}", other.as_str()),
        Needs::Below(other) => format!("a value below {}", other.as_str()),
        Needs::DifferentFrom(other) => format!("a value different from {}", other.as_str()),
        Needs::AtLeastOne => "at least one".to_string(),
        _ => "another value".to_string(),
    };
    format!("{} = {} must be {needs}", r.field.as_str(), r.value)
}

/// Latched fault bits in words.
pub fn fault_names(bits: u16) -> String {
    let names: Vec<String> = pi_core::FaultSet::from_bits(bits)
        .iter()
        .map(|f| f.to_string())
        .collect();
    if names.is_empty() {
        "none".into()
    } else {
        names.join(", ")
    }
}

/// The loop's state code in words.
pub fn state_name(code: u8) -> &'static str {
    match code {
        0 => "disabled",
        1 => "running",
        2 => "faulted",
        3 => "exciting",
        _ => "unknown",
    }
}

/// A capture as the CSV `identify` and `compare` read: `time_s`,
/// `current_a`, `duty` (signed) and `bus_v`, `commanded_v`, `state`, and
/// `request_a` when `request` gives the step the host asked for (`from`
/// until the first sample whose setpoint leaves it, `to` after).
pub fn capture_csv(c: &BoardCapture, request: Option<(f64, f64)>) -> String {
    let mut out = String::from("time_s,current_a,duty,bus_v,commanded_v,setpoint_a,state");
    if request.is_some() {
        out.push_str(",request_a");
    }
    out.push('\n');
    let mut stepped = false;
    for (k, s) in c.samples.iter().enumerate() {
        let duty = s.duty_q15 as f64 / 32767.0;
        out.push_str(&format!(
            "{:.9e},{},{:.6},{},{},{},{}",
            k as f64 * c.period_s,
            s.current_a,
            duty,
            s.bus_v,
            s.commanded_v,
            s.setpoint_a,
            s.state
        ));
        if let Some((from, to)) = request {
            stepped |= (s.setpoint_a as f64 - from).abs() > 1e-6;
            out.push_str(&format!(",{}", if stepped { to } else { from }));
        }
        out.push('\n');
    }
    out
}
