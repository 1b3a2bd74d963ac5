//! What a run leaves behind: one point per control tick, optionally the current at
//! every PWM edge, and a log of commands the controller refused.

use std::io::{self, Write};

/// One control tick.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct TracePoint {
    /// Sampling instant, seconds.
    pub t_s: f64,
    /// The latest current requested by the scenario's events, amperes.
    pub request_a: f64,
    /// The setpoint the controller used this tick (limited and slewed), amperes.
    pub setpoint_a: f64,
    /// The true winding current at the sampling instant, amperes.
    pub current_a: f64,
    /// The current the controller read, amperes.
    pub measured_a: f64,
    /// The ADC reading it came from (after any injected sensor fault).
    pub counts: u16,
    /// The voltage the controller asked for, volts.
    pub commanded_v: f64,
    /// The duty it returned, signed by direction (0 when disabled).
    pub duty: f64,
    /// Whether the returned command enables the bridge.
    pub enabled: bool,
    /// Shaft speed, rad/s.
    pub speed_rad_s: f64,
    /// Bus voltage the controller was given, volts.
    pub bus_v: f64,
    /// Mean current drawn from the supply since the previous tick, amperes
    /// (negative: returned to it).
    pub supply_a: f64,
    /// Winding temperature, C.
    pub winding_c: f64,
    /// Latched faults (the bits of [`pi_core::FaultSet`]).
    pub fault_bits: u16,
    /// The controller's state: 0 disabled, 1 running, 2 faulted.
    pub state: u8,
}

/// The current at a PWM edge (switching mode only, when asked for).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct EdgePoint {
    /// Time, seconds.
    pub t_s: f64,
    /// Winding current, amperes.
    pub current_a: f64,
    /// Terminal voltage during the interval that ends here, volts.
    pub terminal_v: f64,
}

/// Something that happened during a run and is worth telling.
#[derive(Clone, Debug, PartialEq)]
pub struct LogEntry {
    /// When, seconds.
    pub t_s: f64,
    /// What, in one sentence.
    pub text: String,
}

/// A whole run.
#[derive(Clone, Debug, Default)]
pub struct Trace {
    /// One point per control tick.
    pub points: Vec<TracePoint>,
    /// PWM edges, if recorded.
    pub edges: Vec<EdgePoint>,
    /// Refused commands and other notes.
    pub log: Vec<LogEntry>,
}

/// The CSV header of [`Trace::write_csv`].
pub const CSV_HEADER: &str = "t_s,request_a,setpoint_a,current_a,measured_a,counts,commanded_v,duty,enabled,speed_rad_s,bus_v,supply_a,winding_c,fault_bits,state";

/// Significant digits of the time column (a 150 s run at 50 us keeps every tick apart).
pub const TIME_DIGITS: usize = 12;
/// Significant digits of every other real column: the resolution of the
/// firmware's own f32 numbers, well beyond what a sensor, an ADC or a plot
/// resolves, and a fraction of the cost and size of the shortest round-trip
/// form.
pub const VALUE_DIGITS: usize = 7;

/// Powers of ten from 1e-40 to 1e40, for [`put_real`]'s fast path.
const POW10_MIN: i32 = -40;
static POW10: [f64; 81] = {
    let mut t = [0.0; 81];
    let mut k = 0;
    while k < 81 {
        // Built exactly where f64 can (positive powers up to 1e22) and by one
        // division otherwise; 9 to 12 significant digits need no more.
        let e = k as i32 + POW10_MIN;
        let mut p = 1.0;
        let mut j = 0;
        while j < e.abs() {
            p *= 10.0;
            j += 1;
        }
        t[k] = if e < 0 { 1.0 / p } else { p };
        k += 1;
    }
    t
};

fn pow10(e: i32) -> f64 {
    match usize::try_from(e - POW10_MIN) {
        Ok(k) if k < POW10.len() => POW10[k],
        _ => 10f64.powi(e),
    }
}

/// Appends `v` with `digits` significant digits in scientific notation,
/// trailing zeros dropped (`1.5e0`, `-2.25e-3`, `0`), or `NaN`, `inf`, `-inf`.
pub fn put_real(buf: &mut Vec<u8>, v: f64, digits: usize) {
    if v == 0.0 {
        buf.push(b'0');
        return;
    }
    if !v.is_finite() {
        buf.extend_from_slice(if v.is_nan() {
            b"NaN"
        } else if v > 0.0 {
            b"inf"
        } else {
            b"-inf"
        });
        return;
    }
    if v < 0.0 {
        buf.push(b'-');
    }
    let a = v.abs();
    let digits = digits.clamp(1, 17) as i32;
    // The decimal exponent from the binary one (log10(2) = 0.30103), then
    // corrected against the table: no logarithm.
    let bits = ((a.to_bits() >> 52) & 0x7ff) as i32 - 1023;
    let mut e = ((bits as f64) * std::f64::consts::LOG10_2).floor() as i32;
    while a >= pow10(e + 1) {
        e += 1;
    }
    while a < pow10(e) {
        e -= 1;
    }
    let top = pow10(digits) as u64;
    let shift = digits - 1 - e;
    let scaled = if shift >= 0 {
        a * pow10(shift)
    } else {
        a / pow10(-shift)
    };
    let mut m = (scaled + 0.5) as u64;
    if m >= top {
        m /= 10;
        e += 1;
    }
    let mut d = [0u8; 20];
    let start = digits_of(m, &mut d);
    let mut last = 20;
    while last > start + 1 && d[last - 1] == b'0' {
        last -= 1;
    }
    buf.push(d[start]);
    if last > start + 1 {
        buf.push(b'.');
        buf.extend_from_slice(&d[start + 1..last]);
    }
    buf.push(b'e');
    put_int(buf, e as i64);
}

/// "00" to "99", for two digits at a time.
static PAIRS: [u8; 200] = {
    let mut t = [0u8; 200];
    let mut k = 0;
    while k < 100 {
        t[2 * k] = b'0' + (k / 10) as u8;
        t[2 * k + 1] = b'0' + (k % 10) as u8;
        k += 1;
    }
    t
};

/// The decimal digits of `x` into the end of `d`; returns where they start.
fn digits_of(x: u64, d: &mut [u8; 20]) -> usize {
    let mut end = 20;
    // Most mantissas fit 32 bits, whose divisions are cheaper.
    if let Ok(small) = u32::try_from(x) {
        let mut x = small;
        while x >= 100 {
            let k = (x % 100) as usize * 2;
            x /= 100;
            end -= 2;
            d[end] = PAIRS[k];
            d[end + 1] = PAIRS[k + 1];
        }
        return last_digits(x as u64, d, end);
    }
    let mut x = x;
    while x >= 100 {
        let k = (x % 100) as usize * 2;
        x /= 100;
        end -= 2;
        d[end] = PAIRS[k];
        d[end + 1] = PAIRS[k + 1];
    }
    last_digits(x, d, end)
}

/// The last one or two digits (`x < 100`) in front of `end`.
fn last_digits(x: u64, d: &mut [u8; 20], mut end: usize) -> usize {
    if x >= 10 {
        let k = x as usize * 2;
        end -= 2;
        d[end] = PAIRS[k];
        d[end + 1] = PAIRS[k + 1];
    } else {
        end -= 1;
        d[end] = b'0' + x as u8;
    }
    end
}

/// Appends an integer.
pub fn put_int(buf: &mut Vec<u8>, v: i64) {
    if v < 0 {
        buf.push(b'-');
    }
    let mut d = [0u8; 20];
    let start = digits_of(v.unsigned_abs(), &mut d);
    buf.extend_from_slice(&d[start..]);
}

impl Trace {
    /// Writes the per-tick points as CSV (header [`CSV_HEADER`], SI units,
    /// `.` decimal point, one row per kept tick; time to [`TIME_DIGITS`] and
    /// the other reals to [`VALUE_DIGITS`] significant digits).
    pub fn write_csv(&self, out: &mut dyn Write) -> io::Result<()> {
        writeln!(out, "{CSV_HEADER}")?;
        // Rows gather in one buffer handed over in large writes.
        let mut row = Vec::with_capacity(1 << 17);
        for p in &self.points {
            if row.len() > (1 << 17) - 512 {
                out.write_all(&row)?;
                row.clear();
            }
            put_real(&mut row, p.t_s, TIME_DIGITS);
            for v in [p.request_a, p.setpoint_a, p.current_a, p.measured_a] {
                row.push(b',');
                put_real(&mut row, v, VALUE_DIGITS);
            }
            row.push(b',');
            put_int(&mut row, p.counts as i64);
            for v in [p.commanded_v, p.duty] {
                row.push(b',');
                put_real(&mut row, v, VALUE_DIGITS);
            }
            row.push(b',');
            put_int(&mut row, i64::from(p.enabled));
            for v in [p.speed_rad_s, p.bus_v, p.supply_a, p.winding_c] {
                row.push(b',');
                put_real(&mut row, v, VALUE_DIGITS);
            }
            row.push(b',');
            put_int(&mut row, p.fault_bits as i64);
            row.push(b',');
            put_int(&mut row, p.state as i64);
            row.push(b'\n');
        }
        out.write_all(&row)
    }

    /// Writes the edge points as CSV (`t_s,current_a,terminal_v`).
    pub fn write_edges_csv(&self, out: &mut dyn Write) -> io::Result<()> {
        writeln!(out, "t_s,current_a,terminal_v")?;
        let mut row = Vec::with_capacity(64);
        for e in &self.edges {
            row.clear();
            put_real(&mut row, e.t_s, TIME_DIGITS);
            row.push(b',');
            put_real(&mut row, e.current_a, VALUE_DIGITS);
            row.push(b',');
            put_real(&mut row, e.terminal_v, VALUE_DIGITS);
            row.push(b'\n');
            out.write_all(&row)?;
        }
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn real(v: f64, digits: usize) -> String {
        let mut b = Vec::new();
        put_real(&mut b, v, digits);
        String::from_utf8(b).unwrap()
    }

    #[test]
    fn reals_keep_their_significant_digits() {
        assert_eq!(real(1.5, 9), "1.5e0");
        assert_eq!(real(-2.25e-3, 9), "-2.25e-3");
        assert_eq!(real(0.0, 9), "0");
        assert_eq!(real(1000.0, 9), "1e3");
        assert_eq!(real(9.9999999999, 9), "1e1");
        assert_eq!(real(f64::NAN, 9), "NaN");
        assert_eq!(real(1.025e-3, 12), "1.025e-3");
        assert_eq!(real(0.1 + 0.2, 17), "3.0000000000000004e-1");
        assert_eq!(real(1e300, 9), "1e300");
        assert_eq!(real(-1e-300, 9), "-1e-300");
        assert_eq!(real(1e-10, 9), "1e-10");
        assert_eq!(real(999_999_999.7, 9), "1e9");
        // Every value reads back within half a unit of its last digit.
        let mut x = 1.234_567_890_123e-7_f64;
        for _ in 0..400 {
            for digits in [7, 9, 12] {
                let back: f64 = real(x, digits).parse().unwrap();
                assert!(
                    (back - x).abs() <= 0.5 * 10f64.powi(1 - digits as i32) * x.abs(),
                    "{x} {digits}"
                );
            }
            x *= -1.37;
        }
    }
}
