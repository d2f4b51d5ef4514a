//! The fundamental of a family by weighted least squares through the origin.

/// One member: harmonic number, measured frequency (Hz) and its standard uncertainty (Hz).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Member {
    pub n: u32,
    pub freq_hz: f64,
    pub sigma_hz: f64,
}

/// Fundamental and its standard uncertainty from the members.
///
/// # Formula
/// ```text
/// f0 = Σ w·n·f / Σ w·n²,  w = 1/σ²
/// s² = Σ w·(f − n·f0)² / (K − 1)          (reduced χ², K members)
/// σ_f0 = √(max(s², 1) / Σ w·n²)
/// ```
/// # Source
/// Weighted least squares for the model f = n·f0 with no intercept (regression through the
/// origin; any statistics text, e.g. the normal equation of a one-parameter linear model). The
/// uncertainty takes the larger of the stated σ and the scatter, so a family whose lines sit
/// closer than their stated uncertainty is not credited with more precision than the
/// measurement has.
///
/// Returns `None` for no members or non-positive uncertainties.
pub fn fit_fundamental(members: &[Member]) -> Option<(f64, f64)> {
    fit(members).map(|f| (f.fundamental_hz, f.sigma_hz))
}

/// A fundamental with both of its uncertainties.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Fit {
    pub fundamental_hz: f64,
    /// √(max(s², 1) / Σ w·n²): what is reported.
    pub sigma_hz: f64,
    /// √(1 / Σ w·n²): from the stated uncertainties alone (used to place the harmonics).
    pub stated_sigma_hz: f64,
}

/// As [`fit_fundamental`], with both uncertainties.
pub fn fit(members: &[Member]) -> Option<Fit> {
    if members.is_empty()
        || members
            .iter()
            .any(|m| m.sigma_hz.is_nan() || m.sigma_hz <= 0.0)
    {
        return None;
    }
    let w = |m: &Member| 1.0 / (m.sigma_hz * m.sigma_hz);
    let snn: f64 = members.iter().map(|m| w(m) * f64::from(m.n).powi(2)).sum();
    let snf: f64 = members
        .iter()
        .map(|m| w(m) * f64::from(m.n) * m.freq_hz)
        .sum();
    let f0 = snf / snn;
    let k = members.len();
    let chi2: f64 = members
        .iter()
        .map(|m| w(m) * (m.freq_hz - f64::from(m.n) * f0).powi(2))
        .sum();
    let reduced = if k > 1 { chi2 / (k - 1) as f64 } else { 1.0 };
    Some(Fit {
        fundamental_hz: f0,
        sigma_hz: (reduced.max(1.0) / snn).sqrt(),
        stated_sigma_hz: (1.0 / snn).sqrt(),
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn equal_weights_reduce_to_the_textbook_slope_through_the_origin() {
        // source: least squares through the origin, b = Σxy / Σx² (equal weights)
        let data = [
            (3u32, 1_200_150.0),
            (4, 1_599_900.0),
            (5, 2_000_300.0),
            (7, 2_799_800.0),
        ];
        let members: Vec<Member> = data
            .iter()
            .map(|&(n, f)| Member {
                n,
                freq_hz: f,
                sigma_hz: 500.0,
            })
            .collect();
        let (f0, sigma) = fit_fundamental(&members).unwrap();
        let sxy: f64 = data.iter().map(|&(n, f)| f64::from(n) * f).sum();
        let sxx: f64 = data.iter().map(|&(n, _)| f64::from(n).powi(2)).sum();
        assert!((f0 - sxy / sxx).abs() < 1e-6);
        // residual standard error of the slope: √(Σr²/(K−1) / Σx²) when it exceeds σ/√Σx²
        let r2: f64 = data
            .iter()
            .map(|&(n, f)| (f - f64::from(n) * f0).powi(2))
            .sum();
        let scatter = (r2 / 3.0 / sxx).sqrt();
        let stated = 500.0 / sxx.sqrt();
        assert!((sigma - scatter.max(stated)).abs() < 1e-9);
    }

    #[test]
    fn weights_favour_the_precise_members() {
        let members = [
            Member {
                n: 1,
                freq_hz: 100_000.0,
                sigma_hz: 10.0,
            },
            Member {
                n: 2,
                freq_hz: 203_000.0,
                sigma_hz: 10_000.0,
            },
        ];
        let (f0, _) = fit_fundamental(&members).unwrap();
        assert!((f0 - 100_000.0).abs() < 5.0, "{f0}");
    }

    #[test]
    fn refuses_empty_or_zero_uncertainty() {
        assert_eq!(fit_fundamental(&[]), None);
        assert_eq!(
            fit_fundamental(&[Member {
                n: 1,
                freq_hz: 1.0,
                sigma_hz: 0.0
            }]),
            None
        );
    }
}
