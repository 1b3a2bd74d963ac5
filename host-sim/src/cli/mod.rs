//! The `ampwright` command: argument parsing and dispatch, one file per command.
//! Commands only parse, call the library and print.
//!
//! Exit codes: 0 done (and the spec, if any, met); 1 the spec is missed (a run
//! finished but a step missed a limit, or no design method meets the spec
//! strictly), or a comparison beyond its tolerance, or a bring-up whose board
//! misses the spec or the simulation; 2 bad input (arguments, scenario, a scenario without gains whose
//! spec no design meets) or an output that could not be written.

pub mod board;
pub mod columns;
pub mod compare;
pub mod design;
pub mod identify;
pub mod progress;
pub mod simulate;
pub mod sweep;
pub mod virtual_board;

use std::ffi::OsString;

pub use board::BoardArgs;
pub use compare::CompareArgs;
pub use design::DesignArgs;
pub use identify::IdentifyArgs;
pub use simulate::SimulateArgs;
pub use sweep::SweepArgs;
pub use virtual_board::VirtualBoardArgs;

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
    /// Identify the load from a bench capture (CSV): R and L of a held rotor,
    /// and with a speed column on which the rotor turns Ke, J and friction
    /// too; estimates with 95 % intervals, a `[motor]` section to paste into a
    /// scenario, and a picture of the capture against the fitted model.
    Identify(IdentifyArgs),
    /// Compare a bench capture (CSV) with the simulation of a scenario driven
    /// the way the board was: the steps side by side, the normalised error,
    /// the differences in words, and a picture of the two.
    Compare(CompareArgs),
    /// Run one firmware over many boards: the scenario's `[tolerances]` drawn
    /// (Monte-Carlo, corners or both), each board run through the real loop
    /// and analysed; the yield, the worst cases (each written as a scenario
    /// that reproduces it), histograms, a scatter and a CSV of every run.
    Sweep(SweepArgs),
    /// Talk to a board over its bench link (pi-core's `link` feature): its
    /// status, gains, captures, a step, an identification, and the guided
    /// bring-up from identification to verified gains.
    Board(BoardArgs),
    /// Serve a scenario as a board on a pseudo-terminal: the real pi-core
    /// link handler, capture and loop on the simulated drive chain, for
    /// `ampwright board` without hardware.
    VirtualBoard(VirtualBoardArgs),
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
        CommandArgs::Identify(a) => identify::run(&a),
        CommandArgs::Compare(a) => compare::run(&a),
        CommandArgs::Sweep(a) => sweep::run(&a),
        CommandArgs::Board(a) => board::run(&a),
        CommandArgs::VirtualBoard(a) => virtual_board::run(&a),
    }
}
