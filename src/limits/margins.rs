//! Margins of a trace to a limit: `margin_db = limit − level` per point (a margin of zero or
//! more passes), the worst point, and the runs of points over the limit.

use super::Limit;
use crate::scan::Scan;
use serde::Serialize;

/// The point with the smallest margin.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct WorstPoint {
    pub index: usize,
    pub freq_hz: f64,
    pub level_dbuv: f64,
    pub limit_dbuv: f64,
    pub margin_db: f64,
}

/// A run of adjacent points over the limit.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Exceedance {
    pub start_hz: f64,
    pub stop_hz: f64,
    /// Points in the run.
    pub points: usize,
    pub worst_freq_hz: f64,
    pub worst_level_dbuv: f64,
    /// Negative: how far over the limit the worst point is.
    pub worst_margin_db: f64,
}

/// Margins of one trace to one limit.
#[derive(Debug, Clone, PartialEq)]
pub struct Margins {
    pub limit_dbuv: Vec<Option<f64>>,
    pub margin_db: Vec<Option<f64>>,
    /// Points inside the limit's range.
    pub covered: usize,
    pub worst: Option<WorstPoint>,
    pub exceedances: Vec<Exceedance>,
}

impl Margins {
    /// `Some(true)` when every covered point is within the limit, `None` when no point is covered.
    pub fn pass(&self) -> Option<bool> {
        self.worst.map(|w| w.margin_db >= 0.0)
    }
}

/// Margins of `scan` to `limit`, point by point.
pub fn margins(scan: &Scan, limit: &Limit) -> Margins {
    let limit_dbuv = limit.at_all(&scan.freq_hz);
    let margin_db: Vec<Option<f64>> = limit_dbuv
        .iter()
        .zip(scan.level_dbuv.iter())
        .map(|(l, &x)| l.map(|l| l - x))
        .collect();
    let mut worst: Option<WorstPoint> = None;
    for (i, m) in margin_db.iter().enumerate() {
        if let (Some(m), Some(l)) = (*m, limit_dbuv[i]) {
            if worst.is_none_or(|w| m < w.margin_db) {
                let (freq_hz, level_dbuv) = (scan.freq_hz[i], scan.level_dbuv[i]);
                worst = Some(WorstPoint {
                    index: i,
                    freq_hz,
                    level_dbuv,
                    limit_dbuv: l,
                    margin_db: m,
                });
            }
        }
    }
    let covered = margin_db.iter().filter(|m| m.is_some()).count();
    let exceedances = exceedances(scan, &margin_db);
    Margins {
        limit_dbuv,
        margin_db,
        covered,
        worst,
        exceedances,
    }
}

fn exceedances(scan: &Scan, margin_db: &[Option<f64>]) -> Vec<Exceedance> {
    let mut out: Vec<Exceedance> = Vec::new();
    let mut open = false;
    for (i, m) in margin_db.iter().enumerate() {
        let (f, level) = (scan.freq_hz[i], scan.level_dbuv[i]);
        match (*m, open) {
            (Some(m), _) if m < 0.0 => {
                if let (true, Some(run)) = (open, out.last_mut()) {
                    run.stop_hz = f;
                    run.points += 1;
                    if m < run.worst_margin_db {
                        (run.worst_freq_hz, run.worst_level_dbuv, run.worst_margin_db) =
                            (f, level, m);
                    }
                } else {
                    out.push(Exceedance {
                        start_hz: f,
                        stop_hz: f,
                        points: 1,
                        worst_freq_hz: f,
                        worst_level_dbuv: level,
                        worst_margin_db: m,
                    });
                    open = true;
                }
            }
            _ => open = false,
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::scan::ScanMeta;

    #[test]
    fn margin_is_limit_minus_level() {
        let limit = crate::limits::builtin("cispr32-b-qp").unwrap();
        let scan = Scan::new(
            vec![100e3, 150e3, 250e3, 1e6, 6e6],
            vec![90.0, 70.0, 50.0, 57.0, 59.0],
            ScanMeta::default(),
        )
        .unwrap();
        let m = margins(&scan, &limit);
        assert_eq!(m.margin_db[0], None); // below 150 kHz: no limit
        assert_eq!(m.margin_db[1], Some(-4.0)); // source: CISPR 32 Class B QP, 66 dBµV at 150 kHz
        assert_eq!(m.covered, 4);
        let w = m.worst.unwrap();
        assert_eq!((w.freq_hz, w.margin_db), (150e3, -4.0));
        assert_eq!(m.pass(), Some(false));
        assert_eq!(m.exceedances.len(), 2);
        assert_eq!(m.exceedances[1].worst_freq_hz, 1e6);
    }
}
