//! `ampwright sweep SCENARIO`: parse, plan, run (with progress), print,
//! write.

use std::io::{IsTerminal, Write};
use std::path::PathBuf;

use indicatif::{ProgressBar, ProgressDrawTarget, ProgressStyle};

use crate::plot::{sweep_histograms_svg, sweep_scatter_svg};
use crate::scenario::Params;
use crate::sweep::reduce::{Metric, reduce};
use crate::sweep::{self, Nominal, report, worst};

/// Which corners to run.
#[derive(Clone, Copy, Debug, PartialEq, Eq, clap::ValueEnum)]
pub enum CornersArg {
    /// Every combination of each field's extremes (2^n runs).
    Full,
    /// The half fraction whose signs multiply to +1 (2^(n-1) runs).
    Half,
}

/// Arguments of `ampwright sweep`.
#[derive(Debug, clap::Args)]
pub struct SweepArgs {
    /// The scenario, with a `[tolerances]` section.
    pub scenario: PathBuf,
    /// Monte-Carlo runs (default: tolerances.runs; 0 for corners alone).
    #[arg(long)]
    pub runs: Option<u64>,
    /// Run the corners as well.
    #[arg(long, value_enum)]
    pub corners: Option<CornersArg>,
    /// Exit 1 when the yield is under this, percent.
    #[arg(long)]
    pub min_yield_pct: Option<f64>,
    /// Threads (default: every core).
    #[arg(long)]
    pub threads: Option<usize>,
    /// Folder for the output files (created if missing).
    #[arg(long, default_value = "ampwright-out")]
    pub out: PathBuf,
    /// Print the result as JSON instead of the table.
    #[arg(long)]
    pub json: bool,
    /// No progress bar.
    #[arg(long)]
    pub quiet: bool,
}

/// Runs the command; returns the exit code: 0 done (and the yield at least
/// `--min-yield-pct`), 1 under it, 2 bad input or an output that could not
/// be written.
pub fn run(args: &SweepArgs) -> i32 {
    match run_inner(args) {
        Ok(code) => code,
        Err(e) => {
            eprintln!("ampwright: {e}");
            2
        }
    }
}

fn run_inner(args: &SweepArgs) -> Result<i32, String> {
    if let Some(y) = args.min_yield_pct
        && !(0.0..=100.0).contains(&y)
    {
        return Err(format!(
            "--min-yield-pct = {y} must be a percentage from 0 to 100"
        ));
    }
    if args.threads == Some(0) {
        return Err("--threads = 0 must be at least 1".into());
    }
    let text = std::fs::read_to_string(&args.scenario).map_err(|e| {
        format!(
            "cannot read the scenario {}: {e}; check the path",
            args.scenario.display()
        )
    })?;
    let fallback = args
        .scenario
        .file_stem()
        .map_or("scenario".into(), |s| s.to_string_lossy().into_owned());
    let params = Params::from_toml(&text, &fallback).map_err(|e| e.to_string())?;
    let nominal = Nominal::new(params).map_err(|e| e.to_string())?;
    let runs = args.runs.unwrap_or(nominal.tolerances.runs as u64);
    if runs > crate::scenario::tolerances::MAX_RUNS as u64 {
        return Err(format!(
            "--runs = {runs} must be at most {}",
            crate::scenario::tolerances::MAX_RUNS
        ));
    }
    let corners = args.corners.map(|c| c == CornersArg::Half);
    if runs == 0 && corners.is_none() {
        return Err("--runs = 0 leaves nothing to run; give --corners full or half, or some runs".into());
    }
    let plan = sweep::plan(&nominal, runs, corners);
    let bar = if args.quiet || args.json || !std::io::stderr().is_terminal() {
        ProgressBar::hidden()
    } else {
        ProgressBar::with_draw_target(Some(plan.len() as u64), ProgressDrawTarget::stderr()).with_style(
            ProgressStyle::with_template("sweep {bar:30} {pos}/{len} runs, {per_sec}, {eta} left")
                .unwrap_or_else(|_| ProgressStyle::default_bar()),
        )
    };
    let tick = || bar.inc(1);
    let results = match args.threads {
        Some(t) => rayon::ThreadPoolBuilder::new()
            .num_threads(t)
            .build()
            .map_err(|e| format!("cannot start {t} threads: {e}"))?
            .install(|| sweep::sweep(&nominal, &plan, &tick)),
        None => sweep::sweep(&nominal, &plan, &tick),
    };
    bar.finish_and_clear();
    let reduced = reduce(&results);
    let stem = super::file_stem(&nominal.params.name);
    super::create_out_dir(&args.out)?;
    let mut written = Vec::new();
    let mut write = |name: String, body: &str| -> Result<(), String> {
        let path = args.out.join(name);
        super::write_with(&path, |f| f.write_all(body.as_bytes()))?;
        written.push(path.display().to_string());
        Ok(())
    };
    write(format!("{stem}-sweep.csv"), &report::csv(&nominal, &results))?;
    for w in &reduced.worst {
        let run = &results[w.run];
        let name = format!("{stem}-worst-{}", w.metric.name());
        let note = format!(
            "The worst {} of `ampwright sweep {}`: {} ({}), written by the sweep.\n`ampwright simulate` on this file reproduces that run.",
            w.metric.name(),
            args.scenario.display(),
            if w.value.is_finite() {
                format!("{:e}", w.value)
            } else {
                "never reached".into()
            },
            match w.origin {
                sweep::Origin::MonteCarlo(k) => format!("Monte-Carlo run {k}"),
                sweep::Origin::Corner(j) => format!("corner {j}"),
            }
        );
        let body = worst::scenario_text(&text, &nominal, &run.values, &name, &note)?;
        write(format!("{name}.toml"), &body)?;
    }
    let title = format!("{}: {} runs", nominal.params.name, results.len());
    write(
        format!("{stem}-sweep-histograms.svg"),
        &sweep_histograms_svg(
            &title,
            &results,
            &[
                Metric::Overshoot,
                Metric::SettlingTime,
                Metric::RiseTime,
                Metric::PhaseMargin,
            ],
            &nominal.params.spec,
        ),
    )?;
    write(
        format!("{stem}-sweep-scatter.svg"),
        &sweep_scatter_svg(&title, &results, &nominal.params.spec),
    )?;
    let mut out = std::io::stdout().lock();
    let body = if args.json {
        report::json(&nominal, &results, &reduced, args.min_yield_pct)
    } else {
        let mut t = report::table(&nominal, &results, &reduced);
        for w in &written {
            t.push_str(&format!("wrote {w}\n"));
        }
        t
    };
    let _ = writeln!(out, "{}", body.trim_end());
    Ok(match (args.min_yield_pct, reduced.yield_fraction()) {
        (Some(min), Some(y)) if y * 100.0 < min => 1,
        _ => 0,
    })
}
