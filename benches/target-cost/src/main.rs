//! The target-cost probe: pi-core's control path on bare metal, bracketed by
//! marker calls so that an execution trace of QEMU can count each call's
//! instructions exactly (see `run.py`).
//!
//! Every measured call goes through `measure`, which calls `mark_start`, the
//! probe through a function pointer, then `mark_end`; `run.py` counts the trace
//! entries from `mark_start` to `mark_end` and subtracts the count for the
//! empty probe, so the figure is the instructions of the probe's own call (its
//! body and everything it calls, its return included).
//!
//! Scenarios run in a fixed order; the probe announces each on the
//! semihosting console and exits through semihosting when done.

#![no_std]
#![no_main]

use core::arch::asm;
use core::hint::black_box;
use core::panic::PanicInfo;

use pi_core::design::{RlPlant, Sampling, Spec, discrete};
use pi_core::prelude::*;

#[panic_handler]
fn panic(_: &PanicInfo) -> ! {
    exit(1)
}

/// Semihosting call (Arm semihosting specification, `bkpt 0xab` on M-profile).
fn semihost(op: u32, arg: u32) -> u32 {
    let mut r0 = op;
    // SAFETY: the semihosting trap; QEMU answers it with -semihosting.
    unsafe { asm!("bkpt #0xab", inout("r0") r0, in("r1") arg, options(nostack)) };
    r0
}

fn print(s: &[u8]) {
    // SYS_WRITE0 needs a terminated string: copy into a small buffer.
    let mut buf = [0u8; 64];
    let n = s.len().min(63);
    buf[..n].copy_from_slice(&s[..n]);
    semihost(0x04, buf.as_ptr() as u32);
}

fn exit(code: u32) -> ! {
    // SYS_EXIT with ADP_Stopped_ApplicationExit (0x20026), or RunTimeErrorUnknown.
    let reason = if code == 0 { 0x20026 } else { 0x20023 };
    semihost(0x18, reason);
    loop {}
}

#[inline(never)]
#[unsafe(no_mangle)]
extern "C" fn mark_start() {
    // SAFETY: a no-op that keeps the two markers distinct.
    unsafe { asm!("nop", options(nomem, nostack)) };
}

#[inline(never)]
#[unsafe(no_mangle)]
extern "C" fn mark_end() {
    // SAFETY: as above.
    unsafe { asm!("nop", "nop", options(nomem, nostack)) };
}

unsafe extern "C" {
    static _stack_bottom: u32;
}

const PAINT: u32 = 0xA5A5_A5A5;

/// Fills the unused stack below the caller's frame with a pattern; returns
/// the stack pointer there.
#[inline(never)]
fn paint_stack() -> u32 {
    let sp: u32;
    // SAFETY: reads the stack pointer.
    unsafe { asm!("mov {}, sp", out(reg) sp, options(nomem, nostack)) };
    let mut p = &raw const _stack_bottom as u32;
    // A leaf with no frame below its stack pointer: leave 16 bytes of margin.
    while p + 16 < sp {
        // SAFETY: RAM between the end of .bss and below the live stack is unused.
        unsafe { (p as *mut u32).write_volatile(PAINT) };
        p += 4;
    }
    sp
}

/// Prints `stack <bytes>`: the deepest stack use below `sp0` since it was painted.
#[inline(never)]
fn report_stack(sp0: u32) {
    let mut p = &raw const _stack_bottom as u32;
    // SAFETY: reading the painted region, below the live stack.
    while p < sp0 && unsafe { (p as *const u32).read_volatile() } == PAINT {
        p += 4;
    }
    let mut n = sp0.saturating_sub(p);
    let mut digits = [0u8; 10];
    let mut k = digits.len();
    loop {
        k -= 1;
        digits[k] = b'0' + (n % 10) as u8;
        n /= 10;
        if n == 0 || k == 0 {
            break;
        }
    }
    let d = &digits[k..];
    let mut out = [0u8; 20];
    out[..6].copy_from_slice(b"stack ");
    out[6..6 + d.len()].copy_from_slice(d);
    out[6 + d.len()] = b'\n';
    print(&out[..7 + d.len()]);
}

/// Everything a probe may touch.
struct Bench {
    pi: PiController,
    cl: CurrentLoop,
    setpoint_a: f32,
    measured_a: f32,
    counts: u16,
    bus_v: f32,
    out_v: f32,
    cmd: DriveCommand,
    gains_kp: f32,
}

#[inline(never)]
fn measure(b: &mut Bench, f: fn(&mut Bench)) {
    mark_start();
    f(black_box(b));
    mark_end();
}

#[inline(never)]
#[unsafe(no_mangle)]
fn probe_empty(b: &mut Bench) {
    // SAFETY: a no-op, so this probe is not folded into another function.
    unsafe { asm!("nop", "nop", "nop", options(nomem, nostack)) };
    black_box(b);
}

#[inline(never)]
#[unsafe(no_mangle)]
fn probe_pi_update(b: &mut Bench) {
    b.out_v = b.pi.update(b.setpoint_a, b.measured_a);
}

#[inline(never)]
#[unsafe(no_mangle)]
fn probe_loop_tick(b: &mut Bench) {
    b.cmd = b.cl.tick(&TickInput {
        current_counts: b.counts,
        bus_v: b.bus_v,
        speed_rad_s: None,
    });
}

#[inline(never)]
#[unsafe(no_mangle)]
fn probe_design(b: &mut Bench) {
    let plant = RlPlant::new(black_box(1.9f32), black_box(2.4e-3));
    let sampling = Sampling::new(black_box(50e-6f32), true, 0.0);
    let spec = Spec::new(black_box(2e-3f32), black_box(0.05));
    if let (Ok(p), Ok(s), Ok(sp)) = (plant, sampling, spec) {
        if let Ok(g) = discrete::design(&p, &s, &sp) {
            b.gains_kp = g.kp_v_per_a;
        }
    }
}

/// Announces a scenario; `run.py` starts a new scenario at each entry here.
#[inline(never)]
#[unsafe(no_mangle)]
fn announce(name: &[u8]) {
    print(name);
}

fn build() -> Option<Bench> {
    let sense = CurrentSense::from_shunt(12, black_box(3.3), 0.010, 20.0, 2048.0).ok()?;
    let supervisor = SupervisorConfig::new(
        OvercurrentLimit::new(6.0, 3).ok()?,
        BusWindow::new(18.0, 30.0).ok()?,
    )
    .with_thermal(ThermalConfig::from_trip_class(2.0, TripClass::Class10).ok()?);
    let gains = PiGains::from_kp_ti(black_box(12.06), black_box(1.263e-3)).ok()?;
    let pi = PiConfig::new(gains, 50e-6, OutputLimits::symmetric(22.8).ok()?).ok()?;
    let config = LoopConfig::new(
        sense,
        SetpointLimits::new(-4.0, 4.0, 2000.0).ok()?,
        supervisor,
        pi,
        DutyMapping::new(0.95, 12.0).ok()?,
    )
    .ok()?;
    Some(Bench {
        pi: PiController::new(pi),
        cl: CurrentLoop::new(config).ok()?,
        setpoint_a: 1.5,
        measured_a: 1.45,
        counts: 2048,
        bus_v: 24.0,
        out_v: 0.0,
        cmd: DriveCommand::SAFE,
        gains_kp: 0.0,
    })
}

fn main() -> u32 {
    let Some(mut b) = build() else { return 2 };
    announce(b"scenario empty\n");
    for _ in 0..3 {
        measure(&mut b, probe_empty);
    }
    announce(b"scenario pi_linear\n");
    let sp0 = paint_stack();
    for k in 0..20 {
        b.measured_a = 1.45 + 0.001 * k as f32;
        measure(&mut b, probe_pi_update);
    }
    report_stack(sp0);
    announce(b"scenario pi_saturated_high\n");
    let sp0 = paint_stack();
    b.pi.reset();
    for _ in 0..20 {
        b.setpoint_a = 4.0;
        b.measured_a = -2.0;
        measure(&mut b, probe_pi_update);
    }
    report_stack(sp0);
    announce(b"scenario pi_saturated_low\n");
    let sp0 = paint_stack();
    for _ in 0..20 {
        b.setpoint_a = -4.0;
        b.measured_a = 2.0;
        measure(&mut b, probe_pi_update);
    }
    // The assembled loop, closed against a first-order winding model (1.9 ohm,
    // 2.4 mH, 50 us, one-sample delay) computed between the measured calls.
    report_stack(sp0);
    announce(b"scenario loop_closed_run\n");
    let sp0 = paint_stack();
    let _ = b.cl.apply(Command::Enable);
    let _ = b.cl.apply(Command::SetCurrent(1.5));
    let (a, gain) = (0.960_9f32, 0.020_57f32); // exp(-R Ts / L), (1 - a) / R
    let mut i = 0.0f32;
    let mut pending_v = 0.0f32;
    for _ in 0..60 {
        b.counts = (2048.0 + i / 0.004_028_32 + 0.5) as u16;
        measure(&mut b, probe_loop_tick);
        i = a * i + gain * pending_v;
        pending_v = b.cmd.signed_duty() * b.bus_v;
    }
    report_stack(sp0);
    announce(b"scenario loop_faulted\n");
    let sp0 = paint_stack();
    b.counts = 4095; // sensor at the rail: faults on the first tick
    for _ in 0..20 {
        measure(&mut b, probe_loop_tick);
    }
    report_stack(sp0);
    announce(b"scenario design_direct_discrete\n");
    let sp0 = paint_stack();
    for _ in 0..3 {
        measure(&mut b, probe_design);
    }
    report_stack(sp0);
    announce(b"done\n");
    black_box(b.out_v + b.gains_kp);
    0
}

/// Reset: enable the FPU where there is one, then run `main` and exit.
#[unsafe(no_mangle)]
pub extern "C" fn reset() -> ! {
    #[cfg(target_abi = "eabihf")]
    {
        // CPACR: full access to CP10 and CP11 (the FPU), before any float.
        // SAFETY: a write to the system control block on a single core at reset.
        unsafe {
            let cpacr = 0xE000_ED88 as *mut u32;
            cpacr.write_volatile(cpacr.read_volatile() | (0xF << 20));
            asm!("dsb", "isb", options(nostack));
        }
    }
    let code = main();
    exit(code)
}

#[unsafe(link_section = ".reset_vector")]
#[unsafe(no_mangle)]
pub static RESET_VECTOR: extern "C" fn() -> ! = reset;

extern "C" fn fault() -> ! {
    exit(3)
}

/// NMI, HardFault and the rest of the system exceptions all exit with code 3.
#[unsafe(link_section = ".exception_vectors")]
#[unsafe(no_mangle)]
pub static EXCEPTION_VECTORS: [extern "C" fn() -> !; 14] = [fault; 14];
