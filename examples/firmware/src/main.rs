//! Firmware example for an INVENTED board: the "Ampwright bench board rev
//! A" of the README (Cortex-M4F at 168 MHz, 256 KiB flash, 64 KiB RAM), a
//! 24 V sign-magnitude H-bridge on one PWM channel with direction and enable
//! pins, a 10 mOhm shunt into a x20 amplifier on a 12-bit ADC triggered at
//! the PWM centre, a bus divider, and a UART at 115200 baud for the bench
//! link (`ampwright board`).
//!
//! [`wiring`] is the part to copy: it is generic over embedded-hal's
//! `SetDutyCycle` and `OutputPin`, embedded-io's `Read`, `ReadReady` and
//! `Write`, and a two-method ADC trait. This file is the invented board:
//! its peripherals are stand-ins over plain atomics (no registers, no
//! `unsafe`), so the example builds and its size is measured without a
//! vendor HAL; replace each with your HAL's type. The control interrupt is
//! SysTick here, so no device crate is needed; on a real part it is the
//! interrupt that fires when the current conversion completes.

#![no_std]
#![no_main]

mod wiring;

use core::cell::RefCell;
use core::sync::atomic::{AtomicBool, AtomicU16, AtomicU32, Ordering};

use cortex_m::interrupt::Mutex;
use cortex_m_rt::{entry, exception};
use pi_core::capture::{Capture, CaptureSpec, Trigger};
use pi_core::heapless::spsc::Queue;
use pi_core::link::Link;
use pi_core::prelude::*;
use pi_core::{ConfigError, SetpointLimits};
use wiring::{CAPTURE, Control, Sensors, Shared, Shared2Board, SharedCapture, Snapshot, serve_link};

/// The PWM counter's top: 168 MHz / 20 kHz / 2 (centre-aligned).
const PWM_TOP: u16 = 4200;
/// The control period, s (every PWM period).
const PERIOD_S: f32 = 50e-6;

// ---- the invented board's peripherals (stand-ins: replace with your HAL) ----

/// The PWM compare value the bridge's channel would load.
static PWM_COMPARE: AtomicU16 = AtomicU16::new(0);
/// The direction and enable outputs.
static DIRECTION_PIN: AtomicBool = AtomicBool::new(false);
static ENABLE_PIN: AtomicBool = AtomicBool::new(false);
/// The last conversions of the current and bus channels.
static ADC_CURRENT: AtomicU16 = AtomicU16::new(2048);
static ADC_BUS: AtomicU16 = AtomicU16::new(2979);
/// The UART's receive holding register (bit 8: a byte is waiting) and the
/// transmit register.
static UART_RX: AtomicU32 = AtomicU32::new(0);
static UART_TX: AtomicU32 = AtomicU32::new(0);

/// A peripheral that cannot fail.
#[derive(Debug, Clone, Copy)]
enum Never {}

impl embedded_hal::digital::Error for Never {
    fn kind(&self) -> embedded_hal::digital::ErrorKind {
        match *self {}
    }
}
impl embedded_hal::pwm::Error for Never {
    fn kind(&self) -> embedded_hal::pwm::ErrorKind {
        match *self {}
    }
}
impl core::fmt::Display for Never {
    fn fmt(&self, _: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        match *self {}
    }
}
impl core::error::Error for Never {}
impl embedded_io::Error for Never {
    fn kind(&self) -> embedded_io::ErrorKind {
        match *self {}
    }
}

struct PwmChannel;
impl embedded_hal::pwm::ErrorType for PwmChannel {
    type Error = Never;
}
impl embedded_hal::pwm::SetDutyCycle for PwmChannel {
    fn max_duty_cycle(&self) -> u16 {
        PWM_TOP
    }
    fn set_duty_cycle(&mut self, duty: u16) -> Result<(), Never> {
        PWM_COMPARE.store(duty, Ordering::Relaxed);
        Ok(())
    }
}

struct Pin(&'static AtomicBool);
impl embedded_hal::digital::ErrorType for Pin {
    type Error = Never;
}
impl embedded_hal::digital::OutputPin for Pin {
    fn set_low(&mut self) -> Result<(), Never> {
        self.0.store(false, Ordering::Relaxed);
        Ok(())
    }
    fn set_high(&mut self) -> Result<(), Never> {
        self.0.store(true, Ordering::Relaxed);
        Ok(())
    }
}

struct Adc;
impl Sensors for Adc {
    fn current_counts(&mut self) -> u16 {
        ADC_CURRENT.load(Ordering::Relaxed)
    }
    fn bus_v(&mut self) -> f32 {
        // 3.3 V reference, 12 bits, a 10:1 divider: 2979 counts = 24.0 V.
        ADC_BUS.load(Ordering::Relaxed) as f32 * (3.3 * 10.0 / 4095.0)
    }
}

struct Uart;
impl embedded_io::ErrorType for Uart {
    type Error = Never;
}
impl embedded_io::ReadReady for Uart {
    fn read_ready(&mut self) -> Result<bool, Never> {
        Ok(UART_RX.load(Ordering::Relaxed) & 0x100 != 0)
    }
}
impl embedded_io::Read for Uart {
    fn read(&mut self, buf: &mut [u8]) -> Result<usize, Never> {
        let Some(first) = buf.first_mut() else {
            return Ok(0);
        };
        *first = UART_RX.swap(0, Ordering::Relaxed) as u8;
        Ok(1)
    }
}
impl embedded_io::Write for Uart {
    fn write(&mut self, buf: &[u8]) -> Result<usize, Never> {
        for &b in buf {
            UART_TX.store(u32::from(b), Ordering::Relaxed);
        }
        Ok(buf.len())
    }
    fn flush(&mut self) -> Result<(), Never> {
        Ok(())
    }
}

// ---- the firmware ----

type BoardControl = Control<PwmChannel, Pin, Pin, Adc>;

static CONTROL: Shared<PwmChannel, Pin, Pin, Adc> = Mutex::new(RefCell::new(None));
static RECORD: SharedCapture = Mutex::new(RefCell::new(Capture::new()));

/// The loop of the invented board (the README's demo values).
fn build_loop() -> Result<CurrentLoop, ConfigError> {
    let supervisor = SupervisorConfig::new(OvercurrentLimit::new(6.0, 3)?, BusWindow::new(18.0, 30.0)?)
        .with_thermal(ThermalConfig::from_trip_class(2.0, TripClass::Class10)?)
        .with_stuck_detection(StuckDetection::new(0, 100, 0.2)?);
    let config = LoopConfig::new(
        CurrentSense::from_shunt(12, 3.3, 0.010, 20.0, 2048.0)?,
        SetpointLimits::new(-4.0, 4.0, 20_000.0)?,
        supervisor,
        PiConfig::new(
            PiGains::from_kp_ti(12.06, 1.263e-3)?,
            PERIOD_S,
            OutputLimits::symmetric(30.0)?,
        )?,
        DutyMapping::new(0.95, 12.0)?,
    )?;
    CurrentLoop::new(config)
}

#[entry]
fn main() -> ! {
    // A configuration error leaves the bridge off (its pins never driven)
    // and the firmware idle; a real one would report it.
    let Ok(cl) = build_loop() else {
        loop {
            cortex_m::asm::wfi();
        }
    };
    let Ok(idle_spec) = CaptureSpec::new(Trigger::Immediate, 1, 1, CAPTURE) else {
        loop {
            cortex_m::asm::wfi();
        }
    };
    let start = Snapshot {
        status: cl.status(),
        gains: cl.pi().config().gains(),
        limits: *cl.config().setpoint(),
        period_s: PERIOD_S,
        spec: idle_spec,
    };
    let queue: &'static mut Queue<Command, 8> = cortex_m::singleton!(: Queue<Command, 8> = Queue::new())
        .unwrap_or_else(|| {
            loop {
                cortex_m::asm::wfi();
            }
        });
    let (mut to_isr, from_main) = queue.split();
    let control: BoardControl = Control {
        cl,
        commands: from_main,
        bridge: SignMagnitude::new(PwmChannel, Pin(&DIRECTION_PIN), Pin(&ENABLE_PIN)),
        sensors: Adc,
    };
    cortex_m::interrupt::free(|cs| CONTROL.borrow(cs).replace(Some(control)));
    if let Some(mut p) = cortex_m::Peripherals::take() {
        // SysTick stands in for the ADC-complete interrupt: 168 MHz / 20 kHz.
        p.SYST
            .set_clock_source(cortex_m::peripheral::syst::SystClkSource::Core);
        p.SYST.set_reload(168_000_000 / 20_000 - 1);
        p.SYST.clear_current();
        p.SYST.enable_interrupt();
        p.SYST.enable_counter();
    }
    let mut link = Link::new();
    let mut uart = Uart;
    loop {
        let mut board = Shared2Board {
            shared: &CONTROL,
            capture: &RECORD,
            to_isr: &mut to_isr,
            start,
        };
        serve_link(&mut uart, &mut link, &mut board);
        cortex_m::asm::wfi();
    }
}

#[exception]
fn SysTick() {
    cortex_m::interrupt::free(|cs| {
        if let Ok(mut guard) = CONTROL.borrow(cs).try_borrow_mut()
            && let Some(control) = guard.as_mut()
            && let Ok(mut capture) = RECORD.borrow(cs).try_borrow_mut()
        {
            control.tick(&mut capture);
        }
    });
}

#[panic_handler]
fn panic(_: &core::panic::PanicInfo) -> ! {
    // pi-core has no reachable panic (the no-panic link check proves it);
    // this handler covers the rest of a firmware. Drive the bridge off
    // (here the enable stand-in) and stop.
    ENABLE_PIN.store(false, Ordering::Relaxed);
    loop {
        cortex_m::asm::wfi();
    }
}
