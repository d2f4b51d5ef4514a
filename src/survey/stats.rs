//! Statistics of a survey: sample quantiles, spread and the confidence interval of a presence
//! ratio, all through statrs.
//!
//! ```
//! use spurhound::survey::stats::{presence_interval, quantile};
//! // source: from memory of published binomial tables, the exact 95 % interval of 5 in 10 is
//! // 0.187 to 0.813 (the closed-form edge cases are checked in the unit tests)
//! let (lo, hi) = presence_interval(5, 10, 0.95);
//! assert!((lo - 0.1871).abs() < 1e-4 && (hi - 0.8129).abs() < 1e-4);
//! assert_eq!(quantile(&[1.0, 2.0, 3.0], 0.5), Some(2.0));
//! ```

use statrs::distribution::{Beta, ContinuousCDF};
use statrs::statistics::{Data, OrderStatistics, Statistics};

/// The sample quantile `tau` of `values`, ignoring NaN; `None` when none is left.
///
/// # Formula
/// ```text
/// h = (n + 1/3)·τ + 1/3;  Q = x_(⌊h⌋) + (h − ⌊h⌋)·(x_(⌊h⌋+1) − x_(⌊h⌋)),
/// ```
/// x_(k) the k-th smallest, clamped to the smallest and largest value.
/// # Source
/// statrs `OrderStatistics::quantile`: the approximately median-unbiased definition (number 8
/// of the nine in common use by statistics packages).
pub fn quantile(values: &[f64], tau: f64) -> Option<f64> {
    let finite: Vec<f64> = values.iter().copied().filter(|v| !v.is_nan()).collect();
    if finite.is_empty() {
        return None;
    }
    let q = Data::new(finite).quantile(tau);
    q.is_finite().then_some(q)
}

/// Sample standard deviation of `values` (dB for levels), 0 for fewer than two.
///
/// # Formula
/// s = √(Σ(x − x̄)²/(n − 1))
/// # Source
/// statrs `Statistics::std_dev` (the unbiased sample variance).
pub fn spread(values: &[f64]) -> f64 {
    if values.len() < 2 {
        return 0.0;
    }
    let s = values.std_dev();
    if s.is_finite() { s } else { 0.0 }
}

/// The exact two-sided `confidence` interval of a presence ratio, `k` sweeps out of `n`.
///
/// # Formula
/// ```text
/// lower = B⁻¹(α/2; k, n − k + 1)      (0 when k = 0)
/// upper = B⁻¹(1 − α/2; k + 1, n − k)  (1 when k = n),   α = 1 − confidence
/// ```
/// B⁻¹(p; a, b) the quantile of the Beta(a, b) distribution.
/// # Source
/// The exact (equal-tailed) binomial interval, Biometrika 26 (1934), 404-413, written through
/// the Beta quantile by the identity between binomial tails and the regularised incomplete beta
/// function; statrs `Beta::inverse_cdf`. It never undercovers, at the price of being wide for
/// few sweeps.
/// Check values: 5 of 10 gives 0.187 to 0.813; 0 of n gives an upper bound 1 − (α/2)^(1/n).
pub fn presence_interval(k: usize, n: usize, confidence: f64) -> (f64, f64) {
    if n == 0 || k > n {
        return (0.0, 1.0);
    }
    let alpha = (1.0 - confidence).clamp(1e-12, 1.0);
    let (kf, nf) = (k as f64, n as f64);
    let lower = if k == 0 {
        0.0
    } else {
        Beta::new(kf, nf - kf + 1.0)
            .map(|b| b.inverse_cdf(alpha / 2.0))
            .unwrap_or(0.0)
    };
    let upper = if k == n {
        1.0
    } else {
        Beta::new(kf + 1.0, nf - kf)
            .map(|b| b.inverse_cdf(1.0 - alpha / 2.0))
            .unwrap_or(1.0)
    };
    (lower, upper)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn interval_edges_have_closed_forms() {
        // source: derived, with k = 0 the upper bound solves (1 − p)^n = α/2, with k = n the
        // lower bound solves p^n = α/2
        let (lo, hi) = presence_interval(0, 10, 0.95);
        assert_eq!(lo, 0.0);
        assert!((hi - (1.0 - 0.025f64.powf(0.1))).abs() < 1e-9);
        let (lo, hi) = presence_interval(10, 10, 0.95);
        assert!((lo - 0.025f64.powf(0.1)).abs() < 1e-9);
        assert_eq!(hi, 1.0);
    }

    #[test]
    fn quantile_follows_the_median_unbiased_rule() {
        // source: derived from the formula, n = 4, τ = 0.95: h = 4.3333·0.95 + 0.3333 = 4.45
        // → beyond the last order statistic, so the largest value
        assert_eq!(quantile(&[1.0, 2.0, 3.0, 4.0], 0.95), Some(4.0));
        // n = 20 values 1..20, τ = 0.95: h = 20.3333·0.95 + 0.3333 = 19.65 → 19 + 0.65·1
        let v: Vec<f64> = (1..=20).map(f64::from).collect();
        assert!((quantile(&v, 0.95).unwrap() - 19.65).abs() < 1e-9);
        assert_eq!(quantile(&[f64::NAN], 0.5), None);
        // source: derived, sample std of (45, 39) = √18
        assert!((spread(&[45.0, 39.0]) - 18f64.sqrt()).abs() < 1e-12);
    }
}
