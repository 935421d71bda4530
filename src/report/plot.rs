//! The trace plot as SVG: pedal, target and opening against time on one 0-100 % axis, the mode
//! as coloured bands under it, markers at breaks, mends and fault settings, and the windows of
//! `expect opening` lines as shaded limits. Drawn with plotters' SVG backend (text elements, no
//! font files).

use crate::sim::script::{ExpectKind, Expectation};
use crate::sim::trace::{EventKind, Trace};
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};

const WIDTH: u32 = 960;
const HEIGHT: u32 = 560;
/// Height of the mode strip and of the legend row under the main chart.
const STRIP: u32 = 40;
const LEGEND: u32 = 44;
const MARGIN: u32 = 12;
const Y_LABELS: u32 = 58;
const FONT: &str = "sans-serif";

const DRIVER: RGBColor = RGBColor(0x7f, 0x7f, 0x7f);
const PEDAL: RGBColor = RGBColor(0x1f, 0x77, 0xb4);
const TARGET: RGBColor = RGBColor(0xe0, 0x7b, 0x12);
const OPENING: RGBColor = RGBColor(0x22, 0x22, 0x22);
const BREAK: RGBColor = RGBColor(0xc0, 0x39, 0x2b);
const MEND: RGBColor = RGBColor(0x1e, 0x84, 0x49);
const FAULT: RGBColor = RGBColor(0x7d, 0x3c, 0x98);
const WINDOW_OK: RGBColor = RGBColor(0x11, 0x8c, 0x7e);
const WINDOW_FAILED: RGBColor = RGBColor(0xe6, 0x7e, 0x00);
const KEY_OFF: RGBColor = RGBColor(0xd0, 0xd0, 0xd0);

/// Soft, distinguishable fills for modes, by mode index (the policy's order), so a mode keeps
/// its colour across every plot of one policy.
const MODE_COLOURS: [RGBColor; 10] = [
    RGBColor(0xa6, 0xdb, 0xa0),
    RGBColor(0xfd, 0xd4, 0x9e),
    RGBColor(0xf4, 0xa5, 0x82),
    RGBColor(0xb2, 0xab, 0xd2),
    RGBColor(0x92, 0xc5, 0xde),
    RGBColor(0xf7, 0xe0, 0x8b),
    RGBColor(0xc2, 0xa5, 0xcf),
    RGBColor(0xe0, 0xe0, 0xa0),
    RGBColor(0xf1, 0xb6, 0xda),
    RGBColor(0xb8, 0xe1, 0x86),
];

pub fn mode_colour(mode: usize) -> RGBColor {
    MODE_COLOURS[mode % MODE_COLOURS.len()]
}

/// A run of samples in one mode (or with the key off), for the bands.
#[derive(Clone, Debug, PartialEq)]
pub struct Band {
    pub from: f64,
    pub to: f64,
    /// `None` while the key is off.
    pub mode: Option<usize>,
}

/// The mode bands of a trace: each sample's mode holds until the next sample.
pub fn bands(trace: &Trace) -> Vec<Band> {
    let end = trace.length.as_secs_f64();
    let mut out: Vec<Band> = Vec::new();
    for (k, s) in trace.samples.iter().enumerate() {
        let mode = s.key_on.then_some(s.mode);
        let from = s.at.as_secs_f64();
        let to = trace
            .samples
            .get(k + 1)
            .map_or(end, |n| n.at.as_secs_f64())
            .max(from);
        match out.last_mut() {
            Some(b) if b.mode == mode => b.to = to,
            _ => out.push(Band { from, to, mode }),
        }
    }
    out
}

/// A curve: legend name, colour, stroke width, and the sample field it draws.
type Series = (
    &'static str,
    RGBColor,
    u32,
    fn(&crate::sim::trace::TraceSample) -> f64,
);

/// A vertical marker: instant, label, colour.
struct Marker {
    at: f64,
    label: String,
    colour: RGBColor,
}

fn markers(trace: &Trace) -> Vec<Marker> {
    trace
        .events
        .iter()
        .filter_map(|e| {
            let colour = match e.kind {
                EventKind::Break { .. } => BREAK,
                EventKind::Mend { .. } => MEND,
                EventKind::FaultSet { .. } => FAULT,
                _ => return None,
            };
            Some(Marker {
                at: e.at.as_secs_f64(),
                label: trace.event_text(&e.kind),
                colour,
            })
        })
        .collect()
}

/// An `expect opening` window: the limit, the side that is forbidden, and the verdict.
struct Window {
    from: f64,
    to: f64,
    limit: f64,
    at_most: bool,
    passed: bool,
}

fn windows(trace: &Trace, expectations: &[Expectation]) -> Vec<Window> {
    expectations
        .iter()
        .enumerate()
        .filter_map(|(i, e)| {
            // The engine writes one verdict per expectation, in script order.
            let passed = trace.expectations.get(i).is_none_or(|v| v.passed);
            match e.kind {
                ExpectKind::OpeningAtMost { x, from, to } => Some(Window {
                    from: from.as_secs_f64(),
                    to: to.as_secs_f64(),
                    limit: x,
                    at_most: true,
                    passed,
                }),
                ExpectKind::OpeningAtLeast { x, from, to } => Some(Window {
                    from: from.as_secs_f64(),
                    to: to.as_secs_f64(),
                    limit: x,
                    at_most: false,
                    passed,
                }),
                _ => None,
            }
        })
        .collect()
}

/// The plot of one trace. `expectations` are the script's, in the order the trace's verdicts
/// follow; pass `&[]` when the script is not at hand (no windows are drawn then).
pub fn svg(trace: &Trace, expectations: &[Expectation]) -> String {
    let mut buf = String::new();
    if let Err(e) = draw(trace, expectations, &mut buf) {
        // Drawing into a string cannot fail for I/O reasons; say what happened rather than
        // hand back half a document.
        return format!(
            "<svg xmlns=\"http://www.w3.org/2000/svg\" width=\"{WIDTH}\" height=\"60\"><text x=\"10\" y=\"30\">plot of {} failed: {}</text></svg>\n",
            xml_escape(&trace.scenario),
            xml_escape(&e)
        );
    }
    if !buf.ends_with('\n') {
        buf.push('\n');
    }
    buf
}

pub fn xml_escape(s: &str) -> String {
    let mut o = String::with_capacity(s.len());
    for c in s.chars() {
        match c {
            '<' => o.push_str("&lt;"),
            '>' => o.push_str("&gt;"),
            '&' => o.push_str("&amp;"),
            '"' => o.push_str("&quot;"),
            '\'' => o.push_str("&#39;"),
            c => o.push(c),
        }
    }
    o
}

fn draw(trace: &Trace, expectations: &[Expectation], buf: &mut String) -> Result<(), String> {
    let err = |e: &dyn std::fmt::Display| e.to_string();
    let root = SVGBackend::with_string(buf, (WIDTH, HEIGHT)).into_drawing_area();
    root.fill(&WHITE).map_err(|e| err(&e))?;
    let (main, rest) = root.split_vertically(HEIGHT - STRIP - LEGEND);
    let (strip, legend) = rest.split_vertically(STRIP);

    // A zero-length run still gets a drawable axis.
    let end = trace.length.as_secs_f64().max(1e-3);
    let held = trace.expectations.iter().filter(|v| v.passed).count();
    let title = format!(
        "{} (policy {}): {} of {} expectations hold",
        trace.scenario,
        trace.policy,
        held,
        trace.expectations.len()
    );
    let mut chart = ChartBuilder::on(&main)
        .caption(title, (FONT, 25))
        .margin(MARGIN)
        .margin_bottom(4)
        .x_label_area_size(40)
        .y_label_area_size(Y_LABELS)
        .build_cartesian_2d(0f64..end, 0f64..100f64)
        .map_err(|e| err(&e))?;
    chart
        .configure_mesh()
        .x_desc("time [s]")
        .y_desc("position [%]")
        .x_labels(12)
        .y_labels(11)
        .x_label_formatter(&|x| trim_tick(*x))
        .y_label_formatter(&|y| format!("{y:.0}"))
        .label_style((FONT, 16))
        .axis_desc_style((FONT, 17))
        .light_line_style(RGBColor(0xf0, 0xf0, 0xf0))
        .bold_line_style(RGBColor(0xdc, 0xdc, 0xdc))
        .draw()
        .map_err(|e| err(&e))?;

    // Expectation windows first, so the curves stay on top of the shading.
    let wins = windows(trace, expectations);
    let min_width = end / 300.0;
    for w in &wins {
        let colour = if w.passed { WINDOW_OK } else { WINDOW_FAILED };
        let (x0, mut x1) = (w.from.min(end), w.to.min(end));
        if x1 - x0 < min_width {
            x1 = (x0 + min_width).min(end);
        }
        let (y0, y1) = if w.at_most {
            (w.limit, 100.0)
        } else {
            (0.0, w.limit)
        };
        chart
            .draw_series(std::iter::once(Rectangle::new(
                [(x0, y0), (x1, y1)],
                colour.mix(if w.passed { 0.12 } else { 0.25 }).filled(),
            )))
            .map_err(|e| err(&e))?;
        chart
            .draw_series(std::iter::once(PathElement::new(
                vec![(x0, w.limit), (x1, w.limit)],
                colour.stroke_width(2),
            )))
            .map_err(|e| err(&e))?;
        let label = format!(
            "{} {} %{}",
            if w.at_most { "at most" } else { "at least" },
            crate::time::trim(w.limit),
            if w.passed { "" } else { " FAILED" }
        );
        // Inside the shaded side, so the label never sits on the curve it limits.
        let v = if w.at_most { VPos::Bottom } else { VPos::Top };
        let ly = w.limit;
        // Near the right end the label runs leftwards from the window's end, to stay inside.
        let (h, lx) = if x0 > end * 0.75 {
            (HPos::Right, x1)
        } else {
            (HPos::Left, x0)
        };
        let style = TextStyle::from((FONT, 15).into_font())
            .color(&colour)
            .pos(Pos::new(h, v));
        chart
            .draw_series(std::iter::once(Text::new(label, (lx, ly), style)))
            .map_err(|e| err(&e))?;
    }

    let series: [Series; 4] = [
        ("driver pedal", DRIVER, 1, |s| s.driver),
        ("merged pedal", PEDAL, 2, |s| s.pedal),
        ("target", TARGET, 2, |s| s.target),
        ("opening", OPENING, 2, |s| s.opening),
    ];
    for (name, colour, width, get) in series {
        let pts: Vec<(f64, f64)> = trace
            .samples
            .iter()
            .map(|s| (s.at.as_secs_f64(), get(s).clamp(0.0, 100.0)))
            .collect();
        let style = colour.stroke_width(width);
        if name == "driver pedal" {
            chart
                .draw_series(DashedLineSeries::new(pts, 6, 4, style))
                .map_err(|e| err(&e))?
                .label(name)
                .legend(move |(x, y)| PathElement::new(vec![(x, y), (x + 22, y)], style));
        } else {
            chart
                .draw_series(LineSeries::new(pts, style))
                .map_err(|e| err(&e))?
                .label(name)
                .legend(move |(x, y)| PathElement::new(vec![(x, y), (x + 22, y)], style));
        }
    }
    // Legend entries for the windows, only when there are some of that kind.
    for (passed, name) in [
        (true, "expected limit (held)"),
        (false, "expected limit (FAILED)"),
    ] {
        if wins.iter().any(|w| w.passed == passed) {
            let colour = if passed { WINDOW_OK } else { WINDOW_FAILED };
            chart
                .draw_series(std::iter::empty::<PathElement<(f64, f64)>>())
                .map_err(|e| err(&e))?
                .label(name)
                .legend(move |(x, y)| {
                    Rectangle::new([(x, y - 5), (x + 22, y + 5)], colour.mix(0.4).filled())
                });
        }
    }

    // Markers: a dashed line each, the label rotated along it; labels that would overlap are
    // pushed right so each stays readable.
    let mut last_label_x: Option<i32> = None;
    for m in markers(trace) {
        let at = m.at.min(end);
        chart
            .draw_series(DashedLineSeries::new(
                vec![(at, 0.0), (at, 100.0)],
                4,
                3,
                m.colour.stroke_width(1),
            ))
            .map_err(|e| err(&e))?;
        let (px, py) = chart.backend_coord(&(at, 100.0));
        let mut lx = px + 3;
        if let Some(prev) = last_label_x
            && lx < prev + 16
        {
            lx = prev + 16;
        }
        last_label_x = Some(lx);
        let style = TextStyle::from((FONT, 15).into_font())
            .color(&m.colour)
            .transform(FontTransform::Rotate90)
            .pos(Pos::new(HPos::Left, VPos::Bottom));
        main.draw(&Text::new(m.label, (lx, py + 4), style))
            .map_err(|e| err(&e))?;
    }

    chart
        .configure_series_labels()
        .position(SeriesLabelPosition::UpperRight)
        .label_font((FONT, 15))
        .background_style(WHITE.mix(0.85))
        .border_style(RGBColor(0xb0, 0xb0, 0xb0))
        .draw()
        .map_err(|e| err(&e))?;

    // The mode strip, on the same time axis as the chart above.
    let mut sc = ChartBuilder::on(&strip)
        .margin_left(MARGIN)
        .margin_right(MARGIN)
        .margin_top(2)
        .margin_bottom(2)
        .y_label_area_size(Y_LABELS)
        .build_cartesian_2d(0f64..end, 0f64..1f64)
        .map_err(|e| err(&e))?;
    let bs = bands(trace);
    for b in &bs {
        let colour = b.mode.map_or(KEY_OFF, mode_colour);
        sc.draw_series(std::iter::once(Rectangle::new(
            [(b.from, 0.0), (b.to, 1.0)],
            colour.filled(),
        )))
        .map_err(|e| err(&e))?;
        let name = b.mode.map_or("key off", |m| {
            trace.modes.get(m).map_or("?", |s| s.as_str())
        });
        let (x0, _) = sc.backend_coord(&(b.from, 0.0));
        let (x1, _) = sc.backend_coord(&(b.to, 0.0));
        // Only where the name fits (about 8 px a character at 15 px).
        if (x1 - x0) as usize > name.chars().count() * 8 + 6 {
            let style = TextStyle::from((FONT, 15).into_font())
                .color(&BLACK)
                .pos(Pos::new(HPos::Center, VPos::Center));
            sc.draw_series(std::iter::once(Text::new(
                name.to_string(),
                ((b.from + b.to) / 2.0, 0.5),
                style,
            )))
            .map_err(|e| err(&e))?;
        }
    }
    let (sx, sy) = sc.backend_coord(&(0.0, 0.5));
    // backend_coord is in whole-image pixels, so draw on the root area.
    root.draw(&Text::new(
        "mode",
        (sx - 8, sy),
        TextStyle::from((FONT, 16).into_font()).pos(Pos::new(HPos::Right, VPos::Center)),
    ))
    .map_err(|e| err(&e))?;

    // The mode legend: every mode the run visits, in the policy's order.
    let mut seen: Vec<Option<usize>> = bs.iter().map(|b| b.mode).collect();
    seen.sort_by_key(|m| m.map_or(usize::MAX, |x| x));
    seen.dedup();
    let mut x = (MARGIN + Y_LABELS) as i32;
    let y = 14;
    for m in seen {
        let colour = m.map_or(KEY_OFF, mode_colour);
        let name = m.map_or("key off".to_string(), |m| {
            trace.modes.get(m).cloned().unwrap_or_else(|| "?".into())
        });
        legend
            .draw(&Rectangle::new([(x, y), (x + 14, y + 14)], colour.filled()))
            .map_err(|e| err(&e))?;
        legend
            .draw(&Text::new(
                format!("mode {name}"),
                (x + 19, y + 7),
                TextStyle::from((FONT, 16).into_font()).pos(Pos::new(HPos::Left, VPos::Center)),
            ))
            .map_err(|e| err(&e))?;
        x += 19 + (name.chars().count() as i32 + 5) * 8 + 14;
    }
    root.present().map_err(|e| err(&e))?;
    Ok(())
}

/// Tick labels without trailing zeros: `0`, `0.5`, `1.25`.
fn trim_tick(x: f64) -> String {
    let s = format!("{x:.3}");
    let s = s.trim_end_matches('0').trim_end_matches('.');
    if s == "-0" { "0".into() } else { s.into() }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::sim::trace::{TraceEvent, TraceSample, Verdict};
    use crate::time::Time;

    fn sample(ms: u64, mode: usize, key_on: bool, opening: f64) -> TraceSample {
        TraceSample {
            at: Time::from_ms(ms),
            driver: 10.0,
            pedal: 10.0,
            target: opening,
            opening,
            duty: 0.0,
            mode,
            key_on,
        }
    }

    fn trace() -> Trace {
        Trace {
            scenario: "s<1>".into(),
            policy: "p".into(),
            length: Time::from_ms(400),
            sample_every: Time::from_ms(100),
            events: vec![TraceEvent {
                at: Time::from_ms(150),
                kind: EventKind::FaultSet { fault: 0 },
            }],
            samples: vec![
                sample(0, 0, true, 5.0),
                sample(100, 0, true, 20.0),
                sample(200, 1, true, 50.0),
                sample(300, 1, false, 0.0),
            ],
            expectations: vec![Verdict {
                text: "opening at most 30 % from 0 s to 0.3 s".into(),
                passed: false,
                decided_at: Time::from_ms(200),
                explanation: "x".into(),
            }],
            modes: vec!["normal".into(), "reduced".into()],
            faults: vec!["f".into()],
        }
    }

    #[test]
    fn bands_merge_runs_and_mark_key_off() {
        let b = bands(&trace());
        // Instants as the trace converts them (0.3 s is not exact in binary).
        let s = |ms| Time::from_ms(ms).as_secs_f64();
        assert_eq!(
            b,
            vec![
                Band {
                    from: s(0),
                    to: s(200),
                    mode: Some(0)
                },
                Band {
                    from: s(200),
                    to: s(300),
                    mode: Some(1)
                },
                Band {
                    from: s(300),
                    to: s(400),
                    mode: None
                },
            ]
        );
    }

    #[test]
    fn plot_escapes_names_and_marks_the_failed_window() {
        let exp = Expectation {
            text: "opening at most 30 % from 0 s to 0.3 s".into(),
            span: crate::lang::Span { start: 0, end: 0 },
            kind: ExpectKind::OpeningAtMost {
                x: 30.0,
                from: Time::ZERO,
                to: Time::from_ms(300),
            },
        };
        let s = svg(&trace(), &[exp]);
        assert!(s.starts_with("<svg"), "{}", &s[..s.len().min(200)]);
        assert!(s.contains("s&lt;1&gt;"));
        assert!(!s.contains("s<1>"));
        assert!(s.contains("at most 30 % FAILED"));
        assert!(s.contains("fault f set"));
        assert!(s.contains("mode reduced"));
        assert!(s.contains("mode key off"));
        assert!(s.contains("time [s]") && s.contains("position [%]"));
    }

    #[test]
    fn an_empty_trace_still_plots() {
        let mut t = trace();
        t.samples.clear();
        t.events.clear();
        t.length = Time::ZERO;
        let s = svg(&t, &[]);
        assert!(s.contains("</svg>"));
    }

    #[test]
    fn ticks_drop_trailing_zeros() {
        assert_eq!(trim_tick(0.0), "0");
        assert_eq!(trim_tick(0.5), "0.5");
        assert_eq!(trim_tick(1.25), "1.25");
        assert_eq!(trim_tick(2.0), "2");
    }
}
