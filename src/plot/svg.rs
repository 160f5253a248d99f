//! Writing SVG text: escaping, compact coordinates, clipping to a rectangle
//! and the house style every picture shares.
//!
//! Every element writer checks its coordinates and writes nothing when one
//! is not finite, so no `NaN` or `inf` can reach the output.

use super::Area;
use std::fmt::Write;

/// Fonts: the viewer's own interface font, then common sans-serif faces.
pub(crate) const FONT_STACK: &str =
    "system-ui, -apple-system, 'Segoe UI', Roboto, 'Noto Sans', 'Helvetica Neue', Arial, sans-serif";

/// The house palette: quiet greys for the frame, one strong colour per
/// kind of mark.
pub(crate) mod colour {
    /// Page background.
    pub const PAGE: &str = "#ffffff";
    /// Plot panel and event strip background.
    pub const PANEL: &str = "#f6f7f9";
    /// Gridlines at labelled ticks.
    pub const GRID: &str = "#dce1e7";
    /// Gridlines at unlabelled (minor) ticks.
    pub const GRID_MINOR: &str = "#ebeef2";
    /// Panel outline.
    pub const FRAME: &str = "#aab2bd";
    /// Title and main text.
    pub const INK: &str = "#1d2331";
    /// Tick labels, captions and notes.
    pub const MUTED: &str = "#5a6372";
    /// Failure markers.
    pub const FAILURE: &str = "#7b2d6f";
    /// The fitted line and its band.
    pub const FIT: &str = "#0b7a70";
    /// Suspension ticks on the event strip.
    pub const SUSPENSION: &str = "#b07612";
    /// Planned-replacement cost rate.
    pub const PLANNED: &str = "#0b7a70";
    /// Unplanned (failure) cost rate.
    pub const UNPLANNED: &str = "#c24e2c";
    /// Total cost rate and the optimum.
    pub const TOTAL: &str = "#1d2331";
    /// Run-to-failure reference line.
    pub const REFERENCE: &str = "#6f7888";
}

/// Escapes text for XML character data and attribute values. Characters
/// that XML 1.0 cannot carry at all (most control characters) become
/// U+FFFD; line breaks and tabs become spaces.
pub(crate) fn escape(text: &str) -> String {
    let mut out = String::with_capacity(text.len());
    for c in text.chars() {
        match c {
            '&' => out.push_str("&amp;"),
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '"' => out.push_str("&quot;"),
            '\'' => out.push_str("&apos;"),
            '\t' | '\n' | '\r' => out.push(' '),
            '\u{20}'..='\u{D7FF}' | '\u{E000}'..='\u{FFFD}' | '\u{10000}'..='\u{10FFFF}' => {
                out.push(c)
            }
            _ => out.push('\u{FFFD}'),
        }
    }
    out
}

/// Advance width of a character in ems, rounded up from DejaVu Sans (the
/// widest common fallback of the font stack), so that layout errs on the
/// side of room.
fn char_em(c: char) -> f64 {
    match c {
        'i' | 'l' | 'j' | '\'' | '.' | ',' | ':' | ';' | '!' | '|' | ' ' | '\u{2009}' => 0.33,
        'f' | 't' | 'r' | '(' | ')' | '[' | ']' | '-' => 0.41,
        'm' | 'w' | 'M' | 'W' | '%' | '@' => 0.95,
        'A'..='Z' => 0.72,
        '0'..='9' => 0.64,
        c if c.is_ascii() => 0.62,
        // East Asian wide characters and pictographs.
        '\u{1100}'..='\u{115F}' | '\u{2E80}'..='\u{A4CF}' | '\u{AC00}'..='\u{D7A3}' => 1.0,
        '\u{F900}'..='\u{FAFF}' | '\u{FE30}'..='\u{FE4F}' | '\u{FF00}'..='\u{FF60}' => 1.0,
        '\u{1F000}'..='\u{1FAFF}' | '\u{20000}'..='\u{3FFFD}' => 1.0,
        _ => 0.66,
    }
}

/// How much wider bold text runs than regular.
pub(crate) const BOLD_WIDENING: f64 = 1.12;

/// Estimated width in px of `text` at font size `size`, for layout.
pub(crate) fn text_width(text: &str, size: f64) -> f64 {
    text.chars().map(char_em).sum::<f64>() * size
}

/// `text` shortened with an ellipsis so that it fits in `max_px` when set
/// at `size` (in bold if `bold`).
pub(crate) fn fit_text(text: &str, max_px: f64, size: f64, bold: bool) -> String {
    let em = if bold { size * BOLD_WIDENING } else { size };
    if text_width(text, em) <= max_px {
        return text.to_string();
    }
    let budget = max_px - char_em('\u{2026}') * em;
    let mut used = 0.0;
    let mut out = String::new();
    for c in text.chars() {
        used += char_em(c) * em;
        if used > budget {
            break;
        }
        out.push(c);
    }
    let trimmed = out.trim_end();
    format!("{trimmed}\u{2026}")
}

/// A coordinate with at most two decimals, trailing zeros dropped.
pub(crate) fn num(x: f64) -> String {
    let s = format!("{x:.2}");
    let s = if s.contains('.') {
        s.trim_end_matches('0').trim_end_matches('.').to_string()
    } else {
        s
    };
    if s == "-0" {
        "0".to_string()
    } else {
        s
    }
}

fn all_finite(v: &[f64]) -> bool {
    v.iter().all(|x| x.is_finite())
}

/// How a stroke is drawn.
#[derive(Debug, Clone, Copy)]
pub(crate) struct Stroke<'a> {
    pub colour: &'a str,
    pub width: f64,
    /// SVG dash pattern, e.g. "6 4".
    pub dash: Option<&'a str>,
}

impl<'a> Stroke<'a> {
    pub fn solid(colour: &'a str, width: f64) -> Self {
        Stroke {
            colour,
            width,
            dash: None,
        }
    }

    fn attrs(&self) -> String {
        let mut s = format!(
            " fill=\"none\" stroke=\"{}\" stroke-width=\"{}\"",
            self.colour,
            num(self.width)
        );
        if let Some(d) = self.dash {
            let _ = write!(s, " stroke-dasharray=\"{d}\"");
        }
        s
    }
}

/// Horizontal placement of a text's anchor point.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum Anchor {
    Start,
    Middle,
    End,
}

/// How a text is set.
#[derive(Debug, Clone, Copy)]
pub(crate) struct Font<'a> {
    pub size: f64,
    pub colour: &'a str,
    pub anchor: Anchor,
    pub bold: bool,
}

impl<'a> Font<'a> {
    pub fn new(size: f64, colour: &'a str, anchor: Anchor) -> Self {
        Font {
            size,
            colour,
            anchor,
            bold: false,
        }
    }

    pub fn bold(self) -> Self {
        Font { bold: true, ..self }
    }
}

/// An SVG document being written.
pub(crate) struct Svg {
    out: String,
}

impl Svg {
    /// Starts a document of `width` x `height` user units with an accessible
    /// title and description (both escaped here).
    pub fn new(width: f64, height: f64, title: &str, desc: &str) -> Svg {
        let mut out = String::with_capacity(16 * 1024);
        let _ = write!(
            out,
            "<svg xmlns=\"http://www.w3.org/2000/svg\" viewBox=\"0 0 {w} {h}\" \
             width=\"{w}\" height=\"{h}\" preserveAspectRatio=\"xMidYMid meet\" \
             role=\"img\" font-family=\"{font}\">\n<title>{title}</title>\n<desc>{desc}</desc>\n",
            w = num(width),
            h = num(height),
            font = escape(FONT_STACK),
            title = escape(title),
            desc = escape(desc),
        );
        Svg { out }
    }

    /// Closes the document and returns its text.
    pub fn finish(mut self) -> String {
        self.out.push_str("</svg>\n");
        self.out
    }

    fn class_attr(class: &str) -> String {
        if class.is_empty() {
            String::new()
        } else {
            format!(" class=\"{}\"", escape(class))
        }
    }

    /// Opens a group carrying a class (for readers and tests).
    pub fn open_group(&mut self, class: &str) {
        let _ = writeln!(self.out, "<g{}>", Self::class_attr(class));
    }

    /// Closes the innermost group.
    pub fn close_group(&mut self) {
        self.out.push_str("</g>\n");
    }

    /// A rectangle filled with `fill` and optionally outlined.
    pub fn rect(&mut self, area: Area, fill: &str, outline: Option<Stroke>, class: &str) {
        let (x, y, w, h) = (area.left, area.top, area.width(), area.height());
        if !all_finite(&[x, y, w, h]) || w < 0.0 || h < 0.0 {
            return;
        }
        let stroke = match outline {
            Some(s) => format!(" stroke=\"{}\" stroke-width=\"{}\"", s.colour, num(s.width)),
            None => String::new(),
        };
        let _ = writeln!(
            self.out,
            "<rect{} x=\"{}\" y=\"{}\" width=\"{}\" height=\"{}\" fill=\"{fill}\"{stroke}/>",
            Self::class_attr(class),
            num(x),
            num(y),
            num(w),
            num(h),
        );
    }

    /// A straight segment; `extra` is written verbatim (trusted attributes).
    pub fn line(&mut self, a: (f64, f64), b: (f64, f64), stroke: Stroke, class: &str, extra: &str) {
        if !all_finite(&[a.0, a.1, b.0, b.1]) {
            return;
        }
        let _ = writeln!(
            self.out,
            "<line{} x1=\"{}\" y1=\"{}\" x2=\"{}\" y2=\"{}\"{}{extra}/>",
            Self::class_attr(class),
            num(a.0),
            num(a.1),
            num(b.0),
            num(b.1),
            stroke.attrs(),
        );
    }

    /// An open path through `points` (at least two finite points).
    pub fn polyline(&mut self, points: &[(f64, f64)], stroke: Stroke, class: &str) {
        if points.len() < 2 || !points.iter().all(|p| all_finite(&[p.0, p.1])) {
            return;
        }
        let _ = writeln!(
            self.out,
            "<polyline{} points=\"{}\"{} stroke-linejoin=\"round\" stroke-linecap=\"round\"/>",
            Self::class_attr(class),
            point_list(points),
            stroke.attrs(),
        );
    }

    /// A filled closed shape (at least three finite points).
    pub fn polygon(&mut self, points: &[(f64, f64)], fill: &str, opacity: f64, class: &str) {
        if points.len() < 3 || !points.iter().all(|p| all_finite(&[p.0, p.1])) {
            return;
        }
        let _ = writeln!(
            self.out,
            "<polygon{} points=\"{}\" fill=\"{fill}\" fill-opacity=\"{}\" stroke=\"none\"/>",
            Self::class_attr(class),
            point_list(points),
            num(opacity),
        );
    }

    /// A filled circle with a contrasting ring.
    pub fn circle(&mut self, c: (f64, f64), r: f64, fill: &str, ring: Stroke, class: &str) {
        if !all_finite(&[c.0, c.1, r]) {
            return;
        }
        let _ = writeln!(
            self.out,
            "<circle{} cx=\"{}\" cy=\"{}\" r=\"{}\" fill=\"{fill}\" stroke=\"{}\" stroke-width=\"{}\"/>",
            Self::class_attr(class),
            num(c.0),
            num(c.1),
            num(r),
            ring.colour,
            num(ring.width),
        );
    }

    /// A line of text (escaped here); `rotate` turns it about its anchor
    /// point by that many degrees.
    pub fn text(&mut self, at: (f64, f64), text: &str, font: Font, rotate: f64, class: &str) {
        if !all_finite(&[at.0, at.1, font.size, rotate]) || text.is_empty() {
            return;
        }
        let anchor = match font.anchor {
            Anchor::Start => "start",
            Anchor::Middle => "middle",
            Anchor::End => "end",
        };
        let weight = if font.bold {
            " font-weight=\"600\""
        } else {
            ""
        };
        let turn = if rotate != 0.0 {
            format!(
                " transform=\"rotate({} {} {})\"",
                num(rotate),
                num(at.0),
                num(at.1)
            )
        } else {
            String::new()
        };
        let _ = writeln!(
            self.out,
            "<text{} x=\"{}\" y=\"{}\" font-size=\"{}\" fill=\"{}\" text-anchor=\"{anchor}\"{weight}{turn}>{}</text>",
            Self::class_attr(class),
            num(at.0),
            num(at.1),
            num(font.size),
            font.colour,
            escape(text),
        );
    }
}

fn point_list(points: &[(f64, f64)]) -> String {
    let mut s = String::with_capacity(points.len() * 14);
    for (i, p) in points.iter().enumerate() {
        if i > 0 {
            s.push(' ');
        }
        let _ = write!(s, "{},{}", num(p.0), num(p.1));
    }
    s
}

/// The parts of a path (a sequence of points) that lie inside `area`,
/// each part a run of at least two points. Points that are not finite
/// break the path. Segments are cut exactly at the rectangle's edges
/// (Liang-Barsky), so a cut end still lies on the drawn curve.
pub(crate) fn clip_path(points: &[(f64, f64)], area: Area) -> Vec<Vec<(f64, f64)>> {
    let mut runs: Vec<Vec<(f64, f64)>> = Vec::new();
    let mut current: Vec<(f64, f64)> = Vec::new();
    let close = |a: (f64, f64), b: (f64, f64)| (a.0 - b.0).abs() < 1e-9 && (a.1 - b.1).abs() < 1e-9;
    for w in points.windows(2) {
        let (a, b) = (w[0], w[1]);
        let clipped = if all_finite(&[a.0, a.1, b.0, b.1]) {
            clip_segment(a, b, area)
        } else {
            None
        };
        match clipped {
            Some((p, q)) => {
                let continues = current.last().is_some_and(|&last| close(last, p));
                if !continues {
                    if current.len() >= 2 {
                        runs.push(std::mem::take(&mut current));
                    }
                    current.clear();
                    current.push(p);
                }
                current.push(q);
            }
            None => {
                if current.len() >= 2 {
                    runs.push(std::mem::take(&mut current));
                }
                current.clear();
            }
        }
    }
    if current.len() >= 2 {
        runs.push(current);
    }
    runs
}

/// Whether the segment a-b touches the rectangle `area`.
pub(crate) fn segment_meets_box(a: (f64, f64), b: (f64, f64), area: Area) -> bool {
    all_finite(&[a.0, a.1, b.0, b.1]) && clip_segment(a, b, area).is_some()
}

/// Liang-Barsky: the part of segment a-b inside `area`, if any.
fn clip_segment(a: (f64, f64), b: (f64, f64), area: Area) -> Option<((f64, f64), (f64, f64))> {
    let (dx, dy) = (b.0 - a.0, b.1 - a.1);
    if !(dx.is_finite() && dy.is_finite()) {
        return None;
    }
    let mut t0: f64 = 0.0;
    let mut t1: f64 = 1.0;
    for (p, q) in [
        (-dx, a.0 - area.left),
        (dx, area.right - a.0),
        (-dy, a.1 - area.top),
        (dy, area.bottom - a.1),
    ] {
        if p == 0.0 {
            if q < 0.0 {
                return None;
            }
        } else {
            let r = q / p;
            if p < 0.0 {
                t0 = t0.max(r);
            } else {
                t1 = t1.min(r);
            }
        }
    }
    if t0 > t1 {
        return None;
    }
    let at = |t: f64| {
        if t == 0.0 {
            a
        } else if t == 1.0 {
            b
        } else {
            (a.0 + t * dx, a.1 + t * dy)
        }
    };
    Some((at(t0), at(t1)))
}

/// The part of a closed polygon inside `area` (Sutherland-Hodgman against
/// the four edges); empty when nothing is inside. Non-finite points are
/// dropped first.
pub(crate) fn clip_polygon(points: &[(f64, f64)], area: Area) -> Vec<(f64, f64)> {
    let mut poly: Vec<(f64, f64)> = points
        .iter()
        .copied()
        .filter(|p| all_finite(&[p.0, p.1]))
        .collect();
    // Each edge: inside test and intersection with the edge's line.
    type Inside = fn((f64, f64), f64) -> bool;
    let edges: [(Inside, bool, f64); 4] = [
        (|p, v| p.0 >= v, true, area.left),
        (|p, v| p.0 <= v, true, area.right),
        (|p, v| p.1 >= v, false, area.top),
        (|p, v| p.1 <= v, false, area.bottom),
    ];
    for (inside, vertical, v) in edges {
        if poly.is_empty() {
            break;
        }
        let cut = |a: (f64, f64), b: (f64, f64)| {
            if vertical {
                let t = (v - a.0) / (b.0 - a.0);
                (v, a.1 + t * (b.1 - a.1))
            } else {
                let t = (v - a.1) / (b.1 - a.1);
                (a.0 + t * (b.0 - a.0), v)
            }
        };
        let mut out = Vec::with_capacity(poly.len() + 4);
        for i in 0..poly.len() {
            let cur = poly[i];
            let prev = poly[(i + poly.len() - 1) % poly.len()];
            match (inside(cur, v), inside(prev, v)) {
                (true, true) => out.push(cur),
                (true, false) => {
                    out.push(cut(prev, cur));
                    out.push(cur);
                }
                (false, true) => out.push(cut(prev, cur)),
                (false, false) => {}
            }
        }
        poly = out;
    }
    poly.retain(|p| all_finite(&[p.0, p.1]));
    poly
}

#[cfg(test)]
mod tests {
    use super::*;

    fn area() -> Area {
        Area {
            left: 0.0,
            top: 0.0,
            right: 10.0,
            bottom: 10.0,
        }
    }

    #[test]
    fn escaping_covers_markup_and_control_characters() {
        assert_eq!(
            escape("</svg><b a='1'>\"&\"</b>"),
            "&lt;/svg&gt;&lt;b a=&apos;1&apos;&gt;&quot;&amp;&quot;&lt;/b&gt;"
        );
        assert_eq!(
            escape("a\u{0}b\u{1b}c\u{FFFE}"),
            "a\u{FFFD}b\u{FFFD}c\u{FFFD}"
        );
        assert_eq!(escape("line\nbreak\ttab"), "line break tab");
        assert_eq!(escape("Grüße 試験 🚌"), "Grüße 試験 🚌");
    }

    #[test]
    fn numbers_are_short_and_never_negative_zero() {
        assert_eq!(num(12.0), "12");
        assert_eq!(num(12.345), "12.35");
        assert_eq!(num(0.1), "0.1");
        assert_eq!(num(-0.001), "0");
        assert_eq!(num(-3.5), "-3.5");
    }

    #[test]
    fn long_text_is_cut_with_an_ellipsis() {
        let long = "x".repeat(500);
        let cut = fit_text(&long, 100.0, 10.0, false);
        assert!(cut.ends_with('\u{2026}'));
        assert!(text_width(&cut, 10.0) <= 100.0);
        let bold = fit_text(&long, 100.0, 10.0, true);
        assert!(bold.chars().count() < cut.chars().count());
        assert!(text_width(&bold, 10.0 * BOLD_WIDENING) <= 100.0);
        assert_eq!(fit_text("short", 100.0, 10.0, false), "short");
    }

    #[test]
    fn segments_are_cut_at_the_edges() {
        // From (-5, 5) to (15, 5): inside from x = 0 to x = 10.
        let runs = clip_path(&[(-5.0, 5.0), (15.0, 5.0)], area());
        assert_eq!(runs, vec![vec![(0.0, 5.0), (10.0, 5.0)]]);
        // Diagonal through the corner region: y = x + 5 enters at (0, 5), leaves at (5, 10).
        let runs = clip_path(&[(-5.0, 0.0), (20.0, 25.0)], area());
        assert_eq!(runs, vec![vec![(0.0, 5.0), (5.0, 10.0)]]);
        // Entirely outside, and broken by a NaN.
        assert!(clip_path(&[(-5.0, -5.0), (-1.0, 20.0)], area()).is_empty());
        let runs = clip_path(
            &[
                (1.0, 1.0),
                (2.0, 2.0),
                (f64::NAN, 3.0),
                (4.0, 4.0),
                (5.0, 5.0),
            ],
            area(),
        );
        assert_eq!(runs.len(), 2);
        // Leaving and re-entering makes two runs.
        let runs = clip_path(&[(1.0, 1.0), (5.0, 20.0), (9.0, 1.0)], area());
        assert_eq!(runs.len(), 2);
    }

    #[test]
    fn polygons_are_cut_to_the_rectangle() {
        let square = [(-5.0, -5.0), (5.0, -5.0), (5.0, 5.0), (-5.0, 5.0)];
        let cut = clip_polygon(&square, area());
        let xs: Vec<f64> = cut.iter().map(|p| p.0).collect();
        let ys: Vec<f64> = cut.iter().map(|p| p.1).collect();
        assert!(xs.iter().all(|&x| (0.0..=5.0).contains(&x)));
        assert!(ys.iter().all(|&y| (0.0..=5.0).contains(&y)));
        // Shoelace area of the remaining quarter is 25.
        let a: f64 = (0..cut.len())
            .map(|i| {
                let (p, q) = (cut[i], cut[(i + 1) % cut.len()]);
                p.0 * q.1 - q.0 * p.1
            })
            .sum::<f64>()
            / 2.0;
        assert!((a.abs() - 25.0).abs() < 1e-12, "{a}");
        assert!(clip_polygon(&[(20.0, 20.0), (30.0, 20.0), (30.0, 30.0)], area()).is_empty());
    }
}
