//! What given gains do on the sampled loop: closed-loop poles, stability,
//! margins, the largest stable period and the predicted step response, all from
//! an exact discrete model of the held, delayed, optionally filtered winding.
//!
//! ## The sampled plant
//!
//! The controller samples at `t = k Ts`; the duty `u[k]` computed from that
//! sample reaches the bridge `d = D Ts` later (`0 <= D <= 1`) and is held until
//! `u[k+1]` replaces it. The measured current is the winding `1 / (L s + R)`,
//! optionally followed by a first-order filter `1 / (tau s + 1)`. Its step
//! response is `s(t) = a0 + sum_j a_j exp(p_j t)` (partial fractions; `s(0) = 0`),
//! so the sample `n` periods after a unit pulse of `u[0]` is
//! `h[n] = s(n Ts - d) - s((n - 1) Ts - d)`, and summing the geometric series
//! gives, with `e_j = exp(p_j Ts)`,
//!
//! ```text
//! D = 0:  H(z) = sum_j a_j (e_j - 1) / (z - e_j)                      (the zero-order-hold equivalent)
//! D > 0:  H(z) = [ h1 prod_j (z - e_j) + sum_j q_j prod_(i != j) (z - e_i) ] / (z prod_j (z - e_j))
//!         h1 = s(Ts - d),  q_j = a_j exp(p_j (2 Ts - d)) (1 - exp(-p_j Ts))
//! ```
//!
//! which is the modified z-transform of the held plant (Franklin, Powell &
//! Workman, *Digital Control of Dynamic Systems*, the chapter on sampled-data
//! systems; cited from memory); `D = 1` reduces to `H0(z) / z`, the classic
//! one-period delay. Differences of exponentials go through `expm1` so that
//! `f32` keeps its digits when `Ts << L / R`. (When `tau` is within 0.1 % of
//! `L / R` it is nudged by 0.1 % so the two poles stay distinct.)
//! `tests/reference/design_reference.py` checks all of it against an
//! independent exact discretisation of the delayed state-space loop (scipy's
//! matrix exponential) run through python-control.

use crate::design::poly::{Complex, MAX_DEGREE, Poly};
use crate::design::step::{StepMeter, StepMetrics};
use crate::design::{Gains, Real, RlPlant, Sampling};

/// The largest plant order handled here: the winding and one filter.
const MAX_POLES: usize = 2;

/// A sampled plant `num(z) / den(z)`: `den` monic of degree `n` (1 to 3),
/// `num` of degree below `n`, stored as the `n` coefficients of
/// `z^(n-1) .. z^0` (leading ones may be zero).
#[derive(Clone, Copy, Debug, PartialEq)]
struct Discrete<T> {
    num: [T; MAX_POLES + 1],
    den: [T; MAX_POLES + 2],
    n: usize,
}

impl<T: Real> Discrete<T> {
    /// The held, delayed plant with the step response
    /// `a0 + sum a_j exp(p_j t)`, given as the `(p_j, a_j)` pairs.
    fn held(poles: &[(T, T)], period_s: T, delay_periods: T) -> Self {
        let ts = period_s;
        let d = delay_periods * ts;
        let mut out = Self {
            num: [T::ZERO; MAX_POLES + 1],
            den: [T::ZERO; MAX_POLES + 2],
            n: 0,
        };
        // den = prod (z - e_j), lowest power first while building.
        let mut den_low = [T::ZERO; MAX_POLES + 2];
        den_low[0] = T::ONE;
        let mut deg = 0;
        for &(p, _) in poles.iter().take(MAX_POLES) {
            let e = (p * ts).exp();
            multiply_linear(&mut den_low, deg, e);
            deg += 1;
        }
        let np = deg;
        // numerator terms, lowest power first.
        let mut num_low = [T::ZERO; MAX_POLES + 2];
        let delayed = delay_periods > T::ZERO;
        for (j, &(p, a)) in poles.iter().take(MAX_POLES).enumerate() {
            // prod over i != j of (z - e_i)
            let mut others = [T::ZERO; MAX_POLES + 2];
            others[0] = T::ONE;
            let mut od = 0;
            for (i, &(pi, _)) in poles.iter().take(MAX_POLES).enumerate() {
                if i != j {
                    multiply_linear(&mut others, od, (pi * ts).exp());
                    od += 1;
                }
            }
            let coefficient = if delayed {
                // q_j = -a_j exp(p_j (2 Ts - d)) expm1(-p_j Ts)
                -a * (p * (T::of(2.0) * ts - d)).exp() * (-p * ts).exp_m1()
            } else {
                a * (p * ts).exp_m1()
            };
            for (k, &o) in others.iter().enumerate().take(od + 1) {
                if let Some(slot) = num_low.get_mut(k) {
                    *slot = *slot + coefficient * o;
                }
            }
        }
        let mut n = np;
        if delayed {
            // + h1 prod (z - e_j), h1 = s(Ts - d) = sum a_j expm1(p_j (Ts - d)).
            let h1 = poles
                .iter()
                .take(MAX_POLES)
                .fold(T::ZERO, |acc, &(p, a)| acc + a * (p * (ts - d)).exp_m1());
            for (k, &c) in den_low.iter().enumerate().take(np + 1) {
                if let Some(slot) = num_low.get_mut(k) {
                    *slot = *slot + h1 * c;
                }
            }
            // den times z.
            den_low.copy_within(0..MAX_POLES + 1, 1);
            den_low[0] = T::ZERO;
            n += 1;
        }
        out.n = n;
        // Highest power first: den has n + 1 coefficients, num n.
        for k in 0..=n.min(MAX_POLES + 1) {
            if let (Some(dst), Some(&src)) = (out.den.get_mut(k), den_low.get(n - k)) {
                *dst = src;
            }
        }
        for k in 0..n.min(MAX_POLES + 1) {
            if let (Some(dst), Some(&src)) = (out.num.get_mut(k), num_low.get(n - 1 - k)) {
                *dst = src;
            }
        }
        out
    }

    fn den(&self) -> &[T] {
        let (used, _) = self.den.split_at((self.n + 1).min(MAX_POLES + 2));
        used
    }

    fn num(&self) -> &[T] {
        let (used, _) = self.num.split_at(self.n.min(MAX_POLES + 1));
        used
    }

    fn eval(&self, z: Complex<T>) -> Complex<T> {
        let horner = |c: &[T]| {
            c.iter().fold(Complex::real(T::ZERO), |acc, &k| {
                acc.times(z).plus(Complex::real(k))
            })
        };
        horner(self.num()).over(horner(self.den()))
    }
}

/// `p(z) (z - r)` in place, `p` lowest power first of degree `deg`.
fn multiply_linear<T: Real>(p: &mut [T], deg: usize, r: T) {
    let mut carry = T::ZERO;
    for k in 0..=(deg + 1) {
        if let Some(c) = p.get_mut(k) {
            let old = *c;
            *c = carry - r * old;
            carry = old;
        }
    }
}

/// One step of `den(z) y = num(z) u` as a difference equation, with the
/// histories `y[k-1..]` and `u[k-1..]` (most recent first).
fn next_output<T: Real>(plant: &Discrete<T>, y: &[T; 3], u: &[T; 3]) -> T {
    let mut out = T::ZERO;
    for (i, (&nk, &dk)) in plant.num().iter().zip(plant.den().iter().skip(1)).enumerate() {
        if let (Some(&yi), Some(&ui)) = (y.get(i), u.get(i)) {
            out = out + nk * ui - dk * yi;
        }
    }
    out
}

fn shift<T: Copy>(h: &mut [T; 3], v: T) {
    h[2] = h[1];
    h[1] = h[0];
    h[0] = v;
}

/// The open loop of the sampled system, `C(z) H(z)`, with the PI
/// `C(z) = (k1 z - k0) / (z - 1)` (pi-core's backward-Euler law) and the
/// measured-current plant `H` above.
#[derive(Clone, Copy, Debug)]
pub struct OpenLoop<T> {
    /// `Kp + Ki Ts` and `Kp`.
    k1: T,
    k0: T,
    delay_periods: T,
    /// What the controller sees (winding, delay, filter).
    measured: Discrete<T>,
    /// The winding current itself (winding, delay), for the step prediction.
    true_current: Discrete<T>,
}

impl<T: Real> OpenLoop<T> {
    /// The open loop for gains on a plant sampled as described.
    pub fn new(plant: &RlPlant<T>, sampling: &Sampling<T>, gains: &Gains<T>) -> Self {
        let ts = sampling.period_s();
        let kp = gains.kp_v_per_a;
        let ki_ts = gains.ki_v_per_a_s() * ts;
        let r = plant.resistance_ohm();
        let p1 = -r / plant.inductance_h();
        // Winding: s(t) = (1 - exp(p1 t)) / R.
        let winding = [(p1, -T::ONE / r)];
        let delay = sampling.delay_periods();
        let true_current = Discrete::held(&winding, ts, delay);
        let measured = if sampling.filter_tau_s() == T::ZERO {
            true_current
        } else {
            let mut tau = sampling.filter_tau_s();
            if ((-T::ONE / tau) - p1).abs() < T::of(1e-3) * p1.abs() {
                tau = tau * T::of(1.001);
            }
            let p2 = -T::ONE / tau;
            let k = T::ONE / (plant.inductance_h() * tau);
            let a1 = k / (p1 * (p1 - p2));
            let a2 = k / (p2 * (p2 - p1));
            Discrete::held(&[(p1, a1), (p2, a2)], ts, delay)
        };
        Self {
            k1: kp + ki_ts,
            k0: kp,
            delay_periods: delay,
            measured,
            true_current,
        }
    }

    /// The PI's zero in z, `Kp / (Kp + Ki Ts)`.
    pub fn pi_zero(&self) -> T {
        self.k0 / self.k1
    }

    /// The measured-current plant `num / den`: the numerator's coefficients
    /// (as many as the denominator's degree, highest power first, leading ones
    /// possibly zero) and the monic denominator's.
    pub fn plant(&self) -> (&[T], &[T]) {
        (self.measured.num(), self.measured.den())
    }

    /// The sample-to-update delay in the loop, periods.
    pub fn delay_periods(&self) -> T {
        self.delay_periods
    }

    /// `L(z)` at a point.
    pub fn eval(&self, z: Complex<T>) -> Complex<T> {
        let c = Complex::real(self.k1).times(z).minus(Complex::real(self.k0));
        let c = c.over(z.minus(Complex::real(T::ONE)));
        c.times(self.measured.eval(z))
    }

    /// The closed loop's characteristic polynomial:
    /// `(z - 1) den(z) + (k1 z - k0) num(z)`.
    pub fn characteristic(&self) -> Option<Poly<T>> {
        let den = self.measured.den();
        let num = self.measured.num();
        let n = self.measured.n;
        // Highest power first, degree n + 1.
        let mut p = [T::ZERO; MAX_DEGREE + 1];
        // (z - 1) den: coefficient k is den[k] - den[k - 1].
        let mut previous = T::ZERO;
        for (pk, &dk) in p.iter_mut().zip(den) {
            *pk = dk - previous;
            previous = dk;
        }
        if let Some(pk) = p.get_mut(n + 1) {
            *pk = -previous;
        }
        // (k1 z - k0) num: num has degree n - 1 (n coefficients), the product
        // degree n, so it lands on p[1..=n + 1].
        for (i, &c) in num.iter().enumerate() {
            if let Some(pk) = p.get_mut(i + 1) {
                *pk = *pk + self.k1 * c;
            }
            if let Some(pk) = p.get_mut(i + 2) {
                *pk = *pk - self.k0 * c;
            }
        }
        Poly::new(p.get(..=n + 1)?)
    }

    /// Closed-loop poles; `len` of them are valid.
    pub fn poles(&self) -> ([Complex<T>; MAX_DEGREE], usize) {
        match self.characteristic() {
            Some(p) => (p.roots(), p.degree()),
            None => ([Complex::real(T::ZERO); MAX_DEGREE], 0),
        }
    }

    /// Largest pole magnitude (below 1: stable).
    pub fn spectral_radius(&self) -> T {
        let (p, n) = self.poles();
        p.iter().take(n).fold(T::ZERO, |m, z| m.max(z.abs()))
    }

    /// Stable: every closed-loop pole strictly inside the unit circle.
    pub fn is_stable(&self) -> bool {
        self.spectral_radius() < T::ONE
    }
}

/// Gain and phase margins of the sampled loop.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Margins<T> {
    /// Gain margin as a factor (`None`: the phase never reaches -180 degrees
    /// up to the Nyquist frequency).
    pub gain_margin: Option<T>,
    /// Phase margin, degrees (`None`: the gain never crosses 1).
    pub phase_margin_deg: Option<T>,
    /// Gain crossover frequency, hertz.
    pub crossover_hz: Option<T>,
    /// Modulus margin: the shortest distance from `L(exp(j w Ts))` to `-1` on
    /// the grid, `1 / max |S|` (1 is the most a loop can have; about 0.5 is
    /// common practice). It bounds both margins at once: a gain margin of at
    /// least `1 / (1 - Mm)` and a phase margin of at least `2 asin(Mm / 2)`
    /// (Astrom & Murray, *Feedback Systems*, the robustness chapter; cited from
    /// memory).
    pub modulus_margin: T,
}

impl<T: Real> Margins<T> {
    /// The gain margin in decibels, `20 log10(gm)`.
    pub fn gain_margin_db(&self) -> Option<T> {
        self.gain_margin.map(|g| T::of(20.0) * g.ln() / T::of(10.0).ln())
    }
}

/// A phase continued from the previous point of a sweep: `raw` (radians, as
/// `atan2` gives it) moved by whole turns to within `(-pi, pi]` of `previous`.
pub fn unwrap_phase<T: Real>(previous: T, raw: T) -> T {
    let mut d = raw - previous;
    let turn = T::of(2.0) * T::PI;
    // At most a few turns apart for finite inputs; bounded for the device.
    for _ in 0..64 {
        if d > T::PI {
            d = d - turn;
        } else if d <= -T::PI {
            d = d + turn;
        } else {
            break;
        }
    }
    previous + d
}

/// Margins from `L(exp(j w Ts))` on `points` frequencies up to and including
/// the Nyquist frequency exactly, with the phase unwrapped along the grid.
pub fn margins<T: Real>(open: &OpenLoop<T>, period_s: T, points: usize) -> Margins<T> {
    let n = points.max(16);
    let deg = T::of(180.0) / T::PI;
    let mut out = Margins {
        gain_margin: None,
        phase_margin_deg: None,
        crossover_hz: None,
        modulus_margin: T::of(f64::INFINITY),
    };
    let mut prev: Option<(T, T, T)> = None; // (theta, |L|, unwrapped phase)
    for k in 1..=n {
        let theta = if k == n {
            T::PI
        } else {
            T::PI * T::of(k as f64 / n as f64)
        };
        let l = open.eval(Complex::unit(theta));
        let mag = l.abs();
        let raw = l.arg();
        let phase = match prev {
            None => raw,
            Some((_, _, p)) => unwrap_phase(p, raw),
        };
        out.modulus_margin = out.modulus_margin.min(l.plus(Complex::real(T::ONE)).abs());
        if let Some((t0, m0, p0)) = prev {
            if out.phase_margin_deg.is_none() && m0 >= T::ONE && mag < T::ONE {
                let f = (m0 - T::ONE) / (m0 - mag);
                let th = t0 + f * (theta - t0);
                let ph = p0 + f * (phase - p0);
                out.phase_margin_deg = Some(T::of(180.0) + ph * deg);
                out.crossover_hz = Some(th / (T::of(2.0) * T::PI * period_s));
            }
            let limit = -T::PI;
            // Phase crossover, including a phase that reaches -180 exactly at Nyquist.
            let at_nyquist = k == n && (phase - limit).abs() <= T::of(1e-6);
            if out.gain_margin.is_none() && ((p0 > limit && phase <= limit) || at_nyquist) {
                let f = if p0 != phase {
                    (p0 - limit) / (p0 - phase)
                } else {
                    T::ONE
                };
                let m = m0 + f * (mag - m0);
                if m > T::ZERO {
                    out.gain_margin = Some(T::ONE / m);
                }
            }
        }
        prev = Some((theta, mag, phase));
    }
    out
}

/// The largest control period, at or around `sampling`'s, for which the gains
/// keep the loop stable (bisection to 1e-4 relative); `None` if none up to a
/// thousand times the period is unstable (the loop stays stable) or none down to
/// a thousandth is stable.
pub fn largest_stable_period<T: Real>(
    plant: &RlPlant<T>,
    sampling: &Sampling<T>,
    gains: &Gains<T>,
) -> Option<T> {
    let stable = |ts: T| OpenLoop::new(plant, &sampling.with_period(ts), gains).is_stable();
    let ts0 = sampling.period_s();
    let (mut lo, mut hi);
    if stable(ts0) {
        lo = ts0;
        hi = ts0;
        let mut found = false;
        for _ in 0..32 {
            hi = hi * T::of(1.25);
            if !stable(hi) {
                found = true;
                break;
            }
            lo = hi;
        }
        if !found {
            return None;
        }
    } else {
        hi = ts0;
        lo = ts0;
        let mut found = false;
        for _ in 0..32 {
            lo = lo * T::of(0.8);
            if stable(lo) {
                found = true;
                break;
            }
            hi = lo;
        }
        if !found {
            return None;
        }
    }
    for _ in 0..40 {
        let mid = (lo + hi) * T::of(0.5);
        if stable(mid) {
            lo = mid;
        } else {
            hi = mid;
        }
        if hi - lo <= T::of(1e-4) * lo {
            break;
        }
    }
    Some(lo)
}

/// The lag of the current behind its request while the rotor accelerates, as
/// a fraction of the current: the back-EMF is a ramp disturbance at the plant
/// input, rising at `ramp i` volts per second (see
/// [`RlPlant::with_rotor`]), and a PI loop follows a ramp disturbance with the
/// steady error `ramp i / Ki` (the final-value theorem on
/// `E(s) = G(s) / (1 + C(s) G(s)) ramp / s^2` with `C(s) ~ Ki / s`; Ogata,
/// *Modern Control Engineering*, the steady-state-error chapter; cited from
/// memory). 0 for a held rotor or a plain R-L load. If it exceeds the 2 %
/// settling band, a step does not settle until the rotor stops accelerating.
pub fn back_emf_lag<T: Real>(plant: &RlPlant<T>, gains: &Gains<T>) -> T {
    let ki = gains.ki_v_per_a_s();
    if ki > T::ZERO {
        plant.back_emf_ramp_v_per_a_s() / ki
    } else {
        T::of(f64::INFINITY)
    }
}

/// Simulates `steps` control periods of the linear loop after a unit step of
/// the setpoint, without saturation, with the proportional term acting on
/// `b r - y` (`setpoint_weight` b: 1 is the plain PI; 0 takes the PI zero out
/// of the setpoint response, as in `pi-core`'s `PiGains::with_setpoint_weight`),
/// and measures the true winding current at the sampling instants with the one
/// step-metrics routine ([`crate::design::step`]).
pub fn predict_step<T: Real>(
    open: &OpenLoop<T>,
    period_s: T,
    steps: usize,
    setpoint_weight: T,
) -> StepMetrics<T> {
    let kp = open.k0;
    let ki_ts = open.k1 - open.k0;
    let mut meter = StepMeter::new();
    let (mut ym, mut i, mut u) = ([T::ZERO; 3], [T::ZERO; 3], [T::ZERO; 3]);
    let mut integ = T::ZERO;
    for k in 0..steps {
        let y = next_output(&open.measured, &ym, &u);
        let current = next_output(&open.true_current, &i, &u);
        meter.sample(T::of(k as f64) * period_s, current);
        integ = integ + ki_ts * (T::ONE - y);
        let out = kp * (setpoint_weight - y) + integ;
        shift(&mut ym, y);
        shift(&mut i, current);
        shift(&mut u, out);
    }
    meter.finish().unwrap_or(StepMetrics {
        rise_time_s: None,
        overshoot: T::ZERO,
        peak: T::ZERO,
        peak_time_s: T::ZERO,
        settling_time_s: None,
        last: T::ZERO,
    })
}
