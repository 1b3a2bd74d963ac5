//! The `ampwright` command: argument parsing and dispatch, one file per command.
//! Commands only parse, call the library and print.
//!
//! Exit codes: 0 done (and the spec, if any, met); 1 the run finished but a spec
//! criterion failed; 2 bad input (arguments, scenario), a spec no design can
//! meet, or an output that could not be written.

pub mod design;
pub mod progress;
pub mod simulate;

use std::ffi::OsString;
use std::path::PathBuf;

use clap::{Parser, Subcommand};

/// Current control for brushed motors and other R-L loads: simulate the real
/// firmware loop against a model of the drive chain.
#[derive(Debug, Parser)]
#[command(name = "ampwright", version, about)]
pub struct Args {
    /// What to do.
    #[command(subcommand)]
    pub command: CommandArgs,
}

/// The commands.
#[derive(Debug, Subcommand)]
pub enum CommandArgs {
    /// Run a scenario file through the real pi-core loop: metrics table and
    /// verdict on stdout, trace CSV and step-response SVG in the output folder.
    Simulate(SimulateArgs),
    /// Design PI gains for the scenario's winding, sampling and `[spec]` with
    /// every method, analyse each on the sampled loop, and write the chosen
    /// gains as Rust constants and JSON, a root locus and a frequency response.
    Design(DesignArgs),
}

/// Arguments of `ampwright design`.
#[derive(Debug, clap::Args)]
pub struct DesignArgs {
    /// The scenario (TOML) with a `[spec]` section.
    pub scenario: PathBuf,
    /// Replace the spec's 2 % settling time, seconds.
    #[arg(long)]
    pub settling_time_s: Option<f64>,
    /// Replace the spec's overshoot, percent.
    #[arg(long)]
    pub overshoot_pct: Option<f64>,
    /// Replace the winding resistance, ohm.
    #[arg(long)]
    pub resistance_ohm: Option<f64>,
    /// Replace the winding inductance, H.
    #[arg(long)]
    pub inductance_h: Option<f64>,
    /// Replace the control period, s.
    #[arg(long)]
    pub control_period_s: Option<f64>,
    /// Model the one-period computation delay or not (true/false), instead of
    /// deriving it from the scenario's timing.
    #[arg(long)]
    pub delay: Option<bool>,
    /// Replace the current filter's time constant, s (0: none).
    #[arg(long)]
    pub filter_tau_s: Option<f64>,
    /// Replace the supply voltage, V.
    #[arg(long)]
    pub supply_v: Option<f64>,
    /// Folder for the output files (created if missing).
    #[arg(long, default_value = "ampwright-out")]
    pub out: PathBuf,
    /// Print the report as JSON instead of the table.
    #[arg(long)]
    pub json: bool,
}

/// Arguments of `ampwright simulate`.
#[derive(Debug, clap::Args)]
pub struct SimulateArgs {
    /// The scenario (TOML); start from host-sim/scenarios/carousel_step.toml.
    pub scenario: PathBuf,
    /// Folder for the CSV and SVG files (created if missing).
    #[arg(long, default_value = "ampwright-out")]
    pub out: PathBuf,
    /// Print the report as JSON instead of the table.
    #[arg(long)]
    pub json: bool,
    /// Also write the current at every PWM edge (switching bridge only) as CSV.
    #[arg(long)]
    pub edges: bool,
    /// No progress bar.
    #[arg(long)]
    pub quiet: bool,
}

/// A file name from a scenario name: letters, digits, `-` and `_` kept.
pub fn file_stem(name: &str) -> String {
    let s: String = name
        .chars()
        .map(|c| {
            if c.is_ascii_alphanumeric() || c == '-' || c == '_' {
                c
            } else {
                '_'
            }
        })
        .collect();
    if s.is_empty() { "scenario".into() } else { s }
}

/// Creates the output folder, or says why not in one sentence.
pub fn create_out_dir(dir: &std::path::Path) -> Result<(), String> {
    std::fs::create_dir_all(dir).map_err(|e| {
        format!(
            "cannot create the output folder {}: {e}; choose another with --out",
            dir.display()
        )
    })
}

/// Writes a file through a buffer, or says why not in one sentence.
pub fn write_with(
    path: &std::path::Path,
    body: impl FnOnce(&mut dyn std::io::Write) -> std::io::Result<()>,
) -> Result<(), String> {
    use std::io::Write;
    let fail = |e: std::io::Error| {
        format!(
            "cannot write {}: {e}; check the folder given with --out",
            path.display()
        )
    };
    let file = std::fs::File::create(path).map_err(fail)?;
    let mut w = std::io::BufWriter::new(file);
    body(&mut w).map_err(fail)?;
    w.flush().map_err(fail)
}

/// Runs the command line; returns the process exit code.
pub fn main(args: impl IntoIterator<Item = OsString>) -> i32 {
    let args = match Args::try_parse_from(args) {
        Ok(a) => a,
        Err(e) => {
            let code = if e.use_stderr() { 2 } else { 0 };
            let _ = e.print();
            return code;
        }
    };
    match args.command {
        CommandArgs::Simulate(a) => simulate::run(&a),
        CommandArgs::Design(a) => design::run(&a),
    }
}
