//! Pictures of life data and life models as self-contained SVG text.
//!
//! Two pictures:
//!
//! - a **probability plot**: failures at their plotting positions on a
//!   family's probability scale (ruled in percent failing against age), the
//!   fitted model drawn from its quantiles, an optional confidence band, and
//!   the suspensions as ticks on an event strip under the plot;
//! - an **age-replacement cost curve**: planned, unplanned and total cost per
//!   unit of usage against the replacement age, the optimum and the
//!   run-to-failure rate.
//!
//! Pure functions from numbers to text: no SQL, no files, no scripts and no
//! external resources; the SVG has a fixed `viewBox` ([`WIDTH`] x [`HEIGHT`])
//! and uses the viewer's system fonts. Every text that comes from a user
//! (titles, axis labels) is escaped for XML. The layouts are public so that
//! callers and tests can check where a mark lands ([`ProbabilityLayout::to_px`],
//! [`CostLayout::to_px`]).

mod from_model;
mod svg;

pub use from_model::{model_cost_svg, model_probability_svg};

use crate::dist::{Family, LifeDistribution, Linearisation, FAMILIES};
use crate::error::{show_number, LifeError, LifeResult};
use std::collections::HashSet;
use svg::{colour, Anchor, Font, Stroke, Svg};

/// Width of every picture in SVG user units (pixels at 100 %).
pub const WIDTH: f64 = 800.0;
/// Height of every picture; with [`WIDTH`] it fixes the aspect ratio.
pub const HEIGHT: f64 = 540.0;

// Layout shared by the pictures: margins and text baselines, px.
const MARGIN: f64 = 24.0;
const RIGHT_MARGIN: f64 = 30.0;
const TITLE_Y: f64 = 34.0;
const SUBTITLE_Y: f64 = 55.0;
const LEGEND_Y: f64 = 80.0;
const PANEL_TOP: f64 = 98.0;
const TITLE_SIZE: f64 = 19.0;
const TEXT_SIZE: f64 = 12.5;
const TICK_SIZE: f64 = 11.5;
/// Space left of the tick labels for the rotated vertical-axis title.
const Y_TITLE_ROOM: f64 = 22.0;
/// Smallest vertical distance between two labelled percent ticks.
const MIN_TICK_GAP_Y: f64 = 16.0;
/// Smallest horizontal gap between two age tick labels.
const MIN_TICK_GAP_X: f64 = 10.0;

/// A rectangle on the picture, in px from its top-left corner.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Area {
    /// Left edge.
    pub left: f64,
    /// Top edge.
    pub top: f64,
    /// Right edge.
    pub right: f64,
    /// Bottom edge.
    pub bottom: f64,
}

impl Area {
    /// Width in px.
    pub fn width(&self) -> f64 {
        self.right - self.left
    }
    /// Height in px.
    pub fn height(&self) -> f64 {
        self.bottom - self.top
    }
    /// Whether a point lies inside or on the edge (with a little slack for
    /// rounding to two decimals).
    pub fn contains(&self, px: f64, py: f64) -> bool {
        let e = 0.01;
        px >= self.left - e && px <= self.right + e && py >= self.top - e && py <= self.bottom + e
    }
}

/// A tick on an axis.
#[derive(Debug, Clone, PartialEq)]
pub struct Tick {
    /// Position in data units: an age, an unreliability F or a cost rate.
    pub value: f64,
    /// The label written at the tick; None for an unlabelled tick (a minor
    /// tick, or one whose label would collide with a neighbour's).
    pub label: Option<String>,
    /// Major ticks get a stronger gridline.
    pub major: bool,
}

/// A tick while it is being chosen: lower priority numbers keep their label
/// first when labels collide.
#[derive(Debug, Clone)]
struct Mark {
    value: f64,
    label: Option<String>,
    major: bool,
    priority: u8,
}

impl Mark {
    fn tick(self) -> Tick {
        Tick {
            value: self.value,
            label: self.label,
            major: self.major,
        }
    }
}

/// Everything a probability plot shows.
pub struct ProbabilityPlot<'a> {
    /// Title at the top of the picture (any text; it is escaped).
    pub title: String,
    /// The family whose probability scale rules the axes; it must have a
    /// straight-line plot (`Family::linear`).
    pub family: &'static Family,
    /// The fitted model, drawn from its quantiles. A member of `family` is a
    /// straight line; a model of another family is drawn as the curve it
    /// makes on this scale.
    pub model: &'a dyn LifeDistribution,
    /// Failures as (age, plotting position F), e.g. from
    /// [`crate::fit::rank::plotting_positions`].
    pub failures: Vec<(f64, f64)>,
    /// Ages of the suspended (unfailed) units.
    pub suspensions: Vec<f64>,
    /// A confidence band as (age, lower F, upper F) rows, drawn as a shaded
    /// area between the two curves.
    pub band: Option<Vec<(f64, f64, f64)>>,
    /// Horizontal axis title, e.g. "age (km)"; "age" when empty.
    pub age_label: String,
}

/// Where a probability plot puts things: the panel, the axis ranges and
/// ticks, and the mapping from (age, F) to px.
#[derive(Debug, Clone)]
pub struct ProbabilityLayout {
    /// The family whose scale rules the axes.
    pub family: &'static Family,
    /// The plot panel.
    pub area: Area,
    /// The event strip under the panel where suspensions are ticked.
    pub strip: Area,
    /// True when the age axis is logarithmic (x = ln t), false when linear.
    pub log_age: bool,
    /// Ages at the left and right edges of the panel.
    pub ages: (f64, f64),
    /// Unreliability F at the bottom and top edges of the panel.
    pub unreliability: (f64, f64),
    /// Age ticks, ascending; decades (log) or round numbers (linear) are major.
    pub age_ticks: Vec<Tick>,
    /// Percent-failing ticks, ascending in F; every one is labelled.
    pub percent_ticks: Vec<Tick>,
    lin: &'static Linearisation,
    x_edges: (f64, f64),
    y_edges: (f64, f64),
}

impl ProbabilityLayout {
    /// Horizontal px of an age: affine in the family's x(t) (ln t or t).
    /// Ages the axis cannot show (0 on a log axis) give a non-finite value.
    pub fn x_px(&self, age: f64) -> f64 {
        self.x_px_of_plot((self.lin.x)(age))
    }

    /// Vertical px of an unreliability F: affine in the family's y(F),
    /// growing downwards as SVG does, so larger F is higher up.
    pub fn y_px(&self, f: f64) -> f64 {
        self.y_px_of_plot((self.lin.y)(f))
    }

    /// Position in px of the point (age, F).
    pub fn to_px(&self, age: f64, f: f64) -> (f64, f64) {
        (self.x_px(age), self.y_px(f))
    }

    /// The (age, F) drawn at a position: the inverse of [`Self::to_px`].
    pub fn from_px(&self, px: f64, py: f64) -> (f64, f64) {
        let (x0, x1) = self.x_edges;
        let (y0, y1) = self.y_edges;
        let x = x0 + (px - self.area.left) / self.area.width() * (x1 - x0);
        let y = y0 + (self.area.bottom - py) / self.area.height() * (y1 - y0);
        let age = if self.log_age { x.exp() } else { x };
        (age, (self.lin.y_inv)(y))
    }

    fn x_px_of_plot(&self, x: f64) -> f64 {
        let (x0, x1) = self.x_edges;
        self.area.left + (x - x0) / (x1 - x0) * self.area.width()
    }

    fn y_px_of_plot(&self, y: f64) -> f64 {
        let (y0, y1) = self.y_edges;
        self.area.bottom - (y - y0) / (y1 - y0) * self.area.height()
    }
}

/// Checked inputs of a probability plot, with what the axes cannot show.
struct ProbabilityData {
    /// Failures that can be placed.
    failures: Vec<(f64, f64)>,
    /// Suspension ages that can be placed.
    suspensions: Vec<f64>,
    /// Failures and suspensions at age 0 on a log age axis.
    failures_at_zero: usize,
    suspensions_at_zero: usize,
    /// The band rows, sorted by age, ages placeable.
    band: Option<Vec<(f64, f64, f64)>>,
}

fn check_age(arg: &'static str, age: f64, row: usize) -> LifeResult<f64> {
    if age.is_finite() && age >= 0.0 {
        Ok(age)
    } else {
        Err(LifeError::bad(
            arg,
            "must be a finite number >= 0",
            format!("{} (row {row})", show_number(age)),
        ))
    }
}

fn plot_axes(family: &'static Family) -> LifeResult<(&'static Linearisation, bool)> {
    let Some(lin) = family.linear.as_ref() else {
        let with_plot: Vec<String> = FAMILIES
            .iter()
            .filter(|f| f.linear.is_some())
            .map(|f| format!("'{}'", f.name))
            .collect();
        return Err(LifeError::NotEstimable(format!(
            "the {} family has no straight-line probability plot, so it cannot rule the axes \
             of one; families with one: {}",
            family.name,
            with_plot.join(", ")
        )));
    };
    // The age axis is ln t or t; recognise which from the family's x.
    let probe = [0.5, 1.0, 7.0, 1e3, 1e6];
    let near = |a: f64, b: f64| (a - b).abs() <= 1e-12 * (1.0 + b.abs());
    if probe.iter().all(|&t| near((lin.x)(t), t.ln())) {
        Ok((lin, true))
    } else if probe.iter().all(|&t| near((lin.x)(t), t)) {
        Ok((lin, false))
    } else {
        Err(LifeError::NotEstimable(format!(
            "the {} family's probability plot has an age axis that is neither linear nor \
             logarithmic; it cannot be ruled",
            family.name
        )))
    }
}

impl ProbabilityPlot<'_> {
    /// The layout the picture uses: panel, axis ranges, ticks and mapping.
    pub fn layout(&self) -> LifeResult<ProbabilityLayout> {
        self.prepare().map(|(layout, _)| layout)
    }

    fn check(&self, log_age: bool) -> LifeResult<ProbabilityData> {
        let mut failures = Vec::with_capacity(self.failures.len());
        let mut failures_at_zero = 0;
        for (i, &(age, f)) in self.failures.iter().enumerate() {
            let age = check_age("failure age", age, i + 1)?;
            if !(f > 0.0 && f < 1.0) {
                return Err(LifeError::bad(
                    "plotting position",
                    "must be a fraction failed strictly between 0 and 1",
                    format!(
                        "{} (failure at age {}, row {})",
                        show_number(f),
                        show_number(age),
                        i + 1
                    ),
                ));
            }
            if log_age && age == 0.0 {
                failures_at_zero += 1;
            } else {
                failures.push((age, f));
            }
        }
        let mut suspensions = Vec::with_capacity(self.suspensions.len());
        let mut suspensions_at_zero = 0;
        for (i, &age) in self.suspensions.iter().enumerate() {
            let age = check_age("suspension age", age, i + 1)?;
            if log_age && age == 0.0 {
                suspensions_at_zero += 1;
            } else {
                suspensions.push(age);
            }
        }
        let band = match &self.band {
            None => None,
            Some(rows) => {
                let mut kept = Vec::with_capacity(rows.len());
                for (i, &(age, lower, upper)) in rows.iter().enumerate() {
                    let age = check_age("band age", age, i + 1)?;
                    let ok = (0.0..=1.0).contains(&lower)
                        && (0.0..=1.0).contains(&upper)
                        && lower <= upper;
                    if !ok {
                        return Err(LifeError::bad(
                            "band",
                            "must have 0 <= lower F <= upper F <= 1",
                            format!(
                                "lower {} and upper {} at age {} (row {})",
                                show_number(lower),
                                show_number(upper),
                                show_number(age),
                                i + 1
                            ),
                        ));
                    }
                    if !(log_age && age == 0.0) {
                        kept.push((age, lower, upper));
                    }
                }
                kept.sort_by(|a, b| a.0.total_cmp(&b.0));
                Some(kept)
            }
        };
        Ok(ProbabilityData {
            failures,
            suspensions,
            failures_at_zero,
            suspensions_at_zero,
            band,
        })
    }

    fn prepare(&self) -> LifeResult<(ProbabilityLayout, ProbabilityData)> {
        let (lin, log_age) = plot_axes(self.family)?;
        let data = self.check(log_age)?;

        // Vertical range: the plotting positions with a margin, widened to
        // span at least two units of the probability scale, then out to the
        // next percent ticks.
        let candidates = percent_candidates(lin);
        let (mut ya, mut yb) = (f64::INFINITY, f64::NEG_INFINITY);
        for &(_, f) in &data.failures {
            let y = (lin.y)(f);
            ya = ya.min(y);
            yb = yb.max(y);
        }
        if !(ya.is_finite() && yb.is_finite()) {
            // No failures to place: show 1 % to 99 % failing.
            ya = (lin.y)(0.01);
            yb = (lin.y)(0.99);
        }
        let span = yb - ya;
        let pad = (0.08 * span).max((2.0 - span) / 2.0).max(0.15);
        let mut lo = ya - pad;
        let hi = yb + pad;
        let floor = (lin.y)(0.0);
        if floor.is_finite() {
            lo = lo.max(floor);
        }
        // Beyond the last candidate the scale is too compressed for a
        // margin (F would round to 0 or 1): end at the data there.
        let (first, last) = match (candidates.first(), candidates.last()) {
            (Some(a), Some(b)) => (a.y, b.y),
            _ => (lo, hi),
        };
        let y0 = candidates
            .iter()
            .rev()
            .find(|c| c.y <= lo)
            .map_or(ya.min(first), |c| c.y);
        let y1 = candidates
            .iter()
            .find(|c| c.y >= hi)
            .map_or(yb.max(last), |c| c.y);
        let f_range = ((lin.y_inv)(y0), (lin.y_inv)(y1));
        if !(y0.is_finite() && y1.is_finite() && y1 > y0) {
            return Err(LifeError::NotEstimable(format!(
                "the plotting positions span no drawable range on the {} scale",
                self.family.name
            )));
        }

        // Horizontal range: every placed failure and suspension; without
        // failures also the model's ages across the percent range.
        let mut ages: Vec<f64> = data.failures.iter().map(|p| p.0).collect();
        ages.extend(&data.suspensions);
        if data.failures.is_empty() {
            for f in [f_range.0, f_range.1] {
                let t = self.model.quantile(f);
                if t.is_finite() && (t > 0.0 || (!log_age && t >= 0.0)) {
                    ages.push(t);
                }
            }
        }
        if ages.is_empty() {
            return Err(LifeError::NotEstimable(format!(
                "nothing to place on the age axis: no failure or suspension at an age above 0, \
                 and the model gives no age above 0 between {}% and {}% failing",
                show_number(100.0 * f_range.0),
                show_number(100.0 * f_range.1)
            )));
        }
        let (amin, amax) = ages
            .iter()
            .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), &t| {
                (a.min(t), b.max(t))
            });
        let (age_edges, age_marks) = if log_age {
            log_age_axis(amin, amax)?
        } else {
            linear_age_axis(amin, amax)?
        };
        let x_edges = ((lin.x)(age_edges.0), (lin.x)(age_edges.1));
        if !(x_edges.0.is_finite() && x_edges.1.is_finite() && x_edges.1 > x_edges.0) {
            return Err(LifeError::NotEstimable(format!(
                "the ages {} to {} span no drawable range on the age axis",
                show_number(amin),
                show_number(amax)
            )));
        }

        // Percent ticks first: they decide the left margin.
        let bottom = HEIGHT - 108.0;
        let height = bottom - PANEL_TOP;
        let y_of = |y: f64| bottom - (y - y0) / (y1 - y0) * height;
        let mut order: Vec<&Candidate> = candidates
            .iter()
            .filter(|c| c.y >= y0 - 1e-9 && c.y <= y1 + 1e-9)
            .collect();
        order.sort_by_key(|c| c.priority);
        let mut kept: Vec<&Candidate> = Vec::new();
        for c in order {
            let py = y_of(c.y);
            if kept
                .iter()
                .all(|k| (y_of(k.y) - py).abs() >= MIN_TICK_GAP_Y)
            {
                kept.push(c);
            }
        }
        kept.sort_by(|a, b| a.y.total_cmp(&b.y));
        let percent_ticks: Vec<Tick> = kept
            .iter()
            .map(|c| Tick {
                value: c.f,
                label: Some(c.label.clone()),
                major: true,
            })
            .collect();
        let label_room = percent_ticks
            .iter()
            .filter_map(|t| t.label.as_deref())
            .map(|l| svg::text_width(l, TICK_SIZE))
            .fold(0.0, f64::max);
        let area = Area {
            left: MARGIN + Y_TITLE_ROOM + label_room + 10.0,
            top: PANEL_TOP,
            right: WIDTH - RIGHT_MARGIN,
            bottom,
        };
        let strip = Area {
            left: area.left,
            top: bottom + 8.0,
            right: area.right,
            bottom: bottom + 24.0,
        };
        let x_of =
            |t: f64| area.left + ((lin.x)(t) - x_edges.0) / (x_edges.1 - x_edges.0) * area.width();
        let age_ticks = thin_horizontal(age_marks, x_of);
        let layout = ProbabilityLayout {
            family: self.family,
            area,
            strip,
            log_age,
            ages: age_edges,
            unreliability: f_range,
            age_ticks,
            percent_ticks,
            lin,
            x_edges,
            y_edges: (y0, y1),
        };
        Ok((layout, data))
    }
}

/// A candidate percent tick.
#[derive(Debug, Clone)]
struct Candidate {
    f: f64,
    y: f64,
    label: String,
    priority: u8,
}

/// Percent-failing values a probability axis may be ruled at: 1, 2 and 5
/// per decade in the lower tail, 10 % steps and 63.2 % in the middle, and
/// the mirror images in the upper tail, down to 1e-13 % and up to
/// 99.9999999999999 %. Sorted by their height y(F); those with no finite
/// height on this scale are left out.
fn percent_candidates(lin: &Linearisation) -> Vec<Candidate> {
    let mut out: Vec<(f64, String, u8)> = Vec::new();
    // The lower tail: m * 10^-k.
    for k in 1..=15usize {
        for m in [1u32, 2, 5] {
            let f: f64 = format!("{m}e-{k}").parse().unwrap_or(f64::NAN);
            let label = if k <= 2 {
                format!("{}", u64::from(m) * 10u64.pow(2 - k as u32))
            } else {
                format!("0.{}{m}", "0".repeat(k - 3))
            };
            let priority = match (k, m) {
                (1, 5) => 0,
                (1, 1) | (2, 1) => 1,
                (1, 2) | (2, 5) => 3,
                (2, 2) => 4,
                (_, 1) => 5,
                (_, 5) => 6,
                _ => 7,
            };
            out.push((f, label, priority));
        }
    }
    // The middle.
    for (f, label, priority) in [
        (0.3, "30", 3),
        (0.4, "40", 4),
        (0.6, "60", 4),
        (-(-1f64).exp_m1(), "63.2", 2),
        (0.7, "70", 4),
    ] {
        out.push((f, label.to_string(), priority));
    }
    // The upper tail: 1 - m * 10^-k.
    for k in 1..=15usize {
        for m in [5u32, 2, 1] {
            if k == 1 && m == 5 {
                continue; // 50 %, already listed
            }
            let f = 1.0 - format!("{m}e-{k}").parse::<f64>().unwrap_or(f64::NAN);
            let label = match k {
                1 => format!("{}", 100 - 10 * m),
                2 => format!("{}", 100 - m),
                _ => format!("99.{}{}", "9".repeat(k - 3), 10 - m),
            };
            let priority = match (k, m) {
                (1, 1) | (2, 1) => 1,
                (1, 2) | (2, 5) => 3,
                (2, 2) => 4,
                (_, 1) => 5,
                (_, 5) => 6,
                _ => 7,
            };
            out.push((f, label, priority));
        }
    }
    // The origin of scales that have one (exponential: y(0) = 0).
    out.push((0.0, "0".to_string(), 0));
    let mut cands: Vec<Candidate> = out
        .into_iter()
        .filter_map(|(f, label, priority)| {
            let y = (lin.y)(f);
            y.is_finite().then(|| Candidate {
                f,
                y,
                label: format!("{label}%"),
                priority,
            })
        })
        .collect();
    cands.sort_by(|a, b| a.y.total_cmp(&b.y));
    cands
}

/// An exactly rounded power of ten (0 or infinity outside the doubles).
fn pow10(e: i32) -> f64 {
    format!("1e{e}").parse().unwrap_or(f64::NAN)
}

/// Superscript digits for exponents in labels.
fn superscript(e: i32) -> String {
    e.to_string()
        .chars()
        .map(|c| match c {
            '-' => '\u{207B}',
            '0' => '\u{2070}',
            '1' => '\u{00B9}',
            '2' => '\u{00B2}',
            '3' => '\u{00B3}',
            d => char::from_u32(0x2070 + d.to_digit(10).unwrap_or(0)).unwrap_or(d),
        })
        .collect()
}

/// Groups the integer digits of a plain decimal in threes with thin spaces
/// when it has five or more of them.
fn group_digits(s: &str) -> String {
    let (sign, rest) = match s.strip_prefix('-') {
        Some(r) => ("-", r),
        None => ("", s),
    };
    let (int, frac) = match rest.find('.') {
        Some(i) => (&rest[..i], &rest[i..]),
        None => (rest, ""),
    };
    if int.len() < 5 {
        return s.to_string();
    }
    let mut out = String::new();
    for (i, c) in int.chars().enumerate() {
        if i > 0 && (int.len() - i) % 3 == 0 {
            out.push('\u{2009}');
        }
        out.push(c);
    }
    format!("{sign}{out}{frac}")
}

/// Label of the log-axis tick m * 10^e.
fn log_label(m: u32, e: i32) -> String {
    if (0..=6).contains(&e) {
        group_digits(&format!("{m}{}", "0".repeat(e as usize)))
    } else if (-4..0).contains(&e) {
        format!("0.{}{m}", "0".repeat((-e - 1) as usize))
    } else if m == 1 {
        format!("10{}", superscript(e))
    } else {
        format!("{m}\u{00D7}10{}", superscript(e))
    }
}

/// A number for a label: whole numbers from 1000 up grouped, 4 significant
/// digits below, powers of ten for the very large and very small.
fn short(x: f64) -> String {
    if !x.is_finite() {
        return show_number(x);
    }
    let a = x.abs();
    if a == 0.0 {
        "0".to_string()
    } else if !(1e-4..1e9).contains(&a) {
        let e = a.log10().floor() as i32;
        let m = x / pow10(e);
        let m = trim_zeros(&format!("{m:.3}"));
        format!("{m}\u{00D7}10{}", superscript(e))
    } else if a >= 1000.0 {
        group_digits(&format!("{x:.0}"))
    } else {
        let decimals = (3 - a.log10().floor() as i32).max(0) as usize;
        trim_zeros(&format!("{x:.decimals$}"))
    }
}

fn trim_zeros(s: &str) -> String {
    if s.contains('.') {
        s.trim_end_matches('0').trim_end_matches('.').to_string()
    } else {
        s.to_string()
    }
}

/// Log age axis: the ages with a margin (at least 0.4 decades in all), then
/// ticks at decades (major) and 2..9 times a decade (minor). With few
/// decades in view the minor ticks at 2 and 5, or all of them, get labels.
fn log_age_axis(amin: f64, amax: f64) -> LifeResult<((f64, f64), Vec<Mark>)> {
    let (mut a, mut b) = (amin.log10(), amax.log10());
    if !(a.is_finite() && b.is_finite()) {
        return Err(LifeError::NotEstimable(format!(
            "ages {} to {} cannot be placed on a log age axis",
            show_number(amin),
            show_number(amax)
        )));
    }
    if b - a < 0.4 {
        let c = 0.5 * (a + b);
        a = c - 0.2;
        b = c + 0.2;
    }
    let pad = 0.04 * (b - a);
    a -= pad;
    b += pad;
    let mut lo = 10f64.powf(a);
    let mut hi = 10f64.powf(b);
    if !(lo > 0.0 && lo <= amin) {
        lo = amin;
    }
    if !(hi.is_finite() && hi >= amax) {
        hi = amax;
    }
    let (e0, e1) = (lo.log10().floor() as i32, hi.log10().ceil() as i32);
    let decades = (e1 - e0).max(1);
    let every = [1, 2, 5, 10, 20, 50, 100, 200]
        .into_iter()
        .find(|k| decades / k <= 8)
        .unwrap_or(500);
    let inside = |v: f64| v >= lo * (1.0 - 1e-12) && v <= hi * (1.0 + 1e-12);
    let mut marks = Vec::new();
    for e in e0..=e1 {
        let v = pow10(e);
        let major = e.rem_euclid(every) == 0;
        if inside(v) && (major || decades <= 60) {
            marks.push(Mark {
                value: v,
                label: major.then(|| log_label(1, e)),
                major,
                priority: if major { 0 } else { 9 },
            });
        }
        if decades <= 6 {
            for m in 2..=9u32 {
                let v: f64 = format!("{m}e{e}").parse().unwrap_or(f64::NAN);
                if inside(v) {
                    marks.push(Mark {
                        value: v,
                        label: None,
                        major: false,
                        priority: match m {
                            5 => 1,
                            2 => 2,
                            _ => 3,
                        },
                    });
                }
            }
        }
    }
    // Too few labels in view: label 2 and 5 times the decades, then all.
    for level in [2, 3] {
        if marks.iter().filter(|m| m.label.is_some()).count() >= 4 {
            break;
        }
        for mk in marks
            .iter_mut()
            .filter(|m| m.priority <= level && m.label.is_none())
        {
            let e = mk.value.log10().floor() as i32;
            let m = (mk.value / pow10(e)).round() as u32;
            mk.label = Some(log_label(m, e));
        }
    }
    marks.sort_by(|x, y| x.value.total_cmp(&y.value));
    Ok(((lo, hi), marks))
}

/// Linear age axis: from 0 when the youngest age is under 30 % of the
/// oldest, else from the youngest; out to round ticks.
fn linear_age_axis(amin: f64, amax: f64) -> LifeResult<((f64, f64), Vec<Mark>)> {
    let lo = if amin >= 0.0 && amin < 0.3 * amax {
        0.0
    } else {
        amin - 0.03 * (amax - amin)
    };
    let hi = amax + 0.03 * (amax - lo);
    nice_axis(lo, hi, 6.0, "age")
}

/// Round ticks (1, 2 or 5 times a power of ten apart, about `target` of
/// them) covering [lo, hi]; the axis runs from the first to the last tick.
fn nice_axis(lo: f64, hi: f64, target: f64, what: &str) -> LifeResult<((f64, f64), Vec<Mark>)> {
    let too_wide = || {
        LifeError::NotEstimable(format!(
            "the {what} range {} to {} is too wide to draw",
            show_number(lo),
            show_number(hi)
        ))
    };
    if !(lo.is_finite() && hi.is_finite()) {
        return Err(too_wide());
    }
    let (mut a, mut b) = (lo.min(hi), lo.max(hi));
    let scale = a.abs().max(b.abs());
    let min_span = if scale > 0.0 { scale * 1e-6 } else { 1.0 };
    if b - a < min_span {
        let c = 0.5 * a + 0.5 * b;
        let nonnegative = a >= 0.0;
        a = c - 0.5 * min_span;
        b = c + 0.5 * min_span;
        if nonnegative && a < 0.0 {
            a = 0.0;
            b = min_span;
        }
    }
    let span = b - a;
    if !span.is_finite() {
        return Err(too_wide());
    }
    let raw = span / target;
    let e = raw.log10().floor() as i32;
    let mag = pow10(e);
    let norm = raw / mag;
    let (unit, e) = if norm <= 1.0 {
        (1.0, e)
    } else if norm <= 2.0 {
        (2.0, e)
    } else if norm <= 5.0 {
        (5.0, e)
    } else {
        (1.0, e + 1)
    };
    let step = unit * pow10(e);
    let (k0, k1) = ((a / step).floor(), (b / step).ceil());
    let (start, end) = (k0 * step, k1 * step);
    if !(step > 0.0 && start.is_finite() && end.is_finite() && k1 - k0 <= 100.0) {
        return Err(too_wide());
    }
    let mut marks = Vec::new();
    let mut k = k0;
    while k <= k1 {
        let v = k * step;
        marks.push(Mark {
            value: v,
            label: Some(linear_label(v, step, e)),
            major: true,
            priority: if (k / 2.0).fract() == 0.0 { 0 } else { 1 },
        });
        k += 1.0;
    }
    Ok(((start, end), marks))
}

/// Label of a round tick `v` on an axis with ticks `step` = u * 10^e apart.
fn linear_label(v: f64, step: f64, e: i32) -> String {
    if v == 0.0 {
        return "0".to_string();
    }
    if v.abs() >= 1e9 || step < 1e-4 {
        let ev = v.abs().log10().floor() as i32;
        let digits = (ev - e).max(0) as usize;
        let m = trim_zeros(&format!("{:.digits$}", v / pow10(ev)));
        if m == "1" {
            format!("10{}", superscript(ev))
        } else if m == "-1" {
            format!("-10{}", superscript(ev))
        } else {
            format!("{m}\u{00D7}10{}", superscript(ev))
        }
    } else {
        let decimals = (-e).max(0) as usize;
        group_digits(&format!("{v:.decimals$}"))
    }
}

/// Keeps the labels of horizontal-axis ticks that fit side by side, in
/// priority order; ticks whose label must go lose only the label.
fn thin_horizontal(marks: Vec<Mark>, x_of: impl Fn(f64) -> f64) -> Vec<Tick> {
    let mut order: Vec<usize> = (0..marks.len()).collect();
    order.sort_by_key(|&i| (marks[i].priority, i));
    let mut taken: Vec<(f64, f64)> = Vec::new();
    let mut keep = vec![false; marks.len()];
    for i in order {
        let Some(label) = &marks[i].label else {
            continue;
        };
        let x = x_of(marks[i].value);
        let half = 0.5 * svg::text_width(label, TICK_SIZE);
        let (l, r) = (x - half, x + half);
        let fits_page = l >= 2.0 && r <= WIDTH - 2.0;
        let clear = taken
            .iter()
            .all(|&(a, b)| r + MIN_TICK_GAP_X <= a || l >= b + MIN_TICK_GAP_X);
        if fits_page && clear {
            taken.push((l, r));
            keep[i] = true;
        }
    }
    marks
        .into_iter()
        .zip(keep)
        .map(|(mut m, k)| {
            if !k {
                m.label = None;
            }
            m.tick()
        })
        .collect()
}

/// A legend symbol.
enum Symbol<'a> {
    Dot(&'a str),
    Line(Stroke<'a>),
    Swatch(&'a str, f64),
    Tick(&'a str),
}

/// Draws a row of legend entries starting at `x`, centred on `y`.
fn legend(s: &mut Svg, mut x: f64, y: f64, items: &[(Symbol, String)]) {
    s.open_group("legend");
    let font = Font::new(TEXT_SIZE, colour::INK, Anchor::Start);
    for (symbol, text) in items {
        match symbol {
            Symbol::Dot(c) => s.circle((x + 9.0, y), 4.2, c, Stroke::solid(colour::PAGE, 1.2), ""),
            Symbol::Line(stroke) => s.line((x, y), (x + 18.0, y), *stroke, "", ""),
            Symbol::Swatch(c, opacity) => s.polygon(
                &[
                    (x, y - 6.0),
                    (x + 18.0, y - 6.0),
                    (x + 18.0, y + 6.0),
                    (x, y + 6.0),
                ],
                c,
                *opacity,
                "",
            ),
            Symbol::Tick(c) => s.line(
                (x + 9.0, y - 6.0),
                (x + 9.0, y + 6.0),
                Stroke::solid(c, 2.0),
                "",
                "",
            ),
        }
        s.text((x + 24.0, y + 4.3), text, font, 0.0, "");
        x += 24.0 + svg::text_width(text, TEXT_SIZE) + 22.0;
    }
    s.close_group();
}

/// Page, title and subtitle.
fn header(s: &mut Svg, title: &str, subtitle: &str) {
    s.rect(
        Area {
            left: 0.0,
            top: 0.0,
            right: WIDTH,
            bottom: HEIGHT,
        },
        colour::PAGE,
        None,
        "page",
    );
    let room = WIDTH - MARGIN - RIGHT_MARGIN;
    s.text(
        (MARGIN, TITLE_Y),
        &svg::fit_text(title, room, TITLE_SIZE, true),
        Font::new(TITLE_SIZE, colour::INK, Anchor::Start).bold(),
        0.0,
        "title",
    );
    s.text(
        (MARGIN, SUBTITLE_Y),
        &svg::fit_text(subtitle, room, TEXT_SIZE, false),
        Font::new(TEXT_SIZE, colour::MUTED, Anchor::Start),
        0.0,
        "subtitle",
    );
}

/// The vertical axis title, turned to read upwards.
fn y_axis_title(s: &mut Svg, area: Area, text: &str) {
    s.text(
        (MARGIN + 4.0, 0.5 * (area.top + area.bottom)),
        &svg::fit_text(text, area.height(), TEXT_SIZE, false),
        Font::new(TEXT_SIZE, colour::MUTED, Anchor::Middle),
        -90.0,
        "axis-title",
    );
}

/// Vertical gridlines and labels of the age axis.
fn age_grid(s: &mut Svg, area: Area, ticks: &[Tick], label_y: f64, x_of: impl Fn(f64) -> f64) {
    s.open_group("age-grid");
    for t in ticks {
        let x = x_of(t.value);
        let c = if t.major {
            colour::GRID
        } else {
            colour::GRID_MINOR
        };
        s.line(
            (x, area.top),
            (x, area.bottom),
            Stroke::solid(c, 1.0),
            "",
            "",
        );
    }
    s.close_group();
    s.open_group("age-labels");
    let font = Font::new(TICK_SIZE, colour::MUTED, Anchor::Middle);
    for t in ticks {
        if let Some(label) = &t.label {
            s.text((x_of(t.value), label_y), label, font, 0.0, "");
        }
    }
    s.close_group();
}

fn axis_label(text: &str) -> &str {
    if text.trim().is_empty() {
        "age"
    } else {
        text
    }
}

fn model_words(model: &dyn LifeDistribution) -> String {
    let fam = model.family();
    let params: Vec<String> = fam
        .params
        .iter()
        .zip(model.params())
        .map(|(info, v)| format!("{} {}", info.name, short(v)))
        .collect();
    format!("{} {}", fam.name, params.join(", "))
}

fn plural(n: usize, one: &str, many: &str) -> String {
    format!("{n} {}", if n == 1 { one } else { many })
}

/// The probability plot as SVG text; see [`ProbabilityPlot`].
///
/// Errors name the offending value: a family without a straight-line plot
/// (gamma, 3-parameter Weibull), a non-finite or negative age, a plotting
/// position outside (0, 1), a band row with lower > upper.
pub fn probability_plot_svg(p: &ProbabilityPlot) -> LifeResult<String> {
    let (lay, data) = p.prepare()?;
    let area = lay.area;
    let fam = p.family;
    let model_text = model_words(p.model);
    let n_fail = p.failures.len();
    let n_susp = p.suspensions.len();
    let desc = format!(
        "Probability plot on the {} scale: {}, {}; fitted {}.",
        fam.name,
        plural(n_fail, "failure", "failures"),
        plural(n_susp, "suspension", "suspensions"),
        model_text
    );
    let mut s = Svg::new(WIDTH, HEIGHT, &p.title, &desc);
    header(
        &mut s,
        &p.title,
        &format!("{} probability scale \u{00B7} fit: {model_text}", fam.name),
    );

    // Legend.
    let fit_stroke = Stroke::solid(colour::FIT, 2.2);
    let mut items = vec![
        (Symbol::Dot(colour::FAILURE), format!("failures ({n_fail})")),
        (Symbol::Line(fit_stroke), "fit".to_string()),
    ];
    if data.band.as_ref().is_some_and(|b| b.len() >= 2) {
        items.push((
            Symbol::Swatch(colour::FIT, 0.18),
            "confidence band".to_string(),
        ));
    }
    if n_susp > 0 {
        items.push((
            Symbol::Tick(colour::SUSPENSION),
            format!("suspensions ({n_susp})"),
        ));
    }
    legend(&mut s, area.left, LEGEND_Y, &items);

    // Panel and grid.
    s.rect(area, colour::PANEL, None, "panel");
    s.open_group("percent-grid");
    for t in &lay.percent_ticks {
        let y = lay.y_px(t.value);
        s.line(
            (area.left, y),
            (area.right, y),
            Stroke::solid(colour::GRID, 1.0),
            "percent-tick",
            &format!(" data-f=\"{}\"", t.value),
        );
    }
    s.close_group();
    s.open_group("percent-labels");
    let font = Font::new(TICK_SIZE, colour::MUTED, Anchor::End);
    for t in &lay.percent_ticks {
        if let Some(label) = &t.label {
            s.text(
                (area.left - 7.0, lay.y_px(t.value) + 4.0),
                label,
                font,
                0.0,
                "",
            );
        }
    }
    s.close_group();
    let label_y = lay.strip.bottom + 17.0;
    age_grid(&mut s, area, &lay.age_ticks, label_y, |t| lay.x_px(t));

    // Confidence band: upper curve out, lower curve back, cut to the panel.
    let (y0, y1) = lay.y_edges;
    let reach = y1 - y0;
    let band_y = |f: f64| {
        let y = (lay.lin.y)(f);
        let y = if y.is_nan() { y0 - reach } else { y };
        lay.y_px_of_plot(y.clamp(y0 - reach, y1 + reach))
    };
    if let Some(rows) = data.band.as_ref().filter(|b| b.len() >= 2) {
        let mut outline: Vec<(f64, f64)> = rows
            .iter()
            .map(|&(t, _, up)| (lay.x_px(t), band_y(up)))
            .collect();
        outline.extend(
            rows.iter()
                .rev()
                .map(|&(t, low, _)| (lay.x_px(t), band_y(low))),
        );
        let cut = svg::clip_polygon(&outline, area);
        s.polygon(&cut, colour::FIT, 0.18, "band");
    }

    // The model across the percent range: two points for a member of the
    // plot's family (a straight line), a sampled curve otherwise.
    let sample_path = |samples: usize| -> Vec<(f64, f64)> {
        (0..samples)
            .map(|i| {
                let y = y0 + (y1 - y0) * i as f64 / (samples - 1) as f64;
                let t = p.model.quantile((lay.lin.y_inv)(y));
                (lay.x_px(t), lay.y_px_of_plot(y))
            })
            .collect()
    };
    let mut path = sample_path(2);
    let finite = path.iter().all(|q| q.0.is_finite() && q.1.is_finite());
    if !(std::ptr::eq(p.model.family(), fam) && finite) {
        // Another family's curve, or a line with an end the axis cannot
        // show (an age of 0 or infinity): follow it point by point.
        path = sample_path(161);
    }
    for run in svg::clip_path(&path, area) {
        s.polyline(&run, fit_stroke, "fit");
    }

    // Failures, each place once: a marker whose centre falls in the same
    // half-pixel cell as one already drawn would not show (markers are 8 px
    // wide), so a model of a million failures still makes a small picture.
    s.open_group("failures");
    let mut seen = HashSet::new();
    let cell = |v: f64| (2.0 * v).round() as i64;
    for &(age, f) in &data.failures {
        let (x, y) = lay.to_px(age, f);
        if seen.insert((cell(x), cell(y))) {
            s.circle(
                (x, y),
                4.2,
                colour::FAILURE,
                Stroke::solid(colour::PAGE, 1.2),
                "failure",
            );
        }
    }
    s.close_group();
    s.rect(
        area,
        "none",
        Some(Stroke::solid(colour::FRAME, 1.0)),
        "frame",
    );

    // Event strip: one tick per distinct position.
    if !p.suspensions.is_empty() {
        let strip = lay.strip;
        s.rect(strip, colour::PANEL, None, "strip");
        s.open_group("suspensions");
        let mut seen = HashSet::new();
        for &age in &data.suspensions {
            let x = lay.x_px(age);
            if seen.insert(cell(x)) {
                s.line(
                    (x, strip.top + 2.0),
                    (x, strip.bottom - 2.0),
                    Stroke::solid(colour::SUSPENSION, 1.6),
                    "suspension",
                    "",
                );
            }
        }
        s.close_group();
    }

    // Axis titles and a note on what the log axis cannot show.
    s.text(
        (0.5 * (area.left + area.right), label_y + 24.0),
        &svg::fit_text(axis_label(&p.age_label), area.width(), TEXT_SIZE, false),
        Font::new(TEXT_SIZE, colour::MUTED, Anchor::Middle),
        0.0,
        "axis-title",
    );
    y_axis_title(&mut s, area, "percent failing");
    if data.failures_at_zero + data.suspensions_at_zero > 0 {
        let mut parts = Vec::new();
        if data.failures_at_zero > 0 {
            parts.push(plural(data.failures_at_zero, "failure", "failures"));
        }
        if data.suspensions_at_zero > 0 {
            parts.push(plural(
                data.suspensions_at_zero,
                "suspension",
                "suspensions",
            ));
        }
        s.text(
            (MARGIN, HEIGHT - 10.0),
            &format!(
                "Not shown (age 0 has no place on a log age axis): {}.",
                parts.join(", ")
            ),
            Font::new(TICK_SIZE, colour::MUTED, Anchor::Start),
            0.0,
            "note",
        );
    }
    Ok(s.finish())
}

/// (replacement age, planned, unplanned and total cost rate).
type CostRow = (f64, f64, f64, f64);

/// Everything an age-replacement cost curve shows.
pub struct CostCurve {
    /// Title at the top of the picture (any text; it is escaped).
    pub title: String,
    /// Rows of (replacement age, planned cost rate, unplanned cost rate,
    /// total cost rate), each rate a cost per unit of usage. A rate may be
    /// +infinity (e.g. the planned rate at age 0); it is left out of its curve.
    pub points: Vec<(f64, f64, f64, f64)>,
    /// The cheapest replacement age and its total cost rate, if any.
    pub optimum: Option<(f64, f64)>,
    /// The cost rate of never replacing before failure, if known.
    pub run_to_failure_rate: Option<f64>,
    /// Horizontal axis title, e.g. "replacement age (km)"; "age" when empty.
    pub age_label: String,
}

/// Where a cost curve puts things.
#[derive(Debug, Clone)]
pub struct CostLayout {
    /// The plot panel.
    pub area: Area,
    /// Ages at the left and right edges of the panel.
    pub ages: (f64, f64),
    /// Cost rates at the bottom and top edges of the panel.
    pub rates: (f64, f64),
    /// Age ticks, ascending.
    pub age_ticks: Vec<Tick>,
    /// Cost-rate ticks, ascending.
    pub rate_ticks: Vec<Tick>,
}

impl CostLayout {
    /// Position in px of the point (age, cost rate); both axes linear.
    pub fn to_px(&self, age: f64, rate: f64) -> (f64, f64) {
        let (a0, a1) = self.ages;
        let (r0, r1) = self.rates;
        (
            self.area.left + (age - a0) / (a1 - a0) * self.area.width(),
            self.area.bottom - (rate - r0) / (r1 - r0) * self.area.height(),
        )
    }

    /// The (age, cost rate) drawn at a position: the inverse of [`Self::to_px`].
    pub fn from_px(&self, px: f64, py: f64) -> (f64, f64) {
        let (a0, a1) = self.ages;
        let (r0, r1) = self.rates;
        (
            a0 + (px - self.area.left) / self.area.width() * (a1 - a0),
            r0 + (self.area.bottom - py) / self.area.height() * (r1 - r0),
        )
    }
}

fn check_rate(arg: &'static str, v: f64, row: usize) -> LifeResult<f64> {
    if v.is_finite() || v == f64::INFINITY {
        Ok(v)
    } else {
        Err(LifeError::bad(
            arg,
            "must be a number or +infinity",
            format!("{} (row {row})", show_number(v)),
        ))
    }
}

fn check_finite(arg: &'static str, v: f64) -> LifeResult<f64> {
    if v.is_finite() {
        Ok(v)
    } else {
        Err(LifeError::bad(
            arg,
            "must be a finite number",
            show_number(v),
        ))
    }
}

impl CostCurve {
    /// The layout the picture uses: panel, axis ranges, ticks and mapping.
    pub fn layout(&self) -> LifeResult<CostLayout> {
        self.prepare().map(|(layout, _)| layout)
    }

    fn prepare(&self) -> LifeResult<(CostLayout, Vec<CostRow>)> {
        let mut rows = Vec::with_capacity(self.points.len());
        for (i, &(age, planned, unplanned, total)) in self.points.iter().enumerate() {
            rows.push((
                check_age("replacement age", age, i + 1)?,
                check_rate("planned cost rate", planned, i + 1)?,
                check_rate("unplanned cost rate", unplanned, i + 1)?,
                check_rate("total cost rate", total, i + 1)?,
            ));
        }
        if rows.len() < 2 {
            return Err(LifeError::bad(
                "points",
                "must hold at least 2 rows for a cost curve",
                rows.len(),
            ));
        }
        rows.sort_by(|a, b| a.0.total_cmp(&b.0));
        let optimum = match self.optimum {
            Some((a, r)) => Some((
                check_age("optimum age", a, 1)?,
                check_finite("optimum cost rate", r)?,
            )),
            None => None,
        };
        let rtf = self
            .run_to_failure_rate
            .map(|r| check_finite("run-to-failure rate", r))
            .transpose()?;

        // Ages: from 0 when the youngest is under 30 % of the oldest.
        let amin = rows[0].0.min(optimum.map_or(f64::INFINITY, |o| o.0));
        let amax = rows[rows.len() - 1].0.max(optimum.map_or(0.0, |o| o.0));
        let lo = if amin < 0.3 * amax { 0.0 } else { amin };
        let (ages, age_marks) = nice_axis(lo, amax, 6.0, "age")?;

        // Rates: from 0 (or the lowest rate) to the highest, but cut at 2.5
        // times the level that matters (the run-to-failure rate, the optimum,
        // the total at the oldest age) so that the planned rate's climb
        // towards age 0 does not flatten the rest.
        let finite: Vec<f64> = rows
            .iter()
            .flat_map(|r| [r.1, r.2, r.3])
            .chain(optimum.map(|o| o.1))
            .chain(rtf)
            .filter(|v| v.is_finite())
            .collect();
        if finite.is_empty() {
            return Err(LifeError::NotEstimable(
                "the cost curve has no finite cost rate to draw".to_string(),
            ));
        }
        let rmin = finite
            .iter()
            .copied()
            .fold(f64::INFINITY, f64::min)
            .min(0.0);
        let mut rmax = finite.iter().copied().fold(f64::NEG_INFINITY, f64::max);
        let last_total = rows[rows.len() - 1].3;
        let level = [
            rtf,
            optimum.map(|o| o.1),
            last_total.is_finite().then_some(last_total),
        ]
        .into_iter()
        .flatten()
        .fold(f64::NEG_INFINITY, f64::max);
        if level > 0.0 && rmax > 2.5 * level {
            rmax = 2.5 * level;
        }
        let (rates, rate_marks) = nice_axis(rmin, rmax * 1.04, 5.0, "cost rate")?;

        let bottom = HEIGHT - 80.0;
        let label_room = rate_marks
            .iter()
            .filter_map(|m| m.label.as_deref())
            .map(|l| svg::text_width(l, TICK_SIZE))
            .fold(0.0, f64::max);
        let area = Area {
            left: MARGIN + Y_TITLE_ROOM + label_room + 10.0,
            top: PANEL_TOP,
            right: WIDTH - RIGHT_MARGIN,
            bottom,
        };
        let rate_ticks = rate_marks.into_iter().map(Mark::tick).collect();
        let x_of = |a: f64| area.left + (a - ages.0) / (ages.1 - ages.0) * area.width();
        let age_ticks = thin_horizontal(age_marks, x_of);
        Ok((
            CostLayout {
                area,
                ages,
                rates,
                age_ticks,
                rate_ticks,
            },
            rows,
        ))
    }
}

/// The box a label of size (w, h) centred at `c` keeps clear, with padding.
fn label_box(c: (f64, f64), (w, h): (f64, f64)) -> Area {
    Area {
        left: c.0 - 0.5 * w - 4.0,
        top: c.1 - 0.5 * h - 3.0,
        right: c.0 + 0.5 * w + 4.0,
        bottom: c.1 + 0.5 * h + 3.0,
    }
}

/// Centre for a label of size (w, h) that names the mark at `dot`: the
/// position nearest to it, on a grid up to 240 px across and 150 px up or
/// down (above preferred), where the label stays inside `area`, keeps 9 px
/// from the mark and crosses none of the `paths` drawn. None when no
/// position on the grid is clear.
fn place_label(
    dot: (f64, f64),
    size: (f64, f64),
    area: Area,
    paths: &[Vec<(f64, f64)>],
) -> Option<(f64, f64)> {
    let mut best: Option<(f64, (f64, f64))> = None;
    for iy in -30..=30 {
        for ix in -30..=30 {
            let c = (dot.0 + f64::from(ix) * 8.0, dot.1 + f64::from(iy) * 5.0);
            let b = label_box(c, size);
            if b.left < area.left + 2.0
                || b.right > area.right - 2.0
                || b.top < area.top + 2.0
                || b.bottom > area.bottom - 2.0
            {
                continue;
            }
            let gap =
                (dot.0 - dot.0.clamp(b.left, b.right)).hypot(dot.1 - dot.1.clamp(b.top, b.bottom));
            if gap < 9.0 {
                continue;
            }
            let cost = gap + if c.1 > dot.1 { 6.0 } else { 0.0 };
            if best.is_some_and(|(known, _)| known <= cost) {
                continue;
            }
            let crosses = paths
                .iter()
                .any(|p| p.windows(2).any(|s| svg::segment_meets_box(s[0], s[1], b)));
            if !crosses {
                best = Some((cost, c));
            }
        }
    }
    best.map(|(_, c)| c)
}

/// The age-replacement cost curve as SVG text; see [`CostCurve`].
///
/// Errors name the offending value: fewer than 2 rows, a non-finite or
/// negative age, a NaN or -infinite rate, a non-finite optimum or
/// run-to-failure rate.
pub fn cost_curve_svg(c: &CostCurve) -> LifeResult<String> {
    let (lay, rows) = c.prepare()?;
    let area = lay.area;
    let mut summary = String::from("age-replacement cost per unit of usage");
    if let Some((a, r)) = c.optimum {
        summary.push_str(&format!(
            " \u{00B7} optimum: age {} at {}",
            short(a),
            short(r)
        ));
    }
    if let Some(r) = c.run_to_failure_rate {
        summary.push_str(&format!(" \u{00B7} run to failure: {}", short(r)));
    }
    let mut s = Svg::new(WIDTH, HEIGHT, &c.title, &format!("Cost curve: {summary}."));
    header(&mut s, &c.title, &summary);

    let total = Stroke::solid(colour::TOTAL, 2.8);
    let planned = Stroke::solid(colour::PLANNED, 2.0);
    let unplanned = Stroke::solid(colour::UNPLANNED, 2.0);
    let reference = Stroke {
        colour: colour::REFERENCE,
        width: 1.6,
        dash: Some("7 5"),
    };
    let mut items = vec![
        (Symbol::Line(total), "total".to_string()),
        (Symbol::Line(planned), "planned".to_string()),
        (Symbol::Line(unplanned), "unplanned".to_string()),
    ];
    if c.run_to_failure_rate.is_some() {
        items.push((Symbol::Line(reference), "run to failure".to_string()));
    }
    if c.optimum.is_some() {
        items.push((Symbol::Dot(colour::TOTAL), "optimum".to_string()));
    }
    legend(&mut s, area.left, LEGEND_Y, &items);

    s.rect(area, colour::PANEL, None, "panel");
    s.open_group("rate-grid");
    for t in &lay.rate_ticks {
        let y = lay.to_px(lay.ages.0, t.value).1;
        s.line(
            (area.left, y),
            (area.right, y),
            Stroke::solid(colour::GRID, 1.0),
            "rate-tick",
            "",
        );
    }
    s.close_group();
    s.open_group("rate-labels");
    let font = Font::new(TICK_SIZE, colour::MUTED, Anchor::End);
    for t in &lay.rate_ticks {
        if let Some(label) = &t.label {
            let y = lay.to_px(lay.ages.0, t.value).1;
            s.text((area.left - 7.0, y + 4.0), label, font, 0.0, "");
        }
    }
    s.close_group();
    let label_y = area.bottom + 20.0;
    age_grid(&mut s, area, &lay.age_ticks, label_y, |a| {
        lay.to_px(a, 0.0).0
    });

    if let Some(r) = c.run_to_failure_rate {
        let y = lay.to_px(0.0, r).1;
        if y >= area.top && y <= area.bottom {
            s.line(
                (area.left, y),
                (area.right, y),
                reference,
                "run-to-failure",
                "",
            );
        }
    }
    type Pick = fn(&CostRow) -> f64;
    let curves: [(Pick, Stroke, &str); 3] = [
        (|r| r.1, planned, "planned"),
        (|r| r.2, unplanned, "unplanned"),
        (|r| r.3, total, "total"),
    ];
    let mut drawn: Vec<Vec<(f64, f64)>> = Vec::new();
    for (pick, stroke, class) in curves {
        let path: Vec<(f64, f64)> = rows.iter().map(|r| lay.to_px(r.0, pick(r))).collect();
        for run in svg::clip_path(&path, area) {
            s.polyline(&run, stroke, class);
            drawn.push(run);
        }
    }
    if let Some(r) = c.run_to_failure_rate {
        let y = lay.to_px(0.0, r).1;
        drawn.push(vec![(area.left, y), (area.right, y)]);
    }
    if let Some((a, r)) = c.optimum {
        let (x, y) = lay.to_px(a, r);
        if area.contains(x, y) {
            let guide = Stroke {
                colour: colour::REFERENCE,
                width: 1.0,
                dash: Some("2 3"),
            };
            s.line((x, y), (x, area.bottom), guide, "optimum-guide", "");
            drawn.push(vec![(x, y), (x, area.bottom)]);
            let text = format!("optimum: age {}", short(a));
            let (w, h) = (
                svg::text_width(&text, TEXT_SIZE * svg::BOLD_WIDENING),
                TEXT_SIZE,
            );
            let centre = match place_label((x, y), (w, h), area, &drawn) {
                Some(c) => {
                    let b = label_box(c, (w, h));
                    let near = (x.clamp(b.left, b.right), y.clamp(b.top, b.bottom));
                    s.line(
                        (x, y),
                        near,
                        Stroke::solid(colour::MUTED, 1.0),
                        "optimum-leader",
                        "",
                    );
                    c
                }
                // Nowhere clear: above the dot, kept inside the panel.
                None => (
                    x.clamp(area.left + 0.5 * w + 4.0, area.right - 0.5 * w - 4.0),
                    if y - 20.0 > area.top + h {
                        y - 20.0
                    } else {
                        y + 20.0
                    },
                ),
            };
            s.circle(
                (x, y),
                5.5,
                colour::TOTAL,
                Stroke::solid(colour::PAGE, 2.0),
                "optimum",
            );
            s.text(
                (centre.0, centre.1 + 0.36 * h),
                &text,
                Font::new(TEXT_SIZE, colour::INK, Anchor::Middle).bold(),
                0.0,
                "optimum-label",
            );
        }
    }
    s.rect(
        area,
        "none",
        Some(Stroke::solid(colour::FRAME, 1.0)),
        "frame",
    );
    s.text(
        (0.5 * (area.left + area.right), label_y + 26.0),
        &svg::fit_text(axis_label(&c.age_label), area.width(), TEXT_SIZE, false),
        Font::new(TEXT_SIZE, colour::MUTED, Anchor::Middle),
        0.0,
        "axis-title",
    );
    y_axis_title(&mut s, area, "cost per unit of usage");
    Ok(s.finish())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn percent_labels_are_written_from_their_construction() {
        let w = crate::dist::family("weibull").unwrap();
        let c = percent_candidates(w.linear.as_ref().unwrap());
        let find = |label: &str| c.iter().find(|k| k.label == label).map(|k| k.f);
        assert_eq!(find("0.1%"), Some(0.001));
        assert_eq!(find("0.002%"), Some(0.00002));
        assert_eq!(find("5%"), Some(0.05));
        assert_eq!(find("99.9%"), Some(1.0 - 0.001));
        assert_eq!(find("99.98%"), Some(1.0 - 0.0002));
        assert_eq!(find("95%"), Some(1.0 - 0.05));
        assert_eq!(find("63.2%"), Some(1.0 - (-1f64).exp()));
        // No 0 % on a scale where y(0) is not finite.
        assert_eq!(find("0%"), None);
        // Heights ascend with F.
        assert!(c.windows(2).all(|p| p[0].f < p[1].f && p[0].y < p[1].y));
        let e = crate::dist::family("exponential").unwrap();
        let c = percent_candidates(e.linear.as_ref().unwrap());
        assert_eq!(c[0].label, "0%");
    }

    #[test]
    fn number_labels() {
        assert_eq!(log_label(1, 3), "1000");
        assert_eq!(log_label(2, 5), "200\u{2009}000");
        assert_eq!(log_label(5, -2), "0.05");
        assert_eq!(log_label(1, 12), "10\u{00B9}\u{00B2}");
        assert_eq!(log_label(2, -7), "2\u{00D7}10\u{207B}\u{2077}");
        assert_eq!(short(4904.6), "4905");
        assert_eq!(short(354.574), "354.6");
        assert_eq!(short(0.0046623), "0.004662");
        assert_eq!(short(123456.0), "123\u{2009}456");
        assert_eq!(short(2.5e12), "2.5\u{00D7}10\u{00B9}\u{00B2}");
        assert_eq!(linear_label(0.0005, 0.0001, -4), "0.0005");
        assert_eq!(linear_label(25000.0, 5000.0, 3), "25\u{2009}000");
        assert_eq!(linear_label(3e-5, 1e-5, -5), "3\u{00D7}10\u{207B}\u{2075}");
    }

    #[test]
    fn round_ticks_cover_the_range() {
        let ((a, b), marks) = nice_axis(0.0, 4730.0, 6.0, "age").unwrap();
        assert_eq!((a, b), (0.0, 5000.0));
        let values: Vec<f64> = marks.iter().map(|m| m.value).collect();
        assert_eq!(values, vec![0.0, 1000.0, 2000.0, 3000.0, 4000.0, 5000.0]);
        // A single value still gets a range; a huge one is refused by name.
        let ((a, b), _) = nice_axis(0.0, 0.0, 6.0, "age").unwrap();
        assert!(a == 0.0 && b > 0.0);
        let e = nice_axis(-f64::MAX, f64::MAX, 6.0, "age").unwrap_err();
        assert!(e.to_string().contains("too wide"), "{e}");
    }

    #[test]
    fn log_ticks_label_decades_or_finer() {
        let ((lo, hi), marks) = log_age_axis(20.0, 9000.0).unwrap();
        assert!(lo <= 20.0 && hi >= 9000.0);
        let labelled: Vec<f64> = marks
            .iter()
            .filter(|m| m.label.is_some())
            .map(|m| m.value)
            .collect();
        // Three decades in view: 2 and 5 times each decade are labelled too.
        assert_eq!(
            labelled,
            vec![20.0, 50.0, 100.0, 200.0, 500.0, 1000.0, 2000.0, 5000.0, 10000.0]
        );
        assert!(marks.iter().any(|m| m.value == 300.0 && !m.major));
        // Less than a decade: 2 and 5 times the decade get labels too.
        let (_, marks) = log_age_axis(150.0, 700.0).unwrap();
        let labelled: Vec<f64> = marks
            .iter()
            .filter(|m| m.label.is_some())
            .map(|m| m.value)
            .collect();
        assert!(labelled.len() >= 3, "{labelled:?}");
        // Hundreds of decades: at most about 9 labelled ticks, no minors.
        let (_, marks) = log_age_axis(1e-300, 1e300).unwrap();
        assert!(marks.iter().filter(|m| m.label.is_some()).count() <= 10);
        assert!(marks.iter().all(|m| m.major));
    }
}
