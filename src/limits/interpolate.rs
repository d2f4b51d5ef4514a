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
    let tol = 1e-9 * freq_hz.abs();
    // first vertex at or above f
    let i = vertices.partition_point(|v| v.0 < freq_hz - tol);
    value_at(vertices, i, freq_hz, |k| {
        (vertices[k + 1].0 / vertices[k].0).log10()
    })
}

/// [`log_interp`] at each of `freqs_hz`, with the same values, for a whole trace: the vertex
/// is found by a pointer that moves forward while the frequencies ascend (a binary search when
/// one steps back) and each segment's log10(f2/f1) is taken once, so a trace costs one log10
/// per point.
pub fn log_interp_all<'a>(
    vertices: &[(f64, f64)],
    freqs_hz: impl IntoIterator<Item = &'a f64>,
) -> Vec<Option<f64>> {
    let spans: Vec<f64> = vertices
        .windows(2)
        .map(|w| (w[1].0 / w[0].0).log10())
        .collect();
    let mut i = 0usize;
    let mut last = f64::NEG_INFINITY;
    freqs_hz
        .into_iter()
        .map(|&f| {
            let below = f - 1e-9 * f.abs();
            if f < last {
                i = vertices.partition_point(|v| v.0 < below);
            } else {
                while vertices.get(i).is_some_and(|v| v.0 < below) {
                    i += 1;
                }
            }
            last = f;
            value_at(vertices, i, f, |k| spans[k])
        })
        .collect()
}

/// The value at `freq_hz` given `i`, the first vertex at or above it (within 1e-9·f), and
/// `span(k)` = log10(f_{k+1}/f_k) of the segment that starts at vertex k.
fn value_at(
    vertices: &[(f64, f64)],
    i: usize,
    freq_hz: f64,
    span: impl Fn(usize) -> f64,
) -> Option<f64> {
    let (first, last) = (vertices.first()?, vertices.last()?);
    let tol = 1e-9 * freq_hz.abs();
    if !(freq_hz >= first.0 - tol && freq_hz <= last.0 + tol) {
        return None;
    }
    let at = vertices.get(i)?;
    if (at.0 - freq_hz).abs() <= tol {
        // on a vertex: the lowest value among the vertices at this frequency
        let lowest = vertices[i..]
            .iter()
            .take_while(|v| (v.0 - freq_hz).abs() <= tol)
            .map(|v| v.1)
            .fold(f64::INFINITY, f64::min);
        return Some(lowest);
    }
    let k = i.checked_sub(1)?;
    let before = vertices.get(k)?;
    if before.1 == at.1 {
        // a flat segment (most of a limit line): no logarithm to take
        return Some(at.1);
    }
    let t = (freq_hz / before.0).log10() / span(k);
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

    #[test]
    fn a_whole_trace_gets_the_pointwise_values() {
        // a step, a vertex hit exactly, points outside on both sides, and a step back
        let v = [
            (150e3, 66.0),
            (500e3, 56.0),
            (5e6, 56.0),
            (5e6, 60.0),
            (30e6, 60.0),
        ];
        let mut freqs: Vec<f64> = (0..2000).map(|k| 100e3 * 1.0021f64.powi(k)).collect();
        freqs.extend([500e3, 5e6, 5e6, 40e6, 1e6, 150e3]);
        let all = log_interp_all(&v, &freqs);
        for (f, got) in freqs.iter().zip(&all) {
            assert_eq!(*got, log_interp(&v, *f), "at {f} Hz");
        }
        assert!(all.iter().any(Option::is_none) && all.iter().any(Option::is_some));
    }
}
