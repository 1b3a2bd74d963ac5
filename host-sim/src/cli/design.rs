//! `ampwright design <scenario>`: parse, call the design, print, write.

use std::io::Write;
use std::path::PathBuf;

use crate::plot::{frequency_response_svg, root_locus_svg};
use crate::prepare::{self, Overrides};
use crate::results::html::{Section, page};
use crate::scenario::Params;
use crate::tuning::DesignReport;

/// Arguments of `ampwright design`.
#[derive(Debug, clap::Args)]
pub struct DesignArgs {
    /// The scenario (TOML) with a `[spec]` section.
    pub scenario: PathBuf,
    /// Replace the spec's 2 % settling time, s (`spec.settling_time_s`).
    #[arg(long, allow_negative_numbers = true)]
    pub settling_time_s: Option<f64>,
    /// Replace the spec's overshoot, percent, 0 up to 100 (`spec.overshoot_pct`).
    #[arg(long, allow_negative_numbers = true)]
    pub overshoot_pct: Option<f64>,
    /// Replace the spec's 10-90 % rise time, s (`spec.rise_time_s`).
    #[arg(long, allow_negative_numbers = true)]
    pub rise_time_s: Option<f64>,
    /// Replace the winding resistance, ohm (`motor.resistance_ohm`).
    #[arg(long, allow_negative_numbers = true)]
    pub resistance_ohm: Option<f64>,
    /// Replace the winding inductance, H (`motor.inductance_h`).
    #[arg(long, allow_negative_numbers = true)]
    pub inductance_h: Option<f64>,
    /// Replace the control period, s (`timing.control_period_s`); the
    /// sample-to-update delay is worked out again from the timing.
    #[arg(long, allow_negative_numbers = true)]
    pub control_period_s: Option<f64>,
    /// Model this sample-to-update delay, in control periods from 0 to 1,
    /// instead of the one the scenario's timing gives.
    #[arg(long, allow_negative_numbers = true)]
    pub delay_periods: Option<f64>,
    /// Replace the current filter's cutoff, Hz (`sense.filter.cutoff_hz`; an RC
    /// filter if the scenario has none).
    #[arg(long, allow_negative_numbers = true)]
    pub filter_cutoff_hz: Option<f64>,
    /// Replace the supply voltage, V (`bridge.supply_v`).
    #[arg(long, allow_negative_numbers = true)]
    pub supply_v: Option<f64>,
    /// Folder for the output files (created if missing).
    #[arg(long, default_value = "ampwright-out")]
    pub out: PathBuf,
    /// Print the report as JSON instead of the table.
    #[arg(long)]
    pub json: bool,
    /// Overlay every other stable method's frequency response on the chosen one's.
    #[arg(long)]
    pub overlay_methods: bool,
    /// Also write one self-contained HTML page (tables and pictures inline)
    /// for a review.
    #[arg(long)]
    pub report: bool,
    /// Run every method's gains over the scenario's `[tolerances]` and
    /// choose by the worst case (the highest yield, then the shortest worst
    /// settling): each method's yield is shown.
    #[arg(long)]
    pub tolerances: bool,
    /// Monte-Carlo boards per method with --tolerances (default:
    /// tolerances.runs).
    #[arg(long)]
    pub runs: Option<u64>,
}

impl DesignArgs {
    fn overrides(&self) -> Overrides {
        Overrides {
            settling_time_s: self.settling_time_s,
            overshoot_pct: self.overshoot_pct,
            rise_time_s: self.rise_time_s,
            resistance_ohm: self.resistance_ohm,
            inductance_h: self.inductance_h,
            control_period_s: self.control_period_s,
            supply_v: self.supply_v,
            filter_cutoff_hz: self.filter_cutoff_hz,
            delay_periods: self.delay_periods,
        }
    }
}

/// Runs the command; returns the exit code: 0 a method meets the spec, 1 none
/// meets it strictly (the table says what each misses and the nearest
/// feasible spec), 2 bad input or an output that could not be written.
pub fn run(args: &DesignArgs) -> i32 {
    let params = match Params::load(&args.scenario) {
        Ok(p) => p,
        Err(e) => {
            eprintln!("ampwright: {e}");
            return 2;
        }
    };
    let report = match prepare::design(&params, &args.overrides()) {
        Ok(r) => r,
        Err(e) => {
            eprintln!("ampwright: {e}");
            return 2;
        }
    };
    let over_tolerances = if args.tolerances {
        match tolerance_table(args, &params, &report) {
            Ok(t) => Some(t),
            Err(e) => {
                eprintln!("ampwright: {e}");
                return 2;
            }
        }
    } else {
        None
    };
    let written = match write_files(args, &report) {
        Ok(w) => w,
        Err(e) => {
            eprintln!("ampwright: {e}");
            return 2;
        }
    };
    let mut out = std::io::stdout().lock();
    let text = if args.json {
        match &over_tolerances {
            Some((_, json)) => {
                let design: serde_json::Value = serde_json::from_str(&report.json()).unwrap_or_default();
                serde_json::to_string_pretty(&serde_json::json!({"design": design, "tolerances": json}))
                    .unwrap_or_default()
            }
            None => report.json(),
        }
    } else {
        let mut t = report.table();
        if let Some((table, _)) = &over_tolerances {
            t.push('\n');
            t.push_str(table);
        }
        for w in &written {
            t.push_str(&format!("wrote {w}\n"));
        }
        t
    };
    // A closed pipe (`| head`) is not an error worth a message.
    let _ = writeln!(out, "{}", text.trim_end());
    if report.chosen().is_some() { 0 } else { 1 }
}

fn write_files(args: &DesignArgs, report: &DesignReport) -> Result<Vec<String>, String> {
    let dir = &args.out;
    super::create_out_dir(dir)?;
    let stem = super::file_stem(&report.name);
    let mut written = Vec::new();
    let mut put = |name: String, body: String| -> Result<(), String> {
        let path = dir.join(name);
        super::write_with(&path, |f| f.write_all(body.as_bytes()))?;
        written.push(path.display().to_string());
        Ok(())
    };
    if let Some(snippet) = report.rust_snippet() {
        put(format!("{stem}-gains.rs"), snippet)?;
    }
    put(format!("{stem}-design.json"), report.json() + "\n")?;
    let mut sections = report.sections();
    if let Some(p) = report.survey.pictures(args.overlay_methods) {
        let locus = root_locus_svg(
            &format!("{}: root locus in z ({})", report.name, p.method),
            &p.locus,
            Some(p.desired),
        );
        put(format!("{stem}-root-locus.svg"), locus.clone())?;
        sections.push(Section::Heading("Pictures".into()));
        sections.push(Section::Picture("root locus".into(), locus));
        let others: Vec<(&str, &[crate::tuning::locus::BodePoint])> =
            p.others.iter().map(|(n, v)| (*n, v.as_slice())).collect();
        let bode = frequency_response_svg(
            &format!("{}: open-loop frequency response ({})", report.name, p.method),
            (p.method, &p.bode),
            &p.margins,
            &others,
        );
        put(format!("{stem}-frequency-response.svg"), bode.clone())?;
        sections.push(Section::Picture("open-loop frequency response".into(), bode));
    }
    if args.report {
        put(
            format!("{stem}-design-report.html"),
            page(&format!("{}: PI design", report.name), &sections),
        )?;
    }
    Ok(written)
}

/// Every method's gains over the tolerances: the table and its JSON.
fn tolerance_table(
    args: &DesignArgs,
    params: &Params,
    report: &DesignReport,
) -> Result<(String, serde_json::Value), String> {
    use crate::sweep::methods::{choose, method_yields, table};
    let overridden = args.overrides().apply(params).map_err(|e| e.to_string())?;
    let weight = overridden.controller.setpoint_weight;
    let n = crate::sweep::Nominal::new(overridden).map_err(|e| e.to_string())?;
    let runs = args.runs.unwrap_or(n.tolerances.runs as u64);
    if !(1..=crate::scenario::tolerances::MAX_RUNS as u64).contains(&runs) {
        return Err(format!(
            "--runs = {runs} must be from 1 to {}",
            crate::scenario::tolerances::MAX_RUNS
        ));
    }
    let yields = method_yields(&n, report, runs, weight, &|| {});
    let chosen = choose(&yields);
    let json = serde_json::json!(
        yields
            .iter()
            .enumerate()
            .map(|(k, m)| serde_json::json!({
                "method": m.method,
                "kp_v_per_a": m.gains.0,
                "ti_s": m.gains.1,
                "setpoint_weight": m.gains.2,
                "runs": m.reduced.runs,
                "passed": m.reduced.passed,
                "yield": m.reduced.yield_fraction(),
                "yield_interval_95": [m.reduced.interval.0, m.reduced.interval.1],
                "chosen_by_worst_case": Some(k) == chosen,
            }))
            .collect::<Vec<_>>()
    );
    Ok((table(&yields, chosen, runs), json))
}
