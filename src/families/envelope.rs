//! What a family's harmonics say about their source: envelope slope, odd/even pattern and the
//! growth of line width with harmonic number (frequency dither).

use serde::Serialize;

/// One harmonic as measured.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Harmonic {
    pub n: u32,
    pub level_dbuv: f64,
    /// −6 dB width (Hz).
    pub width_hz: f64,
}

/// The shape of a family.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Envelope {
    /// Slope of the harmonic levels against log10(frequency), dB per decade. A trapezoid
    /// falls at −20 dB/decade between its two break points and at −40 dB/decade above.
    pub slope_db_per_decade: Option<f64>,
    /// Mean level of the odd harmonics minus that of the even ones (dB), when both are seen.
    pub odd_over_even_db: Option<f64>,
    /// Share of the even harmonic slots, between the first and last harmonic, that are seen.
    pub even_fraction: f64,
    /// Growth of the −6 dB width per harmonic number beyond a single line's width (Hz).
    pub width_growth_hz: Option<f64>,
    /// Peak-to-peak frequency spread as a percentage of the fundamental, when the widths grow.
    pub spread_pct: Option<f64>,
    /// Standard error of the width growth (Hz per harmonic number), from its fit's residuals.
    pub width_growth_se_hz: Option<f64>,
}

/// Least-squares slope and intercept of y on x; `None` for fewer than two distinct x.
///
/// # Formula
/// ```text
/// b = Σ(x − x̄)(y − ȳ) / Σ(x − x̄)²,  a = ȳ − b·x̄
/// ```
/// # Source
/// Ordinary least squares (any statistics text).
pub fn linear_fit(points: &[(f64, f64)]) -> Option<(f64, f64)> {
    let k = points.len() as f64;
    if points.len() < 2 {
        return None;
    }
    let (mx, my) = points
        .iter()
        .fold((0.0, 0.0), |(a, b), p| (a + p.0 / k, b + p.1 / k));
    let sxx: f64 = points.iter().map(|p| (p.0 - mx).powi(2)).sum();
    if sxx <= 0.0 {
        return None;
    }
    let sxy: f64 = points.iter().map(|p| (p.0 - mx) * (p.1 - my)).sum();
    let b = sxy / sxx;
    Some((b, my - b * mx))
}

/// The envelope of a family with fundamental `f0_hz` whose single line shows `line_width_hz`.
///
/// Dither: a line swept over a total spread Δ shows, at harmonic n, a width of about
/// n·Δ + (a fraction of) the RBW, so the excess width grows as n·Δ (common practice; the
/// spread-spectrum rule in METHODS §9 uses Δf_n = n·Δf). The growth counts only when it adds
/// at least a line width by the highest harmonic seen.
pub fn describe(harmonics: &[Harmonic], f0_hz: f64, line_width_hz: f64) -> Envelope {
    let levels: Vec<(f64, f64)> = harmonics
        .iter()
        .map(|h| ((f0_hz * f64::from(h.n)).log10(), h.level_dbuv))
        .collect();
    let slope_db_per_decade = linear_fit(&levels).map(|(b, _)| b);
    let mean = |odd: bool| {
        let v: Vec<f64> = harmonics
            .iter()
            .filter(|h| (h.n % 2 == 1) == odd)
            .map(|h| h.level_dbuv)
            .collect();
        (!v.is_empty()).then(|| v.iter().sum::<f64>() / v.len() as f64)
    };
    let odd_over_even_db = mean(true).zip(mean(false)).map(|(o, e)| o - e);
    let even_fraction = even_fraction(harmonics);
    let excess: Vec<(f64, f64)> = harmonics
        .iter()
        .map(|h| (f64::from(h.n), (h.width_hz - line_width_hz).max(0.0)))
        .collect();
    let line = linear_fit(&excess);
    let growth = line.map(|(b, _)| b);
    let top_n = harmonics.iter().map(|h| f64::from(h.n)).fold(0.0, f64::max);
    // the fitted growth must add at least a line width by the highest harmonic seen
    let dithered = growth.is_some_and(|g| g > 0.0 && g * top_n >= line_width_hz);
    let spread_pct = dithered.then(|| growth.unwrap_or(0.0) / f0_hz * 100.0);
    Envelope {
        slope_db_per_decade,
        odd_over_even_db,
        even_fraction,
        width_growth_hz: growth,
        spread_pct,
        width_growth_se_hz: line.and_then(|l| slope_se(&excess, l)),
    }
}

/// Standard error of a least-squares slope; `None` for fewer than three points.
///
/// # Formula
/// ```text
/// se(b) = √( Σ(y − a − b·x)² / (k − 2) / Σ(x − x̄)² )
/// ```
/// # Source
/// Ordinary least squares (any statistics text).
pub fn slope_se(points: &[(f64, f64)], (b, a): (f64, f64)) -> Option<f64> {
    let k = points.len();
    if k < 3 {
        return None;
    }
    let mx = points.iter().map(|p| p.0).sum::<f64>() / k as f64;
    let sxx: f64 = points.iter().map(|p| (p.0 - mx).powi(2)).sum();
    let rss: f64 = points.iter().map(|p| (p.1 - a - b * p.0).powi(2)).sum();
    (sxx > 0.0).then(|| (rss / (k - 2) as f64 / sxx).sqrt())
}

fn even_fraction(harmonics: &[Harmonic]) -> f64 {
    let (Some(lo), Some(hi)) = (
        harmonics.iter().map(|h| h.n).min(),
        harmonics.iter().map(|h| h.n).max(),
    ) else {
        return 0.0;
    };
    let slots = (lo..=hi).filter(|n| n % 2 == 0).count();
    if slots == 0 {
        return 0.0;
    }
    harmonics.iter().filter(|h| h.n % 2 == 0).count() as f64 / slots as f64
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::synth::trapezoid_harmonic_peak;

    #[test]
    fn trapezoid_slope_between_the_break_points_is_minus_20_db_per_decade() {
        // source: Paul's trapezoid spectrum: −20 dB/decade between 1/(πτ) and 1/(πτr).
        // 100 kHz, τ = 5 µs (corner 63.7 kHz), τr = 10 ns (corner 31.8 MHz); odd harmonics
        // only (50 % duty) so the sinc's nulls stay out of the fit.
        let h: Vec<Harmonic> = (0..40)
            .map(|k| {
                let n = 2 * k + 1;
                let c = trapezoid_harmonic_peak(n, 1.0, 10e-6, 0.5, 10e-9);
                Harmonic {
                    n,
                    level_dbuv: 20.0 * (c / 2f64.sqrt() / 1e-6).log10(),
                    width_hz: 9e3,
                }
            })
            .collect();
        let e = describe(&h, 100e3, 9e3);
        assert!(
            (e.slope_db_per_decade.unwrap() + 20.0).abs() < 0.5,
            "{:?}",
            e.slope_db_per_decade
        );
        assert_eq!(e.odd_over_even_db, None);
        assert_eq!(e.even_fraction, 0.0);
        assert_eq!(e.spread_pct, None);
    }

    #[test]
    fn width_growing_with_n_gives_the_spread() {
        // 1.2 MHz dithered over 4 % peak to peak: excess width n · 48 kHz
        let h: Vec<Harmonic> = (1..=6)
            .map(|n| Harmonic {
                n,
                level_dbuv: 50.0,
                width_hz: 9e3 + f64::from(n) * 48e3,
            })
            .collect();
        let e = describe(&h, 1.2e6, 9e3);
        assert!((e.spread_pct.unwrap() - 4.0).abs() < 1e-9);
        assert!(
            e.width_growth_se_hz.unwrap() < 1e-6,
            "an exact line has no scatter"
        );
        assert_eq!(e.even_fraction, 1.0);
    }

    #[test]
    fn slope_standard_error_of_a_known_scatter() {
        // source: derived by hand: b = Sxy/Sxx = 3/5 = 0.6, a = 1.5 − 0.6·1.5 = 0.6,
        // residuals (0.4, −1.2, 1.2, −0.4), RSS = 3.2, se = √(3.2/2/5) = 0.5657
        let pts = [(0.0, 1.0), (1.0, 0.0), (2.0, 3.0), (3.0, 2.0)];
        let l = linear_fit(&pts).unwrap();
        assert!(
            (l.0 - 0.6).abs() < 1e-12 && (l.1 - 0.6).abs() < 1e-12,
            "{l:?}"
        );
        assert!((slope_se(&pts, l).unwrap() - 0.5657).abs() < 1e-4);
    }

    #[test]
    fn least_squares_line() {
        assert_eq!(
            linear_fit(&[(0.0, 1.0), (1.0, 3.0), (2.0, 5.0)]),
            Some((2.0, 1.0))
        );
        assert_eq!(linear_fit(&[(1.0, 1.0), (1.0, 3.0)]), None);
    }
}
