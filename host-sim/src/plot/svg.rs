//! A small SVG canvas: a plot area with a left and an optional right axis, nice
//! tick values, polylines, bands and text. Nothing here knows about motors.
//!
//! Pictures are checkable: every drawn data series carries `data-series`,
//! every legend entry `data-legend` (the legend is built from what was drawn,
//! so the two match), and labels placed with [`Canvas::label`] move out of
//! each other's way. `tests/plots.rs` parses the documents and checks both.

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
    /// Boxes of the text placed so far: `(x0, y0, x1, y1)`.
    boxes: Vec<(f64, f64, f64, f64)>,
    /// What has been drawn, for the legend: `(name, colour, dash, kind)`.
    drawn: Vec<(String, String, Option<String>, Mark)>,
}

/// How a legend entry is drawn.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Mark {
    /// A line.
    Line,
    /// A filled band.
    Band,
    /// A cross (a pole).
    Cross,
    /// A ring (a zero).
    Ring,
    /// A dot.
    Dot,
}

/// The width of a text of `chars` characters at `size`, about (sans-serif
/// averages a little over half the size per character).
pub fn text_width(chars: usize, size: f64) -> f64 {
    0.58 * size * chars as f64
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
        Self {
            width,
            height,
            body,
            boxes: Vec::new(),
            drawn: Vec::new(),
        }
    }

    /// A data series: a polyline named for the legend (each name once).
    pub fn series(&mut self, name: &str, pts: &[(f64, f64)], colour: &str, width: f64, dash: Option<&str>) {
        if pts.is_empty() {
            return;
        }
        self.polyline_tagged(pts, colour, width, dash, Some(name));
        self.note(name, colour, dash, Mark::Line);
    }

    /// Records a drawn thing for the legend (once per name).
    pub fn note(&mut self, name: &str, colour: &str, dash: Option<&str>, mark: Mark) {
        if !self.drawn.iter().any(|(n, ..)| n == name) {
            self.drawn.push((
                name.to_string(),
                colour.to_string(),
                dash.map(str::to_string),
                mark,
            ));
        }
    }

    /// A filled band named for the legend, between two corners (pixels).
    pub fn band(&mut self, name: &str, (x0, y0): (f64, f64), (x1, y1): (f64, f64), fill: &str, opacity: f64) {
        let (x, w) = (x0.min(x1), (x1 - x0).abs());
        let (y, h) = (y0.min(y1), (y1 - y0).abs());
        let _ = write!(
            self.body,
            r#"<rect data-series="{}" x="{x:.1}" y="{y:.1}" width="{w:.1}" height="{h:.1}" fill="{fill}" fill-opacity="{opacity}"/>"#,
            escape(name)
        );
        self.note(name, fill, None, Mark::Band);
    }

    /// A marker (cross, ring or dot) at a pixel position, named for the legend.
    pub fn marker(&mut self, name: &str, x: f64, y: f64, mark: Mark, colour: &str, r: f64) {
        let tag = escape(name);
        match mark {
            Mark::Cross => {
                let _ = write!(
                    self.body,
                    r#"<path data-series="{tag}" d="M{:.1},{:.1}L{:.1},{:.1}M{:.1},{:.1}L{:.1},{:.1}" stroke="{colour}" stroke-width="2"/>"#,
                    x - r,
                    y - r,
                    x + r,
                    y + r,
                    x - r,
                    y + r,
                    x + r,
                    y - r
                );
            }
            Mark::Ring => {
                let _ = write!(
                    self.body,
                    r#"<circle data-series="{tag}" cx="{x:.1}" cy="{y:.1}" r="{r:.1}" fill="none" stroke="{colour}" stroke-width="2"/>"#
                );
            }
            _ => {
                let _ = write!(
                    self.body,
                    r#"<circle data-series="{tag}" cx="{x:.1}" cy="{y:.1}" r="{r:.1}" fill="{colour}"/>"#
                );
            }
        }
        self.note(name, colour, None, mark);
    }

    /// The legend: one entry per named thing drawn, in drawing order, in rows
    /// from `(x, y)` that wrap before `right`.
    pub fn legend(&mut self, x: f64, y: f64, right: f64) {
        let drawn = std::mem::take(&mut self.drawn);
        let (mut lx, mut ly) = (x, y);
        for (name, colour, dash, mark) in &drawn {
            let w = 36.0 + text_width(name.chars().count(), 11.0);
            if lx + w > right && lx > x {
                lx = x;
                ly += 16.0;
            }
            let tag = escape(name);
            match mark {
                Mark::Line => {
                    let dash = dash
                        .as_ref()
                        .map(|d| format!(r#" stroke-dasharray="{d}""#))
                        .unwrap_or_default();
                    let _ = write!(
                        self.body,
                        r#"<polyline data-legend="{tag}" fill="none" stroke="{colour}" stroke-width="3"{dash} points="{:.1},{:.1} {:.1},{:.1}"/>"#,
                        lx,
                        ly - 4.0,
                        lx + 18.0,
                        ly - 4.0
                    );
                }
                Mark::Band => {
                    let _ = write!(
                        self.body,
                        r#"<rect data-legend="{tag}" x="{lx:.1}" y="{:.1}" width="18" height="8" fill="{colour}" fill-opacity="0.35"/>"#,
                        ly - 8.0
                    );
                }
                Mark::Cross => {
                    let (cx, cy) = (lx + 9.0, ly - 4.0);
                    let _ = write!(
                        self.body,
                        r#"<path data-legend="{tag}" data-shape="cross" d="M{:.1},{:.1}L{:.1},{:.1}M{:.1},{:.1}L{:.1},{:.1}" stroke="{colour}" stroke-width="2"/>"#,
                        cx - 4.0,
                        cy - 4.0,
                        cx + 4.0,
                        cy + 4.0,
                        cx - 4.0,
                        cy + 4.0,
                        cx + 4.0,
                        cy - 4.0
                    );
                }
                Mark::Ring | Mark::Dot => {
                    let (cx, cy) = (lx + 9.0, ly - 4.0);
                    let (shape, fill) = match mark {
                        Mark::Ring => ("ring", "none"),
                        _ => ("dot", colour.as_str()),
                    };
                    let _ = write!(
                        self.body,
                        r#"<circle data-legend="{tag}" data-shape="{shape}" cx="{cx:.1}" cy="{cy:.1}" r="4" fill="{fill}" stroke="{colour}" stroke-width="2"/>"#
                    );
                }
            }
            self.text(lx + 22.0, ly, name, 11.0, "start", "#222");
            lx += w;
        }
    }

    /// Text placed clear of the text already placed: moved down in steps of
    /// its height (up to ten) until it overlaps nothing.
    pub fn label(&mut self, x: f64, y: f64, s: &str, size: f64, anchor: &str, colour: &str) {
        let w = text_width(s.chars().count(), size);
        let x0 = match anchor {
            "middle" => x - w / 2.0,
            "end" => x - w,
            _ => x,
        };
        let mut yy = y;
        for _ in 0..10 {
            let b = (x0, yy - size, x0 + w, yy + 0.25 * size);
            if !self.boxes.iter().any(|o| overlaps(*o, b)) {
                break;
            }
            yy += size * 1.2;
        }
        self.text(x, yy, s, size, anchor, colour);
    }

    /// A polyline through points (pixels): decoration (grid, frame, limits
    /// named elsewhere); data goes through [`Canvas::series`].
    pub fn polyline(&mut self, pts: &[(f64, f64)], colour: &str, width: f64, dash: Option<&str>) {
        self.polyline_tagged(pts, colour, width, dash, None);
    }

    fn polyline_tagged(
        &mut self,
        pts: &[(f64, f64)],
        colour: &str,
        width: f64,
        dash: Option<&str>,
        tag: Option<&str>,
    ) {
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
        let tag = tag
            .map(|t| format!(r#" data-series="{}""#, escape(t)))
            .unwrap_or_default();
        let _ = write!(
            self.body,
            r#"<polyline{tag} fill="none" stroke="{colour}" stroke-width="{width}"{dash} points="{}"/>"#,
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
        let w = text_width(s.chars().count(), size);
        let x0 = match anchor {
            "middle" => x - w / 2.0,
            "end" => x - w,
            _ => x,
        };
        self.boxes.push((x0, y - size, x0 + w, y + 0.25 * size));
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
        self.frame_with(x, y, x_label, y_label, fmt_x, &[]);
    }

    /// [`Canvas::frame`] with extra y tick values (levels worth reading off,
    /// such as a setpoint); those too close to a regular tick replace it.
    pub fn frame_with(
        &mut self,
        x: &Axis,
        y: &Axis,
        x_label: &str,
        y_label: &str,
        fmt_x: &dyn Fn(f64) -> String,
        extra_y: &[f64],
    ) {
        let (top, bottom) = (y.px_hi.min(y.px_lo), y.px_hi.max(y.px_lo));
        let (left, right) = (x.px_lo.min(x.px_hi), x.px_lo.max(x.px_hi));
        for t in x.ticks(8) {
            let px = x.px(t);
            self.polyline(&[(px, top), (px, bottom)], "#e4e4e4", 1.0, None);
            self.text(px, bottom + 16.0, &fmt_x(t), 11.0, "middle", "#333");
        }
        let mut ys: Vec<f64> = y
            .ticks(6)
            .into_iter()
            .filter(|t| extra_y.iter().all(|e| (y.px(*e) - y.px(*t)).abs() >= 14.0))
            .collect();
        ys.extend(
            extra_y
                .iter()
                .copied()
                .filter(|e| e.is_finite() && *e >= y.lo.min(y.hi) && *e <= y.lo.max(y.hi)),
        );
        ys.sort_by(f64::total_cmp);
        ys.dedup_by(|a, b| (y.px(*a) - y.px(*b)).abs() < 14.0);
        // The axis title stands clear of the widest tick label.
        let mut widest: f64 = 0.0;
        for t in ys {
            let py = y.px(t);
            self.polyline(&[(left, py), (right, py)], "#e4e4e4", 1.0, None);
            let _ = write!(self.body, r#"<g data-tick-y="{t}"></g>"#);
            let label = format_tick(t);
            widest = widest.max(text_width(label.chars().count(), 11.0));
            self.text(left - 6.0, py + 4.0, &label, 11.0, "end", "#333");
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
        self.vtext(
            (left - 6.0 - widest - 10.0).min(left - 44.0),
            (top + bottom) / 2.0,
            y_label,
            12.0,
            "#222",
        );
    }

    /// Tick labels for a right y axis.
    pub fn right_axis(&mut self, x_px: f64, y: &Axis, label: &str, colour: &str) {
        let mut widest: f64 = 0.0;
        for t in y.ticks(4) {
            let py = y.px(t);
            self.polyline(&[(x_px, py), (x_px + 4.0, py)], colour, 1.0, None);
            let text = format_tick(t);
            widest = widest.max(text_width(text.chars().count(), 11.0));
            self.text(x_px + 7.0, py + 4.0, &text, 11.0, "start", colour);
        }
        let mid = (y.px_lo + y.px_hi) / 2.0;
        self.vtext(
            (x_px + 7.0 + widest + 14.0).max(x_px + 44.0),
            mid,
            label,
            12.0,
            colour,
        );
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

/// Pixel points of one column of a trace, thinned to about two points per
/// pixel column of the plot `width` wide, skipping values that are not finite.
pub fn trace_series(
    pts: &[crate::sim::trace::TracePoint],
    x: &Axis,
    y: &Axis,
    width: f64,
    f: &dyn Fn(&crate::sim::trace::TracePoint) -> f64,
) -> Vec<(f64, f64)> {
    let stride = (pts.len() / (width.max(1.0) as usize * 2)).max(1);
    pts.iter()
        .step_by(stride)
        .filter(|p| f(p).is_finite())
        .map(|p| (x.px(p.t_s), y.px(f(p))))
        .collect()
}

/// Whether two boxes `(x0, y0, x1, y1)` overlap.
pub fn overlaps(a: (f64, f64, f64, f64), b: (f64, f64, f64, f64)) -> bool {
    a.0 < b.2 && b.0 < a.2 && a.1 < b.3 && b.1 < a.3
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
