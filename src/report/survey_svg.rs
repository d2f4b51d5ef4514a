//! The survey plot: log-frequency axis, the ambient median and 95th percentile over the sweeps,
//! the limit and the headroom line under it, the ranges where a DUT cannot be judged shaded,
//! and every emitter marked at its 95th percentile by class.

use super::RenderError;
use super::svg::{clip_limit, key_points, reduce_xy};
use crate::analysis::fmt_hz;
use crate::survey::{Emitter, Presence, Survey};
use plotters::prelude::*;

const MEDIAN: RGBColor = RGBColor(150, 150, 150);
const P95: RGBColor = RGBColor(22, 72, 130);
const LIMIT: RGBColor = RGBColor(196, 40, 28);
const BLOCKED: RGBColor = RGBColor(240, 170, 160);
const HUMP: RGBColor = RGBColor(255, 200, 120);
const PERSISTENT: RGBColor = RGBColor(31, 119, 180);
const INTERMITTENT: RGBColor = RGBColor(255, 127, 14);
const ONE_OFF: RGBColor = RGBColor(148, 103, 189);

/// The plot as SVG text.
///
/// # Errors
/// [`RenderError::Plot`] when drawing fails.
pub fn render_survey_svg(s: &Survey) -> Result<String, RenderError> {
    let mut buf = String::new();
    draw(s, &mut buf).map_err(|reason| RenderError::Plot { reason })?;
    Ok(buf)
}

fn err(e: &dyn std::fmt::Display) -> String {
    e.to_string()
}

fn draw(s: &Survey, buf: &mut String) -> Result<(), String> {
    let p = &s.profile;
    let (Some(&x0), Some(&x1)) = (p.freq_hz.first(), p.freq_hz.last()) else {
        return Err("no points to draw".into());
    };
    let (y0, y1) = level_range(s);
    let root = SVGBackend::with_string(buf, (1100, 600)).into_drawing_area();
    root.fill(&WHITE).map_err(|e| err(&e))?;
    let caption = format!(
        "ambient survey, {} sweeps (pre-compliance estimate)",
        s.sweeps.len()
    );
    let mut chart = ChartBuilder::on(&root)
        .caption(caption, ("sans-serif", 20))
        .margin(12)
        .x_label_area_size(44)
        .y_label_area_size(56)
        .build_cartesian_2d(
            (x0..x1).log_scale().with_key_points(key_points(x0, x1)),
            y0..y1,
        )
        .map_err(|e| err(&e))?;
    chart
        .configure_mesh()
        .x_desc("frequency")
        .y_desc(s.quantity.unit())
        .x_label_formatter(&|x| fmt_hz(*x))
        .light_line_style(RGBColor(235, 235, 235))
        .draw()
        .map_err(|e| err(&e))?;
    for b in &s.blocked {
        chart
            .draw_series(std::iter::once(Rectangle::new(
                [
                    (b.start_hz.max(x0), y0),
                    (b.stop_hz.min(x1).max(b.start_hz * 1.0005), y1),
                ],
                BLOCKED.mix(0.45).filled(),
            )))
            .map_err(|e| err(&e))?;
    }
    for e in s.emitters.iter().filter(|e| e.start_hz.is_some()) {
        let (a, b) = (e.start_hz.unwrap_or(x0), e.stop_hz.unwrap_or(x1));
        chart
            .draw_series(std::iter::once(Rectangle::new(
                [(a.max(x0), y0), (b.min(x1), y1)],
                HUMP.mix(0.3).filled(),
            )))
            .map_err(|e| err(&e))?;
    }
    chart
        .draw_series(LineSeries::new(
            reduce_xy(&p.freq_hz, &p.median_dbuv),
            MEDIAN.stroke_width(1),
        ))
        .map_err(|e| err(&e))?
        .label("ambient median")
        .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 18, y)], MEDIAN));
    chart
        .draw_series(LineSeries::new(
            reduce_xy(&p.freq_hz, &p.p95_dbuv),
            P95.stroke_width(1),
        ))
        .map_err(|e| err(&e))?
        .label(format!(
            "ambient {:.0}th percentile",
            100.0 * s.params.level_quantile
        ))
        .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 18, y)], P95));
    if let Some(l) = &s.limit {
        if let Some(pts) = clip_limit(&l.vertices, x0, x1) {
            let h = s.params.headroom_db;
            let under: Vec<(f64, f64)> = pts.iter().map(|&(f, v)| (f, v - h)).collect();
            chart
                .draw_series(LineSeries::new(pts, LIMIT.stroke_width(2)))
                .map_err(|e| err(&e))?
                .label(format!("{} ({})", l.name, l.detector))
                .legend(|(x, y)| {
                    PathElement::new(vec![(x, y), (x + 18, y)], LIMIT.stroke_width(2))
                });
            chart
                .draw_series(LineSeries::new(under, LIMIT.mix(0.5).stroke_width(1)))
                .map_err(|e| err(&e))?
                .label(format!("limit - {h} dB (headroom)"))
                .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 18, y)], LIMIT.mix(0.5)));
        }
    }
    for (class, colour, label) in [
        (Presence::Persistent, PERSISTENT, "persistent emitter"),
        (Presence::Intermittent, INTERMITTENT, "intermittent emitter"),
        (Presence::OneOff, ONE_OFF, "one-off emitter"),
    ] {
        let marks: Vec<(f64, f64)> = s
            .emitters
            .iter()
            .filter(|e| e.class == class)
            .flat_map(marks_of)
            .filter(|m| m.1.is_finite())
            .collect();
        if marks.is_empty() {
            continue;
        }
        chart
            .draw_series(
                marks
                    .into_iter()
                    .map(move |m| TriangleMarker::new(m, 4, colour.filled())),
            )
            .map_err(|e| err(&e))?
            .label(label)
            .legend(move |(x, y)| TriangleMarker::new((x + 9, y), 4, colour.filled()));
    }
    for e in &s.emitters {
        if e.p95_dbuv.is_finite() {
            chart
                .draw_series(std::iter::once(Text::new(
                    format!("#{}", e.id),
                    (e.freq_hz, e.p95_dbuv + (y1 - y0) * 0.02),
                    ("sans-serif", 11).into_font(),
                )))
                .map_err(|e| err(&e))?;
        }
    }
    chart
        .configure_series_labels()
        .position(SeriesLabelPosition::UpperRight)
        .background_style(WHITE.mix(0.85))
        .border_style(RGBColor(180, 180, 180))
        .draw()
        .map_err(|e| err(&e))?;
    root.present().map_err(|e| err(&e))?;
    Ok(())
}

/// Where an emitter is marked: each line of a comb, else its frequency, at the 95th percentile.
fn marks_of(e: &Emitter) -> Vec<(f64, f64)> {
    if e.lines.is_empty() {
        vec![(e.freq_hz, e.p95_dbuv)]
    } else {
        e.lines.iter().map(|l| (l.freq_hz, l.p95_dbuv)).collect()
    }
}

fn level_range(s: &Survey) -> (f64, f64) {
    let p = &s.profile;
    let mut lo = f64::INFINITY;
    let mut hi = f64::NEG_INFINITY;
    for &v in p.median_dbuv.iter().chain(&p.p95_dbuv) {
        if v.is_finite() {
            lo = lo.min(v);
            hi = hi.max(v);
        }
    }
    for l in p.limit_dbuv.iter().flatten() {
        hi = hi.max(*l);
    }
    if !lo.is_finite() || !hi.is_finite() {
        return (0.0, 100.0);
    }
    (
        (lo / 10.0).floor() * 10.0 - 5.0,
        (hi / 10.0).ceil() * 10.0 + 5.0,
    )
}
