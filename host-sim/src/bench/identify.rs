//! R and L of a held rotor (or any R-L load) from a capture, in two stages:
//! pi-core's recursive least squares ([`pi_core::identify`]) on the exact
//! zero-order-hold model, with the voltage's delay behind the samples found
//! from the data (the whole number of samples, 0 to [`MAX_DELAY_SAMPLES`],
//! whose fit leaves the least residual); then the model's own output fitted
//! to the capture ([`super::refine`]), which noise in the measured current
//! does not bias. 95 % intervals from the second fit's covariance, and the
//! fit's quality: the normalised RMS error of the model run on its own from
//! the first sample, and the residual's autocorrelation at one sample.

use pi_core::identify::RlIdentifier;
use serde::Serialize;

use super::capture::{Capture, CaptureError};

/// The longest voltage delay tried, samples.
pub const MAX_DELAY_SAMPLES: usize = 4;
/// A transient (one time constant L/R) shorter than this many samples is
/// refused: too few samples in it to tell L.
pub const MIN_TRANSIENT_SAMPLES: f64 = 1.5;
/// Above this normalised RMS error the R-L model is said not to fit (a
/// choice: 5 % of the current's spread is far beyond sensor noise).
pub const POOR_FIT_NRMSE: f64 = 0.05;
/// Two-sided 95 % point of the normal distribution.
pub const Z95: f64 = 1.959_963_984_540_054;
/// A residual autocorrelation above this says the model misses something
/// (common practice: a white residual stays near 0).
pub const RESIDUAL_CORRELATION_WARN: f64 = 0.5;

/// A value with its 95 % interval.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct Estimate {
    /// The value.
    pub value: f64,
    /// Lower end of the 95 % interval.
    pub low: f64,
    /// Upper end.
    pub high: f64,
}

impl Estimate {
    pub(crate) fn of(value: f64, sd: f64) -> Self {
        Self {
            value,
            low: value - Z95 * sd,
            high: value + Z95 * sd,
        }
    }
}

/// An identified R-L load.
#[derive(Clone, Debug, Serialize)]
pub struct RlFit {
    /// Resistance, ohm.
    pub resistance_ohm: Estimate,
    /// Inductance, H.
    pub inductance_h: Estimate,
    /// The nuisance offset, A: a sensor offset and a constant voltage lost in
    /// the bridge (divided by R), which voltage and current cannot tell apart.
    pub offset_a: f64,
    /// The stage that gave the estimates (`output error`, or the one-step
    /// least squares when the second stage could not improve on it).
    pub stage: &'static str,
    /// The one-step least squares' resistance, ohm (the start).
    pub linear_resistance_ohm: f64,
    /// Its inductance, H.
    pub linear_inductance_h: f64,
    /// The voltage's delay behind the samples, whole samples.
    pub delay_samples: usize,
    /// The sample period, s.
    pub period_s: f64,
    /// Samples used.
    pub samples: usize,
    /// RMS error of the model run on its own, over the RMS of the current's
    /// variation (0 is a perfect fit).
    pub nrmse: f64,
    /// The one-step residual's autocorrelation at one sample.
    pub residual_autocorrelation: f64,
    /// The inductance at each current level the capture visits (empty with
    /// fewer than two steps).
    pub inductance_by_level: Vec<super::levels::LevelInductance>,
    /// The model run on its own from the first sample, A (for the picture).
    #[serde(skip)]
    pub model_a: Vec<f64>,
    /// Warnings, one sentence each.
    pub warnings: Vec<String>,
}

fn fit(c: &Capture, delay: usize) -> Option<(RlIdentifier<f64>, f64)> {
    let mut id = RlIdentifier::new(c.period_s);
    for k in delay..c.current_a.len() {
        id.sample(c.voltage_v[k - delay], c.current_a[k]);
    }
    let s2 = id.rls().residual_variance()?;
    id.estimate().ok().map(|_| (id, s2))
}

/// Identifies R and L; `delay` fixes the voltage's delay in samples instead of
/// finding it.
pub fn identify_rl(c: &Capture, name: &str, delay: Option<usize>) -> Result<RlFit, CaptureError> {
    let candidates: Vec<usize> = match delay {
        Some(d) => vec![d],
        None => (0..=MAX_DELAY_SAMPLES).collect(),
    };
    // Each delay: the one-step least squares, then the output-error fit from
    // it; the delay whose output-error fit leaves the least residual wins
    // (noise in the current biases the first stage's own choice).
    struct Tried {
        d: usize,
        linear: pi_core::identify::RlEstimate<f64>,
        refined: Option<super::refine::Refined>,
        offset0: f64,
        score: f64,
    }
    let tried: Vec<Tried> = candidates
        .into_iter()
        .filter_map(|d| {
            let (id, s2) = fit(c, d)?;
            let linear = id.estimate().ok()?;
            let [a_minus_1, _, k0] = id.rls().theta();
            let offset0 = if a_minus_1 != 0.0 { -k0 / a_minus_1 } else { 0.0 };
            // The start current: the first sample less the offset.
            let i0 = c.current_a.first().map_or(0.0, |y0| y0 - offset0);
            let refined = super::refine::refine(
                [linear.resistance_ohm, linear.inductance_h, offset0, i0],
                c.period_s,
                d,
                &c.current_a,
                &c.voltage_v,
            )
            .filter(|f| f.theta[0] > 0.0 && f.theta[1] > 0.0);
            let score = refined.map_or(s2 * 1e12, |f| f.sse);
            Some(Tried {
                d,
                linear,
                refined,
                offset0,
                score,
            })
        })
        .collect();
    let best = tried.iter().min_by(|a, b| a.score.total_cmp(&b.score)).ok_or_else(|| {
        CaptureError(format!(
            "{name}: the samples do not fit an R-L load at this sample period ({:e} s) with any voltage delay up to {MAX_DELAY_SAMPLES} samples; check the columns, their scales and where the voltage comes from ({})",
            c.period_s, c.voltage_from
        ))
    })?;
    let (d, linear) = (best.d, best.linear);
    let (theta, sd_r, sd_l, stage) = match best.refined {
        Some(f) => (f.theta, f.sd[0], f.sd[1], "output error"),
        None => (
            [
                linear.resistance_ohm,
                linear.inductance_h,
                best.offset0,
                c.current_a.first().map_or(0.0, |y0| y0 - best.offset0),
            ],
            linear.resistance_sd_ohm,
            linear.inductance_sd_h,
            "one-step least squares",
        ),
    };
    let [e_r, e_l, offset, _] = theta;
    let n = c.current_a.len();
    let mut model = Vec::with_capacity(n);
    super::refine::simulate(&theta, c.period_s, d, &c.voltage_v, &mut model);
    let nrmse = super::refine::nrmse(&c.current_a, &model);
    let rho = super::refine::residual_autocorrelation(&c.current_a, &model);
    let mut warnings = Vec::new();
    let tau = e_l / e_r;
    let span_s = c.period_s * n as f64;
    if span_s < 3.0 * tau {
        warnings.push(format!(
            "the capture spans {:.3} ms, under three time constants L/R ({:.3} ms): the steady state is barely seen and R is uncertain; capture longer",
            span_s * 1e3,
            3.0 * tau * 1e3
        ));
    }
    if tau.is_finite() && tau > 0.0 && tau < MIN_TRANSIENT_SAMPLES * c.period_s {
        return Err(CaptureError(format!(
            "{name}: the current's transient lasts {:.3} us (L/R), under {MIN_TRANSIENT_SAMPLES} samples of {:.3} us: too few samples in it to measure L; capture at least {:.0} kHz",
            tau * 1e6,
            c.period_s * 1e6,
            5.0 / tau / 1e3
        )));
    }
    if tau < 3.0 * c.period_s {
        warnings.push(format!(
            "the time constant L/R ({:.3} us) spans under three samples: L is uncertain; sample faster",
            tau * 1e6
        ));
    }
    if rho.abs() > RESIDUAL_CORRELATION_WARN && stage == "one-step least squares" {
        warnings.push(format!(
            "the residual is correlated from sample to sample ({rho:.2}): the R-L model misses something (a turning rotor's back-EMF, a delay that is not whole samples, a filter); the intervals are too narrow"
        ));
    }
    if nrmse > POOR_FIT_NRMSE {
        warnings.push(format!(
            "the R-L model does not fit this capture (normalised RMS error {nrmse:.3}): a turning rotor's back-EMF (give its speed column, or its inertia with --inertia-kg-m2), a saturating core or a load that is not R-L; do not use these values as they are"
        ));
    }
    if sd_r > 0.5 * e_r.abs() || sd_l > 0.5 * e_l.abs() {
        warnings.push(
            "R or L is not determined by this capture (its 95 % interval is wider than the value): step the voltage through a range the current follows, and capture its transients".into(),
        );
    }
    let inductance_by_level = super::levels::by_level(c, e_r, offset, d, e_l);
    let by_current = |pick: fn(f64, f64) -> bool| {
        inductance_by_level.iter().copied().reduce(|a, b| {
            if pick(b.inductance_h.value, a.inductance_h.value) {
                b
            } else {
                a
            }
        })
    };
    if let (Some(lo), Some(hi)) = (by_current(|a, b| a < b), by_current(|a, b| a > b))
        && hi.inductance_h.value > 1.1 * lo.inductance_h.value
        && hi.inductance_h.low > lo.inductance_h.high
    {
        warnings.push(format!(
            "the inductance moves with the current, {:.4} mH settled at {:.3} A against {:.4} mH at {:.3} A (a saturating core): the single L above is an average; the table by level gives each",
            hi.inductance_h.value * 1e3,
            hi.current_a,
            lo.inductance_h.value * 1e3,
            lo.current_a
        ));
    }
    Ok(RlFit {
        inductance_by_level,
        resistance_ohm: Estimate::of(e_r, sd_r),
        inductance_h: Estimate::of(e_l, sd_l),
        offset_a: offset,
        stage,
        linear_resistance_ohm: linear.resistance_ohm,
        linear_inductance_h: linear.inductance_h,
        delay_samples: d,
        period_s: c.period_s,
        samples: n,
        nrmse,
        residual_autocorrelation: rho,
        model_a: model,
        warnings,
    })
}

impl RlFit {
    /// The table, for people.
    pub fn table(&self, name: &str) -> String {
        use std::fmt::Write;
        let mut s = String::new();
        let _ = writeln!(
            s,
            "{name}: R-L identification ({} samples, {:.4} us apart)\n",
            self.samples,
            self.period_s * 1e6
        );
        let _ = writeln!(
            s,
            "{:<16} {:>14} {:>14} {:>14}",
            "parameter", "value", "95 % low", "95 % high"
        );
        for (p, e, scale, unit) in [
            ("resistance", &self.resistance_ohm, 1.0, "ohm"),
            ("inductance", &self.inductance_h, 1e3, "mH"),
        ] {
            let _ = writeln!(
                s,
                "{:<16} {:>10.5} {unit:<3} {:>10.5} {unit:<3} {:>10.5} {unit:<3}",
                p,
                e.value * scale,
                e.low * scale,
                e.high * scale
            );
        }
        let _ = writeln!(
            s,
            "\nvoltage delay {} samples (found from the data); time constant L/R {:.4} ms",
            self.delay_samples,
            self.inductance_h.value / self.resistance_ohm.value * 1e3
        );
        let _ = writeln!(
            s,
            "fit ({}): normalised RMS error {:.4} (model run on its own), residual autocorrelation {:.3}; a sensor offset and a bridge's voltage loss fitted together as one offset ({:.3e} A); the one-step least squares gave {:.5} ohm, {:.5} mH",
            self.stage,
            self.nrmse,
            self.residual_autocorrelation,
            self.offset_a,
            self.linear_resistance_ohm,
            self.linear_inductance_h * 1e3
        );
        if !self.inductance_by_level.is_empty() {
            let _ = writeln!(
                s,
                "\ninductance by current level (each step's transient, R and the offset held; the incremental inductance d psi / d i):"
            );
            let _ = writeln!(
                s,
                "{:>10} {:>12} {:>12} {:>14} {:>14}",
                "at_ms", "settled_a", "step_a", "L_mH", "95 % interval"
            );
            for l in &self.inductance_by_level {
                let _ = writeln!(
                    s,
                    "{:>10.3} {:>12.4} {:>12.4} {:>14.5} {:>6.3} to {:.3}",
                    l.at_s * 1e3,
                    l.current_a,
                    l.step_a,
                    l.inductance_h.value * 1e3,
                    l.inductance_h.low * 1e3,
                    l.inductance_h.high * 1e3
                );
            }
        }
        for w in &self.warnings {
            let _ = writeln!(s, "warning: {w}");
        }
        s
    }

    /// A `[motor]` section to paste into a scenario.
    pub fn motor_section(&self, name: &str) -> String {
        format!(
            "# identified by `ampwright identify` from {name}\n[motor]\nresistance_ohm = {:.6e}    # 95 %: {:.6e} to {:.6e}\ninductance_h = {:.6e}      # 95 %: {:.6e} to {:.6e}\nlocked_rotor = true             # the bench test held the rotor\n",
            self.resistance_ohm.value,
            self.resistance_ohm.low,
            self.resistance_ohm.high,
            self.inductance_h.value,
            self.inductance_h.low,
            self.inductance_h.high
        )
    }

    /// The estimates as JSON, one entry per parameter named as its scenario field.
    pub fn json(&self) -> String {
        let v = serde_json::json!({
            "parameters": {
                "resistance_ohm": self.resistance_ohm,
                "inductance_h": self.inductance_h,
            },
            "delay_samples": self.delay_samples,
            "period_s": self.period_s,
            "samples": self.samples,
            "nrmse": self.nrmse,
            "residual_autocorrelation": self.residual_autocorrelation,
            "offset_a": self.offset_a,
            "stage": self.stage,
            "linear_stage": { "resistance_ohm": self.linear_resistance_ohm, "inductance_h": self.linear_inductance_h },
            "inductance_by_level": self.inductance_by_level,
            "warnings": self.warnings,
        });
        serde_json::to_string_pretty(&v).unwrap_or_default()
    }
}
