//! What the runner calls at each sampling instant: the [`Controller`] trait,
//! implemented by the real [`pi_core::CurrentLoop`], by the real fixed-point
//! loop behind its bus ADC ([`FixedFirmware`]), by [`LoopUnderTest`] (the one
//! a scenario chose) and by [`LinearPi`] (the bare PI for comparisons with
//! reference libraries).

use pi_core::current_loop::fixed::{FixedCommand, FixedLoop, FixedTickInput};
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
            state: state_code(s.state),
            i2t_level: self
                .supervisor()
                .thermal()
                .map_or(0.0, |t| (t.heat() / t.trip_level()) as f64),
        }
    }
}

fn state_code(s: LoopState) -> u8 {
    match s {
        LoopState::Disabled => 0,
        LoopState::Running => 1,
        LoopState::Faulted => 2,
        LoopState::Exciting => 3,
    }
}

/// The fixed-point loop as firmware on a core without an FPU runs it: the
/// bus voltage read by a bus ADC (rounded to the nearest count, as the
/// current's ADC), commands converted to integers in the "main loop" (here).
#[derive(Clone, Debug)]
pub struct FixedFirmware {
    fl: FixedLoop,
    bus_v_per_count: f64,
    bus_max_counts: f64,
}

impl FixedFirmware {
    /// The loop with a bus ADC of `bus_adc_bits`.
    pub fn new(fl: FixedLoop, bus_adc_bits: u8) -> Self {
        let bus_v_per_count = fl.config().bus_v_per_count() as f64;
        Self {
            fl,
            bus_v_per_count,
            bus_max_counts: ((1u32 << bus_adc_bits) - 1) as f64,
        }
    }

    /// The loop.
    pub fn fixed_loop(&self) -> &FixedLoop {
        &self.fl
    }
}

impl Controller for FixedFirmware {
    fn tick(&mut self, m: &Measurement) -> DriveCommand {
        let bus_counts = (m.bus_v / self.bus_v_per_count)
            .round()
            .clamp(0.0, self.bus_max_counts) as u16;
        self.fl
            .tick(FixedTickInput {
                current_counts: m.counts,
                bus_counts,
            })
            .to_drive_command()
    }

    fn command(&mut self, command: Command) -> Result<(), String> {
        let config = *self.fl.config();
        let fixed = match command {
            Command::SetCurrent(a) => FixedCommand::SetCurrent(config.current_q15(a)),
            Command::Retune(g) => FixedCommand::Retune(config.retune(g).map_err(|e| e.to_string())?),
            Command::Enable => FixedCommand::Enable,
            Command::Disable => FixedCommand::Disable,
            Command::ClearFaults => FixedCommand::ClearFaults,
            Command::Excite(_) => return Err("the fixed-point loop runs no excitation".into()),
        };
        self.fl.apply(fixed).map(|_| ()).map_err(|e| e.to_string())
    }

    fn view(&self) -> ControllerView {
        let scale = self.fl.config().scale();
        let q27 = (1u32 << 27) as f64;
        let amps = scale.current_full_scale_a() as f64;
        ControllerView {
            setpoint_a: self.fl.setpoint().0 as f64 / q27 * amps,
            measured_a: self.fl.last_current_q15() as f64 / 32768.0 * amps,
            commanded_v: self.fl.commanded().0 as f64 / q27 * scale.voltage_full_scale_v() as f64,
            fault_bits: self.fl.supervisor().latched().bits(),
            state: state_code(self.fl.state()),
            i2t_level: self.fl.heat().map_or(0.0, |h| (h.heat() / h.trip_level()) as f64),
        }
    }
}

/// The loop a scenario runs: the float one, or the fixed-point one
/// (`controller.arithmetic = "fixed"`).
#[derive(Clone, Debug)]
pub enum LoopUnderTest {
    /// [`CurrentLoop`].
    Float(CurrentLoop),
    /// [`FixedLoop`] behind its bus ADC.
    Fixed(FixedFirmware),
}

impl Controller for LoopUnderTest {
    fn tick(&mut self, m: &Measurement) -> DriveCommand {
        match self {
            LoopUnderTest::Float(c) => Controller::tick(c, m),
            LoopUnderTest::Fixed(c) => c.tick(m),
        }
    }

    fn command(&mut self, command: Command) -> Result<(), String> {
        match self {
            LoopUnderTest::Float(c) => Controller::command(c, command),
            LoopUnderTest::Fixed(c) => c.command(command),
        }
    }

    fn view(&self) -> ControllerView {
        match self {
            LoopUnderTest::Float(c) => Controller::view(c),
            LoopUnderTest::Fixed(c) => c.view(),
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
