//! The built-in demo: the invented sample-carousel gearmotor on the invented bench
//! board, under the real `pi-core` current loop.
//!
//! Three runs, each printed as a table:
//! 1. a 1.5 A current step (the rotor held, as on a locked-rotor bench test);
//! 2. a heavy 3.9 A demand held until the I^2t model (class 10, 2 A rated) trips;
//! 3. a current-sense failure (the amplifier output shorted to ground) mid-run.

use host_sim::demo;
use pi_core::{Command, CurrentLoop, LoopState};

fn main() {
    if let Err(e) = run() {
        eprintln!("demo configuration refused: {e}");
        std::process::exit(2);
    }
}

fn run() -> Result<(), pi_core::ConfigError> {
    println!(
        "Ampwright demo: invented carousel motor AW-C24 (1.9 ohm, 2.4 mH) on bench board rev A, 24 V bus"
    );
    println!(
        "controller: Kp = {:.2} V/A, Ti = {:.3} ms, Ts = 50 us\n",
        demo::gains()?.kp_v_per_a(),
        demo::gains()?.ti_s() * 1e3
    );

    println!("1) step to 1.5 A");
    println!(
        "{:>8} {:>10} {:>10} {:>8}",
        "t_ms", "setpoint_a", "current_a", "duty"
    );
    let mut cl = demo::current_loop()?;
    let mut bench = demo::bench();
    enable(&mut cl, 1.5);
    for k in 0..100 {
        let rec = bench.tick(&mut cl);
        if k % 5 == 0 {
            let st = cl.status();
            println!(
                "{:>8.2} {:>10.3} {:>10.4} {:>8.3}",
                rec.t_s * 1e3,
                st.setpoint_a,
                rec.current_a,
                rec.command.signed_duty()
            );
        }
    }

    println!("\n2) 3.9 A held: I^2t overload (class 10, rated 2 A)");
    println!("{:>8} {:>10} {:>8} {:>10}", "t_s", "current_a", "heat", "state");
    let mut cl = demo::current_loop()?;
    let mut bench = demo::bench();
    enable(&mut cl, 3.9);
    let per_second = (1.0 / demo::PERIOD_S) as u64;
    for k in 0..(300 * per_second) {
        let rec = bench.tick(&mut cl);
        let st = cl.status();
        if k % (20 * per_second) == 0 || st.state == LoopState::Faulted {
            println!(
                "{:>8.1} {:>10.3} {:>8.3} {:>10?}",
                rec.t_s, rec.current_a, st.heat, st.state
            );
        }
        if st.state == LoopState::Faulted {
            println!("tripped: {} (first cause: {:?})", st.latched, st.first_fault);
            match cl.apply(Command::ClearFaults) {
                Ok(_) => println!("clear accepted"),
                Err(e) => println!("clear refused: {e}"),
            }
            break;
        }
    }

    println!("\n3) sense amplifier output shorted to ground at t = 2 ms");
    println!("{:>8} {:>8} {:>8} {:>10}", "t_ms", "counts", "duty", "state");
    let mut cl = demo::current_loop()?;
    let mut bench = demo::bench();
    enable(&mut cl, 1.5);
    for k in 0..44 {
        if k == 40 {
            // The failure: the ADC now reads 0 counts whatever the current.
            bench.adc.offset_counts = -1e6;
        }
        let rec = bench.tick(&mut cl);
        if k >= 38 {
            println!(
                "{:>8.2} {:>8} {:>8.3} {:>10?}",
                rec.t_s * 1e3,
                rec.counts,
                rec.command.signed_duty(),
                cl.state()
            );
        }
    }
    let st = cl.status();
    println!("latched: {} (first cause: {:?})", st.latched, st.first_fault);
    Ok(())
}

fn enable(cl: &mut CurrentLoop, current_a: f32) {
    for command in [Command::Enable, Command::SetCurrent(current_a)] {
        if let Err(e) = cl.apply(command) {
            eprintln!("command refused: {e}");
        }
    }
}
