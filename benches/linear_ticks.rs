//! The linear current loop of `tests/reference/closed_loop_reference.py`'s
//! first case (the invented demo winding, 1.9 ohm and 2.4 mH, sampled every
//! 50 us with a one-sample delay, the backward-Euler PI at 800 Hz) run by the
//! simulator: the bare `pi-core` PI on an ideal averaged bridge. Prints the
//! ticks and the best of three wall times, for `benches/vs-python/compare.py`.
//!
//! ```text
//! cargo run --release -p ampwright-benches --example linear_ticks -- 200000
//! ```

use std::time::Instant;

use host_sim::plant::bridge::{Bridge, BridgeParams};
use host_sim::plant::faults::Injectors;
use host_sim::plant::motor::{Motor, MotorParams};
use host_sim::plant::sense_chain::{SenseChain, SenseParams};
use host_sim::plant::timing::{Timing, TimingParams};
use host_sim::{DriveChain, Event, LinearPi, Runner};
use pi_core::{Command, DutyMapping, OutputLimits, PiConfig, PiController, PiGains};

fn main() {
    let ticks: u64 = std::env::args()
        .nth(1)
        .and_then(|a| a.parse().ok())
        .unwrap_or(200_000);
    let (r, l, ts) = (1.9, 2.4e-3, 50e-6);
    let kp = l * 2.0 * std::f64::consts::PI * 800.0;
    let ti = l / r;
    let mut best = f64::INFINITY;
    let mut last = 0.0;
    for _ in 0..3 {
        let chain = DriveChain {
            load: Box::new(Motor::new(MotorParams::rl(r, l)).unwrap()),
            bridge: Bridge::new(BridgeParams::ideal(48.0, 1.0 / ts)).unwrap(),
            sense: SenseChain::new(SenseParams::ideal(0.01, 20.0, 12, 3.3)).unwrap(),
            injectors: Injectors::default(),
            load_profile: Vec::new(),
            speed_feedback: false,
        };
        let timing = Timing::new(TimingParams::one_sample_delay(ts), ts).unwrap();
        let events = vec![Event {
            at_s: 0.0,
            command: Command::SetCurrent(1.0),
        }];
        let cfg = PiConfig::new(
            PiGains::from_kp_ti(kp as f32, ti as f32).unwrap(),
            ts as f32,
            OutputLimits::symmetric(1000.0).unwrap(),
        )
        .unwrap();
        let mut pi = LinearPi::new(PiController::new(cfg), DutyMapping::new(1.0, 1.0).unwrap());
        let mut run = Runner::new(chain, timing, events);
        let t0 = Instant::now();
        run.run_ticks(&mut pi, ticks);
        best = best.min(t0.elapsed().as_secs_f64());
        last = run.trace().points.last().map_or(0.0, |p| p.current_a);
    }
    println!("ticks {ticks} seconds {best:.6} final_current_a {last:.6}");
}
