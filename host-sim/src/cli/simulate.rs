//! `ampwright simulate <scenario>`: parse, prepare (designing gains a scenario
//! leaves out), run, print, write.

use std::io::Write;
use std::path::PathBuf;

use crate::cli::progress::Progress;
use crate::plot::{LoadPlot, StepPlot, load_run_svg, long_run_svg, step_response_svg};
use crate::prepare;
use crate::results::html::{Section, page};
use crate::results::plan::Plan;
use crate::sim::trace::CsvRows;

/// A run this long or longer gets the thermal picture, s.
const LONG_RUN_S: f64 = 1.0;

/// The plot keeps at most about this many points of a long run.
const PLOT_POINTS: f64 = 100_000.0;
use crate::results::report;
use crate::scenario::Scenario;

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
    /// Also write one self-contained HTML page (tables and pictures inline)
    /// for a review.
    #[arg(long)]
    pub report: bool,
}

/// Runs the command; returns the exit code: 0 done (and the spec met), 1 a
/// spec limit missed, 2 bad input or an output that could not be written.
pub fn run(args: &SimulateArgs) -> i32 {
    let prepared = match prepare::load(&args.scenario) {
        Ok(p) => p,
        Err(e) => {
            eprintln!("ampwright: {e}");
            return 2;
        }
    };
    let scenario = &prepared.scenario;
    if args.edges && scenario.chain.bridge.params().modulation != crate::plant::bridge::Modulation::Switching
    {
        eprintln!(
            "ampwright: --edges records the current at every PWM edge, which only the switching bridge has; set bridge.mode = \"switching\" or leave --edges out"
        );
        return 2;
    }
    let plan = Plan::of(scenario);
    if let Some(why) = plan.refusal(scenario.record_every_ticks) {
        eprintln!("ampwright: {why}");
        return 2;
    }
    if let Some(note) = plan.announcement()
        && !args.quiet
    {
        eprintln!("ampwright: {note}");
    }
    let mut bar = Progress::new(
        &format!("simulating {}", scenario.name),
        !args.quiet && !args.json,
    );
    // The CSV is written as the run goes; memory keeps only what the plot needs.
    let stem = super::file_stem(&scenario.name);
    let csv_path = args.out.join(format!("{stem}.csv"));
    let csv_file = match super::create_out_dir(&args.out).and_then(|()| {
        std::fs::File::create(&csv_path).map_err(|e| {
            format!(
                "cannot write {}: {e}; check the folder given with --out",
                csv_path.display()
            )
        })
    }) {
        Ok(f) => f,
        Err(e) => {
            eprintln!("ampwright: {e}");
            return 2;
        }
    };
    let mut sink = std::io::BufWriter::new(csv_file);
    let every = scenario.record_every_ticks;
    let kept = (plan.rows / PLOT_POINTS).ceil().max(1.0) as u64;
    let result = {
        let mut rows = CsvRows::new(&mut sink, scenario.chain.load.readouts());
        let mut tick = 0u64;
        let mut failed: Option<std::io::Error> = None;
        let run = report::run_streaming(
            scenario,
            prepared.designed.as_ref(),
            &mut |f| bar.update(f),
            every * kept,
            &mut |p| {
                if tick.is_multiple_of(every)
                    && failed.is_none()
                    && let Ok(r) = rows.as_mut()
                    && let Err(e) = r.row(p)
                {
                    failed = Some(e);
                }
                tick += 1;
            },
        );
        let finished = match rows {
            Ok(r) if failed.is_none() => r.finish(),
            Ok(_) => Err(failed.unwrap_or_else(|| std::io::Error::other("write failed"))),
            Err(e) => Err(e),
        };
        finished
            .and_then(|()| sink.flush())
            .map_err(|e| {
                format!(
                    "cannot write {}: {e}; check the folder given with --out",
                    csv_path.display()
                )
            })
            .map(|()| run)
    };
    bar.finish();
    let (mut trace, rep) = match result {
        Ok(Ok(r)) => r,
        Ok(Err(e)) => {
            eprintln!("ampwright: {e}");
            return 2;
        }
        Err(e) => {
            eprintln!("ampwright: {e}");
            return 2;
        }
    };
    if args.edges {
        // A second run recording the edges: the first stays as fast as possible.
        match scenario.start() {
            Ok((mut cl, runner)) => {
                let mut runner = runner.record_edges(true);
                runner.run(&mut cl, scenario.duration_s, &mut |_| {});
                trace.edges = runner.into_trace().edges;
            }
            Err(e) => {
                eprintln!("ampwright: {e}");
                return 2;
            }
        }
    }
    let written = match write_files(args, scenario, &trace, &rep) {
        Ok(mut w) => {
            w.insert(0, csv_path.display().to_string());
            Ok(w)
        }
        Err(e) => Err(e),
    };
    let written = match written {
        Ok(w) => w,
        Err(e) => {
            eprintln!("ampwright: {e}");
            return 2;
        }
    };
    let mut out = std::io::stdout().lock();
    let text = if args.json {
        rep.json()
    } else {
        let mut t = rep.table();
        for w in &written {
            t.push_str(&format!("wrote {w}\n"));
        }
        t
    };
    // A closed pipe (`| head`) is not an error worth a message.
    let _ = writeln!(out, "{}", text.trim_end());
    match rep.pass {
        Some(false) => 1,
        _ => 0,
    }
}

fn write_files(
    args: &SimulateArgs,
    scenario: &Scenario,
    trace: &crate::sim::trace::Trace,
    rep: &report::Report,
) -> Result<Vec<String>, String> {
    let dir = &args.out;
    super::create_out_dir(dir)?;
    let stem = super::file_stem(&scenario.name);
    let mut written = Vec::new();
    let svg = dir.join(format!("{stem}.svg"));
    let doc = step_response_svg(trace, &StepPlot::of(scenario, rep));
    super::write_with(&svg, |f| f.write_all(doc.as_bytes()))?;
    written.push(svg.display().to_string());
    // A long run where heat matters gets its own picture.
    let heats = scenario.chain.load.heats() || scenario.loop_config.supervisor().thermal().is_some();
    if heats && scenario.duration_s >= LONG_RUN_S {
        let path = dir.join(format!("{stem}-thermal.svg"));
        let doc = long_run_svg(
            &format!("{}: winding temperature and I^2t over the run", rep.name),
            trace,
            rep.first_fault.as_ref().map(|(w, t)| (w.as_str(), *t)),
        );
        super::write_with(&path, |f| f.write_all(doc.as_bytes()))?;
        written.push(path.display().to_string());
    }
    // A load that shows more than its current (a plunger, a cell) gets its own picture.
    let mut load_doc = None;
    if !trace.readouts.is_empty() {
        let path = dir.join(format!("{stem}-load.svg"));
        let doc = load_run_svg(trace, &LoadPlot::of(rep, trace));
        super::write_with(&path, |f| f.write_all(doc.as_bytes()))?;
        written.push(path.display().to_string());
        load_doc = Some(doc);
    }
    if args.report {
        let mut sections = rep.sections();
        sections.push(Section::Heading("Pictures".into()));
        sections.push(Section::Picture("step response".into(), doc.clone()));
        if let Some(d) = &load_doc {
            sections.push(Section::Picture("the load over the run".into(), d.clone()));
        }
        for extra in &written {
            if extra.ends_with("-thermal.svg")
                && let Ok(svg) = std::fs::read_to_string(extra)
            {
                sections.push(Section::Picture("winding temperature and I^2t".into(), svg));
            }
        }
        let path = dir.join(format!("{stem}-report.html"));
        let html = page(&format!("{}: simulation", rep.name), &sections);
        super::write_with(&path, |f| f.write_all(html.as_bytes()))?;
        written.push(path.display().to_string());
    }
    if args.edges {
        let edges = dir.join(format!("{stem}-edges.csv"));
        super::write_with(&edges, |f| trace.write_edges_csv(f))?;
        written.push(edges.display().to_string());
    }
    Ok(written)
}
