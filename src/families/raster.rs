//! Medium-wave broadcast carriers sit on a channel raster, so a handful of stations look like a
//! sparse harmonic family of 9 kHz (ITU Regions 1 and 3) or 10 kHz (Region 2). The sieve refuses
//! them (too many harmonics missing); this test claims them as one broadcast family when more
//! of the leftover lines in the band sit on a raster than chance allows.

use statrs::distribution::{Binomial, DiscreteCDF};

/// A raster and the band it is used in (Hz).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Raster {
    pub step_hz: f64,
    pub start_hz: f64,
    pub stop_hz: f64,
    pub name: &'static str,
}

/// MF broadcasting: Regions 1 and 3, 526.5-1606.5 kHz on 9 kHz channels; Region 2,
/// 525-1705 kHz on 10 kHz channels (ITU Radio Regulations Article 5; METHODS.md §7).
pub const MEDIUM_WAVE: [Raster; 2] = [
    Raster {
        step_hz: 9e3,
        start_hz: 526.5e3,
        stop_hz: 1606.5e3,
        name: "medium-wave, 9 kHz raster (Regions 1 and 3)",
    },
    Raster {
        step_hz: 10e3,
        start_hz: 525e3,
        stop_hz: 1705e3,
        name: "medium-wave, 10 kHz raster (Region 2)",
    },
];

/// A raster that explains some lines.
#[derive(Debug, Clone, PartialEq)]
pub struct RasterMatch {
    pub raster: Raster,
    /// Indices into the offered lines, with their channel numbers (frequency / step).
    pub members: Vec<(usize, u32)>,
    /// Chance of at least this many lines on the raster if they fell at random.
    pub p_value: f64,
}

/// Lines with `(freq_hz, sigma_hz)`; returns the raster that explains at least three of those in
/// its band with a chance below 1 %, preferring the one with more members.
pub fn match_raster(lines: &[(f64, f64)]) -> Option<RasterMatch> {
    MEDIUM_WAVE
        .iter()
        .filter_map(|r| test_raster(lines, *r))
        .filter(|m| m.members.len() >= 3 && m.p_value < 0.01)
        .max_by(|a, b| {
            a.members
                .len()
                .cmp(&b.members.len())
                .then(b.p_value.total_cmp(&a.p_value))
        })
}

fn test_raster(lines: &[(f64, f64)], r: Raster) -> Option<RasterMatch> {
    let in_band: Vec<usize> = (0..lines.len())
        .filter(|&i| lines[i].0 >= r.start_hz && lines[i].0 <= r.stop_hz)
        .collect();
    if in_band.is_empty() {
        return None;
    }
    let mut members = Vec::new();
    let mut tol_sum = 0.0;
    for &i in &in_band {
        let (f, sigma) = lines[i];
        let tol = (3.0 * sigma).min(0.25 * r.step_hz);
        tol_sum += tol;
        let k = (f / r.step_hz).round();
        if (f - k * r.step_hz).abs() <= tol {
            members.push((i, k as u32));
        }
    }
    // chance that one line falls within ± tol of a channel
    let p_one = (2.0 * tol_sum / in_band.len() as f64 / r.step_hz).clamp(1e-9, 1.0);
    let binom = Binomial::new(p_one, in_band.len() as u64).ok()?;
    let hits = members.len() as u64;
    let p_value = if hits == 0 { 1.0 } else { binom.sf(hits - 1) };
    Some(RasterMatch {
        raster: r,
        members,
        p_value,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn stations_on_the_9_khz_raster_are_recognised() {
        // source: ITU RR Region 1 MF broadcasting, channels at multiples of 9 kHz
        let lines: Vec<(f64, f64)> = [594e3, 693e3, 909e3, 1089e3, 1422e3]
            .iter()
            .map(|&f| (f + 150.0, 400.0))
            .collect();
        let m = match_raster(&lines).unwrap();
        assert_eq!(m.raster.step_hz, 9e3);
        assert_eq!(m.members.len(), 5);
        assert!(m.p_value < 0.01);
    }

    #[test]
    fn region_2_stations_on_10_khz() {
        let lines: Vec<(f64, f64)> = [560e3, 770e3, 1010e3, 1130e3, 1510e3]
            .iter()
            .map(|&f| (f, 400.0))
            .collect();
        assert_eq!(match_raster(&lines).unwrap().raster.step_hz, 10e3);
    }

    #[test]
    fn lines_at_random_are_not_a_raster() {
        let lines: Vec<(f64, f64)> = [601.3e3, 744.7e3, 862.2e3, 1003.9e3, 1337.6e3]
            .iter()
            .map(|&f| (f, 400.0))
            .collect();
        assert_eq!(match_raster(&lines), None);
    }
}
