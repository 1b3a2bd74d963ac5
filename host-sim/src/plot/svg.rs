//! A small SVG canvas: a plot area with a left and an optional right axis, nice
//! tick values, polylines, bands and text. Nothing here knows about motors.

use std::fmt::Write;

/// A linear axis from data to pixels.
#[derive(Clone, Copy, Debug)]
pub struct Axis {
    /// Data value at the low end.
    pub lo: f64,
    /// Data value at the high end.
    pub hi: f64,
    /// Pixel at the low end.
    pub px_lo: f64,
    /// Pixel at the high end.
    pub px_hi: f64,
}

impl Axis {
    /// Pixel of a data value.
    pub fn px(&self, v: f64) -> f64 {
        let span = self.hi - self.lo;
        let f = if span == 0.0 { 0.5 } else { (v - self.lo) / span };
        self.px_lo + f * (self.px_hi - self.px_lo)
    }

    /// Tick values at 1, 2 or 5 times a power of ten, about `n` of them.
    pub fn ticks(&self, n: usize) -> Vec<f64> {
        let span = (self.hi - self.lo).abs();
        if span.is_nan() || span <= 0.0 || !span.is_finite() {
            return vec![self.lo];
        }
        let raw = span / n.max(1) as f64;
        let mag = 10f64.powf(raw.log10().floor());
        let step = [1.0, 2.0, 5.0, 10.0]
            .iter()
            .map(|m| m * mag)
            .find(|s| *s >= raw)
            .unwrap_or(10.0 * mag);
        let (lo, hi) = (self.lo.min(self.hi), self.lo.max(self.hi));
        let mut v = (lo / step).ceil() * step;
        let mut out = Vec::new();
        while v <= hi + 1e-9 * step {
            out.push(if v.abs() < 1e-12 * step { 0.0 } else { v });
            v += step;
        }
        out
    }
}

/// Widens `[lo, hi]` by a fraction on both ends (and makes it non-empty).
pub fn padded(lo: f64, hi: f64, fraction: f64) -> (f64, f64) {
    let (lo, hi) = if hi > lo { (lo, hi) } else { (lo - 0.5, hi + 0.5) };
    let pad = (hi - lo) * fraction;
    (lo - pad, hi + pad)
}

/// An SVG document being written.
pub struct Canvas {
    /// Width, px.
    pub width: f64,
    /// Height, px.
    pub height: f64,
    body: String,
}

/// Escapes text for SVG.
pub fn escape(s: &str) -> String {
    s.replace('&', "&amp;").replace('<', "&lt;").replace('>', "&gt;")
}

impl Canvas {
    /// An empty white canvas.
    pub fn new(width: f64, height: f64) -> Self {
        let mut body = String::new();
        let _ = write!(
            body,
            r#"<rect x="0" y="0" width="{width}" height="{height}" fill="white"/>"#
        );
        Self { width, height, body }
    }

    /// A polyline through points (pixels).
    pub fn polyline(&mut self, pts: &[(f64, f64)], colour: &str, width: f64, dash: Option<&str>) {
        if pts.is_empty() {
            return;
        }
        let mut d = String::with_capacity(pts.len() * 14);
        for (x, y) in pts {
            let _ = write!(d, "{x:.1},{y:.1} ");
        }
        let dash = dash
            .map(|d| format!(r#" stroke-dasharray="{d}""#))
            .unwrap_or_default();
        let _ = write!(
            self.body,
            r#"<polyline fill="none" stroke="{colour}" stroke-width="{width}"{dash} points="{}"/>"#,
            d.trim_end()
        );
    }

    /// A filled rectangle (pixels).
    pub fn rect(&mut self, x0: f64, y0: f64, x1: f64, y1: f64, fill: &str, opacity: f64) {
        let (x, w) = (x0.min(x1), (x1 - x0).abs());
        let (y, h) = (y0.min(y1), (y1 - y0).abs());
        let _ = write!(
            self.body,
            r#"<rect x="{x:.1}" y="{y:.1}" width="{w:.1}" height="{h:.1}" fill="{fill}" fill-opacity="{opacity}"/>"#
        );
    }

    /// Text at a pixel position; `anchor` is start, middle or end.
    pub fn text(&mut self, x: f64, y: f64, s: &str, size: f64, anchor: &str, colour: &str) {
        let _ = write!(
            self.body,
            r#"<text x="{x:.1}" y="{y:.1}" font-family="sans-serif" font-size="{size}" text-anchor="{anchor}" fill="{colour}">{}</text>"#,
            escape(s)
        );
    }

    /// Vertical text (an axis title), centred on a pixel position.
    pub fn vtext(&mut self, x: f64, y: f64, s: &str, size: f64, colour: &str) {
        let _ = write!(
            self.body,
            r#"<text x="{x:.1}" y="{y:.1}" font-family="sans-serif" font-size="{size}" text-anchor="middle" fill="{colour}" transform="rotate(-90 {x:.1} {y:.1})">{}</text>"#,
            escape(s)
        );
    }

    /// A frame with grid lines and tick labels for the x axis and a left y axis.
    pub fn frame(&mut self, x: &Axis, y: &Axis, x_label: &str, y_label: &str, fmt_x: &dyn Fn(f64) -> String) {
        let (top, bottom) = (y.px_hi.min(y.px_lo), y.px_hi.max(y.px_lo));
        let (left, right) = (x.px_lo.min(x.px_hi), x.px_lo.max(x.px_hi));
        for t in x.ticks(8) {
            let px = x.px(t);
            self.polyline(&[(px, top), (px, bottom)], "#e4e4e4", 1.0, None);
            self.text(px, bottom + 16.0, &fmt_x(t), 11.0, "middle", "#333");
        }
        for t in y.ticks(6) {
            let py = y.px(t);
            self.polyline(&[(left, py), (right, py)], "#e4e4e4", 1.0, None);
            self.text(left - 6.0, py + 4.0, &format_tick(t), 11.0, "end", "#333");
        }
        self.polyline(
            &[
                (left, top),
                (right, top),
                (right, bottom),
                (left, bottom),
                (left, top),
            ],
            "#666",
            1.0,
            None,
        );
        self.text(
            (left + right) / 2.0,
            bottom + 34.0,
            x_label,
            12.0,
            "middle",
            "#222",
        );
        self.vtext(left - 44.0, (top + bottom) / 2.0, y_label, 12.0, "#222");
    }

    /// Tick labels for a right y axis.
    pub fn right_axis(&mut self, x_px: f64, y: &Axis, label: &str, colour: &str) {
        for t in y.ticks(4) {
            let py = y.px(t);
            self.polyline(&[(x_px, py), (x_px + 4.0, py)], colour, 1.0, None);
            self.text(x_px + 7.0, py + 4.0, &format_tick(t), 11.0, "start", colour);
        }
        let mid = (y.px_lo + y.px_hi) / 2.0;
        self.vtext(x_px + 44.0, mid, label, 12.0, colour);
    }

    /// The finished document.
    pub fn finish(self) -> String {
        format!(
            r#"<svg xmlns="http://www.w3.org/2000/svg" width="{w}" height="{h}" viewBox="0 0 {w} {h}">{}</svg>
"#,
            self.body,
            w = self.width,
            h = self.height
        )
    }
}

/// A tick label with no more digits than it needs.
pub fn format_tick(v: f64) -> String {
    if v == 0.0 {
        return "0".into();
    }
    let s = format!("{v:.4}");
    let s = s.trim_end_matches('0').trim_end_matches('.');
    s.to_string()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn ticks_are_round_numbers_inside_the_range() {
        let a = Axis {
            lo: -0.3,
            hi: 1.7,
            px_lo: 0.0,
            px_hi: 100.0,
        };
        let t = a.ticks(5);
        assert_eq!(t, vec![0.0, 0.5, 1.0, 1.5]);
        assert_eq!(format_tick(0.5), "0.5");
        assert_eq!(format_tick(2.0), "2");
    }
}
