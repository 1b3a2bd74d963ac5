//! What given gains do on the sampled loop: closed-loop poles, stability,
//! margins, the largest stable period and the predicted step response, all from
//! the linear discrete model of [`crate::design::discrete`], extended by the
//! current filter when there is one.
//!
//! With a first-order filter of time constant `tau` on the measurement, the
//! controller sees the winding through `1 / ((L s + R)(tau s + 1))`, held over
//! each period; its zero-order-hold equivalent `(n1 z + n0) / ((z - e1)(z - e2))`
//! is computed by partial fractions. (When `tau` is within 0.1 % of `L / R` it
//! is nudged by 0.1 % so the two poles stay distinct.)

use crate::design::discrete::zoh_plant;
use crate::design::poly::{Complex, MAX_DEGREE, Poly};
use crate::design::{Gains, Real, RlPlant, Sampling};

/// The open loop of the sampled system: `C(z) z^-d Gm(z)` with
/// `Gm = num / den`, coefficients highest power first.
#[derive(Clone, Copy, Debug)]
pub struct OpenLoop<T> {
    /// `Kp + Ki Ts` and `Kp`: `C(z) = (k1 z - k0) / (z - 1)`.
    k1: T,
    k0: T,
    delay: bool,
    /// Measured-current plant numerator `[n1, n0]` (`n1 = 0` without filter).
    num: [T; 2],
    /// Its denominator, monic, up to degree 2: `[1, d1, d0]` or `[1, d1]`.
    den: [T; 3],
    den_degree: usize,
    /// The true-current plant `b / (z - a)`.
    a: T,
    b: T,
}

impl<T: Real> OpenLoop<T> {
    /// The open loop for gains on a plant sampled as described.
    pub fn new(plant: &RlPlant<T>, sampling: &Sampling<T>, gains: &Gains<T>) -> Self {
        let ts = sampling.period_s();
        let (a, b) = zoh_plant(plant, ts);
        let kp = gains.kp_v_per_a;
        let ki_ts = gains.ki_v_per_a_s() * ts;
        let (num, den, den_degree) = if sampling.filter_tau_s() == T::ZERO {
            ([T::ZERO, b], [T::ONE, -a, T::ZERO], 1)
        } else {
            let p1 = -plant.resistance_ohm() / plant.inductance_h();
            let mut tau = sampling.filter_tau_s();
            if ((-T::ONE / tau) - p1).abs() < T::of(1e-3) * p1.abs() {
                tau = tau * T::of(1.001);
            }
            let p2 = -T::ONE / tau;
            let k = T::ONE / (plant.inductance_h() * tau);
            let a0 = k / (p1 * p2);
            let a1 = k / (p1 * (p1 - p2));
            let a2 = k / (p2 * (p2 - p1));
            let (e1, e2) = ((p1 * ts).exp(), (p2 * ts).exp());
            let n1 = -a0 * (e1 + e2) - a1 * (T::ONE + e2) - a2 * (T::ONE + e1);
            let n0 = a0 * e1 * e2 + a1 * e2 + a2 * e1;
            ([n1, n0], [T::ONE, -(e1 + e2), e1 * e2], 2)
        };
        Self {
            k1: kp + ki_ts,
            k0: kp,
            delay: sampling.one_period_delay(),
            num,
            den,
            den_degree,
            a,
            b,
        }
    }

    /// The PI's zero in z, `Kp / (Kp + Ki Ts)`.
    pub fn pi_zero(&self) -> T {
        self.k0 / self.k1
    }

    /// The measured-current plant `num / den`: numerator `[n1, n0]` (`n1 = 0`
    /// without a filter) and the monic denominator's coefficients.
    pub fn plant(&self) -> ([T; 2], &[T]) {
        (self.num, self.den_used())
    }

    /// Whether the one-period delay (an open-loop pole at z = 0) is in the loop.
    pub fn has_delay(&self) -> bool {
        self.delay
    }

    /// `L(z)` at a point.
    pub fn eval(&self, z: Complex<T>) -> Complex<T> {
        let c = Complex::real(self.k1).times(z).minus(Complex::real(self.k0));
        let c = c.over(z.minus(Complex::real(T::ONE)));
        let n = Complex::real(self.num[0])
            .times(z)
            .plus(Complex::real(self.num[1]));
        let mut d = Complex::real(T::ONE);
        for &k in self.den_used().iter().skip(1) {
            d = d.times(z).plus(Complex::real(k));
        }
        let mut l = c.times(n).over(d);
        if self.delay {
            l = l.over(z);
        }
        l
    }

    /// The denominator's coefficients in use, `[1, d1]` or `[1, d1, d0]`.
    fn den_used(&self) -> &[T] {
        // `den_degree` is 1 or 2 by construction; written so that no bounds
        // check (and no panic path) is left for firmware builds.
        let (used, _) = self.den.split_at(self.den_degree.min(2) + 1);
        used
    }

    /// The closed loop's characteristic polynomial:
    /// `(z - 1) z^d den(z) + (k1 z - k0) num(z)`.
    pub fn characteristic(&self) -> Option<Poly<T>> {
        // (z - 1) * den: coefficient k is den[k] - den[k - 1], with den[-1] and
        // den[dd + 1] taken as zero.
        let mut p = [T::ZERO; MAX_DEGREE + 1];
        let den = self.den_used();
        let dd = den.len() - 1;
        let mut previous = T::ZERO;
        for (pk, &dk) in p.iter_mut().zip(den) {
            *pk = dk - previous;
            previous = dk;
        }
        if let Some(pk) = p.get_mut(dd + 1) {
            *pk = -previous;
        }
        let mut degree = dd + 1;
        if self.delay {
            degree += 1; // times z: one more trailing zero coefficient
        }
        // + (k1 z - k0)(n1 z + n0) = k1 n1 z^2 + (k1 n0 - k0 n1) z - k0 n0
        let q = [
            self.k1 * self.num[0],
            self.k1 * self.num[1] - self.k0 * self.num[0],
            -self.k0 * self.num[1],
        ];
        // Added at the powers z^2, z^1, z^0 (degree >= 2 here).
        for (j, &v) in q.iter().enumerate() {
            if let Some(pk) = (degree + j).checked_sub(2).and_then(|idx| p.get_mut(idx)) {
                *pk = *pk + v;
            }
        }
        Poly::new(p.get(..=degree)?)
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
            Some((_, _, p)) => {
                // Unwrap: the step from the last point is within (-pi, pi].
                let mut d = raw - p;
                while d > T::PI {
                    d = d - T::of(2.0) * T::PI;
                }
                while d <= -T::PI {
                    d = d + T::of(2.0) * T::PI;
                }
                p + d
            }
        };
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

/// The predicted response to a unit setpoint step, on the true current at the
/// sampling instants.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct StepPrediction<T> {
    /// 10-90 % rise time, s (interpolated).
    pub rise_time_s: Option<T>,
    /// Overshoot, fraction.
    pub overshoot: T,
    /// 2 % settling time, s (last sample outside the band, interpolated).
    pub settling_time_s: Option<T>,
    /// Final value of the simulated window.
    pub final_value: T,
}

/// Simulates `steps` control periods of the linear loop after a unit step of
/// the setpoint, without saturation, with the proportional term acting on
/// `b r - y` (`setpoint_weight` b: 1 is the plain PI; 0 takes the PI zero out
/// of the setpoint response, as in `pi-core`'s `PiGains::with_setpoint_weight`).
pub fn predict_step<T: Real>(
    open: &OpenLoop<T>,
    period_s: T,
    steps: usize,
    setpoint_weight: T,
) -> StepPrediction<T> {
    let (a, b) = (open.a, open.b);
    let mut i = T::ZERO; // true current
    let mut ym = [T::ZERO; 2]; // measured current: y[k], y[k-1]
    let mut v = [T::ZERO; 2]; // applied volts: v[k], v[k-1]
    let mut integ = T::ZERO;
    let mut u_prev = T::ZERO;
    let filtered = open.den_degree == 2;
    let kp = open.k0;
    let ki_ts = open.k1 - open.k0;
    let mut rise10: Option<T> = None;
    let mut rise90: Option<T> = None;
    let mut peak = T::ZERO;
    let mut last_out: Option<usize> = None;
    let mut prev_i = T::ZERO;
    for k in 0..steps {
        let y = if filtered { ym[0] } else { i };
        let e = T::ONE - y;
        integ = integ + ki_ts * e;
        let u = kp * (setpoint_weight - y) + integ;
        let applied = if open.delay { u_prev } else { u };
        u_prev = u;
        // Record the true current at this instant, then advance one period.
        let t = T::of(k as f64) * period_s;
        let cross = |level: T, found: &mut Option<T>| {
            if found.is_none() && i >= level {
                let f = if k > 0 && i != prev_i {
                    (level - prev_i) / (i - prev_i)
                } else {
                    T::ONE
                };
                *found = Some(t - period_s + f * period_s);
            }
        };
        cross(T::of(0.1), &mut rise10);
        cross(T::of(0.9), &mut rise90);
        peak = peak.max(i);
        if (i - T::ONE).abs() > T::of(0.02) {
            last_out = Some(k);
        }
        prev_i = i;
        // Measured-current filter: y[k+1] = -d1 y[k] - d0 y[k-1] + n1 v[k] + n0 v[k-1].
        if filtered {
            let next =
                -open.den[1] * ym[0] - open.den[2] * ym[1] + open.num[0] * applied + open.num[1] * v[0];
            ym = [next, ym[0]];
        }
        v = [applied, v[0]];
        i = a * i + b * applied;
    }
    let settling_time_s = match last_out {
        None => Some(T::ZERO),
        Some(k) if k + 1 >= steps => None,
        Some(k) => Some(T::of((k + 1) as f64) * period_s),
    };
    StepPrediction {
        rise_time_s: match (rise10, rise90) {
            (Some(a), Some(b)) => Some(b - a),
            _ => None,
        },
        overshoot: (peak - T::ONE).max(T::ZERO),
        settling_time_s,
        final_value: prev_i,
    }
}
