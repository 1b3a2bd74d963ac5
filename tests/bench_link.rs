//! The bench link end to end: the host side talking to the virtual board (the
//! real pi-core handler, capture and loop on the simulated drive chain of an
//! invented gearmotor sample with its shaft clamped), in process and through
//! a pseudo-terminal.

use std::path::PathBuf;
use std::time::Duration;

use host_sim::bench::link::BoardLink;
use host_sim::bench::virtual_board::{VirtualBoard, VirtualPort};
use host_sim::bringup::{BringUpOptions, Rotor, bring_up};
use host_sim::scenario::Params;

fn scenario(name: &str) -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
        .join("../host-sim/scenarios")
        .join(name)
}

fn board() -> VirtualPort {
    let prepared = host_sim::prepare::load(&scenario("carousel_bench.toml")).unwrap();
    VirtualPort::new(VirtualBoard::new(&prepared.scenario, 2e-3).unwrap())
}

#[test]
fn the_bring_up_finds_the_sample_and_its_gains_meet_the_spec() {
    let mut link = BoardLink::new(board(), Duration::from_secs(1));
    link.poll = Duration::ZERO;
    let params = Params::load(&scenario("carousel_step.toml")).unwrap();
    let options = BringUpOptions {
        rotor: Rotor::Held,
        test_current_a: None,
        step_a: None,
        max_error_pct: 10.0,
    };
    let b = bring_up(&mut link, &params, &options, &mut |s| eprintln!("{s}")).unwrap();
    let (r, l) = b.winding;
    eprintln!("R {r} L {l} checks {:?} nrmse {}", b.checks, b.comparison.nrmse);
    assert!((r / 2.05 - 1.0).abs() < 0.03, "R = {r}");
    assert!((l / 2.2e-3 - 1.0).abs() < 0.03, "L = {l}");
    assert!(b.passed());
    // The board's own f32 least squares on the same samples and delay is
    // the host's linear stage (pi-core's identify in f64) to within 1 %.
    let on_board = b.identified.on_board.as_ref().unwrap();
    let rl = &b.identified.rl;
    assert!(
        (on_board.resistance_ohm / rl.linear_resistance_ohm - 1.0).abs() < 0.01,
        "{on_board:?} against {}",
        rl.linear_resistance_ohm
    );
    assert!((on_board.inductance_h / rl.linear_inductance_h - 1.0).abs() < 0.01);
    // Its f32 design with the host's method, winding and spec: the host's
    // gains to f32's digits.
    let g = b.on_board_gains.as_ref().unwrap();
    assert!((g.kp_v_per_a / b.designed.kp_v_per_a - 1.0).abs() < 1e-4, "{g:?}");
    assert!((g.ti_s / b.designed.ti_s - 1.0).abs() < 1e-4);
}

/// The same link through a pseudo-terminal, as `ampwright virtual-board`
/// serves it: the board in a thread on the master side, the host on the
/// path of the other side, opened as a serial port.
#[cfg(unix)]
#[test]
fn the_link_runs_through_a_pseudo_terminal() {
    use serialport::SerialPort;
    use std::sync::Arc;
    use std::sync::atomic::{AtomicBool, Ordering};

    let (mut master, slave) = serialport::TTYPort::pair().unwrap();
    master.set_timeout(Duration::from_millis(5)).unwrap();
    let path = slave.name().unwrap();
    let done = Arc::new(AtomicBool::new(false));
    let stop = done.clone();
    let mut vb = board().board;
    let server = std::thread::spawn(move || {
        vb.serve(&mut master, |_| !stop.load(Ordering::Relaxed)).unwrap();
        drop(slave);
        vb.requests()
    });
    let port = serialport::new(&path, 115_200)
        .timeout(Duration::from_millis(5))
        .open_native()
        .unwrap();
    let mut link = BoardLink::new(port, Duration::from_secs(2));
    let hello = link.hello().unwrap();
    assert_eq!(hello.capture_capacity, 2048);
    assert!((hello.period_s - 50e-6).abs() < 1e-9);
    let s = link.status().unwrap();
    assert_eq!((s.state, s.latched), (0, 0));
    // A refusal comes back over the line naming the field.
    let e = link
        .command(pi_core::link::Request::WriteGains {
            kp_v_per_a: 2.0,
            ti_s: -1.0,
            setpoint_weight: 1.0,
        })
        .unwrap_err();
    assert!(e.0.contains("ti_s = -1 must be a value above 0"), "{e}");
    done.store(true, Ordering::Relaxed);
    assert_eq!(server.join().unwrap(), 3);
}

/// Serves `vb` on a new pseudo-terminal from a thread until the flag is
/// set; the port's path, the flag, and the thread (which returns the board).
#[cfg(unix)]
fn serve_on_pty(
    mut vb: VirtualBoard,
) -> (
    String,
    std::sync::Arc<std::sync::atomic::AtomicBool>,
    std::thread::JoinHandle<VirtualBoard>,
) {
    use serialport::SerialPort;
    use std::sync::atomic::Ordering;
    let (mut master, slave) = serialport::TTYPort::pair().unwrap();
    master.set_timeout(Duration::from_millis(5)).unwrap();
    let path = slave.name().unwrap();
    let done = std::sync::Arc::new(std::sync::atomic::AtomicBool::new(false));
    let stop = done.clone();
    let server = std::thread::spawn(move || {
        vb.serve(&mut master, |_| !stop.load(Ordering::Relaxed)).unwrap();
        drop(slave);
        vb
    });
    (path, done, server)
}

/// The board commands as a user runs them, against the virtual board on a
/// pseudo-terminal: nothing is driven without `--energise`, a step is
/// written as a capture that `compare` reads and that agrees with the
/// scenario, and a refused value is exit 2.
#[cfg(unix)]
#[test]
fn the_board_commands_drive_nothing_without_energise_and_write_captures() {
    use pi_core::capture::CaptureState;
    use std::sync::atomic::Ordering;

    let out = ampwright_tests::temp_dir("board_commands");
    let run = |path: &str, args: &[&str]| {
        let mut all = vec!["ampwright", "board", path, "--out", out.to_str().unwrap()];
        all.extend_from_slice(args);
        host_sim::cli::main(all.iter().map(std::ffi::OsString::from))
    };
    let (path, done, server) = serve_on_pty(board().board);
    assert_eq!(run(&path, &["status"]), 0);
    // Without --energise: exit 2, and the loop never ran.
    assert_eq!(run(&path, &["step", "--to-a", "1.5"]), 2);
    assert_eq!(
        run(
            &path,
            &[
                "identify",
                "--rotor",
                "held",
                "--resistance-ohm",
                "1.9",
                "--inductance-h",
                "2.4e-3"
            ]
        ),
        2
    );
    assert_eq!(
        run(&path, &["set-gains", "--kp-v-per-a", "-3", "--ti-s", "1e-3"]),
        2
    );
    done.store(true, Ordering::Relaxed);
    let vb = server.join().unwrap();
    let fw = vb.firmware();
    let s = fw.current_loop().status();
    assert_eq!(
        (s.state, s.excitation_end, s.setpoint_a),
        (pi_core::LoopState::Disabled, None, 0.0)
    );
    assert_eq!(fw.capture().state(), CaptureState::Idle, "never armed");
    assert_eq!(fw.refused(), 0);
    assert_eq!(
        fw.current_loop().pi().config().gains().kp_v_per_a(),
        12.06,
        "the refused gains changed nothing"
    );
    assert!(!out.join("board-step.csv").exists());

    let (path, done, server) = serve_on_pty(vb);
    // A capture of the idle loop, and a design on the board written to it.
    assert_eq!(
        run(&path, &["capture", "--samples", "100", "--decimation", "2"]),
        0
    );
    let idle = std::fs::read_to_string(out.join("board-capture.csv")).unwrap();
    assert_eq!(idle.lines().count(), 101);
    assert!(idle.lines().nth(1).unwrap().starts_with("0.000000000e0,"));
    let design = [
        "design",
        "--resistance-ohm",
        "2.05",
        "--inductance-h",
        "2.2e-3",
        "--settling-time-s",
        "2e-3",
        "--write",
    ];
    assert_eq!(run(&path, &design), 0);
    assert_eq!(
        run(
            &path,
            &["step", "--to-a", "1.5", "--window-s", "0.008", "--energise"]
        ),
        0
    );
    done.store(true, Ordering::Relaxed);
    let vb = server.join().unwrap();
    // The step left the loop disabled, with the board's own design in use:
    // pole-zero cancellation, Ti = L / R.
    assert_eq!(vb.firmware().current_loop().state(), pi_core::LoopState::Disabled);
    let g = vb.firmware().current_loop().pi().config().gains();
    assert!((g.ti_s() / (2.2e-3 / 2.05) - 1.0).abs() < 1e-5, "{g:?}");
    let csv = out.join("board-step.csv");
    let cap = host_sim::bench::capture::read(
        std::fs::File::open(&csv).unwrap(),
        "board-step.csv",
        &Default::default(),
    )
    .unwrap();
    let setpoint = cap.setpoint_a.clone().unwrap();
    assert_eq!((setpoint[0], *setpoint.last().unwrap()), (0.0, 1.5));
    // The simulation of the sample's scenario with the gains the board ran,
    // driven the same way, agrees with it.
    let mut sample = Params::load(&scenario("carousel_bench.toml")).unwrap();
    sample.controller.gains = Some(host_sim::scenario::params::GainParams {
        kp_v_per_a: g.kp_v_per_a() as f64,
        ti_s: g.ti_s() as f64,
    });
    sample.controller.setpoint_weight = Some(g.setpoint_weight() as f64);
    let sample = host_sim::prepare::prepare(sample).unwrap();
    let c = host_sim::results::compare::compare(&cap, Some(&setpoint), &sample.scenario).unwrap();
    assert!(c.nrmse < 0.05, "{}", c.nrmse);
    assert_eq!(c.steps.len(), 1);
}
