//! The SVG plot: log-frequency axis, the DUT trace, the ambient traces, the limit lines and the
//! worst point.

use super::RenderError;
use crate::analysis::{Analysis, fmt_hz};
use crate::scan::Scan;
use plotters::prelude::*;

/// Most points drawn per trace; longer traces are reduced by keeping the maximum of each
/// log-frequency bucket, so no peak disappears from the plot.
pub const MAX_DRAWN: usize = 3000;

const TRACE: RGBColor = RGBColor(22, 72, 130);
const AMBIENT: RGBColor = RGBColor(120, 120, 120);
const LIMITS: [RGBColor; 3] = [
    RGBColor(196, 40, 28),
    RGBColor(225, 130, 0),
    RGBColor(120, 40, 150),
];
const WORST: RGBColor = RGBColor(196, 40, 28);
/// One colour per family, by rank.
const FAMILIES: [RGBColor; 8] = [
    RGBColor(214, 39, 40),
    RGBColor(31, 119, 180),
    RGBColor(44, 160, 44),
    RGBColor(148, 103, 189),
    RGBColor(255, 127, 14),
    RGBColor(23, 190, 207),
    RGBColor(140, 86, 75),
    RGBColor(188, 189, 34),
];
const HUMP: RGBColor = RGBColor(255, 200, 120);

/// The plot as SVG text.
///
/// # Errors
/// [`RenderError::Plot`] when drawing fails.
pub fn render_svg(a: &Analysis) -> Result<String, RenderError> {
    let mut buf = String::new();
    draw(a, &mut buf).map_err(|reason| RenderError::Plot { reason })?;
    Ok(buf)
}

fn draw(a: &Analysis, buf: &mut String) -> Result<(), String> {
    let err = |e: &dyn std::fmt::Display| e.to_string();
    let (x0, x1) = a.scan.span_hz();
    let (y0, y1) = level_range(a);
    let unit = a.scan.meta.quantity.unit();
    let root = SVGBackend::with_string(buf, (1100, 600)).into_drawing_area();
    root.fill(&WHITE).map_err(|e| err(&e))?;
    let title = a
        .scan
        .meta
        .title
        .clone()
        .or_else(|| a.scan.meta.source.clone())
        .unwrap_or_else(|| "scan".into());
    let mut chart = ChartBuilder::on(&root)
        .caption(
            format!("{title} (pre-compliance estimate)"),
            ("sans-serif", 20),
        )
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
        .y_desc(unit)
        .x_label_formatter(&|x| fmt_hz(*x))
        .light_line_style(RGBColor(235, 235, 235))
        .draw()
        .map_err(|e| err(&e))?;
    chart
        .draw_series(LineSeries::new(reduce(&a.scan), TRACE.stroke_width(1)))
        .map_err(|e| err(&e))?
        .label("DUT")
        .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 18, y)], TRACE));
    for h in &a.humps {
        chart
            .draw_series(std::iter::once(Rectangle::new(
                [(h.start_hz.max(x0), y0), (h.stop_hz.min(x1), y1)],
                HUMP.mix(0.35).filled(),
            )))
            .map_err(|e| err(&e))?;
    }
    for amb in &a.ambient {
        chart
            .draw_series(LineSeries::new(
                reduce(&amb.scan),
                AMBIENT.mix(0.85).stroke_width(1),
            ))
            .map_err(|e| err(&e))?
            .label(format!("ambient: {}", amb.scan.label()))
            .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 18, y)], AMBIENT));
    }
    for (i, r) in a.limits.iter().enumerate() {
        let colour = LIMITS[i % LIMITS.len()];
        let Some(pts) = clip_limit(&r.limit.vertices, x0, x1) else {
            continue;
        };
        chart
            .draw_series(LineSeries::new(pts, colour.stroke_width(2)))
            .map_err(|e| err(&e))?
            .label(format!("{} ({})", r.limit.name, r.limit.detector))
            .legend(move |(x, y)| {
                PathElement::new(vec![(x, y), (x + 18, y)], colour.stroke_width(2))
            });
    }
    let mut families: Vec<_> = a.families.iter().collect();
    families.sort_by_key(|f| f.rank);
    for (k, fam) in families.iter().enumerate() {
        let colour = FAMILIES[k % FAMILIES.len()];
        let marks: Vec<(f64, f64)> = a
            .peaks
            .iter()
            .filter(|p| p.family == Some(fam.id))
            .map(|p| (p.freq_hz, p.level_dbuv))
            .collect();
        let label = format!(
            "#{} {} {}",
            fam.rank,
            crate::report::text::kind_name(fam.kind),
            fmt_hz(fam.fundamental_hz)
        );
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
    if let (Some(f), Some(m)) = (a.verdict.worst_freq_hz, a.verdict.worst_margin_db) {
        let level = level_at(&a.scan, f);
        chart
            .draw_series(std::iter::once(Circle::new(
                (f, level),
                6,
                WORST.stroke_width(2),
            )))
            .map_err(|e| err(&e))?;
        let label = format!("worst {m:+.1} dB at {}", fmt_hz(f));
        chart
            .draw_series(std::iter::once(Text::new(
                label,
                (f, level + (y1 - y0) * 0.04),
                ("sans-serif", 14).into_font().color(&WORST),
            )))
            .map_err(|e| err(&e))?;
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

/// The limit's polyline inside [x0, x1], with its ends interpolated at the plot edges.
pub(crate) fn clip_limit(vertices: &[(f64, f64)], x0: f64, x1: f64) -> Option<Vec<(f64, f64)>> {
    let lim = |f: f64| crate::limits::interpolate::log_interp(vertices, f);
    let (first, last) = (vertices.first()?.0, vertices.last()?.0);
    let (a, b) = (x0.max(first), x1.min(last));
    if a >= b {
        return None;
    }
    let mut pts = vec![(a, lim(a)?)];
    pts.extend(vertices.iter().copied().filter(|&(f, _)| f > a && f < b));
    pts.push((b, lim(b)?));
    Some(pts)
}

/// Axis labels at 1, 2 and 5 times the powers of ten inside [x0, x1].
pub(crate) fn key_points(x0: f64, x1: f64) -> Vec<f64> {
    let mut out = Vec::new();
    let mut decade = 10f64.powf(x0.log10().floor());
    while decade <= x1 {
        out.extend(
            [1.0, 2.0, 5.0]
                .iter()
                .map(|m| m * decade)
                .filter(|&f| f >= x0 && f <= x1),
        );
        decade *= 10.0;
    }
    out
}

fn level_at(scan: &Scan, freq_hz: f64) -> f64 {
    let i = scan.freq_hz.iter().position(|&f| f >= freq_hz).unwrap_or(0);
    scan.level_dbuv.get(i).copied().unwrap_or(0.0)
}

fn level_range(a: &Analysis) -> (f64, f64) {
    let mut lo = f64::INFINITY;
    let mut hi = f64::NEG_INFINITY;
    let traces = std::iter::once(&a.scan).chain(a.ambient.iter().map(|x| &x.scan));
    for s in traces {
        for &l in s.level_dbuv.iter() {
            lo = lo.min(l);
            hi = hi.max(l);
        }
    }
    for r in &a.limits {
        for &(_, l) in &r.limit.vertices {
            hi = hi.max(l);
        }
    }
    (
        (lo / 10.0).floor() * 10.0 - 5.0,
        (hi / 10.0).ceil() * 10.0 + 5.0,
    )
}

/// At most [`MAX_DRAWN`] points: the maximum of each equal log-frequency bucket.
pub fn reduce(scan: &Scan) -> Vec<(f64, f64)> {
    reduce_xy(&scan.freq_hz.to_vec(), &scan.level_dbuv.to_vec())
}

/// [`reduce`] for a trace given as two slices; NaN levels are left out.
pub fn reduce_xy(freq_hz: &[f64], level_dbuv: &[f64]) -> Vec<(f64, f64)> {
    let pts = freq_hz
        .iter()
        .copied()
        .zip(level_dbuv.iter().copied())
        .filter(|p| p.1.is_finite());
    let n = freq_hz.len();
    if n <= MAX_DRAWN {
        return pts.collect();
    }
    let (f0, f1) = (freq_hz[0], freq_hz[n - 1]);
    let span = (f1 / f0).ln();
    let mut out: Vec<(f64, f64)> = Vec::with_capacity(MAX_DRAWN);
    let mut bucket = usize::MAX;
    for (f, l) in pts {
        let b = (((f / f0).ln() / span) * (MAX_DRAWN - 1) as f64) as usize;
        match out.last_mut() {
            Some(last) if b == bucket => {
                if l > last.1 {
                    *last = (f, l);
                }
            }
            _ => {
                out.push((f, l));
                bucket = b;
            }
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::scan::ScanMeta;

    #[test]
    fn reduction_keeps_the_maximum() {
        let n = 50_000;
        let f: Vec<f64> = (0..n).map(|i| 150e3 + i as f64 * 10.0).collect();
        let mut l = vec![10.0; n];
        l[31_234] = 80.0;
        let scan = Scan::new(f, l, ScanMeta::default()).unwrap();
        let r = reduce(&scan);
        assert!(r.len() <= MAX_DRAWN);
        assert!(r.iter().any(|p| p.1 == 80.0));
    }
}
