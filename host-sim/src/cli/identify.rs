//! `ampwright identify <capture>`: parse, read the capture, identify, print, write.

use std::io::Write;
use std::path::PathBuf;

use crate::bench::identify::identify_rl;
use crate::bench::rotor::identify_rotor;
use crate::bench::rotor_current::identify_from_current;
use crate::plot::fit_svg;

use super::columns::ColumnArgs;

/// Arguments of `ampwright identify`.
#[derive(Debug, clap::Args)]
pub struct IdentifyArgs {
    /// The capture: a CSV with a header row (time_s, current_a, and voltage_v
    /// or duty with bus_v; `ampwright simulate`'s trace reads as it is).
    pub capture: PathBuf,
    /// Which columns hold what.
    #[command(flatten)]
    pub columns: ColumnArgs,
    /// The voltage's delay behind the samples, whole samples (default: found from the data).
    #[arg(long)]
    pub delay_samples: Option<usize>,
    /// The rotor's inertia, kg m^2, when it is known: with a free rotor and
    /// no speed column, Ke is then fitted from the current alone.
    #[arg(long)]
    pub inertia_kg_m2: Option<f64>,
    /// Fit a held rotor (R and L only) even when the capture's speed column
    /// shows the rotor turning.
    #[arg(long)]
    pub locked_rotor: bool,
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
    let name = args.capture.display().to_string();
    let cap = match args.columns.read(&args.capture, None) {
        Ok(c) => c,
        Err(e) => {
            eprintln!("ampwright: {e}");
            return 2;
        }
    };
    if let Some(j) = args.inertia_kg_m2
        && !(j.is_finite() && j > 0.0 && j <= 1e3)
    {
        eprintln!(
            "ampwright: --inertia-kg-m2 = {j} must be above 0 and at most 1e3 kg m^2; give the rotor's inertia with its load"
        );
        return 2;
    }
    // A speed column on which the rotor turns: the free-rotor fit.
    let rotor = if args.locked_rotor {
        None
    } else {
        identify_rotor(&cap, args.delay_samples)
    };
    let (table, section, json, model, subtitle) = match rotor {
        Some(f) => (
            f.table(&name),
            f.motor_section(&name),
            f.json(),
            f.model_a.clone(),
            format!(
                "free rotor: R = {:.4} ohm, L = {:.4} mH, Ke = {:.4} mV s/rad, voltage delay {} samples; normalised RMS error {:.4}",
                f.resistance_ohm.value,
                f.inductance_h.value * 1e3,
                f.back_emf_v_s_per_rad.value * 1e3,
                f.delay_samples,
                f.current_nrmse
            ),
        ),
        None => match identify_rl(&cap, &name, args.delay_samples) {
            Ok(f) => match args
                .inertia_kg_m2
                .and_then(|j| identify_from_current(&cap, &f, j))
            {
                Some(g) => (
                    g.table(&name),
                    g.motor_section(&name),
                    g.json(),
                    g.model_a.clone(),
                    format!(
                        "free rotor from the current, J given: R = {:.4} ohm, L = {:.4} mH, Ke = {:.4} mV s/rad; normalised RMS error {:.4}",
                        g.resistance_ohm.value,
                        g.inductance_h.value * 1e3,
                        g.back_emf_v_s_per_rad.value * 1e3,
                        g.nrmse
                    ),
                ),
                None => (
                    f.table(&name),
                    f.motor_section(&name),
                    f.json(),
                    f.model_a.clone(),
                    format!(
                        "R = {:.4} ohm, L = {:.4} mH, voltage delay {} samples; normalised RMS error {:.4}",
                        f.resistance_ohm.value,
                        f.inductance_h.value * 1e3,
                        f.delay_samples,
                        f.nrmse
                    ),
                ),
            },
            Err(e) => {
                eprintln!("ampwright: {e}");
                return 2;
            }
        },
    };
    let stem = super::file_stem(
        &args
            .capture
            .file_stem()
            .map_or("capture".into(), |s| s.to_string_lossy().into_owned()),
    );
    let mut written = Vec::new();
    let outcome = super::create_out_dir(&args.out).and_then(|()| {
        let motor = args.out.join(format!("{stem}-motor.toml"));
        super::write_with(&motor, |f| f.write_all(section.as_bytes()))?;
        written.push(motor.display().to_string());
        let svg = args.out.join(format!("{stem}-fit.svg"));
        let doc = fit_svg(
            &format!("{stem}: capture and fitted model"),
            &subtitle,
            &cap.time_s,
            &cap.current_a,
            &model,
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
        json
    } else {
        let mut t = table;
        t.push('\n');
        t.push_str(&section);
        for w in &written {
            t.push_str(&format!("wrote {w}\n"));
        }
        t
    };
    let _ = writeln!(out, "{}", text.trim_end());
    0
}
