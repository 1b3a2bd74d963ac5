//! A bench capture: a CSV with a header row, read by column name.
//!
//! Columns: `time_s` (or `t_s`, as `ampwright simulate` writes it),
//! `current_a`, and either `voltage_v` (the terminal voltage) or `duty` with
//! `bus_v` (the voltage is then their product); optionally `speed_rad_s`.
//! Other columns are ignored. [`Columns`] maps other names and scales, so a
//! scope export (`CH1`, `CH2`, a current probe's volts per amp) or a
//! microcontroller dump reads without editing.
//!
//! A capture that cannot be identified is refused in one sentence: no header
//! or a column missing, a row that is not numbers, time not strictly
//! increasing, a sample period that wanders more than
//! [`PERIOD_TOLERANCE`] from its median, a current clipped at a rail, a
//! voltage that never changes, or too few samples.

use std::io::Read;

/// How far a sample period may wander from the median, fraction (a scope's
/// timebase or a firmware's tick: common practice would keep it far tighter).
pub const PERIOD_TOLERANCE: f64 = 0.01;
/// The fewest samples a capture must have.
pub const MIN_SAMPLES: usize = 20;
/// This many samples in a row at the largest current magnitude, while the
/// voltage changes under them, say the current was clipped at a rail.
pub const CLIPPED_RUN: usize = 10;

/// Which columns hold what, and their scales.
#[derive(Clone, Debug, PartialEq)]
pub struct Columns {
    /// Time column, s (before `time_scale`).
    pub time: Option<String>,
    /// Seconds per unit of the time column.
    pub time_scale: f64,
    /// Current column.
    pub current: String,
    /// Amperes per unit of the current column (a probe's A/V).
    pub current_scale: f64,
    /// Terminal voltage column, if the capture has one.
    pub voltage: Option<String>,
    /// Volts per unit of the voltage column.
    pub voltage_scale: f64,
    /// Duty column (signed), used with `bus` when there is no voltage.
    pub duty: String,
    /// Bus voltage column.
    pub bus: String,
    /// Speed column, rad/s, if any.
    pub speed: String,
    /// Setpoint column, A, if any (default: `request_a`, else `setpoint_a`).
    pub setpoint: Option<String>,
}

impl Default for Columns {
    fn default() -> Self {
        Self {
            time: None,
            time_scale: 1.0,
            current: "current_a".into(),
            current_scale: 1.0,
            voltage: None,
            voltage_scale: 1.0,
            duty: "duty".into(),
            bus: "bus_v".into(),
            speed: "speed_rad_s".into(),
            setpoint: None,
        }
    }
}

/// A capture, SI units, one entry per sample.
#[derive(Clone, Debug, PartialEq)]
pub struct Capture {
    /// Sample times, s.
    pub time_s: Vec<f64>,
    /// Current, A.
    pub current_a: Vec<f64>,
    /// Terminal voltage, V (held from this sample to the next).
    pub voltage_v: Vec<f64>,
    /// Shaft speed, rad/s, if captured.
    pub speed_rad_s: Option<Vec<f64>>,
    /// The current the board was asked for, A, if captured.
    pub setpoint_a: Option<Vec<f64>>,
    /// The median sample period, s.
    pub period_s: f64,
    /// Where the voltage came from, in words (`voltage_v`, `duty x bus_v`).
    pub voltage_from: String,
}

/// A capture refused, in one sentence.
#[derive(Clone, Debug, PartialEq)]
pub struct CaptureError(pub String);

impl std::fmt::Display for CaptureError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(f, "{}", self.0)
    }
}

impl std::error::Error for CaptureError {}

fn refuse(s: impl Into<String>) -> CaptureError {
    CaptureError(s.into())
}

/// Reads and checks a capture; `name` names it in errors (the file's path).
pub fn read(input: impl Read, name: &str, cols: &Columns) -> Result<Capture, CaptureError> {
    let mut r = csv::ReaderBuilder::new()
        .has_headers(true)
        .trim(csv::Trim::All)
        .from_reader(input);
    let header: Vec<String> = r
        .headers()
        .map_err(|e| refuse(format!("cannot read the header row of {name}: {e}")))?
        .iter()
        .map(str::to_string)
        .collect();
    let find = |col: &str| header.iter().position(|h| h == col);
    if header.iter().all(|h| h.parse::<f64>().is_ok()) {
        return Err(refuse(format!(
            "{name} has no header row (its first row is numbers); add one naming the columns (time_s, current_a, voltage_v)"
        )));
    }
    let time_col = match &cols.time {
        Some(t) => find(t).ok_or_else(|| refuse(format!("{name} has no column {t:?}; the columns are {}", header.join(", "))))?,
        None => find("time_s").or_else(|| find("t_s")).ok_or_else(|| {
            refuse(format!(
                "{name} has no time_s (or t_s) column; name the time column with --time-column (the columns are {})",
                header.join(", ")
            ))
        })?,
    };
    let need = |col: &str, option: &str| {
        find(col).ok_or_else(|| {
            refuse(format!(
                "{name} has no column {col:?}; name it with {option} (the columns are {})",
                header.join(", ")
            ))
        })
    };
    let current_col = need(&cols.current, "--current-column")?;
    let voltage_source = match &cols.voltage {
        Some(v) => Some(need(v, "--voltage-column")?),
        None => find("voltage_v"),
    };
    let (duty_col, bus_col) = match voltage_source {
        Some(_) => (None, None),
        None => (
            Some(need(&cols.duty, "--voltage-column (or --duty-column)")?),
            Some(need(&cols.bus, "--bus-column")?),
        ),
    };
    let speed_col = find(&cols.speed);
    let setpoint_col = match &cols.setpoint {
        Some(sp) => Some(need(sp, "--setpoint-column")?),
        None => find("request_a").or_else(|| find("setpoint_a")),
    };
    let mut c = Capture {
        time_s: Vec::new(),
        current_a: Vec::new(),
        voltage_v: Vec::new(),
        speed_rad_s: speed_col.map(|_| Vec::new()),
        setpoint_a: setpoint_col.map(|_| Vec::new()),
        period_s: 0.0,
        voltage_from: match voltage_source {
            Some(v) => header[v].clone(),
            None => format!("{} x {}", cols.duty, cols.bus),
        },
    };
    for (k, rec) in r.records().enumerate() {
        let row = k + 2; // 1-based, after the header
        let rec = rec.map_err(|e| refuse(format!("{name} row {row}: {e}")))?;
        let num = |col: usize| -> Result<f64, CaptureError> {
            let field = rec.get(col).unwrap_or("");
            match field.parse::<f64>() {
                Ok(v) if v.is_finite() => Ok(v),
                _ => Err(refuse(format!(
                    "{name} row {row}, column {}: {field:?} is not a finite number; remove the row or fix the export",
                    header[col]
                ))),
            }
        };
        c.time_s.push(num(time_col)? * cols.time_scale);
        c.current_a.push(num(current_col)? * cols.current_scale);
        let v = match (voltage_source, duty_col, bus_col) {
            (Some(v), ..) => num(v)? * cols.voltage_scale,
            (None, Some(d), Some(b)) => num(d)? * num(b)?,
            _ => 0.0,
        };
        c.voltage_v.push(v);
        if let (Some(col), Some(s)) = (speed_col, c.speed_rad_s.as_mut()) {
            s.push(num(col)?);
        }
        if let (Some(col), Some(s)) = (setpoint_col, c.setpoint_a.as_mut()) {
            s.push(num(col)?);
        }
    }
    check(&mut c, name)?;
    Ok(c)
}

fn check(c: &mut Capture, name: &str) -> Result<(), CaptureError> {
    let n = c.time_s.len();
    if n < MIN_SAMPLES {
        return Err(refuse(format!(
            "{name} has {n} samples; identification needs at least {MIN_SAMPLES} (capture more of the transient)"
        )));
    }
    let mut dts = Vec::with_capacity(n - 1);
    for k in 1..n {
        let dt = c.time_s[k] - c.time_s[k - 1];
        if dt <= 0.0 || dt.is_nan() {
            return Err(refuse(format!(
                "{name}: time does not increase at row {} ({} s after {} s); sort the rows and remove repeats",
                k + 2,
                c.time_s[k],
                c.time_s[k - 1]
            )));
        }
        dts.push(dt);
    }
    let mut sorted = dts.clone();
    sorted.sort_by(f64::total_cmp);
    let median = sorted[sorted.len() / 2];
    if let Some((k, dt)) = dts
        .iter()
        .enumerate()
        .find(|(_, dt)| (**dt - median).abs() > PERIOD_TOLERANCE * median)
    {
        return Err(refuse(format!(
            "{name}: the sample period wanders: {dt:e} s at row {} against a median of {median:e} s (more than {} %); resample the capture evenly",
            k + 3,
            PERIOD_TOLERANCE * 100.0
        )));
    }
    c.period_s = median;
    let (vmin, vmax) = c
        .voltage_v
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), v| {
            (a.min(*v), b.max(*v))
        });
    if vmax - vmin <= 1e-9 * vmax.abs().max(1.0) {
        return Err(refuse(format!(
            "{name}: the voltage ({}) never changes, so there is nothing to identify; capture a step or any change of the voltage",
            c.voltage_from
        )));
    }
    // Clipped: a run of samples at the peak that does not follow the voltage.
    let peak = c.current_a.iter().fold(0.0f64, |m, i| m.max(i.abs()));
    let mut run_start = 0;
    for k in 0..=n {
        let at_peak = k < n && peak > 0.0 && c.current_a[k].abs() == peak;
        if at_peak {
            continue;
        }
        if k - run_start >= CLIPPED_RUN {
            let v = &c.voltage_v[run_start..k];
            let moves = v.iter().any(|x| (x - v[0]).abs() > 1e-6 * v[0].abs().max(1.0));
            if moves {
                return Err(refuse(format!(
                    "{name}: the current stays at {peak} A for {} samples from {} s while the voltage changes: clipped at the sensor's rail; lower the current or widen the range",
                    k - run_start,
                    c.time_s[run_start]
                )));
            }
        }
        run_start = k + 1;
    }
    Ok(())
}
