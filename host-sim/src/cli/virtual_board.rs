//! `ampwright virtual-board SCENARIO`: a board made of the simulator, served
//! on a pseudo-terminal whose path is printed for `ampwright board`.

use std::io::Write;
use std::path::PathBuf;
use std::time::{Duration, Instant};

use serialport::SerialPort;

use crate::bench::virtual_board::VirtualBoard;
use crate::prepare;

/// Arguments of `ampwright virtual-board`.
#[derive(Debug, clap::Args)]
pub struct VirtualBoardArgs {
    /// The scenario whose drive chain and loop the board runs (its events are
    /// not used: commands come over the link).
    pub scenario: PathBuf,
    /// Simulated time that passes after each reply, ms.
    #[arg(long, default_value_t = 2.0)]
    pub quantum_ms: f64,
    /// Stop after this long without a request, s (default: serve until
    /// interrupted).
    #[arg(long)]
    pub idle_exit_s: Option<f64>,
}

/// Runs the command; returns the exit code: 0 served until idle, 2 a bad
/// scenario or argument, or a pseudo-terminal that could not be opened.
#[cfg(unix)]
pub fn run(args: &VirtualBoardArgs) -> i32 {
    match serve(args) {
        Ok(()) => 0,
        Err(e) => {
            eprintln!("ampwright: {e}");
            2
        }
    }
}

/// Runs the command: pseudo-terminals are a Unix facility.
#[cfg(not(unix))]
pub fn run(_: &VirtualBoardArgs) -> i32 {
    eprintln!("ampwright: the virtual board needs a pseudo-terminal, which this system does not have");
    2
}

#[cfg(unix)]
fn serve(args: &VirtualBoardArgs) -> Result<(), String> {
    if !(args.quantum_ms.is_finite() && args.quantum_ms > 0.0 && args.quantum_ms <= 1000.0) {
        return Err(format!(
            "--quantum-ms = {} must be above 0 ms and at most 1000 ms",
            args.quantum_ms
        ));
    }
    if let Some(s) = args.idle_exit_s
        && !(s.is_finite() && s > 0.0)
    {
        return Err(format!("--idle-exit-s = {s} must be above 0 s"));
    }
    let prepared = prepare::load(&args.scenario).map_err(|e| e.to_string())?;
    let mut board =
        VirtualBoard::new(&prepared.scenario, args.quantum_ms * 1e-3).map_err(|e| e.to_string())?;
    let (mut master, slave) = serialport::TTYPort::pair()
        .map_err(|e| format!("cannot open a pseudo-terminal for the virtual board: {e}"))?;
    master
        .set_timeout(Duration::from_millis(20))
        .map_err(|e| format!("cannot set up the pseudo-terminal: {e}"))?;
    let path = slave.name().unwrap_or_default();
    {
        let mut out = std::io::stdout().lock();
        let _ = writeln!(
            out,
            "virtual board running {} on {path}\n\
             (the real pi-core link handler, capture and loop on the simulated drive chain; \
             {} ms of simulated time pass after each reply)",
            prepared.scenario.name, args.quantum_ms
        );
        let _ = out.flush();
    }
    let idle = args.idle_exit_s.map(Duration::from_secs_f64);
    let mut last = (0u64, Instant::now());
    let outcome = board.serve(&mut master, |b| {
        if b.requests() != last.0 {
            last = (b.requests(), Instant::now());
        }
        idle.is_none_or(|d| last.1.elapsed() < d)
    });
    // The other end stays open until here, so the host may close and reopen
    // the port between commands.
    drop(slave);
    outcome.map_err(|e| format!("the virtual board's pseudo-terminal failed: {e}"))?;
    eprintln!(
        "virtual board idle for {} s after {} requests and {:.3} s of simulated time; stopped",
        args.idle_exit_s.unwrap_or(0.0),
        board.requests(),
        board.time_s()
    );
    Ok(())
}
