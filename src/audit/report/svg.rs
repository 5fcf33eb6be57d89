//! A small SVG drawing kit for the report's figures: the tool's palette, marker shapes and
//! dash patterns, linear and logarithmic axes with readable ticks, panels for faceted
//! figures, and text that is always escaped.
//!
//! Hand-written rather than through a plotting crate (DEVELOPERS.md, "Figures"): the
//! figures need shaded bands between curves, labels placed beside data, legends outside the
//! data, small multiples and identical bytes for identical inputs, and the same SVG is
//! inlined in `report.html`, so every id is unique per figure and nothing refers outside it.
//! Must not compute physics: callers pass the numbers to draw.

use std::fmt::Write;

/// The tool's palette: six hues that stay apart under the common colour-vision
/// deficiencies (blues against orange and brown, never red against green), in two
/// lightness groups (dark: #1d4e89, #7a3b12, #404040; light: #e08e0b, #5d9cd3, #9a6fb0)
/// so that the pairs a figure shows side by side (points against points, a threshold
/// against a bound) differ in lightness too. What keeps every series apart in greyscale is
/// its own marker shape and, for lines, dash pattern. Chosen for this tool (common practice
/// for colour-blind safe palettes: vary lightness, pair blue with orange).
pub const PALETTE: [&str; 6] = ["#1d4e89", "#e08e0b", "#5d9cd3", "#7a3b12", "#9a6fb0", "#404040"];
/// Text and axes.
pub const INK: &str = "#1a1a1a";
/// Grid lines.
pub const GRID: &str = "#d9d9d9";
// The three regions of the key-length figure step down in lightness (CIE L* about 95, 86
// and 78), so that they stay apart in greyscale too.
/// Fill of the region a rule may use safely (below the achievable bound).
pub const SECURE_FILL: &str = "#e6f0fa";
/// Fill of the inconclusive band (between the achievable bound and the capacity).
pub const BAND_FILL: &str = "#d6d6d6";
/// Fill of the region that leaks (above the capacity).
pub const LEAK_FILL: &str = "#f3b766";
/// Base font size, px of the figure's own width. Figures are 760 px wide; on A4 with the
/// page's 14 mm margins (182 mm ≈ 688 CSS px of printable width) they scale by about 0.9, so
/// labels print at about 9.5 pt and tick labels (2 px smaller) at about 8 pt.
pub const FONT: f64 = 14.0;

/// Marker shapes, one per series.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Shape {
    /// Filled circle.
    Circle,
    /// Filled square.
    Square,
    /// Filled triangle.
    Triangle,
    /// Filled diamond.
    Diamond,
    /// Filled triangle pointing down.
    TriangleDown,
    /// Open circle.
    Ring,
    /// Cross (×).
    Cross,
    /// An unfilled ring that highlights a point without hiding it.
    Halo,
}

/// Shapes in series order.
pub const SHAPES: [Shape; 6] = [Shape::Circle, Shape::Square, Shape::Triangle, Shape::Diamond, Shape::Ring, Shape::Cross];
/// Dash patterns in series order (SVG `stroke-dasharray`; empty is solid).
pub const DASHES: [&str; 6] = ["", "7 4", "2 3", "9 3 2 3", "4 4", "1 2"];

/// Escapes text for SVG and HTML (element content and quoted attributes).
pub fn esc(s: &str) -> String {
    let mut out = String::with_capacity(s.len());
    for c in s.chars() {
        match c {
            '&' => out.push_str("&amp;"),
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '"' => out.push_str("&quot;"),
            '\'' => out.push_str("&#39;"),
            c => out.push(c),
        }
    }
    out
}

fn f(x: f64) -> String {
    let s = format!("{x:.1}");
    s.strip_suffix(".0").map(str::to_string).unwrap_or(s)
}

/// One figure being drawn.
pub struct Svg {
    buf: String,
    title: String,
    description: String,
    /// Width, px.
    pub width: f64,
    /// Height, px.
    pub height: f64,
}

/// Text anchoring.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Anchor {
    /// Left edge at x.
    Start,
    /// Centred on x.
    Middle,
    /// Right edge at x.
    End,
}

impl Anchor {
    fn name(self) -> &'static str {
        match self {
            Anchor::Start => "start",
            Anchor::Middle => "middle",
            Anchor::End => "end",
        }
    }
}

impl Svg {
    /// A figure with an accessible title and description; the height may be set later
    /// ([`Svg::finish_at`]) once the layout is known.
    pub fn new(width: f64, height: f64, title: &str, description: &str) -> Svg {
        Svg { buf: String::new(), width, height, title: title.to_string(), description: description.to_string() }
    }

    /// Text at (x, y) (baseline).
    pub fn text(&mut self, x: f64, y: f64, s: &str, size: f64, anchor: Anchor, bold: bool) {
        let _ = writeln!(
            self.buf,
            "<text x=\"{}\" y=\"{}\" font-size=\"{}\" text-anchor=\"{}\"{} fill=\"{INK}\">{}</text>",
            f(x),
            f(y),
            f(size),
            anchor.name(),
            if bold { " font-weight=\"bold\"" } else { "" },
            esc(s)
        );
    }

    /// Text with a white halo, readable over data.
    pub fn label(&mut self, x: f64, y: f64, s: &str, anchor: Anchor) {
        let _ = writeln!(
            self.buf,
            "<text x=\"{}\" y=\"{}\" font-size=\"{}\" text-anchor=\"{}\" fill=\"{INK}\" stroke=\"#ffffff\" stroke-width=\"4\" \
             paint-order=\"stroke\">{}</text>",
            f(x),
            f(y),
            f(FONT - 1.0),
            anchor.name(),
            esc(s)
        );
    }

    /// Text rotated a quarter turn anticlockwise, centred on (x, y).
    pub fn vtext(&mut self, x: f64, y: f64, s: &str) {
        let _ = writeln!(
            self.buf,
            "<text x=\"{}\" y=\"{}\" text-anchor=\"middle\" transform=\"rotate(-90 {} {})\" fill=\"{INK}\">{}</text>",
            f(x),
            f(y),
            f(x),
            f(y),
            esc(s)
        );
    }

    /// A straight line.
    pub fn line(&mut self, a: (f64, f64), b: (f64, f64), stroke: &str, width: f64, dash: &str) {
        let _ = writeln!(
            self.buf,
            "<line x1=\"{}\" y1=\"{}\" x2=\"{}\" y2=\"{}\" stroke=\"{stroke}\" stroke-width=\"{}\"{}/>",
            f(a.0),
            f(a.1),
            f(b.0),
            f(b.1),
            f(width),
            dash_attr(dash)
        );
    }

    /// A polyline through points (NaN points break the line).
    pub fn polyline(&mut self, pts: &[(f64, f64)], stroke: &str, width: f64, dash: &str) {
        for run in pts.split(|p| !p.0.is_finite() || !p.1.is_finite()) {
            if run.len() < 2 {
                continue;
            }
            let d: Vec<String> = run.iter().map(|p| format!("{},{}", f(p.0), f(p.1))).collect();
            let _ = writeln!(
                self.buf,
                "<polyline points=\"{}\" fill=\"none\" stroke=\"{stroke}\" stroke-width=\"{}\" stroke-linejoin=\"round\"{}/>",
                d.join(" "),
                f(width),
                dash_attr(dash)
            );
        }
    }

    /// A filled polygon.
    pub fn polygon(&mut self, pts: &[(f64, f64)], fill: &str) {
        if pts.len() < 3 {
            return;
        }
        let d: Vec<String> = pts.iter().map(|p| format!("{},{}", f(p.0), f(p.1))).collect();
        let _ = writeln!(self.buf, "<polygon points=\"{}\" fill=\"{fill}\" stroke=\"none\"/>", d.join(" "));
    }

    /// A rectangle.
    pub fn rect(&mut self, x: f64, y: f64, w: f64, h: f64, fill: &str, stroke: &str) {
        let _ = writeln!(
            self.buf,
            "<rect x=\"{}\" y=\"{}\" width=\"{}\" height=\"{}\" fill=\"{fill}\" stroke=\"{stroke}\"/>",
            f(x),
            f(y),
            f(w.max(0.0)),
            f(h.max(0.0))
        );
    }

    /// A marker of `shape` centred on (x, y), radius `r`.
    pub fn marker(&mut self, shape: Shape, x: f64, y: f64, r: f64, color: &str) {
        let b = &mut self.buf;
        let _ = match shape {
            Shape::Circle => writeln!(
                b,
                "<circle cx=\"{}\" cy=\"{}\" r=\"{}\" fill=\"{color}\" stroke=\"#ffffff\" stroke-width=\"0.8\"/>",
                f(x),
                f(y),
                f(r)
            ),
            Shape::Halo => {
                writeln!(b, "<circle cx=\"{}\" cy=\"{}\" r=\"{}\" fill=\"none\" stroke=\"{color}\" stroke-width=\"2\"/>", f(x), f(y), f(r))
            }
            Shape::Ring => writeln!(
                b,
                "<circle cx=\"{}\" cy=\"{}\" r=\"{}\" fill=\"#ffffff\" stroke=\"{color}\" stroke-width=\"2\"/>",
                f(x),
                f(y),
                f(r)
            ),
            Shape::Square => writeln!(
                b,
                "<rect x=\"{}\" y=\"{}\" width=\"{}\" height=\"{}\" fill=\"{color}\" stroke=\"#ffffff\" stroke-width=\"0.8\"/>",
                f(x - r * 0.9),
                f(y - r * 0.9),
                f(1.8 * r),
                f(1.8 * r)
            ),
            Shape::Triangle => writeln!(
                b,
                "<polygon points=\"{},{} {},{} {},{}\" fill=\"{color}\" stroke=\"#ffffff\" stroke-width=\"0.8\"/>",
                f(x),
                f(y - 1.2 * r),
                f(x - 1.1 * r),
                f(y + 0.8 * r),
                f(x + 1.1 * r),
                f(y + 0.8 * r)
            ),
            Shape::TriangleDown => writeln!(
                b,
                "<polygon points=\"{},{} {},{} {},{}\" fill=\"{color}\" stroke=\"#ffffff\" stroke-width=\"0.8\"/>",
                f(x),
                f(y + 1.2 * r),
                f(x - 1.1 * r),
                f(y - 0.8 * r),
                f(x + 1.1 * r),
                f(y - 0.8 * r)
            ),
            Shape::Diamond => writeln!(
                b,
                "<polygon points=\"{},{} {},{} {},{} {},{}\" fill=\"{color}\" stroke=\"#ffffff\" stroke-width=\"0.8\"/>",
                f(x),
                f(y - 1.3 * r),
                f(x + 1.1 * r),
                f(y),
                f(x),
                f(y + 1.3 * r),
                f(x - 1.1 * r),
                f(y)
            ),
            Shape::Cross => writeln!(
                b,
                "<path d=\"M{},{}L{},{}M{},{}L{},{}\" stroke=\"{color}\" stroke-width=\"2.2\"/>",
                f(x - r),
                f(y - r),
                f(x + r),
                f(y + r),
                f(x - r),
                f(y + r),
                f(x + r),
                f(y - r)
            ),
        };
    }

    /// A haloed label near (x, y) inside `area` (left, top, width, height): placed to the
    /// right of x, moved left as far as needed to fit, never outside the area's edges.
    pub fn label_in(&mut self, area: (f64, f64, f64, f64), x: f64, y: f64, s: &str) {
        // Average advance of the label font, px per character (DejaVu Sans at 13 px).
        const CHAR_WIDTH: f64 = 7.4;
        let w = CHAR_WIDTH * s.chars().count() as f64;
        let lx = (x + 8.0).min(area.0 + area.2 - w - 4.0).max(area.0 + 4.0);
        let ly = y.clamp(area.1 + FONT + 2.0, area.1 + area.3 - 4.0);
        self.label(lx, ly, s, Anchor::Start);
    }

    /// A vertical error bar with caps from y0 to y1 at x.
    pub fn error_bar(&mut self, x: f64, y0: f64, y1: f64, color: &str) {
        if !(y0.is_finite() && y1.is_finite()) {
            return;
        }
        self.line((x, y0), (x, y1), color, 1.4, "");
        self.line((x - 4.0, y0), (x + 4.0, y0), color, 1.4, "");
        self.line((x - 4.0, y1), (x + 4.0, y1), color, 1.4, "");
    }

    /// A legend row of entries starting at (x, y), wrapping at `max_x`; returns the y below it.
    pub fn legend(&mut self, x: f64, y: f64, max_x: f64, entries: &[LegendEntry]) -> f64 {
        let (mut cx, mut cy) = (x, y);
        for e in entries {
            let w = 34.0 + 7.4 * e.label.chars().count() as f64 + 18.0;
            if cx > x && cx + w > max_x {
                cx = x;
                cy += FONT + 8.0;
            }
            match e.key {
                Key::Line { color, dash, width } => self.line((cx, cy - 5.0), (cx + 28.0, cy - 5.0), color, width, dash),
                Key::Marker { shape, color } => self.marker(shape, cx + 14.0, cy - 5.0, 5.0, color),
                Key::MarkerBar { shape, color } => {
                    self.error_bar(cx + 14.0, cy - 12.0, cy + 2.0, color);
                    self.marker(shape, cx + 14.0, cy - 5.0, 5.0, color);
                }
                Key::Fill(fill) => self.rect(cx, cy - 12.0, 28.0, 13.0, fill, "#999999"),
            }
            self.text(cx + 34.0, cy, &e.label, FONT - 1.0, Anchor::Start, false);
            cx += w;
        }
        cy + FONT + 4.0
    }

    /// The finished SVG text.
    pub fn finish(self) -> String {
        let mut out = String::new();
        let _ = write!(
            out,
            "<svg xmlns=\"http://www.w3.org/2000/svg\" width=\"{w}\" height=\"{h}\" viewBox=\"0 0 {w} {h}\" role=\"img\" \
             font-family=\"DejaVu Sans, Verdana, Arial, sans-serif\" font-size=\"{FONT}\">\n<title>{}</title>\n<desc>{}</desc>\n\
             <rect width=\"{w}\" height=\"{h}\" fill=\"#ffffff\"/>\n",
            esc(&self.title),
            esc(&self.description),
            w = f(self.width),
            h = f(self.height.ceil())
        );
        out.push_str(&self.buf);
        out.push_str("</svg>\n");
        out
    }

    /// The finished SVG text at `height` px, with its description.
    pub fn finish_at(mut self, height: f64, description: &str) -> String {
        self.height = height;
        self.description = description.to_string();
        self.finish()
    }
}

fn dash_attr(dash: &str) -> String {
    if dash.is_empty() {
        String::new()
    } else {
        format!(" stroke-dasharray=\"{dash}\"")
    }
}

/// What a legend entry shows.
#[derive(Clone, Copy, Debug)]
pub enum Key {
    /// A line.
    Line {
        /// Colour.
        color: &'static str,
        /// Dash pattern.
        dash: &'static str,
        /// Width, px.
        width: f64,
    },
    /// A marker.
    Marker {
        /// Shape.
        shape: Shape,
        /// Colour.
        color: &'static str,
    },
    /// A marker with an error bar.
    MarkerBar {
        /// Shape.
        shape: Shape,
        /// Colour.
        color: &'static str,
    },
    /// A filled region.
    Fill(&'static str),
}

/// One legend entry.
#[derive(Clone, Debug)]
pub struct LegendEntry {
    /// The key.
    pub key: Key,
    /// Its label.
    pub label: String,
}

/// An axis: data range to pixel range, linear or logarithmic.
#[derive(Clone, Copy, Debug)]
pub struct Axis {
    /// Data low end.
    pub lo: f64,
    /// Data high end.
    pub hi: f64,
    /// Pixel at `lo`.
    pub p0: f64,
    /// Pixel at `hi`.
    pub p1: f64,
    /// Logarithmic (base 10).
    pub log: bool,
}

impl Axis {
    /// Pixel of a data value (clamped a little outside the range so marks stay near it).
    pub fn px(&self, v: f64) -> f64 {
        let t = if self.log {
            (v.log10() - self.lo.log10()) / (self.hi.log10() - self.lo.log10())
        } else {
            (v - self.lo) / (self.hi - self.lo)
        };
        let t = if t.is_finite() { t.clamp(-0.02, 1.02) } else { f64::NAN };
        self.p0 + t * (self.p1 - self.p0)
    }

    /// Tick values: about `n` round numbers (decades on a log axis).
    pub fn ticks(&self, n: usize) -> Vec<f64> {
        if self.log {
            let (a, b) = (self.lo.log10().ceil() as i32, self.hi.log10().floor() as i32);
            let step = ((b - a) as usize / n.max(1)).max(1);
            return (a..=b).step_by(step).map(|e| 10f64.powi(e)).collect();
        }
        let span = self.hi - self.lo;
        if span <= 0.0 || !span.is_finite() {
            return vec![self.lo];
        }
        let raw = span / n.max(1) as f64;
        let mag = 10f64.powf(raw.log10().floor());
        let step = [1.0, 2.0, 2.5, 5.0, 10.0].iter().map(|m| m * mag).find(|s| span / s <= n as f64).unwrap_or(10.0 * mag);
        let first = (self.lo / step).ceil() as i64;
        let last = (self.hi / step + 1e-9).floor() as i64;
        // Rounded to the step's decimals, so that 3 × 0.025 reads 0.075, not 0.07500000000000001.
        let decimals = (2 - step.log10().floor() as i32).max(0) as usize;
        (first..=last).map(|k| format!("{:.*}", decimals, k as f64 * step).parse().unwrap_or(k as f64 * step)).collect()
    }
}

/// A tick label: plain numbers, thousands as k, M, G; decades on a log axis as 1e-6.
pub fn tick_label(v: f64, log: bool) -> String {
    if log {
        return format!("{v:.0e}");
    }
    let a = v.abs();
    let (x, suffix) = if a >= 1e9 {
        (v / 1e9, " G")
    } else if a >= 1e6 {
        (v / 1e6, " M")
    } else if a >= 1e4 {
        (v / 1e3, " k")
    } else {
        (v, "")
    };
    let s = format!("{x:.6}");
    let s = s.trim_end_matches('0').trim_end_matches('.');
    let s = if s == "-0" { "0" } else { s };
    format!("{}{suffix}", s.replace('-', "−"))
}

/// A plotting panel: a frame with axes at a place in the figure.
#[derive(Clone, Copy, Debug)]
pub struct Panel {
    /// Horizontal axis.
    pub x: Axis,
    /// Vertical axis.
    pub y: Axis,
}

impl Panel {
    /// A panel whose plot area is `(left, top, width, height)`.
    pub fn new(area: (f64, f64, f64, f64), x: (f64, f64, bool), y: (f64, f64, bool)) -> Panel {
        let (l, t, w, h) = area;
        Panel { x: Axis { lo: x.0, hi: x.1, p0: l, p1: l + w, log: x.2 }, y: Axis { lo: y.0, hi: y.1, p0: t + h, p1: t, log: y.2 } }
    }

    /// Pixel position of a data point.
    pub fn at(&self, x: f64, y: f64) -> (f64, f64) {
        (self.x.px(x), self.y.px(y))
    }

    /// Grid, frame, tick labels, axis titles and the panel title.
    pub fn frame(&self, svg: &mut Svg, title: &str, x_title: &str, y_title: &str) {
        let (l, r, b, t) = (self.x.p0, self.x.p1, self.y.p0, self.y.p1);
        for v in self.y.ticks(5) {
            let y = self.y.px(v);
            svg.line((l, y), (r, y), GRID, 1.0, "");
            svg.text(l - 6.0, y + 4.5, &tick_label(v, self.y.log), FONT - 2.0, Anchor::End, false);
        }
        for v in self.x.ticks(6) {
            let x = self.x.px(v);
            svg.line((x, t), (x, b), GRID, 1.0, "");
            svg.text(x, b + 17.0, &tick_label(v, self.x.log), FONT - 2.0, Anchor::Middle, false);
        }
        svg.rect(l, t, r - l, b - t, "none", INK);
        svg.text((l + r) / 2.0, b + 36.0, x_title, FONT - 1.0, Anchor::Middle, false);
        if !y_title.is_empty() {
            svg.vtext(l - 48.0, (t + b) / 2.0, y_title);
        }
        if !title.is_empty() {
            svg.text(l, t - 8.0, title, FONT, Anchor::Start, true);
        }
    }

    /// Draws a filled band between two curves sampled at the same x values, clipped to the
    /// panel's vertical range.
    pub fn band(&self, svg: &mut Svg, xs: &[f64], lower: &[f64], upper: &[f64], fill: &str) {
        let clip = |v: f64| v.clamp(self.y.lo, self.y.hi);
        let mut pts: Vec<(f64, f64)> = xs.iter().zip(upper).map(|(&x, &u)| self.at(x, clip(u))).collect();
        pts.extend(xs.iter().zip(lower).rev().map(|(&x, &l)| self.at(x, clip(l))));
        svg.polygon(&pts, fill);
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn text_is_escaped() {
        assert_eq!(esc("<script>&\"'"), "&lt;script&gt;&amp;&quot;&#39;");
        let mut s = Svg::new(10.0, 10.0, "<t>", "d");
        s.text(0.0, 0.0, "<script>alert(1)</script>", 10.0, Anchor::Start, false);
        let out = s.finish();
        assert!(!out.contains("<script>") && out.contains("&lt;script&gt;"));
    }

    #[test]
    fn ticks_are_round_and_inside() {
        let a = Axis { lo: 0.0, hi: 0.137, p0: 0.0, p1: 100.0, log: false };
        let t = a.ticks(6);
        assert_eq!(t, vec![0.0, 0.025, 0.05, 0.075, 0.1, 0.125]);
        let l = Axis { lo: 1e-7, hi: 1e-2, p0: 0.0, p1: 100.0, log: true };
        assert_eq!(l.ticks(6).len(), 6);
        assert_eq!(tick_label(5_000_000.0, false), "5 M");
        assert_eq!(tick_label(-2_500.0, false), "−2500");
        assert_eq!(a.px(0.137), 100.0);
    }
}
