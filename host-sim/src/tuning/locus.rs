//! The pictures' numbers, computed here so that the plots only draw: the root
//! locus of the sampled loop as continuous branches with the gain at which it
//! leaves the unit circle, the z-plane grid of constant damping and natural
//! frequency, and the open loop's frequency response.

use pi_core::design::analysis::{self, OpenLoop};
use pi_core::design::poly::{Complex, MAX_DEGREE};
use pi_core::design::{Gains, RlPlant, Sampling};

/// Points of the locus per decade of gain.
const PER_DECADE: usize = 120;

/// The root locus as `Kp` is scaled with `Ti` held.
#[derive(Clone, Debug)]
pub struct Locus {
    /// Each closed-loop pole's path, point by point as the gain rises.
    pub branches: Vec<Vec<Complex<f64>>>,
    /// The lowest and highest scale of the chosen `Kp` drawn.
    pub scale_range: (f64, f64),
    /// Where the loop goes unstable: the scale of `Kp`, the `Kp` itself (V/A)
    /// and the poles on the unit circle then. `None`: stable over the range.
    pub crossing: Option<(f64, f64, Vec<Complex<f64>>)>,
    /// Open-loop poles and zeros.
    pub open_poles: Vec<Complex<f64>>,
    /// Zeros (the PI's and the plant's).
    pub open_zeros: Vec<Complex<f64>>,
    /// The closed-loop poles with the chosen gains.
    pub chosen: Vec<Complex<f64>>,
}

fn poles(
    plant: &RlPlant<f64>,
    sampling: &Sampling<f64>,
    gains: &Gains<f64>,
    scale: f64,
) -> Vec<Complex<f64>> {
    let g = Gains {
        kp_v_per_a: gains.kp_v_per_a * scale,
        ti_s: gains.ti_s,
    };
    let (p, n) = OpenLoop::new(plant, sampling, &g).poles();
    p[..n.min(MAX_DEGREE)].to_vec()
}

fn radius(p: &[Complex<f64>]) -> f64 {
    p.iter().fold(0.0, |m, z| m.max(z.abs()))
}

/// The locus from a thousandth of the chosen `Kp` to half again past the gain
/// where the loop goes unstable (or a hundred times the chosen one if it
/// never does within a thousand times).
pub fn locus(plant: &RlPlant<f64>, sampling: &Sampling<f64>, gains: &Gains<f64>) -> Locus {
    let unstable = |k: f64| radius(&poles(plant, sampling, gains, k)) >= 1.0;
    let mut crossing = None;
    let mut k = 1.0;
    let mut below = 1e-3;
    let mut found = unstable(1.0).then_some(1.0);
    if found.is_some() {
        below = 1e-3;
    } else {
        while k < 1000.0 {
            below = k;
            k *= 1.25;
            if unstable(k) {
                found = Some(k);
                break;
            }
        }
    }
    if let Some(mut hi) = found {
        let mut lo = below.min(hi);
        if unstable(lo) {
            lo = 1e-3;
        }
        for _ in 0..60 {
            let mid = (lo * hi).sqrt();
            if unstable(mid) {
                hi = mid;
            } else {
                lo = mid;
            }
        }
        crossing = Some((hi, hi * gains.kp_v_per_a, poles(plant, sampling, gains, hi)));
    }
    let top = crossing.as_ref().map_or(100.0, |(k, ..)| 1.5 * k);
    let bottom = 1e-3;
    let n = ((top / bottom).log10() * PER_DECADE as f64).ceil() as usize;
    let mut branches: Vec<Vec<Complex<f64>>> = Vec::new();
    for i in 0..=n {
        let k = bottom * (top / bottom).powf(i as f64 / n as f64);
        let mut now = poles(plant, sampling, gains, k);
        if branches.is_empty() {
            branches = now.iter().map(|z| vec![*z]).collect();
            continue;
        }
        // Each branch takes the nearest remaining pole: continuous paths.
        for b in branches.iter_mut() {
            let last = *b.last().unwrap_or(&Complex::real(0.0));
            if let Some((j, _)) = now
                .iter()
                .enumerate()
                .map(|(j, z)| (j, z.minus(last).abs()))
                .min_by(|a, b| a.1.total_cmp(&b.1))
            {
                b.push(now.swap_remove(j));
            }
        }
    }
    let g = OpenLoop::new(plant, sampling, gains);
    let (num, den) = g.plant();
    let roots = |c: &[f64]| -> Vec<Complex<f64>> {
        let first = c.iter().position(|&v| v != 0.0).unwrap_or(c.len());
        pi_core::design::poly::Poly::new(&c[first..]).map_or(Vec::new(), |p| p.roots()[..p.degree()].to_vec())
    };
    let mut open_poles = vec![Complex::real(1.0)];
    open_poles.extend(roots(den));
    let mut open_zeros = vec![Complex::real(g.pi_zero())];
    open_zeros.extend(roots(num));
    Locus {
        branches,
        scale_range: (bottom, top),
        crossing,
        open_poles,
        open_zeros,
        chosen: poles(plant, sampling, gains, 1.0),
    }
}

/// A curve of constant damping `zeta` in the z-plane, `z = exp(s Ts)` with
/// `s = wn (-zeta + j sqrt(1 - zeta^2))`, from `wn Ts = 0` to where it
/// reaches the negative real axis (upper half; mirror it for the lower).
pub fn constant_damping(zeta: f64) -> Vec<Complex<f64>> {
    let wd_over_wn = (1.0 - zeta * zeta).max(0.0).sqrt();
    let end = if wd_over_wn > 0.0 {
        std::f64::consts::PI / wd_over_wn
    } else {
        6.0
    };
    (0..=120)
        .map(|k| {
            let wn_t = end * k as f64 / 120.0;
            let r = (-zeta * wn_t).exp();
            let a = wn_t * wd_over_wn;
            Complex::new(r * a.cos(), r * a.sin())
        })
        .collect()
}

/// A curve of constant natural frequency `wn Ts` in the z-plane, damping from
/// 0 to 1 (upper half).
pub fn constant_natural_frequency(wn_t: f64) -> Vec<Complex<f64>> {
    (0..=60)
        .map(|k| {
            let zeta = k as f64 / 60.0;
            let r = (-zeta * wn_t).exp();
            let a = wn_t * (1.0 - zeta * zeta).max(0.0).sqrt();
            Complex::new(r * a.cos(), r * a.sin())
        })
        .collect()
}

/// One point of a frequency response.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct BodePoint {
    /// Frequency, Hz.
    pub hz: f64,
    /// Magnitude, dB.
    pub db: f64,
    /// Phase, degrees, unwrapped along the sweep.
    pub deg: f64,
}

/// The open loop's frequency response from `f_lo` to the Nyquist frequency,
/// `n + 1` points on a log scale (the last exactly at Nyquist).
pub fn bode(open: &OpenLoop<f64>, period_s: f64, f_lo: f64, n: usize) -> Vec<BodePoint> {
    let nyquist = 0.5 / period_s;
    let (l0, l1) = (f_lo.log10(), nyquist.log10());
    let mut prev: Option<f64> = None;
    (0..=n)
        .map(|k| {
            let hz = if k == n {
                nyquist
            } else {
                10f64.powf(l0 + (l1 - l0) * k as f64 / n as f64)
            };
            let l = open.eval(Complex::unit(2.0 * std::f64::consts::PI * hz * period_s));
            let ph = prev.map_or(l.arg(), |p| analysis::unwrap_phase(p, l.arg()));
            prev = Some(ph);
            BodePoint {
                hz,
                db: 20.0 * l.abs().log10(),
                deg: ph.to_degrees(),
            }
        })
        .collect()
}

/// The phase crossover: the first frequency where the unwrapped phase reaches
/// -180 degrees (interpolated), with the magnitude there, dB.
pub fn phase_crossover(points: &[BodePoint]) -> Option<(f64, f64)> {
    points.windows(2).find_map(|w| {
        let (a, b) = (w[0], w[1]);
        if a.deg > -180.0 && b.deg <= -180.0 {
            let f = (a.deg + 180.0) / (a.deg - b.deg);
            Some((a.hz + f * (b.hz - a.hz), a.db + f * (b.db - a.db)))
        } else {
            None
        }
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_locus_leaves_the_circle_where_the_loop_goes_unstable() {
        let plant = RlPlant::new(1.9, 2.4e-3).unwrap();
        let sampling = Sampling::new(50e-6, 1.0, 0.0).unwrap();
        let g = Gains {
            kp_v_per_a: 12.0,
            ti_s: 1.263e-3,
        };
        let l = locus(&plant, &sampling, &g);
        let (k, kp, on_circle) = l.crossing.clone().unwrap();
        assert!((kp - 12.0 * k).abs() < 1e-9);
        assert!((radius(&on_circle) - 1.0).abs() < 1e-6, "{on_circle:?}");
        // Just below it the loop is stable, just above it is not.
        assert!(radius(&poles(&plant, &sampling, &g, k * 0.999)) < 1.0);
        assert!(radius(&poles(&plant, &sampling, &g, k * 1.001)) >= 1.0);
        // Branches are continuous: no jump larger than a small part of the plane.
        for b in &l.branches {
            for w in b.windows(2) {
                assert!(w[1].minus(w[0]).abs() < 0.2, "{:?} -> {:?}", w[0], w[1]);
            }
        }
    }

    #[test]
    fn grid_curves_are_what_their_names_say() {
        // Constant damping 0.5 at wn Ts = 1: |z| = exp(-0.5), angle sqrt(0.75).
        let c = constant_damping(0.5);
        let end = std::f64::consts::PI / 0.75f64.sqrt();
        let k = (120.0 / end).round() as usize;
        let wn_t = end * k as f64 / 120.0;
        assert!((c[k].abs() - (-0.5 * wn_t).exp()).abs() < 1e-12);
        // Constant natural frequency: undamped end on the unit circle.
        let w = constant_natural_frequency(0.5);
        assert!((w[0].abs() - 1.0).abs() < 1e-12 && (w[0].arg() - 0.5).abs() < 1e-12);
    }
}
