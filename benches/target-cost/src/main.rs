//! The target-cost probe: pi-core's control path on bare metal, bracketed by
//! marker calls so that an execution trace of QEMU can count each call's
//! instructions exactly (see `run.py`).
//!
//! Every measured call goes through `measure`, which calls `mark_start`, the
//! probe, then `mark_end`. Each probe is an `#[inline(never)]` function taking
//! its inputs in registers as the ABI passes them (the bare PI: the controller,
//! setpoint and measurement; the loop: the loop and the tick's inputs), with
//! the inputs made opaque by `black_box` at the call. `run.py` counts, inside
//! the bracket, from the probe's first instruction up to its return, so the
//! figure is the probe's call itself (its frame, body and everything it calls)
//! and nothing of the harness. `probe_empty` is a check on that count.
//!
//! Scenarios run in a fixed order; the probe announces each on the
//! semihosting console and exits through semihosting when done.

#![no_std]
#![no_main]

use core::arch::asm;
use core::hint::black_box;
use core::panic::PanicInfo;

use pi_core::capture::{Capture, CaptureSpec, Trigger};
use pi_core::current_loop::fixed::{FixedCommand, FixedDrive, FixedLoop, FixedLoopConfig, FixedTickInput};
use pi_core::design::{RlPlant, Sampling, Spec, discrete};
use pi_core::pi::fixed::{FixedPi, FixedScale};
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

/// Runs `f` between the two markers; `run.py` finds the probe's own
/// instructions inside the bracket.
#[inline(always)]
fn measure<R>(f: impl FnOnce() -> R) -> R {
    mark_start();
    let r = f();
    mark_end();
    black_box(r)
}

/// A probe that does nothing: its count is its own frame, a check on `run.py`.
#[inline(never)]
#[unsafe(no_mangle)]
fn probe_empty(x: u32) -> u32 {
    // SAFETY: a no-op, so this probe is not folded into another function.
    unsafe { asm!("nop", options(nomem, nostack)) };
    x
}

/// The bare PI update, inputs and output in registers as the ABI passes them.
#[inline(never)]
#[unsafe(no_mangle)]
fn probe_pi_update(pi: &mut PiController, setpoint_a: f32, measured_a: f32) -> f32 {
    pi.update(setpoint_a, measured_a)
}

/// The fixed-point PI update (Q15 in, Q15 out).
#[inline(never)]
#[unsafe(no_mangle)]
fn probe_fixed_pi_update(pi: &mut FixedPi, setpoint_q15: i16, measured_q15: i16) -> i16 {
    pi.update(setpoint_q15, measured_q15)
}

/// One tick of the assembled loop.
#[inline(never)]
#[unsafe(no_mangle)]
fn probe_loop_tick(cl: &mut CurrentLoop, input: &TickInput) -> DriveCommand {
    cl.tick(input)
}

/// One tick of the assembled fixed-point loop.
#[inline(never)]
#[unsafe(no_mangle)]
fn probe_fixed_loop_tick(cl: &mut FixedLoop, input: FixedTickInput) -> FixedDrive {
    cl.tick(input)
}

/// One tick's capture call, after the tick.
#[inline(never)]
#[unsafe(no_mangle)]
fn probe_capture(cap: &mut Capture<CAPTURE>, cl: &CurrentLoop, input: &TickInput) {
    cap.record(cl, input)
}

/// The on-device design routine (direct discrete placement, f32), as a retune
/// from a bench command would run it; returns Kp or NaN.
#[inline(never)]
#[unsafe(no_mangle)]
fn probe_design(r_ohm: f32, l_h: f32, ts_s: f32, settling_s: f32, overshoot: f32) -> f32 {
    let plant = RlPlant::new(r_ohm, l_h);
    let sampling = Sampling::new(ts_s, 1.0, 0.0);
    let spec = Spec::new(settling_s, overshoot);
    if let (Ok(p), Ok(s), Ok(sp)) = (plant, sampling, spec)
        && let Ok(g) = discrete::design(&p, &s, &sp)
    {
        return g.kp_v_per_a;
    }
    f32::NAN
}

/// Announces a scenario; `run.py` starts a new scenario at each entry here.
#[inline(never)]
#[unsafe(no_mangle)]
fn announce(name: &[u8]) {
    print(name);
}

/// One PI update through the probe, with opaque inputs.
fn pi_call(pi: &mut PiController, setpoint_a: f32, measured_a: f32) -> f32 {
    let (r, y) = (black_box(setpoint_a), black_box(measured_a));
    measure(|| probe_pi_update(black_box(pi), r, y))
}

/// One fixed-point PI update through the probe, with opaque inputs.
fn fixed_pi_call(pi: &mut FixedPi, setpoint_q15: i16, measured_q15: i16) -> i16 {
    let (r, y) = (black_box(setpoint_q15), black_box(measured_q15));
    measure(|| probe_fixed_pi_update(black_box(pi), r, y))
}

/// One loop tick through the probe, with opaque inputs.
fn tick_call(cl: &mut CurrentLoop, counts: u16, bus_v: f32) -> DriveCommand {
    let input = black_box(TickInput {
        current_counts: counts,
        bus_v,
        speed_rad_s: None,
    });
    measure(|| probe_loop_tick(black_box(cl), &input))
}

/// One fixed-point loop tick through the probe, with opaque inputs.
fn fixed_tick_call(cl: &mut FixedLoop, counts: u16, bus_counts: u16) -> FixedDrive {
    let input = black_box(FixedTickInput {
        current_counts: counts,
        bus_counts,
    });
    measure(|| probe_fixed_loop_tick(black_box(cl), input))
}

/// A tick of the loop (not measured), then its capture call (measured).
fn capture_call(cap: &mut Capture<CAPTURE>, cl: &mut CurrentLoop, counts: u16) {
    let input = black_box(TickInput {
        current_counts: counts,
        bus_v: 24.0,
        speed_rad_s: None,
    });
    cl.tick(&input);
    measure(|| probe_capture(black_box(cap), black_box(cl), &input));
}

/// Samples the probe's capture holds (20 bytes each).
const CAPTURE: usize = 64;

/// A scenario: announce it, paint the stack, run `body`, report the stack.
fn scenario(name: &[u8], body: impl FnOnce()) {
    announce(name);
    let sp0 = paint_stack();
    body();
    report_stack(sp0);
}

/// The invented demo board of `host-sim` (`demo::loop_config`): 12-bit ADC,
/// 10 mOhm shunt, gain 20 at mid-scale; 6 A for 3 samples; bus 18-30 V; I^2t
/// class 10 at 2 A rated; setpoint +/-4 A slewed at 2000 A/s; Kp = L 2 pi 800 Hz,
/// Ti = L / R for the 1.9 ohm, 2.4 mH winding; PI limits +/-30 V; duty <= 0.95.
fn demo_loop() -> Option<CurrentLoop> {
    let sense = CurrentSense::from_shunt(12, black_box(3.3), 0.010, 20.0, 2048.0).ok()?;
    let supervisor = SupervisorConfig::new(
        OvercurrentLimit::new(6.0, 3).ok()?,
        BusWindow::new(18.0, 30.0).ok()?,
    )
    .with_thermal(ThermalConfig::from_trip_class(2.0, TripClass::Class10).ok()?);
    let config = LoopConfig::new(
        sense,
        SetpointLimits::new(-4.0, 4.0, 2000.0).ok()?,
        supervisor,
        demo_pi(AntiWindup::default(), IntegratorRule::BackwardEuler, 30.0)?,
        DutyMapping::new(0.95, 12.0).ok()?,
    )
    .ok()?;
    CurrentLoop::new(config).ok()
}

/// The demo loop on integers, with a 12-bit bus ADC of 40 V full scale.
fn demo_fixed_loop() -> Option<FixedLoop> {
    let base = *demo_loop()?.config();
    let config = FixedLoopConfig::new(base, 12, black_box(40.0 / 4096.0)).ok()?;
    FixedLoop::new(config).ok()
}

/// The demo loop with everything on that can cost a tick: stuck detection
/// (band 0 counts, 100 ticks, 5 % drive), a speed limit of 600 rad/s and
/// feedforward of the winding's 1.9 ohm and an invented 0.02 V s/rad.
fn full_loop() -> Option<CurrentLoop> {
    let base = *demo_loop()?.config();
    let supervisor = (*base.supervisor())
        .with_stuck_detection(StuckDetection::new(0, 100, 0.05).ok()?)
        .with_speed_limit(SpeedLimit::new(600.0).ok()?);
    let config = LoopConfig::new(
        *base.sense(),
        *base.setpoint(),
        supervisor,
        *base.pi(),
        *base.duty(),
    )
    .ok()?
    .with_feedforward(Feedforward::new(black_box(1.9), black_box(0.02)).ok()?)
    .ok()?;
    CurrentLoop::new(config).ok()
}

/// The demo fixed-point loop with stuck detection on as in `full_loop`
/// (it takes no speed and no feedforward).
fn full_fixed_loop() -> Option<FixedLoop> {
    let base = *demo_loop()?.config();
    let supervisor = (*base.supervisor()).with_stuck_detection(StuckDetection::new(0, 100, 0.05).ok()?);
    let base = LoopConfig::new(
        *base.sense(),
        *base.setpoint(),
        supervisor,
        *base.pi(),
        *base.duty(),
    )
    .ok()?;
    let config = FixedLoopConfig::new(base, 12, black_box(40.0 / 4096.0)).ok()?;
    FixedLoop::new(config).ok()
}

/// Bus counts of 24 V on the demo's bus ADC.
const BUS_24V: u16 = 2458;

/// As `closed_run`, for the fixed-point loop.
fn fixed_closed_run(cl: &mut FixedLoop, ticks: u32, i: &mut f32, pending_v: &mut f32) {
    let (a, gain) = (0.960_9f32, 0.020_57f32);
    let bus_v = BUS_24V as f32 * 40.0 / 4096.0;
    for _ in 0..ticks {
        let cmd = fixed_tick_call(cl, counts_of(*i), BUS_24V);
        *i = a * *i + gain * *pending_v;
        *pending_v = cmd.to_drive_command().signed_duty() * bus_v;
    }
}

fn demo_pi(aw: AntiWindup, rule: IntegratorRule, limit_v: f32) -> Option<PiConfig> {
    let gains = PiGains::from_kp_ti(black_box(12.06), black_box(1.263e-3)).ok()?;
    PiConfig::new(gains, 50e-6, OutputLimits::symmetric(limit_v).ok()?)
        .ok()?
        .with_rule(rule)
        .with_anti_windup(aw)
        .ok()
}

/// Counts for a current on the demo board (4.028 mA per count at mid-scale).
fn counts_of(current_a: f32) -> u16 {
    (2048.0 + current_a / 0.004_028_32 + 0.5) as u16
}

/// Runs the demo loop closed around a first-order model of the winding (1.9
/// ohm, 2.4 mH, 50 us, the duty applied one period late), computed between the
/// measured calls, for `ticks` ticks at a bus of `bus_v`.
fn closed_run(cl: &mut CurrentLoop, ticks: u32, bus_v: f32, i: &mut f32, pending_v: &mut f32) {
    let (a, gain) = (0.960_9f32, 0.020_57f32); // exp(-R Ts / L), (1 - a) / R
    for _ in 0..ticks {
        let cmd = tick_call(cl, counts_of(*i), bus_v);
        *i = a * *i + gain * *pending_v;
        *pending_v = cmd.signed_duty() * bus_v;
    }
}

fn main() -> u32 {
    let Some(pi_config) = demo_pi(AntiWindup::default(), IntegratorRule::BackwardEuler, 22.8) else {
        return 2;
    };
    scenario(b"scenario empty\n", || {
        for k in 0..3 {
            black_box(measure(|| probe_empty(black_box(k))));
        }
    });
    let mut pi = PiController::new(pi_config);
    scenario(b"scenario pi_linear\n", || {
        for k in 0..20 {
            pi_call(&mut pi, 1.5, 1.45 + 0.001 * k as f32);
        }
    });
    scenario(b"scenario pi_saturated_high\n", || {
        pi.reset();
        for _ in 0..20 {
            pi_call(&mut pi, 4.0, -2.0);
        }
    });
    scenario(b"scenario pi_saturated_low\n", || {
        for _ in 0..20 {
            pi_call(&mut pi, -4.0, 2.0);
        }
    });
    scenario(b"scenario pi_bad_input\n", || {
        for _ in 0..5 {
            pi_call(&mut pi, 1.5, f32::NAN);
        }
    });
    // The general path: the update that hands a retune over, trapezoidal
    // integration, clamping.
    scenario(b"scenario pi_retune_handover\n", || {
        for k in 0..5 {
            pi.retune(pi.config().gains());
            pi_call(&mut pi, 1.5, 1.4 + 0.01 * k as f32);
        }
    });
    let Some(tustin) = demo_pi(AntiWindup::default(), IntegratorRule::Tustin, 22.8) else {
        return 2;
    };
    let mut pi = PiController::new(tustin);
    scenario(b"scenario pi_tustin_mixed\n", || {
        for k in 0..20 {
            pi_call(&mut pi, if k < 10 { 1.5 } else { 4.0 }, -1.0 + 0.1 * k as f32);
        }
    });
    let Some(clamping) = demo_pi(AntiWindup::Clamping, IntegratorRule::BackwardEuler, 22.8) else {
        return 2;
    };
    let mut pi = PiController::new(clamping);
    scenario(b"scenario pi_clamping_mixed\n", || {
        for k in 0..20 {
            pi_call(&mut pi, if k < 10 { 1.5 } else { 4.0 }, -1.0 + 0.1 * k as f32);
        }
    });

    // The fixed-point PI on the same configuration, full scales 8 A and
    // 32 V (1.5 A is 6144 counts, 4 A 16384).
    let Ok(scale) = FixedScale::new(8.0, 32.0) else {
        return 2;
    };
    let Ok(mut fixed) = FixedPi::new(pi_config, scale) else {
        return 2;
    };
    scenario(b"scenario fixed_pi_linear\n", || {
        for k in 0..20 {
            fixed_pi_call(&mut fixed, 6144, 5939 + 4 * k);
        }
    });
    scenario(b"scenario fixed_pi_saturated\n", || {
        for k in 0..20 {
            if k < 10 {
                fixed_pi_call(&mut fixed, 16384, -8192);
            } else {
                fixed_pi_call(&mut fixed, -16384, 8192);
            }
        }
    });

    // A setpoint weight of 0 (what direct placement and the root locus
    // design give): the proportional part in two products, the saturated
    // step's offset `Kp (1 - b) r`, both arithmetics.
    let Some(weighted) = PiGains::from_kp_ti(black_box(12.06), black_box(1.263e-3))
        .and_then(|g| g.with_setpoint_weight(0.0))
        .ok()
        .and_then(|g| PiConfig::new(g, 50e-6, OutputLimits::symmetric(22.8).ok()?).ok())
    else {
        return 2;
    };
    let mut pi = PiController::new(weighted);
    scenario(b"scenario pi_weighted_mixed\n", || {
        for k in 0..20 {
            pi_call(&mut pi, if k < 10 { 1.5 } else { 4.0 }, -1.0 + 0.1 * k as f32);
        }
    });
    let Ok(mut fixed) = FixedPi::new(weighted, scale) else {
        return 2;
    };
    scenario(b"scenario fixed_pi_weighted_mixed\n", || {
        for k in 0..20 {
            if k < 10 {
                fixed_pi_call(&mut fixed, 6144, 5939 + 4 * k);
            } else {
                fixed_pi_call(&mut fixed, 16384, -8192);
            }
        }
    });

    // The assembled loop on the demo board: enabled, a 1.5 A step, closed
    // against the winding model for 250 ticks, so the run covers the slew, the
    // saturated and the linear PI, and one 10 ms step of the I^2t model.
    let Some(mut cl) = demo_loop() else { return 2 };
    let (mut i, mut pending_v) = (0.0f32, 0.0f32);
    scenario(b"scenario loop_closed_run\n", || {
        let _ = cl.apply(Command::Enable);
        let _ = cl.apply(Command::SetCurrent(1.5));
        closed_run(&mut cl, 250, 24.0, &mut i, &mut pending_v);
    });
    // Running into the limit on the quiet path: a 4 A setpoint while the
    // reading stays at 0.5 A (a winding held back by something the PI cannot
    // overcome), the PI saturated high.
    scenario(b"scenario loop_saturated\n", || {
        let _ = cl.apply(Command::SetCurrent(4.0));
        for _ in 0..40 {
            tick_call(&mut cl, counts_of(0.5), 24.0);
        }
        let _ = cl.apply(Command::SetCurrent(1.5));
        closed_run(&mut cl, 60, 24.0, &mut i, &mut pending_v);
    });
    // Running while a detector counts: the current above the 6 A threshold for
    // two samples (the third would trip), then back.
    scenario(b"scenario loop_overcurrent_counting\n", || {
        for _ in 0..4 {
            tick_call(&mut cl, counts_of(6.5), 24.0);
            tick_call(&mut cl, counts_of(6.5), 24.0);
            tick_call(&mut cl, counts_of(1.5), 24.0);
        }
    });
    // Running with a warm winding (I^2t heat above rated, below the trip).
    scenario(b"scenario loop_hot_winding\n", || {
        if let Some(t) = cl.supervisor_mut().thermal_mut() {
            let _ = t.set_heat(1.2);
        }
        closed_run(&mut cl, 20, 24.0, &mut i, &mut pending_v);
    });
    scenario(b"scenario loop_faulted\n", || {
        for _ in 0..20 {
            tick_call(&mut cl, 4095, 24.0); // sensor at the rail: faults on the first tick
        }
    });
    // The same runs on the fixed-point loop (every tick takes its full check).
    let Some(mut fl) = demo_fixed_loop() else { return 2 };
    let (mut i, mut pending_v) = (0.0f32, 0.0f32);
    let q15 = |a: f32| (a / (4096.0 * 0.004_028_32) * 32768.0) as i16;
    scenario(b"scenario fixed_loop_closed_run\n", || {
        let _ = fl.apply(FixedCommand::Enable);
        let _ = fl.apply(FixedCommand::SetCurrent(q15(1.5)));
        fixed_closed_run(&mut fl, 250, &mut i, &mut pending_v);
    });
    scenario(b"scenario fixed_loop_saturated\n", || {
        let _ = fl.apply(FixedCommand::SetCurrent(q15(4.0)));
        for _ in 0..40 {
            fixed_tick_call(&mut fl, counts_of(0.5), BUS_24V);
        }
        let _ = fl.apply(FixedCommand::SetCurrent(q15(1.5)));
        fixed_closed_run(&mut fl, 60, &mut i, &mut pending_v);
    });
    scenario(b"scenario fixed_loop_overcurrent_counting\n", || {
        for _ in 0..4 {
            fixed_tick_call(&mut fl, counts_of(6.5), BUS_24V);
            fixed_tick_call(&mut fl, counts_of(6.5), BUS_24V);
            fixed_tick_call(&mut fl, counts_of(1.5), BUS_24V);
        }
    });
    // A warm winding, through a thermal step (200 ticks).
    scenario(b"scenario fixed_loop_hot_winding\n", || {
        if let Some(h) = fl.heat_mut() {
            let _ = h.set_heat(1.2);
        }
        fixed_closed_run(&mut fl, 210, &mut i, &mut pending_v);
    });
    scenario(b"scenario fixed_loop_faulted\n", || {
        for _ in 0..20 {
            fixed_tick_call(&mut fl, 4095, BUS_24V);
        }
    });
    // Everything that costs a tick at once, on the loops with every
    // protection on: the setpoint slewing (its target alternating 0.2 A
    // either side, at 0.1 A per tick), a reading of 6.5 A two ticks in
    // three (the overcurrent and the stuck detector counting, the PI
    // saturated low, never a trip), over three thermal steps (600 ticks):
    // the slowest ticks are the thermal step's first and last.
    let Some(mut cl) = full_loop() else { return 2 };
    scenario(b"scenario loop_worst\n", || {
        let _ = cl.apply(Command::Enable);
        for k in 0..600 {
            let _ = cl.apply(Command::SetCurrent(if k % 2 == 0 { 1.7 } else { 1.3 }));
            let amps = if k % 3 == 2 { 1.5 } else { 6.5 };
            let input = black_box(TickInput {
                current_counts: counts_of(amps),
                bus_v: 24.0,
                speed_rad_s: Some(300.0),
            });
            measure(|| probe_loop_tick(black_box(&mut cl), &input));
        }
    });
    let Some(mut fl) = full_fixed_loop() else { return 2 };
    scenario(b"scenario fixed_loop_worst\n", || {
        let _ = fl.apply(FixedCommand::Enable);
        for k in 0..600 {
            let _ = fl.apply(FixedCommand::SetCurrent(q15(if k % 2 == 0 { 1.7 } else { 1.3 })));
            let amps = if k % 3 == 2 { 1.5 } else { 6.5 };
            fixed_tick_call(&mut fl, counts_of(amps), BUS_24V);
        }
    });
    // The capture beside a running loop: idle, armed and waiting for a
    // setpoint change, filling every tick, filling one tick in four.
    let Some(mut cl) = demo_loop() else { return 2 };
    let _ = cl.apply(Command::Enable);
    let mut cap: Capture<CAPTURE> = Capture::new();
    scenario(b"scenario capture_idle\n", || {
        for _ in 0..20 {
            capture_call(&mut cap, &mut cl, counts_of(0.0));
        }
    });
    scenario(b"scenario capture_armed\n", || {
        if let Ok(spec) = CaptureSpec::new(Trigger::SetpointChange, 1, 40, CAPTURE) {
            let _ = cap.arm(spec, 0.0, 0.0);
        }
        for _ in 0..20 {
            capture_call(&mut cap, &mut cl, counts_of(0.0));
        }
    });
    scenario(b"scenario capture_filling\n", || {
        let _ = cl.apply(Command::SetCurrent(1.0));
        for _ in 0..30 {
            capture_call(&mut cap, &mut cl, counts_of(0.2));
        }
    });
    scenario(b"scenario capture_decimated\n", || {
        if let Ok(spec) = CaptureSpec::new(Trigger::Immediate, 4, 40, CAPTURE) {
            let _ = cap.arm(spec, 1.0, 0.2);
        }
        for _ in 0..40 {
            capture_call(&mut cap, &mut cl, counts_of(0.2));
        }
    });
    scenario(b"scenario design_direct_discrete\n", || {
        for _ in 0..3 {
            let kp = measure(|| {
                probe_design(
                    black_box(1.9),
                    black_box(2.4e-3),
                    black_box(50e-6),
                    black_box(2e-3),
                    black_box(0.05),
                )
            });
            black_box(kp);
        }
    });
    announce(b"done\n");
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
