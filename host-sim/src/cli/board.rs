//! `ampwright board PORT ...`: a board over its bench link. Parse, open the
//! port, call [`crate::bringup`], print, write. Commands that put current
//! into the load print what they will do and need `--energise`.

use std::io::Write;
use std::path::PathBuf;
use std::time::Duration;

use clap::Subcommand;
use pi_core::link::{Request, TriggerWire};

use crate::bench::link::{BoardLink, capture_csv, fault_names, state_name};
use crate::bringup::{self, BringUpOptions, IdentifyPlan, Rotor, StepPlan};
use crate::plot::{fit_svg, overlay_svg};
use crate::results::compare::sig;
use crate::scenario::Params;

/// Arguments of `ampwright board`.
#[derive(Debug, clap::Args)]
pub struct BoardArgs {
    /// The board's serial port (`/dev/ttyACM0`, `COM3`, or the path
    /// `ampwright virtual-board` prints).
    pub port: String,
    /// The line's speed, baud.
    #[arg(long, default_value_t = 115_200)]
    pub baud: u32,
    /// How long to wait for each reply, ms.
    #[arg(long, default_value_t = 1000)]
    pub timeout_ms: u64,
    /// Folder for the captures and pictures (created if missing).
    #[arg(long, default_value = "ampwright-out", global = true)]
    pub out: PathBuf,
    /// What to do.
    #[command(subcommand)]
    pub action: BoardAction,
}

/// How the shaft is held, as the command line says it.
#[derive(Clone, Copy, Debug, PartialEq, Eq, clap::ValueEnum)]
pub enum RotorArg {
    /// Clamped: R and L only.
    Held,
    /// Free to turn (give --inertia-kg-m2): Ke as well.
    Free,
}

/// A capture trigger, as the command line says it.
#[derive(Clone, Copy, Debug, PartialEq, Eq, clap::ValueEnum)]
pub enum TriggerArg {
    /// At once.
    Immediate,
    /// When the target current changes.
    Setpoint,
    /// When an excitation starts.
    Excitation,
    /// When the measured current rises through --level-a.
    Rising,
    /// When it falls through --level-a.
    Falling,
}

/// What to do with the board.
#[derive(Debug, Subcommand)]
pub enum BoardAction {
    /// The board's loop state, faults, gains, limits and capture size.
    Status,
    /// Stop the loop: safe output.
    Disable,
    /// Clear latched faults (the loop stays disabled).
    Clear,
    /// Write new gains (applied without a bump while the loop runs).
    SetGains {
        /// Proportional gain, V/A.
        #[arg(long)]
        kp_v_per_a: f32,
        /// Integral time, s.
        #[arg(long)]
        ti_s: f32,
        /// Share of the setpoint in the proportional term, 0 to 1.
        #[arg(long, default_value_t = 1.0)]
        setpoint_weight: f32,
    },
    /// Arm the capture, wait for it to fill, write it as a capture CSV.
    Capture {
        /// What starts it.
        #[arg(long, value_enum, default_value_t = TriggerArg::Immediate)]
        trigger: TriggerArg,
        /// The level of a rising or falling trigger, A.
        #[arg(long, default_value_t = 0.0)]
        level_a: f32,
        /// One tick kept in this many.
        #[arg(long, default_value_t = 1)]
        decimation: u16,
        /// Samples to keep (at most the board's capacity).
        #[arg(long)]
        samples: u16,
        /// Give up waiting for the trigger after this long, s.
        #[arg(long, default_value_t = 30.0)]
        wait_s: f64,
    },
    /// A closed-loop current step with a capture, written as a capture CSV
    /// that `ampwright identify` and `ampwright compare` read.
    Step {
        /// The current after the step, A.
        #[arg(long)]
        to_a: f64,
        /// The current before it, A.
        #[arg(long, default_value_t = 0.0)]
        from_a: f64,
        /// How long to capture, s.
        #[arg(long, default_value_t = 0.02)]
        window_s: f64,
        /// Run it: the load is driven.
        #[arg(long)]
        energise: bool,
    },
    /// Open-loop voltage steps with a capture, fitted by the host: R and L
    /// (and Ke with the shaft free), a `[motor]` section, a picture.
    Identify {
        /// How the shaft is during the test.
        #[arg(long, value_enum)]
        rotor: RotorArg,
        /// Rotor and load inertia, kg m^2 (with --rotor free).
        #[arg(long)]
        inertia_kg_m2: Option<f64>,
        /// A rough resistance (ohmmeter or datasheet), ohm: sets the test
        /// voltage and the time at each level.
        #[arg(long)]
        resistance_ohm: f64,
        /// A rough inductance, H.
        #[arg(long)]
        inductance_h: f64,
        /// The current the high level aims at, A (default half the board's
        /// setpoint limit).
        #[arg(long)]
        test_current_a: Option<f64>,
        /// Run it: the load is driven.
        #[arg(long)]
        energise: bool,
    },
    /// Identify, design from the scenario's spec, write the gains, verify
    /// with a step, compare it with the simulation, and give a verdict with
    /// the gains.
    BringUp {
        /// The scenario: its spec, its drive chain, and rough R and L.
        scenario: PathBuf,
        /// How the shaft is during the identification and the step.
        #[arg(long, value_enum)]
        rotor: RotorArg,
        /// Rotor and load inertia, kg m^2 (with --rotor free).
        #[arg(long)]
        inertia_kg_m2: Option<f64>,
        /// The identification's current, A (default half the board's limit).
        #[arg(long)]
        test_current_a: Option<f64>,
        /// The verification step, A (default the test current).
        #[arg(long)]
        step_a: Option<f64>,
        /// The comparison's tolerance: normalised RMS error, percent.
        #[arg(long, default_value_t = 10.0)]
        max_error_pct: f64,
        /// Print the result as JSON.
        #[arg(long)]
        json: bool,
        /// Run it: the load is driven.
        #[arg(long)]
        energise: bool,
    },
}

fn rotor(arg: RotorArg, inertia: Option<f64>) -> Result<Rotor, String> {
    match (arg, inertia) {
        (RotorArg::Held, _) => Ok(Rotor::Held),
        (RotorArg::Free, Some(j)) if j.is_finite() && j > 0.0 && j <= 1e3 => Ok(Rotor::Free { inertia_kg_m2: j }),
        (RotorArg::Free, Some(j)) => Err(format!(
            "--inertia-kg-m2 = {j} must be above 0 and at most 1e3 kg m^2"
        )),
        (RotorArg::Free, None) => Err(
            "--rotor free needs --inertia-kg-m2 (the rotor's and its load's inertia); or clamp the shaft and give --rotor held"
                .into(),
        ),
    }
}

/// Runs the command; returns the exit code: 0 done (and for `bring-up`, the
/// verdict passed), 1 a bring-up whose step missed the spec or the
/// simulation, 2 bad arguments, a board that refused or did not answer, a
/// missing `--energise`, or an output that could not be written.
pub fn run(args: &BoardArgs) -> i32 {
    match run_inner(args) {
        Ok(code) => code,
        Err(e) => {
            eprintln!("ampwright: {e}");
            2
        }
    }
}

/// Without `--energise`: what would happen, and no current. The plan goes
/// to stderr with the progress notes; stdout keeps the results (and JSON).
fn confirm(energise: bool, plan: &str) -> Result<(), String> {
    eprintln!("{plan}");
    if energise {
        Ok(())
    } else {
        Err("nothing was applied: this drives the load; check the setup above, then add --energise".into())
    }
}

fn run_inner(args: &BoardArgs) -> Result<i32, String> {
    let port = serialport::new(&args.port, args.baud)
        .timeout(Duration::from_millis(20))
        .open_native()
        .map_err(|e| {
            format!(
                "cannot open the port {}: {e}; check the path and that no other program holds it",
                args.port
            )
        })?;
    let mut link = BoardLink::new(port, Duration::from_millis(args.timeout_ms.max(1)));
    let hello = link.hello().map_err(|e| e.0)?;
    let mut out = std::io::stdout().lock();
    let write = |name: &str, text: &str| -> Result<PathBuf, String> {
        super::create_out_dir(&args.out)?;
        let path = args.out.join(name);
        super::write_with(&path, |f| f.write_all(text.as_bytes()))?;
        Ok(path)
    };
    match &args.action {
        BoardAction::Status => {
            let s = link.status().map_err(|e| e.0)?;
            let g = link.gains().map_err(|e| e.0)?;
            let (min_a, max_a, slew) = link.limits().map_err(|e| e.0)?;
            let _ = writeln!(
                out,
                "board on {}: control period {} us, capture of {} samples\n\
                 loop {}, faults latched: {}\n\
                 target {} A, setpoint {} A, measured {} A, {} V asked, duty {:.4}, I^2t heat {:.3}\n\
                 gains: Kp = {} V/A, Ti = {} ms, setpoint weight {}\n\
                 setpoint limits: {} A to {} A, slew {} A/s",
                args.port,
                sig(hello.period_s * 1e6),
                hello.capture_capacity,
                state_name(s.state),
                fault_names(s.latched),
                sig(s.target_a as f64),
                sig(s.setpoint_a as f64),
                sig(s.current_a as f64),
                sig(s.commanded_v as f64),
                s.duty,
                s.heat,
                sig(g.kp_v_per_a),
                sig(g.ti_s * 1e3),
                sig(g.setpoint_weight),
                sig(min_a),
                sig(max_a),
                sig(slew)
            );
        }
        BoardAction::Disable => {
            link.command(Request::Disable).map_err(|e| e.0)?;
            let _ = writeln!(out, "disabled");
        }
        BoardAction::Clear => {
            link.command(Request::ClearFaults).map_err(|e| e.0)?;
            let _ = writeln!(out, "faults cleared");
        }
        BoardAction::SetGains {
            kp_v_per_a,
            ti_s,
            setpoint_weight,
        } => {
            link.command(Request::WriteGains {
                kp_v_per_a: *kp_v_per_a,
                ti_s: *ti_s,
                setpoint_weight: *setpoint_weight,
            })
            .map_err(|e| e.0)?;
            let g = link.gains().map_err(|e| e.0)?;
            let _ = writeln!(
                out,
                "the board runs Kp = {} V/A, Ti = {} ms, setpoint weight {}",
                sig(g.kp_v_per_a),
                sig(g.ti_s * 1e3),
                sig(g.setpoint_weight)
            );
        }
        BoardAction::Capture {
            trigger,
            level_a,
            decimation,
            samples,
            wait_s,
        } => {
            let t = match trigger {
                TriggerArg::Immediate => TriggerWire::Immediate,
                TriggerArg::Setpoint => TriggerWire::SetpointChange,
                TriggerArg::Excitation => TriggerWire::Excitation,
                TriggerArg::Rising | TriggerArg::Falling => TriggerWire::Level {
                    level_a: *level_a,
                    rising: *trigger == TriggerArg::Rising,
                },
            };
            if !(wait_s.is_finite() && *wait_s > 0.0) {
                return Err(format!("--wait-s = {wait_s} must be above 0 s"));
            }
            link.arm(t, *decimation, *samples).map_err(|e| e.0)?;
            let _ = writeln!(out, "armed; waiting for the trigger and {samples} samples");
            let c = link
                .collect(Duration::from_secs_f64(*wait_s), hello.period_s)
                .map_err(|e| e.0)?;
            let path = write("board-capture.csv", &capture_csv(&c, None))?;
            let _ = writeln!(out, "wrote {} ({} samples)", path.display(), c.samples.len());
        }
        BoardAction::Step {
            to_a,
            from_a,
            window_s,
            energise,
        } => {
            let plan = StepPlan::new(*from_a, *to_a, *window_s, &hello).map_err(|e| e.0)?;
            confirm(*energise, &plan.describe())?;
            let csv = bringup::step(&mut link, &plan).map_err(|e| e.0)?;
            let path = write("board-step.csv", &csv)?;
            let _ = writeln!(
                out,
                "wrote {}; `ampwright compare {} SCENARIO` sets it beside the simulation",
                path.display(),
                path.display()
            );
        }
        BoardAction::Identify {
            rotor: r,
            inertia_kg_m2,
            resistance_ohm,
            inductance_h,
            test_current_a,
            energise,
        } => {
            for (flag, v) in [
                ("--resistance-ohm", *resistance_ohm),
                ("--inductance-h", *inductance_h),
            ] {
                if !(v.is_finite() && v > 0.0) {
                    return Err(format!(
                        "{flag} = {v} must be above 0; give a rough value from the datasheet or a meter"
                    ));
                }
            }
            let shaft = rotor(*r, *inertia_kg_m2)?;
            let (_, max_a, _) = link.limits().map_err(|e| e.0)?;
            let plan = IdentifyPlan::new(
                *resistance_ohm,
                *inductance_h,
                &hello,
                max_a,
                *test_current_a,
                shaft,
            )
            .map_err(|e| e.0)?;
            confirm(*energise, &plan.describe())?;
            let id = bringup::identify(&mut link, &plan).map_err(|e| e.0)?;
            let csv = write("board-identify.csv", &id.csv)?;
            let name = csv.display().to_string();
            let (table, section, model) = match &id.rotor {
                Some(f) => (f.table(&name), f.motor_section(&name), f.model_a.clone()),
                None => (
                    id.rl.table(&name),
                    id.rl.motor_section(&name),
                    id.rl.model_a.clone(),
                ),
            };
            let svg = fit_svg(
                "the board's identification: capture and fitted model",
                &format!(
                    "R = {:.4} ohm through the bridge, L = {:.4} mH",
                    id.resistance_ohm().value,
                    id.inductance_h().value * 1e3
                ),
                &id.capture.time_s,
                &id.capture.current_a,
                &model,
                &id.capture.voltage_v,
            );
            let svg = write("board-identify-fit.svg", &svg)?;
            let _ = writeln!(
                out,
                "{}\n{}wrote {}\nwrote {}",
                table.trim_end(),
                section,
                csv.display(),
                svg.display()
            );
        }
        BoardAction::BringUp {
            scenario,
            rotor: r,
            inertia_kg_m2,
            test_current_a,
            step_a,
            max_error_pct,
            json,
            energise,
        } => {
            if !(max_error_pct.is_finite() && *max_error_pct > 0.0) {
                return Err(format!(
                    "--max-error-pct = {max_error_pct} must be a percentage above 0"
                ));
            }
            let params = Params::load(scenario).map_err(|e| e.to_string())?;
            let options = BringUpOptions {
                rotor: rotor(*r, *inertia_kg_m2)?,
                test_current_a: *test_current_a,
                step_a: *step_a,
                max_error_pct: *max_error_pct,
            };
            confirm(
                *energise,
                &format!(
                    "bring-up: an identification (open-loop voltage steps, {}), then the new gains are written and a closed-loop step is run at the identification's current unless --step-a says otherwise",
                    match options.rotor {
                        Rotor::Held => "rotor held: clamp the shaft",
                        Rotor::Free { .. } => "shaft free to turn",
                    }
                ),
            )?;
            let b = bringup::bring_up(&mut link, &params, &options, &mut |s| eprintln!("{s}"))
                .map_err(|e| e.0)?;
            let ident_csv = write("bringup-identify.csv", &b.identified.csv)?;
            let step_csv = write("bringup-step.csv", &b.step_csv)?;
            let c = &b.comparison;
            let compare_svg = write(
                "bringup-step-compare.svg",
                &overlay_svg(
                    "verification step on the board and its simulation",
                    &format!(
                        "Kp = {:.4} V/A, Ti = {:.4} ms; normalised RMS error {:.4}",
                        b.designed.kp_v_per_a,
                        b.designed.ti_s * 1e3,
                        c.nrmse
                    ),
                    &c.time_s,
                    (&c.capture_a, &c.simulated_a, &c.voltage_v),
                    ("captured current", "simulated current", "captured - simulated"),
                ),
            )?;
            let gains = write("bringup-gains.toml", &b.gains_toml())?;
            let text = if *json {
                b.json()
            } else {
                let mut t = b.table(&scenario.display().to_string());
                for p in [&ident_csv, &step_csv, &compare_svg, &gains] {
                    t.push_str(&format!("wrote {}\n", p.display()));
                }
                t
            };
            let _ = writeln!(out, "{}", text.trim_end());
            return Ok(if b.passed() { 0 } else { 1 });
        }
    }
    Ok(0)
}
