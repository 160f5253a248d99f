//! The SVG pictures: parsed back with an XML parser (roxmltree), marks found
//! where the published layout says they are, the fitted line checked against
//! the model's quantiles, user text escaped, bad input refused by name.
//! Two example pictures are written to `target/tmp/` for a person to look at.

use lifedata::decide::{age_replacement_cost_rate, optimal_replacement_age};
use lifedata::dist::{family, Family, LifeDistribution, FAMILIES};
use lifedata::fit::bounds::{bound, BoundMethod, Level, Quantity, Side};
use lifedata::fit::rank::{plotting_positions, Positions};
use lifedata::fit::{fit, FitOptions};
use lifedata::plot::{
    cost_curve_svg, probability_plot_svg, CostCurve, ProbabilityLayout, ProbabilityPlot, HEIGHT,
    WIDTH,
};
use lifedata::sample::Sample;
use lifedata::{LifeError, Model};
use roxmltree::{Document, Node};

const SVG_NS: &str = "http://www.w3.org/2000/svg";

/// Parses a picture and checks the root: an `<svg>` in the SVG namespace
/// with the fixed viewBox, and nothing executable or external anywhere.
fn parse(svg: &str) -> Document<'_> {
    let doc = Document::parse(svg).unwrap_or_else(|e| panic!("not well-formed XML: {e}\n{svg}"));
    let root = doc.root_element();
    assert_eq!(root.tag_name().name(), "svg");
    assert_eq!(root.tag_name().namespace(), Some(SVG_NS));
    assert_eq!(
        root.attribute("viewBox"),
        Some(format!("0 0 {WIDTH} {HEIGHT}").as_str())
    );
    for node in doc.descendants().filter(|n| n.is_element()) {
        let name = node.tag_name().name();
        assert!(
            !matches!(name, "script" | "foreignObject" | "image" | "use" | "a"),
            "unexpected <{name}>"
        );
        for a in node.attributes() {
            assert!(!a.name().starts_with("on"), "event handler {}", a.name());
            assert!(
                !a.value().contains("url("),
                "external reference {}",
                a.value()
            );
            assert!(
                !a.value().contains("NaN") && !a.value().contains("inf"),
                "non-finite number in {}=\"{}\"",
                a.name(),
                a.value()
            );
        }
    }
    doc
}

fn with_class<'a, 'i>(doc: &'a Document<'i>, class: &str) -> Vec<Node<'a, 'i>> {
    doc.descendants()
        .filter(|n| n.is_element() && n.attribute("class") == Some(class))
        .collect()
}

fn attr(n: &Node, name: &str) -> f64 {
    n.attribute(name)
        .unwrap_or_else(|| panic!("no {name} on {n:?}"))
        .parse()
        .unwrap()
}

fn points(n: &Node) -> Vec<(f64, f64)> {
    n.attribute("points")
        .unwrap()
        .split(' ')
        .map(|p| {
            let (x, y) = p.split_once(',').unwrap();
            (x.parse().unwrap(), y.parse().unwrap())
        })
        .collect()
}

fn texts(doc: &Document) -> Vec<String> {
    doc.descendants()
        .filter(|n| n.has_tag_name((SVG_NS, "text")))
        .map(|n| n.text().unwrap_or_default().to_string())
        .collect()
}

/// Half a unit in the last printed decimal (coordinates carry two), plus
/// floating-point noise.
const PX: f64 = 0.01;

/// Invented lives of a brake actuator class (km): 12 failures, 9 units still
/// running or removed unfailed.
const ACTUATORS: &[(f64, bool)] = &[
    (41_200.0, true),
    (58_900.0, true),
    (63_000.0, false),
    (77_400.0, true),
    (80_100.0, false),
    (92_800.0, true),
    (98_000.0, true),
    (104_500.0, false),
    (111_300.0, true),
    (118_000.0, false),
    (126_700.0, true),
    (131_900.0, true),
    (140_000.0, false),
    (149_200.0, true),
    (152_000.0, false),
    (163_800.0, true),
    (171_000.0, false),
    (178_500.0, true),
    (190_000.0, false),
    (196_300.0, true),
    (210_000.0, false),
];

struct Fitted {
    model: Model,
    failures: Vec<(f64, f64)>,
    suspensions: Vec<f64>,
}

fn fitted(rows: &[(f64, bool)], options: &str) -> Fitted {
    let counted: Vec<(f64, bool, u64)> = rows.iter().map(|&(a, f)| (a, f, 1)).collect();
    let sample = Sample::from_rows(&counted).unwrap();
    let model = fit(&sample, &FitOptions::parse(options).unwrap(), 0).unwrap();
    let failures = plotting_positions(&sample.obs(), Positions::Bernard)
        .unwrap()
        .iter()
        .map(|p| (p.age, p.unreliability))
        .collect();
    let suspensions = rows.iter().filter(|r| !r.1).map(|r| r.0).collect();
    Fitted {
        model,
        failures,
        suspensions,
    }
}

/// Two-sided 95 % Fisher bounds on the fraction failed at ages spread
/// evenly in log age from `from` to `to`.
fn fisher_band(model: &Model, from: f64, to: f64) -> Vec<(f64, f64, f64)> {
    let level = Level::new(0.95, 2).unwrap();
    (0..=40)
        .map(|i| {
            let t = from * (to / from).powf(f64::from(i) / 40.0);
            let r = |side| {
                bound(
                    model,
                    Quantity::Reliability(t),
                    level,
                    BoundMethod::Fisher,
                    side,
                )
                .unwrap()
            };
            (t, 1.0 - r(Side::Upper), 1.0 - r(Side::Lower))
        })
        .collect()
}

fn example_path(name: &str) -> std::path::PathBuf {
    let dir = std::path::Path::new(env!("CARGO_TARGET_TMPDIR"));
    std::fs::create_dir_all(dir).unwrap();
    dir.join(name)
}

fn plot<'a>(family: &'static Family, model: &'a dyn LifeDistribution) -> ProbabilityPlot<'a> {
    ProbabilityPlot {
        title: "test".into(),
        family,
        model,
        failures: vec![],
        suspensions: vec![],
        band: None,
        age_label: "age (h)".into(),
    }
}

/// Every placed failure has a marker at `to_px`, every suspension a tick on
/// the strip at its `x_px`, and there are no other markers.
fn check_marks(doc: &Document, lay: &ProbabilityLayout, p: &ProbabilityPlot) {
    let markers = with_class(doc, "failure");
    let placed: Vec<&(f64, f64)> = p
        .failures
        .iter()
        .filter(|f| !(lay.log_age && f.0 == 0.0))
        .collect();
    for &&(age, f) in &placed {
        let (x, y) = lay.to_px(age, f);
        assert!(
            lay.area.contains(x, y),
            "failure ({age}, {f}) at ({x}, {y}) is off the panel"
        );
        assert!(
            markers
                .iter()
                .any(|m| (attr(m, "cx") - x).abs() <= PX && (attr(m, "cy") - y).abs() <= PX),
            "no marker for failure ({age}, {f}) at ({x}, {y})"
        );
    }
    for m in &markers {
        let (cx, cy) = (attr(m, "cx"), attr(m, "cy"));
        assert!(
            placed.iter().any(|&&(a, f)| {
                let (x, y) = lay.to_px(a, f);
                (cx - x).abs() <= PX && (cy - y).abs() <= PX
            }),
            "marker at ({cx}, {cy}) belongs to no failure"
        );
    }
    let ticks = with_class(doc, "suspension");
    for &age in p
        .suspensions
        .iter()
        .filter(|&&a| !(lay.log_age && a == 0.0))
    {
        let x = lay.x_px(age);
        assert!(x >= lay.area.left - PX && x <= lay.area.right + PX);
        let tick = ticks
            .iter()
            .find(|t| (attr(t, "x1") - x).abs() <= PX)
            .unwrap_or_else(|| panic!("no strip tick for the suspension at {age}"));
        assert!(attr(tick, "y1") >= lay.area.bottom && attr(tick, "y2") <= lay.strip.bottom);
    }
}

/// Percent gridlines sit at the height of their F: the height is one affine,
/// falling function of the family's y(F) for every tick.
fn check_percent_ticks(doc: &Document, lay: &ProbabilityLayout) {
    let lin = lay.family.linear.as_ref().unwrap();
    let lines = with_class(doc, "percent-tick");
    assert_eq!(lines.len(), lay.percent_ticks.len());
    assert!(lines.len() >= 3, "only {} percent ticks", lines.len());
    let mut seen = Vec::new();
    for l in &lines {
        let f: f64 = l.attribute("data-f").unwrap().parse().unwrap();
        let y = attr(l, "y1");
        assert_eq!(attr(l, "y2"), y);
        assert!((y - lay.y_px(f)).abs() <= PX, "tick {f} at {y}");
        seen.push(((lin.y)(f), y));
    }
    let (a, b) = (seen[0], seen[seen.len() - 1]);
    let slope = (b.1 - a.1) / (b.0 - a.0);
    assert!(slope < 0.0);
    for &(yf, py) in &seen {
        assert!(
            (a.1 + slope * (yf - a.0) - py).abs() <= 2.0 * PX,
            "{yf} at {py}"
        );
    }
    // Labels read as percentages at the same heights.
    let labels = texts(doc);
    for t in &lay.percent_ticks {
        let label = t.label.as_ref().unwrap();
        assert!(label.ends_with('%'));
        let value: f64 = label.trim_end_matches('%').parse().unwrap();
        assert!(
            (value / 100.0 - t.value).abs() <= 5e-4 * t.value.max(1e-300),
            "{label}"
        );
        assert!(labels.contains(label));
    }
}

/// The fitted line's drawn ends, read back through `from_px`, satisfy the
/// model's quantile relation t = Q(F) (to the 0.005 px of rounding).
fn check_fit_line(doc: &Document, lay: &ProbabilityLayout, model: &dyn LifeDistribution) {
    let runs = with_class(doc, "fit");
    assert!(!runs.is_empty(), "no fitted line");
    for run in &runs {
        let pts = points(run);
        for &(px, py) in &[pts[0], pts[pts.len() - 1]] {
            assert!(lay.area.contains(px, py));
            let (age, f) = lay.from_px(px, py);
            let q = model.quantile(f);
            // Rounding moves x(t) by at most PX px; convert that to age.
            let dx = PX * (lay.from_px(px + 1.0, py).0 - age).abs();
            assert!(
                (q - age).abs() <= dx.max(1e-9 * age.abs()),
                "Q({f}) = {q}, drawn at {age}"
            );
        }
    }
}

#[test]
fn weibull_plot_puts_every_mark_where_the_layout_says() {
    let d = fitted(ACTUATORS, r#"{"dist":"weibull"}"#);
    let band = fisher_band(&d.model, 20_000.0, 400_000.0);
    let p = ProbabilityPlot {
        title: "Brake actuators, fleet A: life on the Weibull scale".into(),
        family: family("weibull").unwrap(),
        model: d.model.dist.as_ref(),
        failures: d.failures.clone(),
        suspensions: d.suspensions.clone(),
        band: Some(band),
        age_label: "age at removal (km)".into(),
    };
    let svg = probability_plot_svg(&p).unwrap();
    std::fs::write(example_path("probability_plot_weibull.svg"), &svg).unwrap();
    let doc = parse(&svg);
    let lay = p.layout().unwrap();
    assert_eq!(with_class(&doc, "failure").len(), 12);
    assert_eq!(with_class(&doc, "suspension").len(), 9);
    check_marks(&doc, &lay, &p);
    check_percent_ticks(&doc, &lay);
    check_fit_line(&doc, &lay, p.model);
    // The band is one shaded polygon inside the panel.
    let band = with_class(&doc, "band");
    assert_eq!(band.len(), 1);
    assert!(points(&band[0])
        .iter()
        .all(|&(x, y)| lay.area.contains(x, y)));
    // Legend and axis titles.
    let labels = texts(&doc);
    for want in [
        "failures (12)",
        "fit",
        "confidence band",
        "suspensions (9)",
        "percent failing",
        "age at removal (km)",
    ] {
        assert!(
            labels.iter().any(|l| l == want),
            "no text {want:?} in {labels:?}"
        );
    }
    // Age ticks on a log axis: decades major, labelled 10 000 and 100 000 km.
    assert!(lay.log_age);
    let labelled: Vec<f64> = lay
        .age_ticks
        .iter()
        .filter(|t| t.label.is_some())
        .map(|t| t.value)
        .collect();
    assert!(labelled.contains(&100_000.0), "{labelled:?}");
}

#[test]
fn the_line_crosses_the_63_percent_tick_at_the_scale() {
    let d = fitted(ACTUATORS, r#"{"dist":"weibull"}"#);
    let scale = d.model.dist.params()[1];
    let p = ProbabilityPlot {
        failures: d.failures.clone(),
        suspensions: d.suspensions.clone(),
        ..plot(family("weibull").unwrap(), d.model.dist.as_ref())
    };
    let svg = probability_plot_svg(&p).unwrap();
    let doc = parse(&svg);
    let lay = p.layout().unwrap();
    let characteristic = 1.0 - (-1f64).exp();
    let tick = lay
        .percent_ticks
        .iter()
        .find(|t| t.label.as_deref() == Some("63.2%"))
        .expect("a 63.2% tick");
    assert_eq!(tick.value, characteristic);
    let tick_y = with_class(&doc, "percent-tick")
        .iter()
        .find(|l| l.attribute("data-f").unwrap().parse::<f64>().unwrap() == characteristic)
        .map(|l| attr(l, "y1"))
        .unwrap();
    // The straight line (two points for a Weibull model on Weibull axes)
    // passes through (scale, 63.2 %).
    let line = points(&with_class(&doc, "fit")[0]);
    assert_eq!(line.len(), 2);
    let (a, b) = (line[0], line[1]);
    let x_at = a.0 + (b.0 - a.0) * (tick_y - a.1) / (b.1 - a.1);
    assert!(
        (x_at - lay.x_px(scale)).abs() < 0.05,
        "{x_at} vs {}",
        lay.x_px(scale)
    );
    assert!((lay.y_px(characteristic) - tick_y).abs() <= PX);
    // to_px is monotone: older is further right, more failed is higher up.
    let ages: Vec<f64> = (0..200).map(|i| 1e3 * 1.05f64.powi(i)).collect();
    assert!(ages.windows(2).all(|w| lay.x_px(w[0]) < lay.x_px(w[1])));
    let fs: Vec<f64> = (1..1000).map(|i| f64::from(i) / 1000.0).collect();
    assert!(fs.windows(2).all(|w| lay.y_px(w[0]) > lay.y_px(w[1])));
    // from_px inverts to_px.
    for &(age, f) in &d.failures {
        let (x, y) = lay.to_px(age, f);
        let (a2, f2) = lay.from_px(x, y);
        assert!((a2 / age - 1.0).abs() < 1e-12 && (f2 / f - 1.0).abs() < 1e-12);
    }
}

/// A member of each family with a straight-line plot, its failures placed
/// exactly on its line (ages at the model's quantiles of Bernard positions).
#[test]
fn every_family_with_a_line_gets_ruled_axes_and_a_straight_line() {
    let mut ruled = 0;
    for fam in FAMILIES.iter().copied().filter(|f| f.linear.is_some()) {
        let params: Vec<f64> = match fam.name {
            "weibull" => vec![2.0, 1000.0],
            "exponential" => vec![1000.0],
            "lognormal" => vec![6.5, 0.6],
            "normal" => vec![1000.0, 200.0],
            "loglogistic" => vec![3.0, 1000.0],
            other => panic!("no test member for the {other} family; add one here"),
        };
        let model = (fam.build)(&params).unwrap();
        let n = 10.0;
        let failures: Vec<(f64, f64)> = (1..=10)
            .map(|i| {
                let f = (f64::from(i) - 0.3) / (n + 0.4);
                (model.quantile(f), f)
            })
            .collect();
        let p = ProbabilityPlot {
            failures,
            suspensions: vec![model.quantile(0.5), model.quantile(0.9)],
            ..plot(fam, model.as_ref())
        };
        let svg = probability_plot_svg(&p).unwrap();
        let doc = parse(&svg);
        let lay = p.layout().unwrap();
        assert_eq!(lay.log_age, !matches!(fam.name, "normal" | "exponential"));
        check_marks(&doc, &lay, &p);
        check_percent_ticks(&doc, &lay);
        check_fit_line(&doc, &lay, model.as_ref());
        // On its own family's scale a member is one straight two-point line,
        // and the failures (on that line) are within a pixel of it.
        let runs = with_class(&doc, "fit");
        assert_eq!(runs.len(), 1, "{}", fam.name);
        let line = points(&runs[0]);
        assert_eq!(line.len(), 2);
        let (a, b) = (line[0], line[1]);
        for &(age, f) in &p.failures {
            let (x, y) = lay.to_px(age, f);
            let off = ((b.0 - a.0) * (a.1 - y) - (a.0 - x) * (b.1 - a.1)).abs()
                / ((b.0 - a.0).hypot(b.1 - a.1));
            assert!(
                off < 0.05,
                "{}: failure ({age}, {f}) is {off} px off the line",
                fam.name
            );
        }
        ruled += 1;
    }
    assert_eq!(ruled, 5);
}

#[test]
fn the_exponential_scale_starts_at_zero_percent() {
    let fam = family("exponential").unwrap();
    let model = (fam.build)(&[500.0]).unwrap();
    let p = ProbabilityPlot {
        failures: vec![(0.0, 0.05), (40.0, 0.15), (130.0, 0.25), (260.0, 0.4)],
        ..plot(fam, model.as_ref())
    };
    let lay = p.layout().unwrap();
    assert_eq!(lay.unreliability.0, 0.0);
    assert_eq!(lay.ages.0, 0.0);
    assert_eq!(lay.percent_ticks[0].label.as_deref(), Some("0%"));
    // The line goes through the origin, the panel's bottom-left corner.
    let svg = probability_plot_svg(&p).unwrap();
    let doc = parse(&svg);
    let line = points(&with_class(&doc, "fit")[0]);
    assert!((line[0].0 - lay.area.left).abs() <= PX && (line[0].1 - lay.area.bottom).abs() <= PX);
    check_marks(&doc, &lay, &p);
}

#[test]
fn a_model_of_another_family_is_drawn_as_its_curve() {
    let model = (family("lognormal").unwrap().build)(&[6.5, 0.6]).unwrap();
    let p = ProbabilityPlot {
        failures: vec![(300.0, 0.1), (600.0, 0.4), (900.0, 0.7)],
        ..plot(family("weibull").unwrap(), model.as_ref())
    };
    let svg = probability_plot_svg(&p).unwrap();
    let doc = parse(&svg);
    let lay = p.layout().unwrap();
    let runs = with_class(&doc, "fit");
    assert!(runs.iter().map(|r| points(r).len()).sum::<usize>() > 50);
    // Every vertex of the curve is a (Q(F), F) point of the model.
    for run in &runs {
        for &(px, py) in &points(run) {
            let (age, f) = lay.from_px(px, py);
            let dx = PX * (lay.from_px(px + 1.0, py).0 - age).abs();
            let dy = PX * (lay.from_px(px, py - 1.0).1 - f).abs();
            let q = model.quantile(f);
            // Either coordinate's rounding, carried through the model.
            let slack = dx + dy * (model.quantile(f + dy) - q).abs() / dy.max(1e-300) + 1e-9;
            assert!((q - age).abs() <= slack * 2.0, "({age}, {f}): Q = {q}");
        }
    }
}

#[test]
fn hostile_text_is_escaped() {
    let hostile = "</svg><script>alert(1)</script>";
    let model = (family("weibull").unwrap().build)(&[2.0, 1000.0]).unwrap();
    let label = "age <km> & \"odd\" 'unit'\u{0}\u{1b}";
    let p = ProbabilityPlot {
        title: hostile.into(),
        failures: vec![(500.0, 0.2), (900.0, 0.6)],
        age_label: label.into(),
        ..plot(family("weibull").unwrap(), model.as_ref())
    };
    let svg = probability_plot_svg(&p).unwrap();
    assert!(!svg.contains("<script"), "{svg}");
    let doc = parse(&svg);
    assert_eq!(
        doc.descendants()
            .filter(|n| n.has_tag_name((SVG_NS, "svg")))
            .count(),
        1
    );
    let title = doc
        .descendants()
        .find(|n| n.has_tag_name((SVG_NS, "title")))
        .unwrap();
    assert_eq!(title.text(), Some(hostile));
    let all = texts(&doc);
    assert!(all.iter().any(|t| t == hostile), "{all:?}");
    assert!(
        all.iter()
            .any(|t| t == "age <km> & \"odd\" 'unit'\u{FFFD}\u{FFFD}"),
        "{all:?}"
    );

    let c = CostCurve {
        title: hostile.into(),
        age_label: label.into(),
        ..cost_example().0
    };
    let svg = cost_curve_svg(&c).unwrap();
    assert!(!svg.contains("<script"));
    let doc = parse(&svg);
    assert!(texts(&doc).iter().any(|t| t == hostile));
}

#[test]
fn a_long_title_is_shortened_on_the_picture_but_kept_whole_in_its_title() {
    let model = (family("weibull").unwrap().build)(&[2.0, 1000.0]).unwrap();
    let long = "Fleet ".repeat(60);
    let p = ProbabilityPlot {
        title: long.clone(),
        failures: vec![(500.0, 0.2)],
        ..plot(family("weibull").unwrap(), model.as_ref())
    };
    let svg = probability_plot_svg(&p).unwrap();
    let doc = parse(&svg);
    let shown = with_class(&doc, "title")[0].text().unwrap().to_string();
    assert!(
        shown.ends_with('\u{2026}') && shown.chars().count() < 120,
        "{shown}"
    );
    let title = doc
        .descendants()
        .find(|n| n.has_tag_name((SVG_NS, "title")))
        .unwrap();
    assert_eq!(title.text(), Some(long.replace('\n', " ").as_str()));
}

#[test]
fn families_without_a_straight_line_plot_are_refused_by_name() {
    for name in ["gamma", "weibull3"] {
        let fam = family(name).unwrap();
        let params = if name == "gamma" {
            vec![2.0, 500.0]
        } else {
            vec![2.0, 1000.0, 100.0]
        };
        let model = (fam.build)(&params).unwrap();
        let p = ProbabilityPlot {
            failures: vec![(500.0, 0.3)],
            ..plot(fam, model.as_ref())
        };
        let e = probability_plot_svg(&p).unwrap_err();
        assert!(matches!(e, LifeError::NotEstimable(_)), "{e:?}");
        let text = e.to_string();
        assert!(
            text.contains(&format!(
                "the {name} family has no straight-line probability plot"
            )),
            "{text}"
        );
        assert!(
            text.contains("'weibull'") && !text.contains("'gamma'"),
            "{text}"
        );
        assert!(p.layout().is_err());
    }
}

#[test]
fn bad_values_are_refused_naming_the_value() {
    let model = (family("weibull").unwrap().build)(&[2.0, 1000.0]).unwrap();
    let base = || plot(family("weibull").unwrap(), model.as_ref());
    let cases: Vec<(ProbabilityPlot, &str)> = vec![
        (
            ProbabilityPlot {
                failures: vec![(100.0, 0.2), (f64::NAN, 0.5)],
                ..base()
            },
            "failure age must be a finite number >= 0, got NaN (row 2)",
        ),
        (
            ProbabilityPlot {
                failures: vec![(100.0, 1.0)],
                ..base()
            },
            "plotting position must be a fraction failed strictly between 0 and 1, got 1 \
             (failure at age 100, row 1)",
        ),
        (
            ProbabilityPlot {
                suspensions: vec![-3.0],
                ..base()
            },
            "suspension age must be a finite number >= 0, got -3 (row 1)",
        ),
        (
            ProbabilityPlot {
                band: Some(vec![(100.0, 0.3, 0.2)]),
                ..base()
            },
            "band must have 0 <= lower F <= upper F <= 1, got lower 0.3 and upper 0.2 at age \
             100 (row 1)",
        ),
        (
            ProbabilityPlot {
                failures: vec![(f64::INFINITY, 0.5)],
                ..base()
            },
            "failure age must be a finite number >= 0, got Inf (row 1)",
        ),
    ];
    for (p, want) in cases {
        assert_eq!(probability_plot_svg(&p).unwrap_err().to_string(), want);
    }

    let (c, _) = cost_example();
    let mut nan = c.points.clone();
    nan[3].2 = f64::NAN;
    let cases: Vec<(CostCurve, &str)> = vec![
        (
            CostCurve {
                points: nan,
                ..cost_example().0
            },
            "unplanned cost rate must be a number or +infinity, got NaN (row 4)",
        ),
        (
            CostCurve {
                points: vec![c.points[5]],
                ..cost_example().0
            },
            "points must hold at least 2 rows for a cost curve, got 1",
        ),
        (
            CostCurve {
                run_to_failure_rate: Some(f64::NEG_INFINITY),
                ..cost_example().0
            },
            "run-to-failure rate must be a finite number, got -Inf",
        ),
        (
            CostCurve {
                optimum: Some((f64::NAN, 1.0)),
                ..cost_example().0
            },
            "optimum age must be a finite number >= 0, got NaN (row 1)",
        ),
    ];
    for (c, want) in cases {
        assert_eq!(cost_curve_svg(&c).unwrap_err().to_string(), want);
    }
}

#[test]
fn awkward_data_still_gives_a_clean_picture() {
    let weibull = family("weibull").unwrap();
    let model = (weibull.build)(&[1.2, 1e3]).unwrap();
    let clean = |p: &ProbabilityPlot| {
        let svg = probability_plot_svg(p).unwrap();
        let doc = parse(&svg);
        let lay = p.layout().unwrap();
        check_marks(&doc, &lay, p);
        assert!(lay.age_ticks.iter().filter(|t| t.label.is_some()).count() <= 12);
        assert!(lay.percent_ticks.len() <= 1 + (lay.area.height() / 16.0) as usize);
        (svg, lay)
    };
    // Ages over six hundred decades, positions deep in both tails.
    let p = ProbabilityPlot {
        failures: vec![(1e-300, 1e-12), (1.0, 0.5), (1e300, 1.0 - 1e-12)],
        suspensions: vec![1e-200, 1e200],
        band: Some(vec![(1e-300, 0.0, 1.0), (1e300, 0.0, 1.0)]),
        ..plot(weibull, model.as_ref())
    };
    let (svg, lay) = clean(&p);
    assert!(lay.ages.0 <= 1e-300 && lay.ages.1 >= 1e300);
    assert!(
        svg.contains("10\u{207B}"),
        "powers of ten label the decades"
    );
    // No failures: the model's line from 1 % to 99 % sets the ages.
    let p = ProbabilityPlot {
        suspensions: vec![50.0, 80.0, 80.0],
        ..plot(weibull, model.as_ref())
    };
    let (svg, lay) = clean(&p);
    let doc = parse(&svg);
    assert!(!with_class(&doc, "fit").is_empty());
    check_fit_line(&doc, &lay, model.as_ref());
    // Nothing at all but a model.
    let (svg, _) = clean(&plot(weibull, model.as_ref()));
    assert!(!with_class(&parse(&svg), "fit").is_empty());
    // Age 0 has no place on a log axis: counted in a note, not drawn.
    let p = ProbabilityPlot {
        failures: vec![(0.0, 0.1), (300.0, 0.3), (700.0, 0.6)],
        suspensions: vec![0.0, 0.0, 500.0],
        ..plot(weibull, model.as_ref())
    };
    let (svg, _) = clean(&p);
    let doc = parse(&svg);
    assert_eq!(with_class(&doc, "failure").len(), 2);
    let note = with_class(&doc, "note");
    assert_eq!(
        note[0].text(),
        Some("Not shown (age 0 has no place on a log age axis): 1 failure, 2 suspensions.")
    );
    // All at one age, many times over: one marker, one strip tick.
    let p = ProbabilityPlot {
        failures: vec![(250.0, 0.3); 500],
        suspensions: vec![250.0; 10_000],
        ..plot(weibull, model.as_ref())
    };
    let (svg, _) = clean(&p);
    let doc = parse(&svg);
    assert_eq!(with_class(&doc, "failure").len(), 1);
    assert_eq!(with_class(&doc, "suspension").len(), 1);
    assert!(texts(&doc).iter().any(|t| t == "suspensions (10000)"));
    // A normal scale with one failure at age 0 (a linear axis shows it).
    let normal = family("normal").unwrap();
    let nm = (normal.build)(&[100.0, 30.0]).unwrap();
    clean(&ProbabilityPlot {
        failures: vec![(0.0, 0.01)],
        ..plot(normal, nm.as_ref())
    });
    // Ages too wide for a linear axis are refused, not drawn wrong.
    let e = probability_plot_svg(&ProbabilityPlot {
        failures: vec![(0.0, 0.1), (f64::MAX, 0.9)],
        ..plot(normal, nm.as_ref())
    })
    .unwrap_err();
    assert!(e.to_string().contains("too wide to draw"), "{e}");
}

/// Cost rates of a Weibull (shape 2.5, scale 1000 h) with planned
/// replacement at cost 1 and failure replacement at cost 10, from the
/// project's own readers; and that model.
fn cost_example() -> (CostCurve, Box<dyn LifeDistribution>) {
    let d = (family("weibull").unwrap().build)(&[2.5, 1000.0]).unwrap();
    let (cp, cf) = (1.0, 10.0);
    let points: Vec<(f64, f64, f64, f64)> = (1..=120)
        .map(|i| {
            let t = 20.0 * f64::from(i);
            let used = d.sf_integral(t);
            let (planned, unplanned) = (cp * d.sf(t) / used, cf * d.cdf(t) / used);
            (
                t,
                planned,
                unplanned,
                age_replacement_cost_rate(d.as_ref(), cp, cf, t),
            )
        })
        .collect();
    let best = optimal_replacement_age(d.as_ref(), cp, cf)
        .unwrap()
        .unwrap();
    let c = CostCurve {
        title: "Brake actuators: when to replace".into(),
        points,
        optimum: Some((best, age_replacement_cost_rate(d.as_ref(), cp, cf, best))),
        run_to_failure_rate: Some(cf / d.mean()),
        age_label: "replacement age (operating hours)".into(),
    };
    (c, d)
}

#[test]
fn cost_curve_marks_the_optimum_and_the_run_to_failure_rate() {
    let (c, d) = cost_example();
    let svg = cost_curve_svg(&c).unwrap();
    std::fs::write(example_path("cost_curve.svg"), &svg).unwrap();
    let doc = parse(&svg);
    let lay = c.layout().unwrap();
    let (best, rate) = c.optimum.unwrap();
    assert!((best - 354.574).abs() < 1e-3, "README value: {best}");

    let dot = with_class(&doc, "optimum");
    assert_eq!(dot.len(), 1);
    let (x, y) = lay.to_px(best, rate);
    assert!((attr(&dot[0], "cx") - x).abs() <= PX && (attr(&dot[0], "cy") - y).abs() <= PX);
    assert!(texts(&doc).iter().any(|t| t == "optimum: age 354.6"));
    // The label sits in the panel, clear of the dot, tied to it by a leader
    // that starts at the dot.
    let label = &with_class(&doc, "optimum-label")[0];
    let (lx, ly) = (attr(label, "x"), attr(label, "y"));
    assert!(lay.area.contains(lx, ly));
    assert!((lx - x).hypot(ly - y) > 9.0);
    let leader = &with_class(&doc, "optimum-leader")[0];
    assert!((attr(leader, "x1") - x).abs() <= PX && (attr(leader, "y1") - y).abs() <= PX);
    // The label's baseline is not on the total curve: the curve at the
    // label's x is at least half a text height away.
    let total_at = |px: f64| {
        let (age, _) = lay.from_px(px, 0.0);
        let used = age_replacement_cost_rate(d.as_ref(), 1.0, 10.0, age);
        lay.to_px(age, used).1
    };
    assert!(
        (total_at(lx) - ly).abs() > 6.0,
        "label at {ly}, curve at {}",
        total_at(lx)
    );

    let rtf = with_class(&doc, "run-to-failure");
    assert_eq!(rtf.len(), 1);
    let ry = lay.to_px(0.0, c.run_to_failure_rate.unwrap()).1;
    assert!((attr(&rtf[0], "y1") - ry).abs() <= PX && attr(&rtf[0], "y2") == attr(&rtf[0], "y1"));
    assert!(rtf[0].attribute("stroke-dasharray").is_some());

    // Each curve's vertices inside the panel are rows of the data; the
    // total is the sum of the other two, and it bottoms out at the optimum.
    for (class, pick) in [("planned", 1usize), ("unplanned", 2), ("total", 3)] {
        let runs = with_class(&doc, class);
        assert!(!runs.is_empty(), "no {class} curve");
        let mut matched = 0;
        for run in &runs {
            for &(px, py) in &points(run) {
                assert!(lay.area.contains(px, py));
                let on_edge = (py - lay.area.top).abs() < PX || (py - lay.area.bottom).abs() < PX;
                let row = c.points.iter().find(|r| {
                    let v = [r.1, r.2, r.3][pick - 1];
                    let (rx, ry) = lay.to_px(r.0, v);
                    (rx - px).abs() <= PX && (ry - py).abs() <= PX
                });
                assert!(
                    row.is_some() || on_edge,
                    "{class} vertex ({px}, {py}) is no row"
                );
                matched += usize::from(row.is_some());
            }
        }
        assert!(matched > 60, "{class}: only {matched} rows drawn");
    }
    for r in &c.points {
        assert!((r.1 + r.2 - r.3).abs() <= 1e-12 * r.3);
        assert!(r.3 >= rate * (1.0 - 1e-12));
    }
    // Rate axis from 0; ticks labelled and ascending.
    assert_eq!(lay.rates.0, 0.0);
    assert!(lay.rate_ticks.windows(2).all(|w| w[0].value < w[1].value));
    let labels = texts(&doc);
    for want in ["total", "planned", "unplanned", "run to failure", "optimum"] {
        assert!(labels.iter().any(|l| l == want), "no legend entry {want:?}");
    }
}

#[test]
fn cost_curve_with_an_infinite_start_and_no_optimum() {
    // Shape 0.8: no optimum; the planned rate is infinite at age 0.
    let d = (family("weibull").unwrap().build)(&[0.8, 1000.0]).unwrap();
    let points: Vec<(f64, f64, f64, f64)> = (0..=50)
        .map(|i| {
            let t = 40.0 * f64::from(i);
            let used = d.sf_integral(t);
            // At age 0 both rates are infinite (0/0 for the unplanned
            // one; its limit is 5 f(0) = infinity for shape < 1).
            let (p, u) = if t == 0.0 {
                (f64::INFINITY, f64::INFINITY)
            } else {
                (d.sf(t) / used, 5.0 * d.cdf(t) / used)
            };
            (t, p, u, p + u)
        })
        .collect();
    let c = CostCurve {
        title: "no optimum".into(),
        points,
        optimum: None,
        run_to_failure_rate: Some(5.0 / d.mean()),
        age_label: String::new(),
    };
    let svg = cost_curve_svg(&c).unwrap();
    let doc = parse(&svg);
    assert!(with_class(&doc, "optimum").is_empty());
    assert!(texts(&doc).iter().any(|t| t == "age"));
    let lay = c.layout().unwrap();
    // The axis is cut near the levels that matter, not at the huge rates
    // near age 0, so the run-to-failure line sits in the lower part.
    let ry = lay.to_px(0.0, c.run_to_failure_rate.unwrap()).1;
    assert!(ry > lay.area.top + 0.4 * lay.area.height() && ry < lay.area.bottom);
}

/// A fleet-sized plot stays small: markers whose centres fall in the same
/// half-pixel cell are drawn once, yet every failure lies within 0.71 px
/// (a cell's diagonal) of a drawn marker, and every marker sits on a failure.
#[test]
fn a_hundred_thousand_failures_make_a_small_picture_with_every_failure_shown() {
    let model = (family("weibull").unwrap().build)(&[2.0, 1000.0]).unwrap();
    let n = 100_000;
    let failures: Vec<(f64, f64)> = (1..=n)
        .map(|i| {
            let f = (i as f64 - 0.3) / (n as f64 + 0.4);
            (model.quantile(f).round().max(1.0), f)
        })
        .collect();
    let mut p = plot(family("weibull").unwrap(), model.as_ref());
    p.failures = failures;
    let svg = probability_plot_svg(&p).unwrap();
    assert!(svg.len() < 600_000, "{} bytes", svg.len());
    let doc = parse(&svg);
    let lay = p.layout().unwrap();
    let markers: Vec<(f64, f64)> = with_class(&doc, "failure")
        .iter()
        .map(|m| (attr(m, "cx"), attr(m, "cy")))
        .collect();
    assert!(markers.len() < 10_000, "{} markers", markers.len());
    // Markers in x order to find the near ones quickly.
    let mut by_x = markers.clone();
    by_x.sort_by(|a, b| a.0.total_cmp(&b.0));
    for &(age, f) in &p.failures {
        let (x, y) = lay.to_px(age, f);
        let from = by_x.partition_point(|m| m.0 < x - 0.8);
        let near = by_x[from..]
            .iter()
            .take_while(|m| m.0 <= x + 0.8)
            .any(|m| (m.0 - x).hypot(m.1 - y) <= 0.71 + PX);
        assert!(near, "failure ({age}, {f}) at ({x}, {y}) has no marker");
    }
    let mut placed: Vec<(f64, f64)> = p.failures.iter().map(|&(a, f)| lay.to_px(a, f)).collect();
    placed.sort_by(|a, b| a.0.total_cmp(&b.0));
    for &(cx, cy) in &markers {
        let from = placed.partition_point(|q| q.0 < cx - PX);
        assert!(
            placed[from..]
                .iter()
                .take_while(|q| q.0 <= cx + PX)
                .any(|q| (q.1 - cy).abs() <= PX),
            "marker at ({cx}, {cy}) belongs to no failure"
        );
    }
}
