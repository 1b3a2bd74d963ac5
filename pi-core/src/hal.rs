//! embedded-hal 1.0 adapters: drive commands onto PWM channels and pins.
//!
//! Two common bridge interfaces:
//!
//! * [`SignMagnitude`]: one PWM input carries the duty and one direction pin the
//!   polarity (high = [`Direction::Forward`]).
//! * [`TwoPwm`]: one PWM per half-bridge input; forward drives input A with the duty
//!   and holds B at 0, reverse the other way round. What the bridge does in the
//!   off-time (coast or brake, fast or slow decay) depends on its truth table.
//!
//! Both take an optional enable pin (high = enabled); pass [`NoPin`] when the bridge
//! has none. Duty fractions become counts as `round(duty * max_duty_cycle())`,
//! limited to `[0, max_duty_cycle()]`. On a safe command the duty goes to 0 before
//! the enable pin drops; on a direction change the duty goes to 0 before the
//! direction pin changes. A HAL error is returned at once, as it came, in
//! [`DriveError`]; nothing is unwrapped.

use embedded_hal::digital::{ErrorType as PinErrorType, OutputPin};
use embedded_hal::pwm::SetDutyCycle;

use crate::output::{Direction, DriveCommand};

/// Something that puts a [`DriveCommand`] onto the hardware.
pub trait DriveOutput {
    /// The error the hardware can report.
    type Error;

    /// Applies one command. On error the hardware may be partly updated; the caller
    /// should disable the loop (its next command is then the safe one).
    fn apply(&mut self, command: &DriveCommand) -> Result<(), Self::Error>;
}

/// Which part of the bridge interface failed, with the HAL's own error.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum DriveError<PwmE, DirE, EnE> {
    /// Writing a PWM duty failed.
    Pwm(PwmE),
    /// Writing the direction pin failed.
    Direction(DirE),
    /// Writing the enable pin failed.
    Enable(EnE),
}

impl<PwmE: core::fmt::Debug, DirE: core::fmt::Debug, EnE: core::fmt::Debug> core::fmt::Display
    for DriveError<PwmE, DirE, EnE>
{
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        match self {
            DriveError::Pwm(e) => write!(
                f,
                "writing a PWM duty failed ({e:?}); the bridge may be partly updated, disable the loop"
            ),
            DriveError::Direction(e) => write!(
                f,
                "writing the direction pin failed ({e:?}); the bridge may be partly updated, disable the loop"
            ),
            DriveError::Enable(e) => write!(
                f,
                "writing the enable pin failed ({e:?}); the bridge may be partly updated, disable the loop"
            ),
        }
    }
}

impl<PwmE: core::fmt::Debug, DirE: core::fmt::Debug, EnE: core::fmt::Debug> core::error::Error
    for DriveError<PwmE, DirE, EnE>
{
}

/// A stand-in for an absent enable pin: does nothing, never fails.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct NoPin;

impl PinErrorType for NoPin {
    type Error = core::convert::Infallible;
}

impl OutputPin for NoPin {
    fn set_low(&mut self) -> Result<(), Self::Error> {
        Ok(())
    }
    fn set_high(&mut self) -> Result<(), Self::Error> {
        Ok(())
    }
}

/// Duty fraction to counts, `round(duty * max)`, limited to `[0, max]`; NaN gives 0.
#[inline]
pub fn duty_to_counts(duty: f32, max_duty_cycle: u16) -> u16 {
    let counts = duty * max_duty_cycle as f32 + 0.5;
    // `as` saturates (NaN -> 0), so this cannot overflow or panic.
    let counts = counts as u16;
    if counts > max_duty_cycle {
        max_duty_cycle
    } else {
        counts
    }
}

/// One PWM for the duty, one pin for the direction, optional enable pin.
#[derive(Debug)]
pub struct SignMagnitude<P, D, E = NoPin> {
    pwm: P,
    direction: D,
    enable: E,
    last_direction: Option<Direction>,
}

impl<P, D, E> SignMagnitude<P, D, E>
where
    P: SetDutyCycle,
    D: OutputPin,
    E: OutputPin,
{
    /// Takes the pins; the first command sets all of them.
    pub fn new(pwm: P, direction: D, enable: E) -> Self {
        Self {
            pwm,
            direction,
            enable,
            last_direction: None,
        }
    }

    /// Gives the pins back.
    pub fn release(self) -> (P, D, E) {
        (self.pwm, self.direction, self.enable)
    }
}

impl<P, D, E> DriveOutput for SignMagnitude<P, D, E>
where
    P: SetDutyCycle,
    D: OutputPin,
    E: OutputPin,
{
    type Error = DriveError<P::Error, D::Error, E::Error>;

    fn apply(&mut self, command: &DriveCommand) -> Result<(), Self::Error> {
        if !command.enabled {
            self.pwm.set_duty_cycle(0).map_err(DriveError::Pwm)?;
            return self.enable.set_low().map_err(DriveError::Enable);
        }
        let counts = duty_to_counts(command.duty, self.pwm.max_duty_cycle());
        if self.last_direction != Some(command.direction) {
            self.pwm.set_duty_cycle(0).map_err(DriveError::Pwm)?;
            match command.direction {
                Direction::Forward => self.direction.set_high(),
                Direction::Reverse => self.direction.set_low(),
            }
            .map_err(DriveError::Direction)?;
            self.last_direction = Some(command.direction);
        }
        self.pwm.set_duty_cycle(counts).map_err(DriveError::Pwm)?;
        self.enable.set_high().map_err(DriveError::Enable)
    }
}

/// One PWM per half-bridge input (A drives forward, B reverse), optional enable pin.
#[derive(Debug)]
pub struct TwoPwm<A, B, E = NoPin> {
    a: A,
    b: B,
    enable: E,
}

impl<A, B, E> TwoPwm<A, B, E>
where
    A: SetDutyCycle,
    B: SetDutyCycle<Error = A::Error>,
    E: OutputPin,
{
    /// Takes the two PWM channels (same error type, as on one timer) and the enable pin.
    pub fn new(a: A, b: B, enable: E) -> Self {
        Self { a, b, enable }
    }

    /// Gives the channels back.
    pub fn release(self) -> (A, B, E) {
        (self.a, self.b, self.enable)
    }
}

impl<A, B, E> DriveOutput for TwoPwm<A, B, E>
where
    A: SetDutyCycle,
    B: SetDutyCycle<Error = A::Error>,
    E: OutputPin,
{
    type Error = DriveError<A::Error, core::convert::Infallible, E::Error>;

    fn apply(&mut self, command: &DriveCommand) -> Result<(), Self::Error> {
        if !command.enabled {
            self.a.set_duty_cycle(0).map_err(DriveError::Pwm)?;
            self.b.set_duty_cycle(0).map_err(DriveError::Pwm)?;
            return self.enable.set_low().map_err(DriveError::Enable);
        }
        // The input going to 0 is written first, so both are never driven at once.
        match command.direction {
            Direction::Forward => {
                self.b.set_duty_cycle(0).map_err(DriveError::Pwm)?;
                let counts = duty_to_counts(command.duty, self.a.max_duty_cycle());
                self.a.set_duty_cycle(counts).map_err(DriveError::Pwm)?;
            }
            Direction::Reverse => {
                self.a.set_duty_cycle(0).map_err(DriveError::Pwm)?;
                let counts = duty_to_counts(command.duty, self.b.max_duty_cycle());
                self.b.set_duty_cycle(counts).map_err(DriveError::Pwm)?;
            }
        }
        self.enable.set_high().map_err(DriveError::Enable)
    }
}

#[cfg(test)]
mod tests {
    extern crate std;
    use std::cell::RefCell;
    use std::rc::Rc;
    use std::vec::Vec;

    use super::*;

    #[derive(Debug, Clone, Copy, PartialEq, Eq)]
    enum Event {
        Duty(&'static str, u16),
        Pin(&'static str, bool),
    }

    #[derive(Debug, Clone, Copy, PartialEq, Eq)]
    struct Broken;
    impl embedded_hal::pwm::Error for Broken {
        fn kind(&self) -> embedded_hal::pwm::ErrorKind {
            embedded_hal::pwm::ErrorKind::Other
        }
    }
    impl embedded_hal::digital::Error for Broken {
        fn kind(&self) -> embedded_hal::digital::ErrorKind {
            embedded_hal::digital::ErrorKind::Other
        }
    }

    struct Pwm {
        name: &'static str,
        log: Rc<RefCell<Vec<Event>>>,
        fail: bool,
    }
    impl embedded_hal::pwm::ErrorType for Pwm {
        type Error = Broken;
    }
    impl SetDutyCycle for Pwm {
        fn max_duty_cycle(&self) -> u16 {
            1000
        }
        fn set_duty_cycle(&mut self, duty: u16) -> Result<(), Broken> {
            if self.fail {
                return Err(Broken);
            }
            self.log.borrow_mut().push(Event::Duty(self.name, duty));
            Ok(())
        }
    }

    struct MockPin {
        name: &'static str,
        log: Rc<RefCell<Vec<Event>>>,
    }
    impl PinErrorType for MockPin {
        type Error = Broken;
    }
    impl OutputPin for MockPin {
        fn set_low(&mut self) -> Result<(), Broken> {
            self.log.borrow_mut().push(Event::Pin(self.name, false));
            Ok(())
        }
        fn set_high(&mut self) -> Result<(), Broken> {
            self.log.borrow_mut().push(Event::Pin(self.name, true));
            Ok(())
        }
    }

    fn cmd(duty: f32, direction: Direction) -> DriveCommand {
        DriveCommand {
            duty,
            direction,
            enabled: true,
        }
    }

    #[test]
    fn counts_round_and_saturate() {
        assert_eq!(duty_to_counts(0.5, 1000), 500);
        assert_eq!(duty_to_counts(0.0004, 1000), 0);
        assert_eq!(duty_to_counts(0.0006, 1000), 1);
        assert_eq!(duty_to_counts(1.7, 1000), 1000);
        assert_eq!(duty_to_counts(-0.3, 1000), 0);
        assert_eq!(duty_to_counts(f32::NAN, 1000), 0);
        assert_eq!(duty_to_counts(1.0, u16::MAX), u16::MAX);
    }

    #[test]
    fn sign_magnitude_sequence() {
        let log = Rc::new(RefCell::new(Vec::new()));
        let pwm = Pwm {
            name: "pwm",
            log: log.clone(),
            fail: false,
        };
        let dir = MockPin {
            name: "dir",
            log: log.clone(),
        };
        let en = MockPin {
            name: "en",
            log: log.clone(),
        };
        let mut out = SignMagnitude::new(pwm, dir, en);
        out.apply(&cmd(0.25, Direction::Forward)).unwrap();
        out.apply(&cmd(0.30, Direction::Forward)).unwrap();
        out.apply(&cmd(0.10, Direction::Reverse)).unwrap();
        out.apply(&DriveCommand::SAFE).unwrap();
        use Event::*;
        assert_eq!(
            *log.borrow(),
            [
                Duty("pwm", 0),
                Pin("dir", true),
                Duty("pwm", 250),
                Pin("en", true),
                Duty("pwm", 300),
                Pin("en", true),
                Duty("pwm", 0),
                Pin("dir", false),
                Duty("pwm", 100),
                Pin("en", true),
                Duty("pwm", 0),
                Pin("en", false),
            ]
        );
    }

    #[test]
    fn two_pwm_sequence() {
        let log = Rc::new(RefCell::new(Vec::new()));
        let a = Pwm {
            name: "a",
            log: log.clone(),
            fail: false,
        };
        let b = Pwm {
            name: "b",
            log: log.clone(),
            fail: false,
        };
        let mut out = TwoPwm::new(a, b, NoPin);
        out.apply(&cmd(0.5, Direction::Forward)).unwrap();
        out.apply(&cmd(0.2, Direction::Reverse)).unwrap();
        out.apply(&DriveCommand::SAFE).unwrap();
        use Event::*;
        assert_eq!(
            *log.borrow(),
            [
                Duty("b", 0),
                Duty("a", 500),
                Duty("a", 0),
                Duty("b", 200),
                Duty("a", 0),
                Duty("b", 0),
            ]
        );
    }

    #[test]
    fn hal_errors_are_returned() {
        let log = Rc::new(RefCell::new(Vec::new()));
        let pwm = Pwm {
            name: "pwm",
            log: log.clone(),
            fail: true,
        };
        let dir = MockPin {
            name: "dir",
            log: log.clone(),
        };
        let mut out = SignMagnitude::new(pwm, dir, NoPin);
        assert_eq!(
            out.apply(&cmd(0.5, Direction::Forward)),
            Err(DriveError::Pwm(Broken))
        );
        assert_eq!(out.apply(&DriveCommand::SAFE), Err(DriveError::Pwm(Broken)));
    }
}
