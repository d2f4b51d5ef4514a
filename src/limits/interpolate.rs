//! Piecewise interpolation linear in log10(f), shared by limit lines and transducer tables.

/// Value at `freq_hz` of a table of `(freq_hz, value)` vertices, linear in log10(f) between
/// neighbours. Two vertices at one frequency form a step; at the step the lower value applies.
/// Outside the table there is no value.
///
/// # Formula
/// ```text
/// v(f) = v1 + (v2 − v1)·log10(f/f1)/log10(f2/f1)
/// ```
/// # Source
/// The form limit tables take ("decreasing linearly with the logarithm of the frequency",
/// CISPR 32 and 47 CFR 15.107 table notes); "the lower limit applies at the transition
/// frequencies" (CISPR 22/32 table notes), "the tighter limit applies at the band edges"
/// (47 CFR 15.109(c)).
pub fn log_interp(vertices: &[(f64, f64)], freq_hz: f64) -> Option<f64> {
    let (first, last) = (vertices.first()?, vertices.last()?);
    let tol = 1e-9 * freq_hz.abs();
    if !(freq_hz >= first.0 - tol && freq_hz <= last.0 + tol) {
        return None;
    }
    // First vertex at or above f.
    let i = vertices.partition_point(|v| v.0 < freq_hz - tol);
    let at = vertices.get(i)?;
    if (at.0 - freq_hz).abs() <= tol {
        // On a vertex: the lowest value among the vertices at this frequency.
        let lowest = vertices[i..]
            .iter()
            .take_while(|v| (v.0 - freq_hz).abs() <= tol)
            .map(|v| v.1)
            .fold(f64::INFINITY, f64::min);
        return Some(lowest);
    }
    let before = vertices.get(i.checked_sub(1)?)?;
    let t = (freq_hz / before.0).log10() / (at.0 / before.0).log10();
    Some(before.1 + (at.1 - before.1) * t)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn log_linear_between_vertices() {
        let v = [(150e3, 66.0), (500e3, 56.0)];
        // source: derived, 66 − 10·log10(0.25/0.15)/log10(0.5/0.15) = 61.757
        let expected = 66.0 - 10.0 * (0.25f64 / 0.15).log10() / (0.5f64 / 0.15).log10();
        assert!((log_interp(&v, 250e3).unwrap() - expected).abs() < 1e-12);
        assert_eq!(log_interp(&v, 100e3), None);
        assert_eq!(log_interp(&v, 600e3), None);
    }

    #[test]
    fn lower_value_at_a_step() {
        let v = [(1.0, 10.0), (2.0, 10.0), (2.0, 5.0), (3.0, 5.0)];
        assert_eq!(log_interp(&v, 2.0), Some(5.0));
        let v = [(1.0, 5.0), (2.0, 5.0), (2.0, 10.0), (3.0, 10.0)];
        assert_eq!(log_interp(&v, 2.0), Some(5.0));
        assert_eq!(log_interp(&v, 2.0001), Some(10.0));
    }
}
