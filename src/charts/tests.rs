//! Chart-level tests: every output is parsed as XML and read back the way a person would read it.

use super::axis;
use super::*;
use proptest::prelude::*;
use roxmltree::{Document, Node};

const NASTY: &str = "<&>\"";

fn parse(svg: &str) -> Document<'_> {
    let doc = Document::parse(svg).unwrap_or_else(|e| panic!("not well-formed: {e}"));
    let root = doc.root_element();
    assert_eq!(root.tag_name().name(), "svg");
    assert_eq!(root.attribute("width"), Some("100%"));
    // Charts whose marks are links are groups (links inside an image are hidden); others images.
    let links = root.descendants().any(|n| n.has_tag_name("a"));
    let role = root.attribute("role");
    if has_class(&root, "ll-lift-map") || links {
        assert_eq!(role, Some("group"));
    } else {
        assert_eq!(role, Some("img"));
        assert!(!links, "a chart with links must not be an image");
    }
    assert_eq!(root.attribute("aria-label"), first_title(&root).as_deref());
    let view_box = root.attribute("viewBox").expect("viewBox");
    assert_eq!(view_box.split(' ').count(), 4);
    let first = root.first_element_child().expect("a title");
    assert_eq!(first.tag_name().name(), "title");
    assert!(!first.text().unwrap_or("").trim().is_empty());
    doc
}

fn first_title(root: &Node<'_, '_>) -> Option<String> {
    root.first_element_child()
        .and_then(|t| t.text())
        .map(str::to_string)
}

fn has_class(node: &Node<'_, '_>, class: &str) -> bool {
    node.attribute("class")
        .is_some_and(|c| c.split_whitespace().any(|x| x == class))
}

fn by_class<'a, 'i>(doc: &'a Document<'i>, class: &str) -> Vec<Node<'a, 'i>> {
    doc.descendants().filter(|n| has_class(n, class)).collect()
}

fn texts_under(node: Node<'_, '_>) -> Vec<String> {
    node.descendants()
        .filter(|n| n.has_tag_name("text"))
        .map(|n| n.text().unwrap_or("").to_string())
        .collect()
}

fn all_texts(doc: &Document<'_>) -> Vec<String> {
    texts_under(doc.root_element())
}

fn title_of(node: Node<'_, '_>) -> String {
    node.children()
        .find(|c| c.has_tag_name("title"))
        .and_then(|t| t.text())
        .unwrap_or("")
        .to_string()
}

fn number(node: &Node<'_, '_>, attr: &str) -> f64 {
    node.attribute(attr)
        .and_then(|v| v.parse().ok())
        .unwrap_or_else(|| panic!("numeric {attr} on {:?}", node.tag_name()))
}

/// Reads tick labels back into numbers ("1 900" → 1900, "−2" → −2).
fn tick_value(label: &str) -> f64 {
    let cleaned: String = label
        .chars()
        .filter(|c| *c != axis::GROUP_SEPARATOR)
        .map(|c| if c == axis::MINUS { '-' } else { c })
        .collect();
    cleaned
        .parse()
        .unwrap_or_else(|_| panic!("tick label {label:?}"))
}

/// (value, y of the tick) for each y-axis label; the label baseline sits 0.35 em below the tick.
fn y_ticks(doc: &Document<'_>, font: f64) -> Vec<(f64, f64)> {
    let axis = by_class(doc, "ll-axis-y")
        .into_iter()
        .next()
        .expect("y axis");
    axis.children()
        .filter(|n| n.has_tag_name("text") && !has_class(n, "ll-axis-title"))
        .map(|n| {
            (
                tick_value(n.text().unwrap_or("")),
                number(&n, "y") - font * 0.35,
            )
        })
        .collect()
}

fn x_tick_labels(doc: &Document<'_>) -> Vec<String> {
    let axis = by_class(doc, "ll-axis-x")
        .into_iter()
        .next()
        .expect("x axis");
    let mut labels = texts_under(axis);
    labels.pop(); // the axis title
    labels
}

fn assert_nice_and_even(values: &[f64]) {
    assert!(values.len() >= 2, "ticks {values:?}");
    let step = values[1] - values[0];
    assert!(axis::is_nice_step(step), "step {step} of {values:?}");
    for pair in values.windows(2) {
        assert!(
            ((pair[1] - pair[0]) - step).abs() < 1e-9,
            "uneven ticks {values:?}"
        );
    }
}

// ---------- relative compaction chart ----------

fn rc(label: &str, rc_pct: f64, status: RcStatus) -> RcBar {
    RcBar {
        label: label.to_string(),
        rc_pct,
        status,
        href: Some(format!("/tests/{label}")),
    }
}

fn lot_sheet() -> RcChartInput {
    RcChartInput {
        title: "Lot 14".to_string(),
        tests: vec![
            rc("101", 97.2, RcStatus::Pass),
            rc("102", 93.8, RcStatus::Superseded),
            rc("103", 96.1, RcStatus::Pass),
            rc("104", 94.1, RcStatus::Fail),
            rc("105", 91.0, RcStatus::Voided),
            rc("106", 96.4, RcStatus::Pass),
        ],
        limit_pct: 95.0,
        mean_pct: Some(96.0),
    }
}

#[test]
fn a_lot_of_many_thousand_tests_draws_one_path_of_dots_per_status() {
    let statuses = RcStatus::ALL;
    let tests = (0..90_000)
        .map(|i| {
            rc(
                &format!("T{i}"),
                93.0 + (i % 70) as f64 / 10.0,
                statuses[i % 4],
            )
        })
        .collect();
    let svg = rc_chart(&RcChartInput {
        title: "Lot 90".to_string(),
        tests,
        limit_pct: 95.0,
        mean_pct: Some(96.0),
    });
    assert!(svg.len() < 2_500_000, "{} bytes", svg.len());
    let doc = parse(&svg);
    assert!(by_class(&doc, "ll-test").is_empty());
    for status in statuses {
        let cloud = by_class(&doc, &format!("ll-{}", status.code()));
        assert_eq!(cloud.len(), 1, "{status:?}");
        let d = cloud[0].attribute("d").unwrap();
        assert_eq!(d.matches('M').count(), 22_500, "{status:?}");
    }
}

#[test]
fn rc_chart_draws_one_mark_per_test_with_status_classes() {
    let svg = rc_chart(&lot_sheet());
    let doc = parse(&svg);
    assert_eq!(by_class(&doc, "ll-test").len(), 6);
    assert_eq!(by_class(&doc, "ll-pass").len(), 3);
    assert_eq!(by_class(&doc, "ll-fail").len(), 1);
    assert_eq!(by_class(&doc, "ll-superseded").len(), 1);
    assert_eq!(by_class(&doc, "ll-voided").len(), 1);
}

#[test]
fn rc_marks_differ_by_shape_and_fill() {
    let svg = rc_chart(&lot_sheet());
    let doc = parse(&svg);
    let shape_of = |class: &str| {
        let mark = by_class(&doc, class)[0];
        let shape = mark
            .children()
            .filter(|c| c.is_element() && !c.has_tag_name("title") && !c.has_tag_name("rect"))
            .find(|c| !c.has_tag_name("text"))
            .expect("a shape");
        (
            shape.tag_name().name().to_string(),
            shape.attribute("fill").unwrap_or("").to_string(),
        )
    };
    let pass = shape_of("ll-pass");
    let fail = shape_of("ll-fail");
    let superseded = shape_of("ll-superseded");
    let voided = shape_of("ll-voided");
    assert_eq!(pass.0, "circle");
    assert_eq!(fail.0, "path");
    assert_ne!(fail.1, superseded.1, "superseded is hollow, fail is filled");
    assert_eq!(voided.1, "none");
    assert_ne!(pass, voided);
}

#[test]
fn rc_marks_carry_tooltips_and_links() {
    let svg = rc_chart(&lot_sheet());
    let doc = parse(&svg);
    let marks = by_class(&doc, "ll-test");
    assert_eq!(
        title_of(marks[1]),
        "Test 102: RC 93.8 %, fail, superseded by retest"
    );
    assert_eq!(
        title_of(marks[4]),
        "Test 105: RC 91.0 %, voided, not counted"
    );
    assert!(marks.iter().all(|m| m.has_tag_name("a")));
    assert_eq!(marks[0].attribute("href"), Some("/tests/101"));
}

#[test]
fn rc_script_links_are_dropped() {
    let mut input = lot_sheet();
    input.tests[0].href = Some("javascript:alert(1)".to_string());
    input.tests[1].href = None;
    let svg = rc_chart(&input);
    let doc = parse(&svg);
    let marks = by_class(&doc, "ll-test");
    assert!(marks[0].has_tag_name("g"));
    assert!(marks[1].has_tag_name("g"));
    assert!(!svg.contains("javascript"));
}

#[test]
fn rc_limit_line_sits_where_the_axis_says() {
    let svg = rc_chart(&lot_sheet());
    let doc = parse(&svg);
    let ticks = y_ticks(&doc, 13.0);
    let (v0, y0) = ticks[0];
    let (v1, y1) = ticks[ticks.len() - 1];
    let expected = |v: f64| y0 + (v - v0) / (v1 - v0) * (y1 - y0);
    let limit = by_class(&doc, "ll-limit")[0];
    assert!((number(&limit, "y1") - expected(95.0)).abs() < 0.02);
    assert_eq!(number(&limit, "y1"), number(&limit, "y2"));
    let mean = by_class(&doc, "ll-mean")[0];
    assert!((number(&mean, "y1") - expected(96.0)).abs() < 0.02);
    let texts = all_texts(&doc);
    assert!(texts.contains(&"minimum 95.0 %".to_string()), "{texts:?}");
    assert!(texts.contains(&"mean 96.0 %".to_string()));
}

#[test]
fn rc_ticks_are_nice_and_cover_every_value() {
    let svg = rc_chart(&lot_sheet());
    let doc = parse(&svg);
    let values: Vec<f64> = y_ticks(&doc, 13.0).iter().map(|t| t.0).collect();
    assert_nice_and_even(&values);
    assert!(values[0] <= 91.0 && *values.last().expect("ticks") >= 97.2);
}

#[test]
fn rc_marker_heights_follow_the_scale() {
    let svg = rc_chart(&lot_sheet());
    let doc = parse(&svg);
    let ticks = y_ticks(&doc, 13.0);
    let (v0, y0) = ticks[0];
    let (v1, y1) = ticks[ticks.len() - 1];
    let pass = by_class(&doc, "ll-pass")[0];
    let circle = pass
        .children()
        .find(|c| c.has_tag_name("circle"))
        .expect("circle");
    let expected = y0 + (97.2 - v0) / (v1 - v0) * (y1 - y0);
    assert!((number(&circle, "cy") - expected).abs() < 0.02);
}

#[test]
fn rc_without_tests_says_so() {
    let input = RcChartInput {
        title: "Lot 15".to_string(),
        limit_pct: 95.0,
        ..Default::default()
    };
    let svg = rc_chart(&input);
    let doc = parse(&svg);
    assert!(by_class(&doc, "ll-test").is_empty());
    assert!(all_texts(&doc).contains(&"no tests yet".to_string()));
    assert!(by_class(&doc, "ll-legend").is_empty());
}

#[test]
fn rc_with_one_test_labels_it() {
    let mut input = lot_sheet();
    input.tests.truncate(1);
    let svg = rc_chart(&input);
    let doc = parse(&svg);
    assert_eq!(by_class(&doc, "ll-test").len(), 1);
    assert_eq!(x_tick_labels(&doc), vec!["101"]);
    assert!(
        all_texts(&doc).contains(&"97.2".to_string()),
        "value printed over the mark"
    );
}

#[test]
fn rc_with_500_tests_thins_axis_labels() {
    let tests = (0..500)
        .map(|i| {
            let rc_pct = 93.0 + (i % 17) as f64 * 0.5;
            let status = if rc_pct < 95.0 {
                RcStatus::Fail
            } else {
                RcStatus::Pass
            };
            rc(&format!("{}", 1000 + i), rc_pct, status)
        })
        .collect();
    let input = RcChartInput {
        title: "All tests".to_string(),
        tests,
        limit_pct: 95.0,
        mean_pct: None,
    };
    let svg = rc_chart(&input);
    let doc = parse(&svg);
    assert_eq!(by_class(&doc, "ll-test").len(), 500);
    let labels = x_tick_labels(&doc);
    assert!((2..=12).contains(&labels.len()), "{} labels", labels.len());
    assert_eq!(labels[0], "1000");
    assert!(svg.len() < 200_000, "{} bytes", svg.len());
}

#[test]
fn rc_survives_missing_values() {
    let mut input = lot_sheet();
    input.tests[0].rc_pct = f64::NAN;
    input.limit_pct = f64::INFINITY;
    input.mean_pct = Some(f64::NAN);
    let svg = rc_chart(&input);
    let doc = parse(&svg);
    assert_eq!(by_class(&doc, "ll-test").len(), 6);
    assert!(by_class(&doc, "ll-limit").is_empty());
    assert_eq!(
        title_of(by_class(&doc, "ll-test")[0]),
        "Test 101: no RC value, pass"
    );
}

#[test]
fn rc_unset_limit_draws_no_line_and_keeps_the_scale_tight() {
    let mut input = lot_sheet();
    input.limit_pct = 0.0;
    let svg = rc_chart(&input);
    let doc = parse(&svg);
    assert!(by_class(&doc, "ll-limit").is_empty());
    let values: Vec<f64> = y_ticks(&doc, 13.0).iter().map(|t| t.0).collect();
    assert!(values[0] >= 80.0, "{values:?}");
}

#[test]
fn rc_escapes_every_text() {
    let mut input = lot_sheet();
    input.title = NASTY.to_string();
    input.tests[0].label = NASTY.to_string();
    input.tests[0].href = Some(format!("/t?a=1&b={NASTY}"));
    let svg = rc_chart(&input);
    let doc = parse(&svg);
    assert_eq!(title_of(doc.root_element()), NASTY);
    assert!(all_texts(&doc).contains(&NASTY.to_string()));
    let first = by_class(&doc, "ll-test")[0];
    assert_eq!(first.attribute("href"), Some("/t?a=1&b=<&>\""));
}

#[test]
fn rc_legend_lists_the_statuses_present() {
    let svg = rc_chart(&lot_sheet());
    let doc = parse(&svg);
    let legend = by_class(&doc, "ll-legend")[0];
    assert_eq!(
        texts_under(legend),
        vec![
            "pass",
            "fail",
            "fail, superseded by retest",
            "voided, not counted"
        ]
    );
}

#[test]
fn rc_output_is_deterministic() {
    assert_eq!(rc_chart(&lot_sheet()), rc_chart(&lot_sheet()));
}

// ---------- compaction curve chart ----------

/// Dry density at saturation S for Gs (DOMAIN.md: ρd = Gs ρw / (1 + w Gs / S), Das, compaction chapter).
fn saturated(w_pct: f64, gs: f64, s: f64) -> f64 {
    gs * 1000.0 / (1.0 + w_pct / 100.0 * gs / s)
}

fn curve_sheet() -> CurveChartInput {
    let fitted = (0..=40)
        .map(|i| {
            let w = 7.5 + i as f64 * 0.2;
            (w, 1985.0 - 6.0 * (w - 11.2).powi(2))
        })
        .collect();
    let line = |s: f64| -> Vec<(f64, f64)> {
        (0..=60)
            .map(|i| {
                let w = 2.0 + i as f64 * 0.5;
                (w, saturated(w, 2.70, s))
            })
            .collect()
    };
    CurveChartInput {
        title: "Borrow B2".to_string(),
        x_label: "Water content (%)".to_string(),
        y_label: "Dry density (kg/m³)".to_string(),
        lab_points: vec![
            (8.0, 1930.0),
            (9.6, 1969.0),
            (11.2, 1984.0),
            (12.8, 1968.0),
            (14.4, 1925.0),
        ],
        fitted,
        optimum: (11.2, 1985.0),
        zero_air_voids: line(1.0),
        saturation_lines: vec![
            Series {
                label: "S = 90 %".to_string(),
                points: line(0.9),
            },
            Series {
                label: "S = 80 %".to_string(),
                points: line(0.8),
            },
        ],
        field_points: vec![
            FieldMark {
                label: "T-1".to_string(),
                x: 10.5,
                y: 1950.0,
                passed: true,
            },
            FieldMark {
                label: "T-2".to_string(),
                x: 13.5,
                y: 1880.0,
                passed: false,
            },
            FieldMark {
                label: "T-3".to_string(),
                x: 11.8,
                y: 1962.0,
                passed: true,
            },
        ],
        optimum_label: String::new(),
    }
}

#[test]
fn curve_draws_every_point_with_its_own_shape() {
    let svg = curve_chart(&curve_sheet());
    let doc = parse(&svg);
    assert_eq!(by_class(&doc, "ll-lab").len(), 5);
    assert_eq!(by_class(&doc, "ll-field").len(), 3);
    let pass = by_class(&doc, "ll-pass");
    let fail = by_class(&doc, "ll-fail");
    assert_eq!((pass.len(), fail.len()), (2, 1));
    let shape = |n: Node<'_, '_>| {
        n.children()
            .find(|c| c.is_element() && !c.has_tag_name("title"))
            .map(|c| c.tag_name().name().to_string())
    };
    assert_eq!(
        shape(by_class(&doc, "ll-lab")[0]).as_deref(),
        Some("circle")
    );
    assert_eq!(shape(pass[0]).as_deref(), Some("rect"));
    assert_eq!(shape(fail[0]).as_deref(), Some("path"));
    assert_eq!(
        title_of(fail[0]),
        "T-2: water content 13.5 %, dry density 1\u{202F}880 kg/m³, fail"
    );
}

#[test]
fn curve_annotates_the_optimum() {
    let svg = curve_chart(&curve_sheet());
    let doc = parse(&svg);
    // Thousands grouped with a narrow space, as SI writing does (common practice).
    let want = "MDD 1\u{202F}985 kg/m³ at OMC 11.2 %";
    assert!(all_texts(&doc).contains(&want.to_string()));
    assert_eq!(by_class(&doc, "ll-optimum").len(), 1);
    let mut input = curve_sheet();
    input.optimum_label = "MDD 1.985 Mg/m³ · OMC 11.2 %".to_string();
    let svg = curve_chart(&input);
    assert!(all_texts(&parse(&svg)).contains(&input.optimum_label));
}

#[test]
fn curve_axes_fit_the_data_with_padding() {
    let input = curve_sheet();
    let svg = curve_chart(&input);
    let doc = parse(&svg);
    let ys: Vec<f64> = y_ticks(&doc, 13.0).iter().map(|t| t.0).collect();
    let xs: Vec<f64> = x_tick_labels(&doc).iter().map(|l| tick_value(l)).collect();
    assert_nice_and_even(&ys);
    assert_nice_and_even(&xs);
    let (x0, x1) = (xs[0], xs[xs.len() - 1]);
    let (y0, y1) = (ys[0], ys[ys.len() - 1]);
    let points = input
        .lab_points
        .iter()
        .copied()
        .chain(input.field_points.iter().map(|f| (f.x, f.y)));
    for (x, y) in points {
        assert!(x > x0 && x < x1, "x {x} inside {x0}..{x1}");
        assert!(y > y0 && y < y1, "y {y} inside {y0}..{y1}");
    }
    // Fits the data: not the whole ZAV line, which runs from 2 % to 32 %.
    assert!(x1 - x0 <= 12.0, "x range {x0}..{x1}");
}

#[test]
fn curve_clips_reference_lines_and_labels_them() {
    let svg = curve_chart(&curve_sheet());
    let doc = parse(&svg);
    let clip = doc
        .descendants()
        .find(|n| n.has_tag_name("clipPath"))
        .expect("clip path");
    let id = clip.attribute("id").expect("id");
    let zav = by_class(&doc, "ll-zav")[0];
    let group = zav.parent_element().expect("group");
    assert_eq!(
        group.attribute("clip-path"),
        Some(format!("url(#{id})").as_str())
    );
    assert_eq!(by_class(&doc, "ll-saturation").len(), 2);
    let labels = texts_under(by_class(&doc, "ll-line-labels")[0]);
    for want in ["S = 90 %", "S = 80 %", "zero air voids"] {
        assert!(labels.contains(&want.to_string()), "{want} in {labels:?}");
    }
    // Distinct dash patterns so the lines read in black and white.
    let dashes: Vec<&str> = by_class(&doc, "ll-saturation")
        .iter()
        .chain(std::iter::once(&zav))
        .map(|n| n.attribute("stroke-dasharray").expect("dashed"))
        .collect();
    assert_ne!(dashes[0], dashes[1]);
    assert_ne!(dashes[1], dashes[2]);
}

#[test]
fn curve_legend_names_what_is_drawn() {
    let svg = curve_chart(&curve_sheet());
    let doc = parse(&svg);
    let legend = texts_under(by_class(&doc, "ll-legend")[0]);
    assert_eq!(
        legend,
        vec![
            "lab specimen",
            "fitted curve",
            "optimum",
            "zero air voids",
            "field test, pass",
            "field test, fail"
        ]
    );
}

#[test]
fn curve_markers_lie_inside_the_plot() {
    let svg = curve_chart(&curve_sheet());
    let doc = parse(&svg);
    let clip = doc
        .descendants()
        .find(|n| n.has_tag_name("clipPath"))
        .expect("clip");
    let rect = clip.first_element_child().expect("rect");
    let (left, top) = (number(&rect, "x"), number(&rect, "y"));
    let (right, bottom) = (left + number(&rect, "width"), top + number(&rect, "height"));
    for node in by_class(&doc, "ll-lab") {
        let c = node
            .children()
            .find(|c| c.has_tag_name("circle"))
            .expect("circle");
        let (cx, cy) = (number(&c, "cx"), number(&c, "cy"));
        assert!(cx > left && cx < right && cy > top && cy < bottom);
    }
}

#[test]
fn curve_without_points_says_so() {
    let input = CurveChartInput {
        title: "Borrow B3".to_string(),
        x_label: "Water content (%)".to_string(),
        y_label: "Dry density (kg/m³)".to_string(),
        ..Default::default()
    };
    let svg = curve_chart(&input);
    let doc = parse(&svg);
    assert!(all_texts(&doc).contains(&"no lab points yet".to_string()));
    assert!(
        by_class(&doc, "ll-optimum").is_empty(),
        "(0, 0) means no optimum yet"
    );
    let ys: Vec<f64> = y_ticks(&doc, 13.0).iter().map(|t| t.0).collect();
    assert!(ys[0] >= 1500.0 && ys[ys.len() - 1] <= 2300.0, "{ys:?}");
}

#[test]
fn curve_escapes_every_text() {
    let mut input = curve_sheet();
    input.title = NASTY.to_string();
    input.x_label = NASTY.to_string();
    input.field_points[0].label = NASTY.to_string();
    input.saturation_lines[0].label = NASTY.to_string();
    let svg = curve_chart(&input);
    let doc = parse(&svg);
    assert_eq!(title_of(doc.root_element()), NASTY);
    let texts = all_texts(&doc);
    assert!(
        texts.iter().filter(|t| t.as_str() == NASTY).count() >= 3,
        "{texts:?}"
    );
}

#[test]
fn curve_output_is_deterministic() {
    assert_eq!(curve_chart(&curve_sheet()), curve_chart(&curve_sheet()));
}

// ---------- lift map ----------

fn km(m: f64) -> String {
    let metres = m.round().max(0.0) as u64;
    format!("{}+{:03}", metres / 1000, metres % 1000)
}

fn zone_rows(layers: usize) -> Vec<MapRow> {
    (0..layers)
        .map(|row| MapRow {
            zone: if row < layers.div_ceil(2) {
                "Fill"
            } else {
                "Capping"
            }
            .to_string(),
            layer: format!("L{}", row + 1),
            row,
        })
        .collect()
}

fn lot(row: usize, from_m: f64, to_m: f64, state: MapState) -> MapLot {
    MapLot {
        row,
        from_m,
        to_m,
        state,
        title: format!("Lot {row}/{from_m}"),
        href: format!("/lots/{row}-{from_m}"),
    }
}

fn small_map() -> LiftMapInput {
    let mut lots = Vec::new();
    for row in 0..4 {
        for (k, state) in MapState::ALL.iter().enumerate() {
            let from = k as f64 * 100.0;
            lots.push(lot(row, from, from + 100.0, *state));
        }
    }
    LiftMapInput {
        chainage_from_m: 0.0,
        chainage_to_m: 700.0,
        rows: zone_rows(4),
        lots,
        chainage_label: Box::new(km),
        width_px: 800,
        zoom_href: Some(Box::new(|a, b| format!("/map?from={a:.0}&to={b:.0}"))),
    }
}

/// 60 km, 30 layers, 20,000 lots of about 90 m; states by a works front, or by a cheap hash.
fn big_map(width_px: u32, scrambled: bool) -> LiftMapInput {
    let mut lots = Vec::with_capacity(20_000);
    let mut seed: u64 = 9;
    for row in 0..30usize {
        let count = 20_000 / 30 + usize::from(row < 20_000 % 30);
        let step = 60_000.0 / count as f64;
        let front = 60_000.0 * (1.0 - 0.7 * row as f64 / 30.0);
        for k in 0..count {
            seed = seed
                .wrapping_mul(6_364_136_223_846_793_005)
                .wrapping_add(1_442_695_040_888_963_407);
            let pick = (seed >> 33) as usize;
            let from = k as f64 * step;
            let state = if scrambled {
                MapState::ALL[pick % 7]
            } else if from > front {
                MapState::Open
            } else if from > front - 3000.0 {
                MapState::ALL[pick % 4]
            } else if pick.is_multiple_of(10) {
                MapState::Accepted
            } else {
                MapState::Certified
            };
            lots.push(lot(row, from, from + step, state));
        }
    }
    LiftMapInput {
        chainage_from_m: 0.0,
        chainage_to_m: 60_000.0,
        rows: zone_rows(30),
        lots,
        chainage_label: Box::new(km),
        width_px,
        zoom_href: Some(Box::new(|a, b| format!("/map?from={a:.0}&to={b:.0}"))),
    }
}

fn lot_rects<'a, 'i>(doc: &'a Document<'i>, class: &str) -> Vec<Node<'a, 'i>> {
    by_class(doc, class)
        .first()
        .map(|g| g.descendants().filter(|n| n.has_tag_name("rect")).collect())
        .unwrap_or_default()
}

#[test]
fn map_draws_each_wide_lot_as_a_linked_rect() {
    let input = small_map();
    let svg = lift_map(&input);
    let doc = parse(&svg);
    let rects = lot_rects(&doc, "ll-lots");
    assert_eq!(rects.len(), input.lots.len());
    assert!(by_class(&doc, "ll-cells").is_empty());
    for rect in &rects {
        let link = rect.parent_element().expect("link");
        assert!(link.has_tag_name("a"));
        assert!(link.attribute("href").expect("href").starts_with("/lots/"));
        let title = title_of(link);
        let state_group = link.parent_element().expect("state group");
        let code = state_group
            .attribute("class")
            .expect("class")
            .trim_start_matches("ll-")
            .to_string();
        let state = MapState::ALL
            .iter()
            .find(|s| s.token() == code)
            .expect("a state group");
        assert!(title.ends_with(&format!("({})", state.label())), "{title}");
    }
}

#[test]
fn map_lot_geometry_follows_chainage_and_rows() {
    let input = small_map();
    let svg = lift_map(&input);
    let doc = parse(&svg);
    let rects = lot_rects(&doc, "ll-lots");
    let widths: Vec<f64> = rects.iter().map(|r| number(r, "width")).collect();
    // Every lot is 100 m of a 700 m map, so every rect has the same width (less the hairline gap).
    assert!(
        widths.iter().all(|w| (w - widths[0]).abs() < 0.11),
        "{widths:?}"
    );
    // Row 0 (bottom) lies below row 3 (top).
    let y_of_row = |row: usize| {
        rects
            .iter()
            .find(|r| title_of(r.parent_element().expect("a")).starts_with(&format!("Lot {row}/")))
            .map(|r| number(r, "y"))
            .expect("row drawn")
    };
    assert!(y_of_row(0) > y_of_row(3));
}

#[test]
fn map_patterns_exist_for_every_fill() {
    let svg = lift_map(&small_map());
    let doc = parse(&svg);
    let ids: Vec<&str> = doc
        .descendants()
        .filter(|n| n.has_tag_name("pattern"))
        .filter_map(|n| n.attribute("id"))
        .collect();
    assert_eq!(ids.len(), 7);
    for node in doc
        .descendants()
        .filter(|n| n.attribute("fill").is_some_and(|f| f.starts_with("url(")))
    {
        let fill = node.attribute("fill").expect("fill");
        let id = fill.trim_start_matches("url(#").trim_end_matches(')');
        assert!(ids.contains(&id), "{fill} has no pattern");
    }
}

#[test]
fn map_legend_names_every_state_with_swatch_and_mark() {
    let svg = lift_map(&small_map());
    let doc = parse(&svg);
    let items = by_class(&doc, "ll-legend-item");
    for state in MapState::ALL {
        let item = items
            .iter()
            .find(|i| texts_under(**i).contains(&state.label().to_string()))
            .unwrap_or_else(|| panic!("{} in legend", state.label()));
        let texts = texts_under(*item);
        assert!(
            texts.contains(&state.mark().to_string()),
            "mark of {}",
            state.label()
        );
        let swatch = item
            .children()
            .find(|c| c.has_tag_name("rect"))
            .expect("swatch");
        assert!(
            swatch
                .attribute("fill")
                .expect("fill")
                .contains(state.token())
        );
    }
    assert!(
        items
            .iter()
            .any(|i| texts_under(*i).contains(&"no lot yet".to_string()))
    );
}

#[test]
fn map_marks_wide_lots_with_their_letter() {
    let svg = lift_map(&small_map());
    let doc = parse(&svg);
    let marks = texts_under(by_class(&doc, "ll-marks")[0]);
    assert_eq!(marks.len(), 28);
    for state in MapState::ALL {
        assert_eq!(
            marks.iter().filter(|m| m.as_str() == state.mark()).count(),
            4
        );
    }
}

#[test]
fn map_chainage_ticks_use_the_project_format() {
    let svg = lift_map(&small_map());
    let doc = parse(&svg);
    let labels = x_tick_labels(&doc);
    assert!(labels.contains(&"0+000".to_string()), "{labels:?}");
    assert!(labels.contains(&"0+700".to_string()) || labels.contains(&"0+600".to_string()));
    let metres: Vec<f64> = labels
        .iter()
        .map(|l| {
            let (k, m) = l.split_once('+').expect("km+m");
            tick_value(k) * 1000.0 + tick_value(m)
        })
        .collect();
    assert_nice_and_even(&metres);
}

#[test]
fn map_groups_layers_by_zone_with_labels() {
    let svg = lift_map(&small_map());
    let doc = parse(&svg);
    assert_eq!(
        texts_under(by_class(&doc, "ll-zones")[0]),
        vec!["Capping", "Fill"]
    );
    assert_eq!(
        texts_under(by_class(&doc, "ll-layers")[0]),
        vec!["L1", "L2", "L3", "L4"]
    );
}

#[test]
fn narrow_lots_become_cells_showing_the_worst_state() {
    // Six 1 m lots in a 10 km map at 800 px: each is a tenth of a pixel.
    let mut input = small_map();
    input.chainage_to_m = 10_000.0;
    input.lots = (0..6)
        .map(|i| {
            let state = if i == 3 {
                MapState::Failing
            } else {
                MapState::Certified
            };
            lot(0, 5000.0 + i as f64, 5001.0 + i as f64, state)
        })
        .collect();
    let svg = lift_map(&input);
    let doc = parse(&svg);
    let cells = lot_rects(&doc, "ll-cells");
    assert_eq!(cells.len(), 1);
    let link = cells[0].parent_element().expect("link");
    assert_eq!(
        title_of(link),
        "5+000–5+006: 6 lots, 1 failing, 5 certified"
    );
    assert_eq!(link.attribute("href"), Some("/map?from=5000&to=5006"));
    assert_eq!(
        link.parent_element().and_then(|g| g.attribute("class")),
        Some("ll-failing")
    );
    assert!(number(&cells[0], "width") >= MIN_LOT_PX);
    assert!(
        all_texts(&doc)
            .iter()
            .any(|t| t.contains("grouped into cells"))
    );
}

#[test]
fn cells_without_zoom_links_still_have_tooltips() {
    let mut input = small_map();
    input.chainage_to_m = 10_000.0;
    input.zoom_href = None;
    input.lots = vec![lot(1, 10.0, 11.0, MapState::Open)];
    let svg = lift_map(&input);
    let doc = parse(&svg);
    let cells = lot_rects(&doc, "ll-cells");
    let holder = cells[0].parent_element().expect("holder");
    assert!(holder.has_tag_name("g"));
    assert_eq!(title_of(holder), "0+010–0+011: 1 lot, 1 open");
}

#[test]
fn huge_map_is_aggregated_bounded_and_small() {
    for scrambled in [false, true] {
        let input = big_map(1200, scrambled);
        let svg = lift_map(&input);
        let doc = parse(&svg);
        let cells = lot_rects(&doc, "ll-cells");
        let lots = lot_rects(&doc, "ll-lots");
        assert!(!cells.is_empty());
        assert!(
            cells.len() + lots.len() <= 1200 * 30,
            "{} rects",
            cells.len() + lots.len()
        );
        assert!(cells.len() + lots.len() <= MAX_CELLS + 30, "budget");
        // Every lot is accounted for, either drawn or counted in a cell's tooltip.
        let counted: usize = cells
            .iter()
            .map(|c| {
                let title = title_of(c.parent_element().expect("link"));
                let after = title.split(": ").nth(1).expect("count");
                after
                    .split(' ')
                    .next()
                    .and_then(|n| n.parse::<usize>().ok())
                    .expect("number")
            })
            .sum();
        assert_eq!(counted + lots.len(), 20_000);
        assert!(
            svg.len() < 1_500_000,
            "{} bytes (scrambled {scrambled})",
            svg.len()
        );
    }
}

#[test]
fn huge_map_at_phone_width_stays_small() {
    let svg = lift_map(&big_map(360, true));
    let doc = parse(&svg);
    let rects = lot_rects(&doc, "ll-cells").len() + lot_rects(&doc, "ll-lots").len();
    assert!(rects <= 360 * 30, "{rects}");
    assert!(svg.len() < 1_500_000, "{} bytes", svg.len());
}

#[test]
fn map_at_phone_width_wraps_its_legend() {
    let mut input = small_map();
    input.width_px = 360;
    let svg = lift_map(&input);
    let doc = parse(&svg);
    assert!(
        doc.root_element()
            .attribute("viewBox")
            .expect("vb")
            .starts_with("0 0 360 ")
    );
    let rows: std::collections::BTreeSet<i64> = by_class(&doc, "ll-legend-item")
        .iter()
        .filter_map(|i| i.children().find(|c| c.has_tag_name("text")))
        .map(|t| number(&t, "y").round() as i64)
        .collect();
    assert!(rows.len() >= 3, "legend rows {rows:?}");
}

#[test]
fn map_handles_empty_and_odd_inputs() {
    let mut input = small_map();
    input.rows.clear();
    let svg = lift_map(&input);
    assert!(all_texts(&parse(&svg)).contains(&"no layers yet".to_string()));

    let mut input = small_map();
    input.lots.clear();
    let svg = lift_map(&input);
    assert!(all_texts(&parse(&svg)).contains(&"no lots yet".to_string()));

    let mut input = small_map();
    input.chainage_from_m = 700.0;
    input.chainage_to_m = 0.0;
    input.lots.push(lot(99, 0.0, 10.0, MapState::Open));
    input.lots.push(lot(0, f64::NAN, 10.0, MapState::Open));
    input.lots.push(lot(0, 900.0, 1000.0, MapState::Open));
    input.lots[0].href = "javascript:alert(1)".to_string();
    let svg = lift_map(&input);
    let doc = parse(&svg);
    assert_eq!(lot_rects(&doc, "ll-lots").len(), 28);
    assert!(!svg.contains("javascript"));
    let desc = doc
        .descendants()
        .find(|n| n.has_tag_name("desc"))
        .and_then(|n| n.text())
        .expect("desc");
    assert!(desc.contains("3 lots lie outside"), "{desc}");
}

#[test]
fn map_escapes_every_text() {
    let mut input = small_map();
    input.rows[0].zone = NASTY.to_string();
    input.rows[0].layer = NASTY.to_string();
    input.lots[0].title = NASTY.to_string();
    input.chainage_label = Box::new(|_| NASTY.to_string());
    let svg = lift_map(&input);
    let doc = parse(&svg);
    let texts = all_texts(&doc);
    assert!(
        texts.iter().filter(|t| t.as_str() == NASTY).count() >= 3,
        "{texts:?}"
    );
    assert!(
        doc.descendants()
            .any(|n| n.has_tag_name("title") && n.text() == Some("<&>\" (open)"))
    );
}

#[test]
fn map_output_is_deterministic() {
    assert_eq!(lift_map(&small_map()), lift_map(&small_map()));
}

// ---------- any input ----------

fn any_float() -> impl Strategy<Value = f64> {
    prop_oneof![
        8 => -1e4f64..1e5,
        1 => Just(f64::NAN),
        1 => Just(f64::INFINITY),
        1 => Just(0.0),
    ]
}

fn any_text() -> impl Strategy<Value = String> {
    prop_oneof![
        Just(String::new()),
        Just(NASTY.to_string()),
        "[a-zA-Z0-9 <>&\"'+\u{1}é³]{0,24}"
    ]
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(48))]

    #[test]
    fn rc_chart_always_parses(values in prop::collection::vec((any_float(), 0usize..4, any_text()), 0..40), limit in any_float()) {
        let tests = values
            .into_iter()
            .map(|(v, s, label)| RcBar { label, rc_pct: v, status: RcStatus::ALL[s], href: Some("/x".into()) })
            .collect::<Vec<_>>();
        let n = tests.len();
        let svg = rc_chart(&RcChartInput { title: "t".into(), tests, limit_pct: limit, mean_pct: Some(limit) });
        let doc = parse(&svg);
        prop_assert_eq!(by_class(&doc, "ll-test").len(), n);
    }

    #[test]
    fn curve_chart_always_parses(
        lab in prop::collection::vec((any_float(), any_float()), 0..8),
        field in prop::collection::vec((any_float(), any_float(), any::<bool>(), any_text()), 0..12),
        optimum in (any_float(), any_float()),
    ) {
        let input = CurveChartInput {
            title: "c".into(),
            x_label: "w (%)".into(),
            y_label: "ρd (kg/m³)".into(),
            lab_points: lab.clone(),
            fitted: lab.clone(),
            optimum,
            zero_air_voids: lab.clone(),
            saturation_lines: vec![Series { label: "S".into(), points: lab }],
            field_points: field.into_iter().map(|(x, y, passed, label)| FieldMark { label, x, y, passed }).collect(),
            optimum_label: String::new(),
        };
        parse(&curve_chart(&input));
    }

    #[test]
    fn lift_map_always_parses(
        lots in prop::collection::vec((0usize..6, any_float(), any_float(), 0usize..7), 0..300),
        range in (any_float(), any_float()),
        width in 0u32..5000,
        rows in 0usize..6,
    ) {
        let input = LiftMapInput {
            chainage_from_m: range.0,
            chainage_to_m: range.1,
            rows: zone_rows(rows),
            lots: lots.into_iter().map(|(r, a, b, s)| lot(r, a, b, MapState::ALL[s])).collect(),
            chainage_label: Box::new(km),
            width_px: width,
            zoom_href: Some(Box::new(|a, b| format!("/m?{a}&{b}"))),
        };
        let svg = lift_map(&input);
        let doc = parse(&svg);
        let rects = lot_rects(&doc, "ll-cells").len() + lot_rects(&doc, "ll-lots").len();
        prop_assert!(rects <= (width.max(280) as usize) * rows.max(1));
    }
}
