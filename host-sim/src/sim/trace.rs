//! What a run leaves behind: one point per control tick, optionally the current at
//! every PWM edge, and a log of commands the controller refused.

use std::io::{self, Write};

use crate::plant::load::{READOUTS, Readout};

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
    /// The controller's state: 0 disabled, 1 running, 2 faulted, 3 exciting.
    pub state: u8,
    /// The I^2t model's heat as a fraction of its trip level (0: off).
    pub i2t_level: f64,
    /// What the load shows besides its current, in the order and units of
    /// [`Trace::readouts`] (NaN past them).
    pub load: [f64; READOUTS],
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
    /// What a charger's main loop did, when the scenario ran one.
    pub charge: Option<crate::sim::charger::ChargeRecord>,
    /// What [`TracePoint::load`] holds: the load's readouts, each a CSV
    /// column after [`CSV_HEADER`]'s.
    pub readouts: &'static [Readout],
}

/// The CSV header of [`Trace::write_csv`], before the load's readouts (a
/// motor has none; a solenoid adds `travel_mm,inductance_mh`).
pub const CSV_HEADER: &str = "t_s,request_a,setpoint_a,current_a,measured_a,counts,commanded_v,duty,enabled,speed_rad_s,bus_v,supply_a,winding_c,fault_bits,state,i2t_level";

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
    let mut out = [0u8; REAL_MAX];
    let n = real_into(&mut out, 0, v, digits);
    buf.extend_from_slice(&out[..n]);
}

/// The longest text [`real_into`] writes, bytes.
const REAL_MAX: usize = 32;

/// Writes `v` as [`put_real`] does into `out` from `at`; returns the end.
/// Every digit goes straight to its place: no temporary, no copy.
fn real_into(out: &mut [u8], at: usize, v: f64, digits: usize) -> usize {
    let mut n = at;
    if v == 0.0 {
        out[n] = b'0';
        return n + 1;
    }
    if !v.is_finite() {
        let text: &[u8] = if v.is_nan() {
            b"NaN"
        } else if v > 0.0 {
            b"inf"
        } else {
            b"-inf"
        };
        for &c in text {
            out[n] = c;
            n += 1;
        }
        return n;
    }
    let a = v.abs();
    let digits = digits.clamp(1, 17) as i32;
    // The decimal exponent from the binary one: floor(b log10 2) is
    // (b 1233) >> 12 to within one, then corrected against the table (no
    // logarithm, no floor call).
    let bits = ((a.to_bits() >> 52) & 0x7ff) as i32 - 1023;
    let mut e = (bits * 1233) >> 12;
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
    let mut count = digits as usize;
    if m >= top {
        m /= 10;
        e += 1;
    }
    // Trailing zeros dropped: fewer digits to write.
    while count > 1 && m.is_multiple_of(10) {
        m /= 10;
        count -= 1;
    }
    if v < 0.0 {
        out[n] = b'-';
        n += 1;
    }
    // "d" or "d.ddd": the first digit, then the point when more follow. The
    // fraction's digits are written from the end, two at a time.
    let end = if count > 1 { n + count + 1 } else { n + 1 };
    let mut k = end;
    let mut x = m;
    while k >= n + 4 {
        let pair = (x % 100) as usize * 2;
        x /= 100;
        k -= 2;
        out[k] = PAIRS[pair];
        out[k + 1] = PAIRS[pair + 1];
    }
    if k > n + 2 {
        k -= 1;
        out[k] = b'0' + (x % 10) as u8;
        x /= 10;
    }
    if count > 1 {
        out[n + 1] = b'.';
    }
    out[n] = b'0' + x as u8;
    n = end;
    out[n] = b'e';
    n += 1;
    if e < 0 {
        out[n] = b'-';
        n += 1;
    }
    int_into(out, n, e.unsigned_abs() as u64)
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

/// Writes an unsigned integer into `out` from `at`; returns the end.
fn int_into(out: &mut [u8], at: usize, v: u64) -> usize {
    let mut len = 1;
    let mut t = v;
    while t >= 10 {
        t /= 10;
        len += 1;
    }
    let mut k = at + len;
    let mut x = v;
    loop {
        k -= 1;
        out[k] = b'0' + (x % 10) as u8;
        x /= 10;
        if k == at {
            break;
        }
    }
    at + len
}

/// Appends an integer.
pub fn put_int(buf: &mut Vec<u8>, v: i64) {
    let mut out = [0u8; 24];
    let mut n = 0;
    if v < 0 {
        out[0] = b'-';
        n = 1;
    }
    let n = int_into(&mut out, n, v.unsigned_abs());
    buf.extend_from_slice(&out[..n]);
}

/// Writes trace points as CSV rows as they come (header [`CSV_HEADER`], SI
/// units, `.` decimal point; time to [`TIME_DIGITS`] and the other reals to
/// [`VALUE_DIGITS`] significant digits), gathering them in one buffer handed
/// over in large writes. A run can stream its rows through it without
/// keeping them.
pub struct CsvRows<'a> {
    out: &'a mut dyn Write,
    buf: Vec<u8>,
    readouts: usize,
}

/// The buffer size of [`CsvRows`], bytes.
const CSV_BUFFER: usize = 1 << 17;
/// The longest row: 12 reals, 4 integers, the readouts, separators.
const ROW_MAX: usize = (17 + READOUTS) * REAL_MAX;

impl<'a> CsvRows<'a> {
    /// Starts the file: writes the header, [`CSV_HEADER`] and a column for
    /// each of the load's `readouts`.
    pub fn new(out: &'a mut dyn Write, readouts: &[Readout]) -> io::Result<Self> {
        write!(out, "{CSV_HEADER}")?;
        for r in readouts.iter().take(READOUTS) {
            write!(out, ",{}", r.column)?;
        }
        writeln!(out)?;
        Ok(Self {
            out,
            buf: Vec::with_capacity(CSV_BUFFER),
            readouts: readouts.len().min(READOUTS),
        })
    }

    /// One row.
    pub fn row(&mut self, p: &TracePoint) -> io::Result<()> {
        if self.buf.len() > CSV_BUFFER - ROW_MAX {
            self.out.write_all(&self.buf)?;
            self.buf.clear();
        }
        let mut row = [0u8; ROW_MAX];
        let mut n = real_into(&mut row, 0, p.t_s, TIME_DIGITS);
        let sep = |n: usize, row: &mut [u8; ROW_MAX]| {
            row[n] = b',';
            n + 1
        };
        for v in [p.request_a, p.setpoint_a, p.current_a, p.measured_a] {
            n = sep(n, &mut row);
            n = real_into(&mut row, n, v, VALUE_DIGITS);
        }
        n = sep(n, &mut row);
        n = int_into(&mut row, n, p.counts as u64);
        for v in [p.commanded_v, p.duty] {
            n = sep(n, &mut row);
            n = real_into(&mut row, n, v, VALUE_DIGITS);
        }
        n = sep(n, &mut row);
        n = int_into(&mut row, n, u64::from(p.enabled));
        for v in [p.speed_rad_s, p.bus_v, p.supply_a, p.winding_c] {
            n = sep(n, &mut row);
            n = real_into(&mut row, n, v, VALUE_DIGITS);
        }
        n = sep(n, &mut row);
        n = int_into(&mut row, n, p.fault_bits as u64);
        n = sep(n, &mut row);
        n = int_into(&mut row, n, p.state as u64);
        n = sep(n, &mut row);
        n = real_into(&mut row, n, p.i2t_level, VALUE_DIGITS);
        for &v in &p.load[..self.readouts] {
            n = sep(n, &mut row);
            n = real_into(&mut row, n, v, VALUE_DIGITS);
        }
        row[n] = b'\n';
        self.buf.extend_from_slice(&row[..n + 1]);
        Ok(())
    }

    /// Hands over what is left.
    pub fn finish(mut self) -> io::Result<()> {
        self.out.write_all(&self.buf)?;
        self.buf.clear();
        Ok(())
    }
}

impl Trace {
    /// Writes the kept points as CSV (see [`CsvRows`]).
    pub fn write_csv(&self, out: &mut dyn Write) -> io::Result<()> {
        let mut rows = CsvRows::new(out, self.readouts)?;
        for p in &self.points {
            rows.row(p)?;
        }
        rows.finish()
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
