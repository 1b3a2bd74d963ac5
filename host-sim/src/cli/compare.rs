//! `ampwright compare <capture> <scenario>`: parse, read, prepare, compare,
//! print, write.

use std::io::Write;
use std::path::PathBuf;

use crate::plot::overlay_svg;
use crate::prepare;
use crate::results::compare::compare;
use crate::results::compare::within;

use super::columns::ColumnArgs;

/// Arguments of `ampwright compare`.
#[derive(Debug, clap::Args)]
pub struct CompareArgs {
    /// The capture: a CSV with a header row (time_s, current_a, voltage_v or
    /// duty with bus_v, and the setpoint as request_a or setpoint_a).
    pub capture: PathBuf,
    /// The scenario to compare it with (its winding, bridge, sense chain,
    /// timing and loop; its events are replaced by the capture's).
    pub scenario: PathBuf,
    /// Which columns hold what.
    #[command(flatten)]
    pub columns: ColumnArgs,
    /// The setpoint column, amperes (default request_a, else setpoint_a).
    #[arg(long)]
    pub setpoint_column: Option<String>,
    /// Drive the simulation with the capture's voltage, open loop, even when the
    /// capture has a setpoint.
    #[arg(long)]
    pub open_loop: bool,
    /// Exit 1 when the normalised RMS error exceeds this, percent of the
    /// capture's spread.
    #[arg(long)]
    pub max_error_pct: Option<f64>,
    /// Folder for the output files (created if missing).
    #[arg(long, default_value = "ampwright-out")]
    pub out: PathBuf,
    /// Print the comparison as JSON instead of the table.
    #[arg(long)]
    pub json: bool,
}

/// Runs the command; returns the exit code: 0 compared (and within the
/// tolerance, if one was given), 1 beyond it, 2 bad input or an output that
/// could not be written.
pub fn run(args: &CompareArgs) -> i32 {
    if let Some(tol) = args.max_error_pct
        && !(tol.is_finite() && tol > 0.0)
    {
        eprintln!(
            "ampwright: --max-error-pct = {tol} must be a percentage above 0; give the error you accept"
        );
        return 2;
    }
    let cap = match args.columns.read(&args.capture, args.setpoint_column.clone()) {
        Ok(c) => c,
        Err(e) => {
            eprintln!("ampwright: {e}");
            return 2;
        }
    };
    let prepared = match prepare::load(&args.scenario) {
        Ok(p) => p,
        Err(e) => {
            eprintln!("ampwright: {e}");
            return 2;
        }
    };
    let setpoint = if args.open_loop {
        None
    } else {
        cap.setpoint_a.as_deref()
    };
    let c = match compare(&cap, setpoint, &prepared.scenario) {
        Ok(c) => c,
        Err(e) => {
            eprintln!("ampwright: {e}");
            return 2;
        }
    };
    let name = args.capture.display().to_string();
    let stem = super::file_stem(
        &args
            .capture
            .file_stem()
            .map_or("capture".into(), |s| s.to_string_lossy().into_owned()),
    );
    let svg = args.out.join(format!("{stem}-compare.svg"));
    let outcome = super::create_out_dir(&args.out).and_then(|()| {
        let doc = overlay_svg(
            &format!("{stem}: capture and simulation of {}", prepared.scenario.name),
            &format!(
                "normalised RMS error {:.4}; {}; {}",
                c.nrmse,
                if c.offset_a == 0.0 {
                    "no offset".to_string()
                } else {
                    format!(
                        "offset {} A once settled",
                        crate::results::compare::sig(c.offset_a)
                    )
                },
                if c.lag_s == 0.0 {
                    "no delay".to_string()
                } else {
                    format!(
                        "the capture lags by {} us",
                        crate::results::compare::sig(c.lag_s * 1e6)
                    )
                }
            ),
            &c.time_s,
            (&c.capture_a, &c.simulated_a, &c.voltage_v),
            ("captured current", "simulated current", "captured - simulated"),
        );
        super::write_with(&svg, |f| f.write_all(doc.as_bytes()))
    });
    if let Err(e) = outcome {
        eprintln!("ampwright: {e}");
        return 2;
    }
    let mut out = std::io::stdout().lock();
    let text = if args.json {
        c.json(args.max_error_pct)
    } else {
        format!(
            "{}wrote {}",
            c.table(&name, &prepared.scenario.name, args.max_error_pct),
            svg.display()
        )
    };
    let _ = writeln!(out, "{}", text.trim_end());
    match within(&c, args.max_error_pct) {
        Some(false) => 1,
        _ => 0,
    }
}
