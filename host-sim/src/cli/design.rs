//! `ampwright design <scenario>`.

use pi_core::design::Spec;
use pi_core::design::analysis::{self, OpenLoop};
use pi_core::design::discrete::target_pole;

use crate::cli::DesignArgs;
use crate::design_report::{self, DesignFailure};
use crate::plot::{frequency_response_svg, root_locus_svg};
use crate::scenario::Scenario;

/// Runs the command; returns the exit code.
pub fn run(args: &DesignArgs) -> i32 {
    let mut scenario = match Scenario::load(&args.scenario) {
        Ok(s) => s,
        Err(e) => {
            eprintln!("ampwright: {e}");
            return 2;
        }
    };
    if let Some(ts) = args.settling_time_s {
        scenario.spec.settling_time_s = Some(ts);
    }
    if let Some(os) = args.overshoot_pct {
        scenario.spec.overshoot_pct = Some(os);
    }
    let report = match design_report::basis(&scenario).and_then(|mut b| {
        let set = |slot: &mut f64, v: Option<f64>| {
            if let Some(v) = v {
                *slot = v;
            }
        };
        set(&mut b.resistance_ohm, args.resistance_ohm);
        set(&mut b.inductance_h, args.inductance_h);
        set(&mut b.period_s, args.control_period_s);
        set(&mut b.filter_tau_s, args.filter_tau_s);
        set(&mut b.supply_v, args.supply_v);
        if let Some(d) = args.delay {
            b.delay_periods = if d { 1.0 } else { 0.0 };
        }
        design_report::design_basis(&scenario.name, b)
    }) {
        Ok(r) => r,
        Err(DesignFailure::Infeasible(why)) => {
            eprintln!("ampwright: {why}");
            return 2;
        }
        Err(e) => {
            eprintln!("ampwright: {e}");
            return 2;
        }
    };
    match write_files(args, &report) {
        Ok(written) => {
            if args.json {
                println!("{}", report.json());
            } else {
                print!("{}", report.table());
                for w in written {
                    println!("wrote {w}");
                }
            }
            0
        }
        Err(e) => {
            eprintln!("ampwright: {e}");
            2
        }
    }
}

fn write_files(args: &DesignArgs, report: &design_report::DesignReport) -> Result<Vec<String>, String> {
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
    if let Some((plant, sampling, gains)) = report.chosen_open_loop() {
        let b = &report.basis;
        let desired = Spec::new(b.settling_time_s, b.overshoot)
            .ok()
            .map(|s| target_pole(&s, b.period_s));
        let method = report.chosen().map_or("", |m| m.method);
        put(
            format!("{stem}-root-locus.svg"),
            root_locus_svg(
                &format!("{}: root locus in z ({method})", report.name),
                &plant,
                &sampling,
                &gains,
                desired,
            ),
        )?;
        let open = OpenLoop::new(&plant, &sampling, &gains);
        let m = analysis::margins(&open, b.period_s, design_report::GRID_POINTS);
        put(
            format!("{stem}-frequency-response.svg"),
            frequency_response_svg(
                &format!("{}: open-loop frequency response ({method})", report.name),
                &open,
                b.period_s,
                &m,
            ),
        )?;
    }
    Ok(written)
}
