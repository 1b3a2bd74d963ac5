//! What the runner calls at each sampling instant: the [`Controller`] trait,
//! implemented by the real [`pi_core::CurrentLoop`] and by [`LinearPi`] (the
//! bare PI for comparisons with reference libraries).

use pi_core::{Command, CurrentLoop, DriveCommand, DutyMapping, LoopState, PiController, TickInput};

/// What the controller is given at a sampling instant.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Measurement {
    /// The ADC reading of the current (after injected sensor faults).
    pub counts: u16,
    /// The filtered sense signal in amperes, before noise and quantisation (used
    /// only by the linear reference controller).
    pub filtered_a: f64,
    /// Bus voltage, volts.
    pub bus_v: f64,
    /// Shaft speed, rad/s, if the firmware measures it.
    pub speed_rad_s: Option<f64>,
}

/// What the runner can read back from a controller after a tick.
#[derive(Clone, Copy, Debug, PartialEq, Default)]
pub struct ControllerView {
    /// Setpoint used, amperes.
    pub setpoint_a: f64,
    /// Current it read, amperes.
    pub measured_a: f64,
    /// Voltage asked for, volts.
    pub commanded_v: f64,
    /// Latched fault bits.
    pub fault_bits: u16,
    /// 0 disabled, 1 running, 2 faulted, 3 exciting.
    pub state: u8,
    /// The I^2t model's heat as a fraction of its trip level (1 trips; 0
    /// when the protection is off).
    pub i2t_level: f64,
}

/// A controller the runner can close the loop with.
pub trait Controller {
    /// One control tick.
    fn tick(&mut self, m: &Measurement) -> DriveCommand;
    /// A command from the main loop; `Err` is the refusal, in one sentence.
    fn command(&mut self, command: Command) -> Result<(), String>;
    /// The state after the last tick.
    fn view(&self) -> ControllerView;
}

impl Controller for CurrentLoop {
    fn tick(&mut self, m: &Measurement) -> DriveCommand {
        CurrentLoop::tick(
            self,
            &TickInput {
                current_counts: m.counts,
                bus_v: m.bus_v as f32,
                speed_rad_s: m.speed_rad_s.map(|w| w as f32),
            },
        )
    }

    fn command(&mut self, command: Command) -> Result<(), String> {
        self.apply(command).map(|_| ()).map_err(|e| e.to_string())
    }

    fn view(&self) -> ControllerView {
        let s = self.status();
        ControllerView {
            setpoint_a: s.setpoint_a as f64,
            measured_a: s.current_a as f64,
            commanded_v: s.commanded_v as f64,
            fault_bits: s.latched.bits(),
            state: match s.state {
                LoopState::Disabled => 0,
                LoopState::Running => 1,
                LoopState::Faulted => 2,
                LoopState::Exciting => 3,
            },
            i2t_level: self
                .supervisor()
                .thermal()
                .map_or(0.0, |t| (t.heat() / t.trip_level()) as f64),
        }
    }
}

/// The bare [`PiController`] closing the loop on the unquantised sense signal,
/// with the volts turned into a duty by the bus. Its loop is linear while the
/// output stays inside the limits, which is what a comparison with a reference
/// library needs; real runs use [`CurrentLoop`].
#[derive(Clone, Debug)]
pub struct LinearPi {
    pi: PiController,
    duty: DutyMapping,
    setpoint_a: f32,
    measured_a: f32,
    volts: f32,
}

impl LinearPi {
    /// The controller with its duty mapping.
    pub fn new(pi: PiController, duty: DutyMapping) -> Self {
        Self {
            pi,
            duty,
            setpoint_a: 0.0,
            measured_a: 0.0,
            volts: 0.0,
        }
    }
}

impl Controller for LinearPi {
    fn tick(&mut self, m: &Measurement) -> DriveCommand {
        let bus = m.bus_v as f32;
        let available = self.duty.available_v(bus);
        self.measured_a = m.filtered_a as f32;
        self.volts = self
            .pi
            .update_within(self.setpoint_a, self.measured_a, -available, available);
        self.duty.command(self.volts, bus)
    }

    fn command(&mut self, command: Command) -> Result<(), String> {
        match command {
            Command::SetCurrent(a) => self.setpoint_a = a,
            Command::Retune(g) => self.pi.retune(g),
            _ => {}
        }
        Ok(())
    }

    fn view(&self) -> ControllerView {
        ControllerView {
            setpoint_a: self.setpoint_a as f64,
            measured_a: self.measured_a as f64,
            commanded_v: self.volts as f64,
            fault_bits: 0,
            state: 1,
            i2t_level: 0.0,
        }
    }
}
