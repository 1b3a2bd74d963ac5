//! `ampwright identify <capture>`: parse, read the capture, identify, print, write.

use std::io::Write;
use std::path::PathBuf;

use crate::bench::capture::{self, Columns};
use crate::bench::identify::identify_rl;
use crate::plot::fit_svg;

/// Arguments of `ampwright identify`.
#[derive(Debug, clap::Args)]
pub struct IdentifyArgs {
    /// The capture: a CSV with a header row (time_s, current_a, and voltage_v
    /// or duty with bus_v; `ampwright simulate`'s trace reads as it is).
    pub capture: PathBuf,
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
    /// The voltage's delay behind the samples, whole samples (default: found from the data).
    #[arg(long)]
    pub delay_samples: Option<usize>,
    /// Folder for the output files (created if missing).
    #[arg(long, default_value = "ampwright-out")]
    pub out: PathBuf,
    /// Print the estimates as JSON instead of the table.
    #[arg(long)]
    pub json: bool,
}

/// Runs the command; returns the exit code: 0 identified, 2 a capture or an
/// argument refused, or an output that could not be written.
pub fn run(args: &IdentifyArgs) -> i32 {
    for (flag, v) in [
        ("--time-scale", args.time_scale),
        ("--current-scale", args.current_scale),
        ("--voltage-scale", args.voltage_scale),
    ] {
        if !(v.is_finite() && v != 0.0) {
            eprintln!(
                "ampwright: {flag} = {v} must be a finite number other than zero; give the units per column unit"
            );
            return 2;
        }
    }
    let name = args.capture.display().to_string();
    let file = match std::fs::File::open(&args.capture) {
        Ok(f) => f,
        Err(e) => {
            eprintln!("ampwright: cannot read the capture {name}: {e}; check the path");
            return 2;
        }
    };
    let cols = Columns {
        time: args.time_column.clone(),
        time_scale: args.time_scale,
        current: args.current_column.clone(),
        current_scale: args.current_scale,
        voltage: args.voltage_column.clone(),
        voltage_scale: args.voltage_scale,
        duty: args.duty_column.clone(),
        bus: args.bus_column.clone(),
        ..Columns::default()
    };
    let fit = match capture::read(std::io::BufReader::new(file), &name, &cols)
        .and_then(|c| identify_rl(&c, &name, args.delay_samples).map(|f| (c, f)))
    {
        Ok(x) => x,
        Err(e) => {
            eprintln!("ampwright: {e}");
            return 2;
        }
    };
    let (cap, fit) = fit;
    let stem = super::file_stem(
        &args
            .capture
            .file_stem()
            .map_or("capture".into(), |s| s.to_string_lossy().into_owned()),
    );
    let mut written = Vec::new();
    let outcome = super::create_out_dir(&args.out).and_then(|()| {
        let motor = args.out.join(format!("{stem}-motor.toml"));
        super::write_with(&motor, |f| f.write_all(fit.motor_section(&name).as_bytes()))?;
        written.push(motor.display().to_string());
        let svg = args.out.join(format!("{stem}-fit.svg"));
        let doc = fit_svg(
            &format!("{stem}: capture and fitted R-L model"),
            &format!(
                "R = {:.4} ohm, L = {:.4} mH, voltage delay {} samples; normalised RMS error {:.4}",
                fit.resistance_ohm.value,
                fit.inductance_h.value * 1e3,
                fit.delay_samples,
                fit.nrmse
            ),
            &cap.time_s,
            &cap.current_a,
            &fit.model_a,
            &cap.voltage_v,
        );
        super::write_with(&svg, |f| f.write_all(doc.as_bytes()))?;
        written.push(svg.display().to_string());
        Ok(())
    });
    if let Err(e) = outcome {
        eprintln!("ampwright: {e}");
        return 2;
    }
    let mut out = std::io::stdout().lock();
    let text = if args.json {
        fit.json()
    } else {
        let mut t = fit.table(&name);
        t.push('\n');
        t.push_str(&fit.motor_section(&name));
        for w in &written {
            t.push_str(&format!("wrote {w}\n"));
        }
        t
    };
    let _ = writeln!(out, "{}", text.trim_end());
    0
}
