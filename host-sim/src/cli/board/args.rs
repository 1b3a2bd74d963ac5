//! The arguments of `ampwright board`.

use std::path::PathBuf;

use clap::Subcommand;

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

/// A design method, as the command line says it.
#[derive(Clone, Copy, Debug, PartialEq, Eq, clap::ValueEnum)]
pub enum MethodArg {
    /// The sampled loop's poles placed directly.
    DirectDiscrete,
    /// Continuous pole placement.
    RootLocus,
    /// The lumped small time constant.
    ModulusOptimum,
    /// The PI zero on the winding's pole.
    Cancellation,
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
    #[command(allow_negative_numbers = true)]
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
    #[command(allow_negative_numbers = true)]
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
    #[command(allow_negative_numbers = true)]
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
    #[command(allow_negative_numbers = true)]
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
    /// Design gains on the board with its own f32 design code, and print
    /// them; `--write` makes the board run them.
    #[command(allow_negative_numbers = true)]
    Design {
        /// The method.
        #[arg(long, value_enum, default_value_t = MethodArg::Cancellation)]
        method: MethodArg,
        /// The winding's resistance, ohm.
        #[arg(long)]
        resistance_ohm: f64,
        /// Its inductance, H.
        #[arg(long)]
        inductance_h: f64,
        /// The 2 % settling time asked, s.
        #[arg(long)]
        settling_time_s: f64,
        /// The overshoot allowed, percent.
        #[arg(long, default_value_t = 5.0)]
        overshoot_pct: f64,
        /// The largest 10-90 % rise time, s.
        #[arg(long)]
        rise_time_s: Option<f64>,
        /// The sample-to-update delay, control periods (0 to 1).
        #[arg(long, default_value_t = 1.0)]
        delay_periods: f64,
        /// Write the gains to the board (applied without a bump).
        #[arg(long)]
        write: bool,
    },
    /// Identify, design from the scenario's spec, write the gains, verify
    /// with a step, compare it with the simulation, and give a verdict with
    /// the gains.
    #[command(allow_negative_numbers = true)]
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
