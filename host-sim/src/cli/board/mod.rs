//! `ampwright board PORT ...`: a board over its bench link. Parse, open the
//! port, call [`crate::bringup`], print, write. Commands that put current
//! into the load print what they will do and need `--energise`.

use std::io::Write;
use std::path::PathBuf;
use std::time::Duration;

use pi_core::link::{MethodWire, Request, TriggerWire};

use crate::bench::link::{BoardLink, DesignAsk, capture_csv, fault_names, state_name};
use crate::bringup::{self, BringUpOptions, IdentifyPlan, Rotor, StepPlan};

mod args;

use crate::plot::{fit_svg, overlay_svg};
use crate::results::compare::sig;
use crate::scenario::Params;
pub use args::{BoardAction, BoardArgs, MethodArg, RotorArg, TriggerArg};

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
            // The board names its fields; the user wrote the options.
            .map_err(|e| {
                e.0.replace("kp_v_per_a =", "--kp-v-per-a =")
                    .replace("ti_s =", "--ti-s =")
                    .replace("setpoint_weight =", "--setpoint-weight =")
            })?;
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
        BoardAction::Design {
            method,
            resistance_ohm,
            inductance_h,
            settling_time_s,
            overshoot_pct,
            rise_time_s,
            delay_periods,
            write: apply,
        } => {
            for (flag, v) in [
                ("--resistance-ohm", *resistance_ohm),
                ("--inductance-h", *inductance_h),
                ("--settling-time-s", *settling_time_s),
                ("--rise-time-s", rise_time_s.unwrap_or(1.0)),
            ] {
                if !(v.is_finite() && v > 0.0) {
                    return Err(format!("{flag} = {v} must be above 0"));
                }
            }
            if !(0.0..100.0).contains(overshoot_pct) {
                return Err(format!(
                    "--overshoot-pct = {overshoot_pct} must be from 0 % up to (not including) 100 %"
                ));
            }
            if !(0.0..=1.0).contains(delay_periods) {
                return Err(format!(
                    "--delay-periods = {delay_periods} must be from 0 to 1 control period"
                ));
            }
            let ask = DesignAsk {
                method: match method {
                    MethodArg::DirectDiscrete => MethodWire::DirectDiscrete,
                    MethodArg::RootLocus => MethodWire::RootLocus,
                    MethodArg::ModulusOptimum => MethodWire::ModulusOptimum,
                    MethodArg::Cancellation => MethodWire::Cancellation,
                },
                resistance_ohm: *resistance_ohm,
                inductance_h: *inductance_h,
                settling_time_s: *settling_time_s,
                overshoot_pct: *overshoot_pct,
                rise_time_s: *rise_time_s,
                delay_periods: *delay_periods,
            };
            let g = link.design(&ask).map_err(|e| e.0)?;
            let _ = writeln!(
                out,
                "the board designed Kp = {} V/A, Ti = {} ms, setpoint weight {} (f32, its own design code)",
                sig(g.kp_v_per_a),
                sig(g.ti_s * 1e3),
                sig(g.setpoint_weight)
            );
            if *apply {
                link.command(Request::WriteGains {
                    kp_v_per_a: g.kp_v_per_a as f32,
                    ti_s: g.ti_s as f32,
                    setpoint_weight: g.setpoint_weight as f32,
                })
                .map_err(|e| e.0)?;
                let _ = writeln!(out, "written: the board runs them");
            }
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
            let on_board = match &id.on_board {
                Ok(b) => format!(
                    "the board's own least squares (f32, {} samples): {} ohm through the bridge, {} mH\n",
                    b.samples,
                    sig(b.resistance_ohm),
                    sig(b.inductance_h * 1e3)
                ),
                Err(e) => format!("the board's own least squares: none ({e})\n"),
            };
            let on_board = format!(
                "{on_board}R was measured through the bridge: it includes the switches' on-resistance (two of them in series with a sign-magnitude bridge); the winding alone is that much less\n"
            );
            let _ = writeln!(
                out,
                "{}\n{on_board}{}wrote {}\nwrote {}",
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
