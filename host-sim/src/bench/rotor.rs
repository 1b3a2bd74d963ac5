//! A free rotor with its speed captured: R, L and the back-EMF constant Ke
//! from the electrical equation, then the inertia J, viscous friction B and
//! Coulomb friction Tc from the mechanical one, with Kt = Ke (SI units).
//!
//! ```text
//! L di/dt = v - R i - Ke w             (electrical; w from the capture)
//! J dw/dt = Kt i - B w - Tc sign(w)    (mechanical; i from the capture)
//! ```
//!
//! Each equation is first solved by linear least squares on its sampled form
//! (the start), then its own output is fitted to the capture by
//! Levenberg-Marquardt ([`super::refine::fit`]), as the R-L identification
//! does: the electrical model runs on the captured voltage and speed and is
//! fitted to the current over `[R, L, Ke, offset, i0]`; the mechanical model
//! runs on the captured current and is fitted to the speed over
//! `[J, B, Tc, w0]`. Between two samples the voltage is held, and the speed
//! (in the electrical model) and the current (in the mechanical one) are
//! taken as straight lines: each step is then exact for a first-order block
//! with a ramp input, `x1 = a x0 + (u1 - a u0 - tau (u1 - u0) / Ts (1 - a)) / g`
//! with `a = exp(-Ts / tau)` and `g` the block's damping (R, or B). A rotor
//! stopped with `|Kt i| <= Tc` stays stopped, and one whose speed would change
//! sign while `|Kt i| <= Tc` stops there (the usual stick-slip simplification,
//! common practice). Under a stronger torque the model passes through zero
//! where the simulator's motor pauses for one interval: that pause is a jump
//! in the model as `Tc` leaves zero, and with it the fit could not move off a
//! start at `Tc = 0`.
//!
//! A measured speed is noisy, and noise on the electrical model's input
//! biases its fit (errors in variables: white speed noise of 1 % of the top
//! speed made L come out 4 % high on a 0.4 ms winding). The mechanical
//! model's speed integrates the current and carries little noise, so the
//! electrical model is fitted a second time on it, and that fit is kept when
//! it explains the current better than the first.
//!
//! J's interval takes in Ke's: the two relative standard deviations are added
//! in quadrature (the delta method, taking the two fits as independent).
//!
//! Without a speed column Ke cannot be told from J: the current alone fixes
//! only `Ke^2 / J` and `B / J` (the transfer function from voltage to current
//! is `(J s + B) / ((L s + R)(J s + B) + Ke^2)`), so a free-rotor fit needs
//! the speed.

use serde::Serialize;

use super::capture::Capture;
use super::identify::{Estimate, MAX_DELAY_SAMPLES};
use super::refine::{fit, nrmse, residual_autocorrelation};

/// An identified free rotor.
#[derive(Clone, Debug, Serialize)]
pub struct RotorFit {
    /// Resistance, ohm (the winding and whatever else carries the current
    /// between the voltage's measuring points).
    pub resistance_ohm: Estimate,
    /// Inductance, H.
    pub inductance_h: Estimate,
    /// Back-EMF constant, V s/rad (= the torque constant in N m/A).
    pub back_emf_v_s_per_rad: Estimate,
    /// Inertia, kg m^2.
    pub inertia_kg_m2: Estimate,
    /// Viscous friction, N m s/rad.
    pub viscous_n_m_s_per_rad: Estimate,
    /// Coulomb friction, N m.
    pub coulomb_n_m: Estimate,
    /// The current's offset (sensor offset and bridge loss together), A.
    pub offset_a: f64,
    /// The voltage's delay behind the samples, whole samples.
    pub delay_samples: usize,
    /// The sample period, s.
    pub period_s: f64,
    /// Samples used.
    pub samples: usize,
    /// Normalised RMS error of the electrical model run on its own.
    pub current_nrmse: f64,
    /// Normalised RMS error of the mechanical model run on its own.
    pub speed_nrmse: f64,
    /// The electrical model's current, A (for the picture).
    #[serde(skip)]
    pub model_a: Vec<f64>,
    /// Warnings, one sentence each.
    pub warnings: Vec<String>,
}

/// One first-order step with a held input `h` and a ramped input from `u0`
/// to `u1`: `x' = (-g x + h + u) / m`, over `ts`.
fn ramp_step(x0: f64, g: f64, m: f64, h: f64, u0: f64, u1: f64, ts: f64) -> f64 {
    let x = g * ts / m;
    if x.is_nan() || x <= 1e-4 {
        // Little damping over a step (or none): the trapezoid rule on it, which
        // stays differentiable in `g` down to zero; its error is of order
        // `x^3`, below 1e-12.
        return (x0 * (1.0 - 0.5 * x) + ts * (h + 0.5 * (u0 + u1)) / m) / (1.0 + 0.5 * x);
    }
    let tau = m / g;
    let a = (-ts / tau).exp();
    let one_minus_a = -(-ts / tau).exp_m1();
    a * x0 + (h * one_minus_a + u1 - a * u0 - tau * (u1 - u0) / ts * one_minus_a) / g
}

/// The electrical model's current: `theta = [R, L, Ke, offset, i0]`.
fn electrical(theta: &[f64; 5], ts: f64, d: usize, v: &[f64], w: &[f64], out: &mut Vec<f64>) {
    let [r, l, ke, offset, i0] = *theta;
    out.clear();
    let mut i = i0;
    for k in 0..v.len() {
        out.push(i + offset);
        let vk = if k >= d { v[k - d] } else { v[0] };
        let w1 = w.get(k + 1).copied().unwrap_or(w[k]);
        i = ramp_step(i, r, l, vk, -ke * w[k], -ke * w1, ts);
    }
}

/// The mechanical model's speed from the current: `theta = [J, B, Tc, w0]`.
fn mechanical(theta: &[f64; 4], kt: f64, ts: f64, i: &[f64], out: &mut Vec<f64>) {
    let [j, b, tc, w0] = *theta;
    out.clear();
    let mut w = w0;
    for k in 0..i.len() {
        out.push(w);
        let (t0, t1) = (kt * i[k], kt * i.get(k + 1).copied().unwrap_or(i[k]));
        let drive = 0.5 * (t0 + t1);
        if w == 0.0 && drive.abs() <= tc {
            continue; // stopped, and static friction holds it
        }
        let friction = -tc * if w != 0.0 { w.signum() } else { drive.signum() };
        let next = ramp_step(w, b.max(0.0), j, friction, t0, t1, ts);
        w = if w != 0.0 && next * w < 0.0 && drive.abs() <= tc {
            0.0
        } else {
            next
        };
    }
}

/// Least squares `x b = y` by the normal equations (3 columns).
fn least_squares3(rows: impl Iterator<Item = ([f64; 3], f64)>) -> Option<[f64; 3]> {
    let mut m = [[0.0; 3]; 3];
    let mut r = [0.0; 3];
    for (x, y) in rows {
        for i in 0..3 {
            r[i] += x[i] * y;
            for j in 0..3 {
                m[i][j] += x[i] * x[j];
            }
        }
    }
    super::refine::solve(&m, &r)
}

/// The electrical fit's floors (the scale below which a parameter is zero).
const ELECTRICAL_FLOORS: [f64; 5] = [1e-9, 1e-12, 1e-9, 1e-6, 1e-6];

/// The mechanical fit and the current it ran on (the offset taken out).
struct Mechanical {
    fit: super::refine::Refined<4>,
    i_true: Vec<f64>,
}

/// Fits `[J, B, Tc, w0]` to the speed `w`, the torque from the current `i`
/// less the electrical fit's offset with `Kt = Ke`.
fn mechanical_fit(electrical: [f64; 5], ts: f64, i: &[f64], w: &[f64]) -> Option<Mechanical> {
    let [_, _, kt, offset, _] = electrical;
    let n = i.len();
    // The start from integrals, w[k] - w[0] = (Kt S_i - B S_w - Tc S_s) / J.
    let (mut si, mut sw, mut ss) = (0.0, 0.0, 0.0);
    let mut rows = Vec::with_capacity(n);
    for k in 1..n {
        let (i_mid, w_mid) = (0.5 * (i[k - 1] - offset + i[k] - offset), 0.5 * (w[k - 1] + w[k]));
        si += kt * i_mid * ts;
        sw += w_mid * ts;
        ss += w_mid.signum() * ts;
        rows.push(([si, -sw, -ss], w[k] - w[0]));
    }
    let [inv_j, b_over_j, tc_over_j] = least_squares3(rows.into_iter()).unwrap_or([1.0, 0.0, 0.0]);
    let j0 = if inv_j > 0.0 { 1.0 / inv_j } else { 1e-4 };
    let start = [j0, (b_over_j * j0).max(0.0), (tc_over_j * j0).max(0.0), w[0]];
    let i_true: Vec<f64> = i.iter().map(|x| x - offset).collect();
    let fit = fit(
        start,
        // Floors at the scale that matters: the damping that would change the
        // speed by a factor e over the capture, a friction of 1e-9 N m.
        [1e-12, j0 / (ts * n as f64), 1e-9, 1e-6],
        w,
        |th, out| mechanical(th, kt, ts, &i_true, out),
        |th| th[0] > 0.0 && th[1] >= 0.0 && th[2] >= 0.0,
    )?;
    Some(Mechanical { fit, i_true })
}

/// Identifies a free rotor from a capture with its speed; `None` when the
/// capture has no speed or the rotor never turns.
pub fn identify_rotor(c: &Capture, delay: Option<usize>) -> Option<RotorFit> {
    let w = c.speed_rad_s.as_ref()?;
    let peak_w = w.iter().fold(0.0f64, |m, x| m.max(x.abs()));
    if peak_w <= 0.0 {
        return None;
    }
    let (i, v, ts) = (&c.current_a, &c.voltage_v, c.period_s);
    let n = i.len();
    let candidates: Vec<usize> = match delay {
        Some(d) => vec![d],
        None => (0..=MAX_DELAY_SAMPLES).collect(),
    };
    // Electrical: the start from i[k+1] = a i[k] + b v[k-d] - b Ke w[k] + c
    // (four columns: the last, the constant, folded in by centring).
    let electrical_fit = |d: usize| {
        let rows = (d..n - 1).map(|k| ([i[k], v[k - d], -0.5 * (w[k] + w[k + 1])], i[k + 1]));
        let [a, b, bke] = least_squares3(rows)?;
        let (r0, ke0) = ((1.0 - a) / b, bke / b);
        let l0 = -r0 * ts / a.ln();
        let start = [r0, l0, ke0, 0.0, i[0]];
        let start = if start.iter().all(|x| x.is_finite()) && r0 > 0.0 && l0 > 0.0 {
            start
        } else {
            [1.0, 1e-3, 0.0, 0.0, i[0]]
        };
        fit(
            start,
            ELECTRICAL_FLOORS,
            i,
            |th, out| electrical(th, ts, d, v, w, out),
            |th| th[0] > 0.0 && th[1] > 0.0,
        )
        .map(|f| (d, f))
    };
    let best = candidates
        .into_iter()
        .filter_map(electrical_fit)
        .min_by(|a, b| a.1.sse.total_cmp(&b.1.sse));
    let (d, mut e) = best?;
    let mut m = mechanical_fit(e.theta, ts, i, w)?;
    // The measured speed's noise is noise on the electrical model's input,
    // which biases its fit (errors in variables: it lengthens L). The
    // mechanical model's speed integrates the current and carries little of
    // it; the electrical model is fitted again on that speed, and the second
    // fit kept when it explains the current better.
    let mut model_w = Vec::with_capacity(n);
    mechanical(&m.fit.theta, e.theta[2], ts, &m.i_true, &mut model_w);
    let again = fit(
        e.theta,
        ELECTRICAL_FLOORS,
        i,
        |th, out| electrical(th, ts, d, v, &model_w, out),
        |th| th[0] > 0.0 && th[1] > 0.0,
    );
    let mut speed_in = w.as_slice();
    if let Some(again) = again.filter(|a| a.sse < e.sse) {
        e = again;
        m = mechanical_fit(e.theta, ts, i, w)?;
        speed_in = &model_w;
    }
    let [r, l, ke, offset, _] = e.theta;
    let mut model_a = Vec::with_capacity(n);
    electrical(&e.theta, ts, d, v, speed_in, &mut model_a);
    let kt = ke;
    let [j, b, tc, _] = m.fit.theta;
    let mut model_w = Vec::with_capacity(n);
    mechanical(&m.fit.theta, kt, ts, &m.i_true, &mut model_w);
    let m = m.fit;
    let rel_ke = e.sd[2] / ke.abs().max(f64::MIN_POSITIVE);
    let sd_j = j * ((m.sd[0] / j).powi(2) + rel_ke.powi(2)).sqrt();
    let mut warnings = Vec::new();
    if peak_w * ke < 0.1 * v.iter().fold(0.0f64, |a, x| a.max(x.abs())) {
        warnings.push(format!(
            "the back-EMF reached only {:.1} % of the largest voltage: Ke is uncertain; let the rotor run faster",
            100.0 * peak_w * ke / v.iter().fold(0.0f64, |a, x| a.max(x.abs())).max(f64::MIN_POSITIVE)
        ));
    }
    let rho = residual_autocorrelation(w, &model_w);
    if rho > super::identify::RESIDUAL_CORRELATION_WARN {
        warnings.push(format!(
            "the speed's residual is correlated from sample to sample ({rho:.2}): the mechanical model misses something (a load torque, friction of another shape, a speed filter); B and Tc trade against each other and their intervals are too narrow"
        ));
    }
    Some(RotorFit {
        resistance_ohm: Estimate::of(r, e.sd[0]),
        inductance_h: Estimate::of(l, e.sd[1]),
        back_emf_v_s_per_rad: Estimate::of(ke, e.sd[2]),
        inertia_kg_m2: Estimate::of(j, sd_j),
        viscous_n_m_s_per_rad: Estimate::of(b, m.sd[1]),
        coulomb_n_m: Estimate::of(tc, m.sd[2]),
        offset_a: offset,
        delay_samples: d,
        period_s: ts,
        samples: n,
        current_nrmse: nrmse(i, &model_a),
        speed_nrmse: nrmse(w, &model_w),
        model_a,
        warnings,
    })
}

impl RotorFit {
    /// The estimates: name, value, unit scale and unit, for the table.
    fn rows(&self) -> [(&'static str, &Estimate, f64, &'static str); 6] {
        [
            ("resistance", &self.resistance_ohm, 1.0, "ohm"),
            ("inductance", &self.inductance_h, 1e3, "mH"),
            ("back-EMF Ke", &self.back_emf_v_s_per_rad, 1e3, "mV s/rad"),
            ("inertia J", &self.inertia_kg_m2, 1e7, "g cm^2"),
            ("viscous B", &self.viscous_n_m_s_per_rad, 1e6, "uN m s/rad"),
            ("Coulomb Tc", &self.coulomb_n_m, 1e3, "mN m"),
        ]
    }

    /// The table, for people.
    pub fn table(&self, name: &str) -> String {
        use std::fmt::Write;
        let mut s = String::new();
        let _ = writeln!(
            s,
            "{name}: free-rotor identification ({} samples, {:.4} us apart; the speed column drives the back-EMF)\n",
            self.samples,
            self.period_s * 1e6
        );
        let _ = writeln!(
            s,
            "{:<14} {:>13} {:>13} {:>13}  unit",
            "parameter", "value", "95 % low", "95 % high"
        );
        for (p, e, scale, unit) in self.rows() {
            let _ = writeln!(
                s,
                "{p:<14} {:>13.6} {:>13.6} {:>13.6}  {unit}",
                e.value * scale,
                e.low * scale,
                e.high * scale
            );
        }
        let _ = writeln!(
            s,
            "\nvoltage delay {} samples (found from the data); torque constant Kt = Ke (SI); electrical time constant L/R {:.4} ms, mechanical J/B {}",
            self.delay_samples,
            self.inductance_h.value / self.resistance_ohm.value * 1e3,
            if self.viscous_n_m_s_per_rad.value > 0.0 {
                format!(
                    "{:.4} s",
                    self.inertia_kg_m2.value / self.viscous_n_m_s_per_rad.value
                )
            } else {
                "(no viscous friction)".into()
            }
        );
        let _ = writeln!(
            s,
            "fit (output error): normalised RMS error {:.4} on the current, {:.4} on the speed (each model run on its own); one offset for the sensor and the bridge's loss ({:.3e} A)",
            self.current_nrmse, self.speed_nrmse, self.offset_a
        );
        for w in &self.warnings {
            let _ = writeln!(s, "warning: {w}");
        }
        s
    }

    /// A `[motor]` section to paste into a scenario.
    pub fn motor_section(&self, name: &str) -> String {
        let mut s = format!("# identified by `ampwright identify` from {name} (a free rotor)\n[motor]\n");
        for (field, e) in [
            ("resistance_ohm", &self.resistance_ohm),
            ("inductance_h", &self.inductance_h),
            ("back_emf_v_s_per_rad", &self.back_emf_v_s_per_rad),
            ("inertia_kg_m2", &self.inertia_kg_m2),
            ("viscous_n_m_s_per_rad", &self.viscous_n_m_s_per_rad),
            ("coulomb_n_m", &self.coulomb_n_m),
        ] {
            s.push_str(&format!(
                "{:<32} # 95 %: {:.6e} to {:.6e}\n",
                format!("{field} = {:.6e}", e.value.max(0.0)),
                e.low,
                e.high
            ));
        }
        s
    }

    /// The estimates as JSON, one entry per parameter named as its scenario field.
    pub fn json(&self) -> String {
        let v = serde_json::json!({
            "parameters": {
                "resistance_ohm": self.resistance_ohm,
                "inductance_h": self.inductance_h,
                "back_emf_v_s_per_rad": self.back_emf_v_s_per_rad,
                "torque_n_m_per_a": self.back_emf_v_s_per_rad,
                "inertia_kg_m2": self.inertia_kg_m2,
                "viscous_n_m_s_per_rad": self.viscous_n_m_s_per_rad,
                "coulomb_n_m": self.coulomb_n_m,
            },
            "delay_samples": self.delay_samples,
            "period_s": self.period_s,
            "samples": self.samples,
            "current_nrmse": self.current_nrmse,
            "speed_nrmse": self.speed_nrmse,
            "offset_a": self.offset_a,
            "warnings": self.warnings,
        });
        serde_json::to_string_pretty(&v).unwrap_or_default()
    }
}
