//! The iron's saturation: a winding's incremental inductance falling with
//! its current, as a curve of shares of the small-signal inductance.

use crate::model_error::ModelError;

/// Most points a saturation curve holds.
pub const SATURATION_POINTS: usize = 8;

/// The incremental inductance as a share of `inductance_h` at given
/// currents (magnitudes, ascending from 0 A), linear between the points and
/// held beyond the last. The step uses the share at the interval's starting
/// current (the intervals are a PWM period or less, so the current moves
/// little within one).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Saturation {
    points: [(f64, f64); SATURATION_POINTS],
    len: usize,
}

impl Saturation {
    /// A curve from `(current_a, share)` points; refused (naming the field)
    /// unless there are 1 to [`SATURATION_POINTS`] of them, the currents
    /// start at 0 and rise, and every share is in (0, 1].
    pub fn new(points: &[(f64, f64)]) -> Result<Self, ModelError> {
        if points.is_empty() || points.len() > SATURATION_POINTS {
            return Err(ModelError::new(
                "motor.saturation.current_a",
                format!("{} points", points.len()),
                format!("1 to {SATURATION_POINTS} points"),
            ));
        }
        let mut last = -1.0;
        for (k, &(i, share)) in points.iter().enumerate() {
            if !(i.is_finite() && i > last) || (k == 0 && i != 0.0) {
                return Err(ModelError::new(
                    "motor.saturation.current_a",
                    i,
                    "rising currents, the first 0 A",
                ));
            }
            ModelError::within("motor.saturation.inductance_share", share, 1e-3, 1.0)?;
            last = i;
        }
        let mut s = Self {
            points: [(0.0, 1.0); SATURATION_POINTS],
            len: points.len(),
        };
        s.points[..points.len()].copy_from_slice(points);
        Ok(s)
    }

    /// The points.
    pub fn points(&self) -> &[(f64, f64)] {
        &self.points[..self.len]
    }

    /// The share at a current (its magnitude).
    pub fn share(&self, current_a: f64) -> f64 {
        let i = current_a.abs();
        let pts = self.points();
        match pts.iter().position(|&(x, _)| x > i) {
            None => pts[pts.len() - 1].1,
            Some(0) => pts[0].1,
            Some(k) => {
                let ((x0, y0), (x1, y1)) = (pts[k - 1], pts[k]);
                y0 + (y1 - y0) * (i - x0) / (x1 - x0)
            }
        }
    }
}
