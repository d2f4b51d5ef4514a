//! Association of detections across sweeps.
//!
//! Lines are clustered with DBSCAN (linfa-clustering) on a warped log-frequency axis: the
//! radius that may separate two detections of one emitter is a share of the RBW (or the display
//! step, where that is coarser) plus a relative drift, so it is constant in Hz at low frequency
//! and relative at high frequency. DBSCAN takes one radius; the axis is warped so that this
//! radius is one unit everywhere. Humps, which are regions, are associated by the overlap of
//! their extents.
//!
//! ```
//! use spurhound::survey::cluster::{Axis, associate};
//! let grid: Vec<f64> = (0..1000).map(|i| 150e3 + i as f64 * 4.5e3).collect();
//! let axis = Axis::new(&grid, Some(9e3), 0.5, 200e-6);
//! // two carriers 9 kHz apart, each seen three times within ±1 kHz
//! let f = [909e3, 909.8e3, 908.6e3, 918e3, 918.9e3, 917.5e3];
//! let u: Vec<f64> = f.iter().map(|&x| axis.at(x)).collect();
//! let clusters = associate(&u);
//! assert_eq!(clusters, vec![vec![0, 1, 2], vec![3, 4, 5]]);
//! ```

use linfa::traits::Transformer;
use linfa_clustering::Dbscan;
use ndarray::Array2;

/// A frequency axis on which the association radius is one unit.
#[derive(Debug, Clone, PartialEq)]
pub struct Axis {
    freq_hz: Vec<f64>,
    u: Vec<f64>,
    /// Radius at the first and last grid point, Hz (for extrapolation).
    end_radius_hz: (f64, f64),
}

impl Axis {
    /// The axis of a display grid.
    ///
    /// # Formula
    /// ```text
    /// r(f) = k·max(B, s(f)) + δ·f,     u(f) = ∫ df / r(f)
    /// ```
    /// B the RBW (twice the step when unknown), s the local display step, k = `radius_rbw`,
    /// δ = `drift`; the integral is the trapezoid rule over the grid. For a log-spaced grid
    /// (s ∝ f) u is proportional to log f.
    /// # Source
    /// Common practice: a line is placed within half an RBW or half a step of its frequency on
    /// each sweep (METHODS §6, §9); oscillators drift by a relative amount.
    pub fn new(freq_hz: &[f64], rbw_hz: Option<f64>, radius_rbw: f64, drift: f64) -> Axis {
        let n = freq_hz.len();
        let step = |i: usize| -> f64 {
            match n {
                0 | 1 => 1.0,
                _ => {
                    let j = i.min(n - 2);
                    freq_hz[j + 1] - freq_hz[j]
                }
            }
        };
        let radius = |i: usize| -> f64 {
            let s = step(i);
            let b = rbw_hz.filter(|r| *r > 0.0).unwrap_or(2.0 * s);
            (radius_rbw * b.max(s) + drift * freq_hz[i]).max(1e-9)
        };
        let mut u = Vec::with_capacity(n);
        let mut acc = 0.0;
        for i in 0..n {
            if i > 0 {
                let df = freq_hz[i] - freq_hz[i - 1];
                acc += df * 0.5 * (1.0 / radius(i - 1) + 1.0 / radius(i));
            }
            u.push(acc);
        }
        let end_radius_hz = if n == 0 {
            (1.0, 1.0)
        } else {
            (radius(0), radius(n - 1))
        };
        Axis {
            freq_hz: freq_hz.to_vec(),
            u,
            end_radius_hz,
        }
    }

    /// The coordinate of `freq_hz`: linear between grid points, and at the end radius beyond.
    pub fn at(&self, freq_hz: f64) -> f64 {
        let f = &self.freq_hz;
        let (Some(&first), Some(&last)) = (f.first(), f.last()) else {
            return 0.0;
        };
        if freq_hz <= first {
            return (freq_hz - first) / self.end_radius_hz.0;
        }
        let end = self.u.last().copied().unwrap_or(0.0);
        if freq_hz >= last {
            return end + (freq_hz - last) / self.end_radius_hz.1;
        }
        let i = f.partition_point(|&x| x <= freq_hz).clamp(1, f.len() - 1);
        let t = (freq_hz - f[i - 1]) / (f[i] - f[i - 1]);
        self.u[i - 1] + t * (self.u[i] - self.u[i - 1])
    }
}

/// DBSCAN labels of 1-D coordinates with a radius of one unit and `min_points` (at least 2, the
/// point itself counted); `None` for noise. Non-finite coordinates are noise.
pub fn dbscan_labels(coords: &[f64], min_points: usize) -> Vec<Option<usize>> {
    let keep: Vec<usize> = (0..coords.len())
        .filter(|&i| coords[i].is_finite())
        .collect();
    let mut labels = vec![None; coords.len()];
    if keep.is_empty() {
        return labels;
    }
    let data: Vec<f64> = keep.iter().map(|&i| coords[i]).collect();
    let Ok(obs) = Array2::from_shape_vec((data.len(), 1), data) else {
        return labels;
    };
    let params = Dbscan::params(min_points.max(2)).tolerance(1.0);
    let Ok(found) = params.transform(&obs) else {
        return labels;
    };
    for (k, &i) in keep.iter().enumerate() {
        labels[i] = found.get(k).copied().flatten();
    }
    labels
}

/// Groups of indices of `coords` (radius one unit): DBSCAN clusters with two points or more,
/// and every noise point as a group of its own (a detection seen once is an emitter seen once,
/// not nothing). Groups are sorted by their mean coordinate, members ascending.
pub fn associate(coords: &[f64]) -> Vec<Vec<usize>> {
    let labels = dbscan_labels(coords, 2);
    let count = labels.iter().flatten().max().map_or(0, |m| m + 1);
    let mut groups: Vec<Vec<usize>> = vec![Vec::new(); count];
    for (i, l) in labels.iter().enumerate() {
        match l {
            Some(c) => groups[*c].push(i),
            None if coords[i].is_finite() => groups.push(vec![i]),
            None => {}
        }
    }
    let mean = |g: &Vec<usize>| g.iter().map(|&i| coords[i]).sum::<f64>() / g.len() as f64;
    groups.retain(|g| !g.is_empty());
    groups.sort_by(|a, b| mean(a).total_cmp(&mean(b)));
    groups
}

/// Groups of overlapping intervals `(start, stop)`: single linkage in order of start, an
/// interval joining the group before it when it starts no more than `gap_share` (relative)
/// above the group's highest stop (fragments of one hump split by a dip). Groups sorted by
/// start, members ascending.
pub fn overlapping(intervals: &[(f64, f64)], gap_share: f64) -> Vec<Vec<usize>> {
    let mut order: Vec<usize> = (0..intervals.len()).collect();
    order.sort_by(|&a, &b| intervals[a].0.total_cmp(&intervals[b].0));
    let mut groups: Vec<Vec<usize>> = Vec::new();
    let mut reach = f64::NEG_INFINITY;
    for i in order {
        let (s, e) = intervals[i];
        let joins = s <= reach * (1.0 + gap_share);
        match groups.last_mut() {
            Some(g) if joins => g.push(i),
            _ => {
                groups.push(vec![i]);
                reach = f64::NEG_INFINITY;
            }
        }
        reach = reach.max(e);
    }
    for g in &mut groups {
        g.sort_unstable();
    }
    groups
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_radius_is_one_unit_on_linear_and_log_grids() {
        // linear 4.5 kHz grid, 9 kHz RBW, no drift: r = 0.5·9 kHz = 4.5 kHz = one grid step
        let lin: Vec<f64> = (0..100).map(|i| 150e3 + i as f64 * 4.5e3).collect();
        let a = Axis::new(&lin, Some(9e3), 0.5, 0.0);
        assert!((a.at(300e3) - a.at(295.5e3) - 1.0).abs() < 1e-9);
        // log grid, ratio 1.01 per point, RBW negligible: r = 0.5·step, so u ∝ ln f
        let log: Vec<f64> = (0..300).map(|i| 1e6 * 1.01f64.powi(i)).collect();
        let b = Axis::new(&log, Some(1.0), 0.5, 0.0);
        let du1 = b.at(2e6) - b.at(1.5e6);
        let du2 = b.at(4e6) - b.at(3e6);
        assert!((du1 / du2 - 1.0).abs() < 0.01, "{du1} {du2}");
    }

    #[test]
    fn single_detections_are_their_own_groups() {
        let g = associate(&[0.0, 0.4, 10.0, 0.8, 25.0]);
        assert_eq!(g, vec![vec![0, 1, 3], vec![2], vec![4]]);
        assert!(associate(&[]).is_empty());
        assert_eq!(associate(&[f64::NAN, 1.0]), vec![vec![1]]);
    }

    #[test]
    fn hump_fragments_join_across_small_gaps() {
        // 2.2-5.0 MHz and 5.09-5.16 MHz: a gap of 1.8 % joins at a 2 % share, not at 1 %
        let iv = [(2.2e6, 5.0e6), (5.09e6, 5.16e6), (150e3, 400e3)];
        assert_eq!(overlapping(&iv, 0.02), vec![vec![2], vec![0, 1]]);
        assert_eq!(overlapping(&iv, 0.01), vec![vec![2], vec![0], vec![1]]);
    }
}
