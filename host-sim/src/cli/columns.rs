//! The capture's column options, shared by `identify` and `compare`.

use std::path::Path;

use crate::bench::capture::{self, Capture, Columns};

/// Which columns of the capture hold what, and their scales.
#[derive(Debug, clap::Args)]
pub struct ColumnArgs {
    /// The time column (default time_s, or t_s).
    #[arg(long)]
    pub time_column: Option<String>,
    /// Seconds per unit of the time column.
    #[arg(long, default_value_t = 1.0)]
    pub time_scale: f64,
    /// The current column.
    #[arg(long, default_value = "current_a")]
    pub current_column: String,
    /// Amperes per unit of the current column (a current probe's A/V).
    #[arg(long, default_value_t = 1.0)]
    pub current_scale: f64,
    /// The terminal voltage column (default voltage_v; without it, duty x bus_v).
    #[arg(long)]
    pub voltage_column: Option<String>,
    /// Volts per unit of the voltage column.
    #[arg(long, default_value_t = 1.0)]
    pub voltage_scale: f64,
    /// The duty column, used with --bus-column when there is no voltage.
    #[arg(long, default_value = "duty")]
    pub duty_column: String,
    /// The bus voltage column.
    #[arg(long, default_value = "bus_v")]
    pub bus_column: String,
}

impl ColumnArgs {
    /// Reads the capture at `path` with these columns; the refusal is one
    /// sentence in the user's terms.
    pub fn read(&self, path: &Path, setpoint: Option<String>) -> Result<Capture, String> {
        for (flag, v) in [
            ("--time-scale", self.time_scale),
            ("--current-scale", self.current_scale),
            ("--voltage-scale", self.voltage_scale),
        ] {
            if !(v.is_finite() && v != 0.0) {
                return Err(format!(
                    "{flag} = {v} must be a finite number other than zero; give the units per column unit"
                ));
            }
        }
        let name = path.display().to_string();
        let file = std::fs::File::open(path)
            .map_err(|e| format!("cannot read the capture {name}: {e}; check the path"))?;
        let cols = Columns {
            time: self.time_column.clone(),
            time_scale: self.time_scale,
            current: self.current_column.clone(),
            current_scale: self.current_scale,
            voltage: self.voltage_column.clone(),
            voltage_scale: self.voltage_scale,
            duty: self.duty_column.clone(),
            bus: self.bus_column.clone(),
            setpoint,
            ..Columns::default()
        };
        capture::read(std::io::BufReader::new(file), &name, &cols).map_err(|e| e.to_string())
    }
}
