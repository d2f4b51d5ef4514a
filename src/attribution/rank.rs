//! Ranking: the DUT family to fix first is rank 1. DUT and mixed families come before ambient
//! ones; within each group the worst margin leads, then the number of points over the limit,
//! then the confidence.

use crate::analysis::{Family, Origin};

/// Assigns `rank` (1 = first to fix) to every family in place.
pub fn rank(families: &mut [Family]) {
    let mut order: Vec<usize> = (0..families.len()).collect();
    order.sort_by(|&a, &b| {
        let (x, y) = (&families[a], &families[b]);
        let ambient = |f: &Family| f.origin == Origin::Ambient;
        ambient(x)
            .cmp(&ambient(y))
            .then_with(|| {
                let m = |f: &Family| f.worst_margin_db.unwrap_or(f64::INFINITY);
                m(x).total_cmp(&m(y))
            })
            .then_with(|| y.points_over.cmp(&x.points_over))
            .then_with(|| y.confidence.total_cmp(&x.confidence))
    });
    for (r, &i) in order.iter().enumerate() {
        families[i].rank = r + 1;
    }
}

/// Confidence that a family is real, 0 to 1: the share of its expected harmonics that are
/// seen, times a saturating term in their number (three harmonics give 0.53, ten give 0.92).
///
/// # Formula
/// ```text
/// c = K/(K + misses) · (1 − exp(−K/4))
/// ```
pub fn confidence(seen: usize, misses: usize) -> f64 {
    let k = seen as f64;
    if seen == 0 {
        return 0.0;
    }
    k / (k + misses as f64) * (1.0 - (-k / 4.0).exp())
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::analysis::Kind;

    fn fam(id: usize, origin: Origin, margin: Option<f64>) -> Family {
        Family {
            id,
            fundamental_hz: 1e5,
            fundamental_sigma_hz: 1.0,
            harmonics: vec![1, 2, 3],
            kind: Kind::Switching,
            origin,
            worst_margin_db: margin,
            rank: 0,
            remedies: vec![],
            points_over: usize::from(margin.is_some_and(|m| m < 0.0)),
            confidence: 0.5,
            ..Family::default()
        }
    }

    #[test]
    fn ambient_never_outranks_the_dut() {
        let mut f = vec![
            fam(1, Origin::Ambient, Some(-20.0)),
            fam(2, Origin::Dut, Some(3.0)),
            fam(3, Origin::Dut, Some(-5.0)),
        ];
        rank(&mut f);
        assert_eq!((f[0].rank, f[1].rank, f[2].rank), (3, 2, 1));
    }

    #[test]
    fn confidence_grows_with_harmonics_and_falls_with_misses() {
        assert!((confidence(3, 0) - (1.0 - (-0.75f64).exp())).abs() < 1e-12);
        assert!(confidence(10, 0) > confidence(3, 0));
        assert!(confidence(6, 3) < confidence(6, 0));
    }
}
