//! Broadcast carriers sit on channel rasters inside their allocated bands, so a set of stations
//! looks like a sparse harmonic family of the raster step: 9 kHz (LF and MF, ITU Regions 1 and 3),
//! 10 kHz (MF, Region 2), 5 kHz (HF broadcasting), 100 kHz (VHF FM). The sieve refuses such sets
//! (too many channels empty); this stage claims them as one broadcast family per service when the
//! evidence allows: more lines on the raster than chance gives, or lines that the ambient scans
//! show too. The allocation alone never decides.

use statrs::distribution::{Binomial, DiscreteCDF};

/// A broadcasting service: its channel step and its bands (Hz).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Service {
    pub name: &'static str,
    pub step_hz: f64,
    pub bands: &'static [(f64, f64)],
}

/// LF broadcasting 148.5-283.5 kHz (Region 1) and MF broadcasting 526.5-1606.5 kHz (Regions 1
/// and 3), 9 kHz channels (ITU Radio Regulations Article 5; METHODS.md §7).
pub const LF_MF_9K: Service = Service {
    name: "LF/MF broadcasting, 9 kHz raster (Regions 1 and 3)",
    step_hz: 9e3,
    bands: &[(148.5e3, 283.5e3), (526.5e3, 1606.5e3)],
};
/// MF broadcasting 525-1705 kHz, 10 kHz channels (Region 2; METHODS.md §7).
pub const MF_10K: Service = Service {
    name: "MF broadcasting, 10 kHz raster (Region 2)",
    step_hz: 10e3,
    bands: &[(525e3, 1705e3)],
};
/// HF broadcasting bands (kHz ranges of METHODS.md §7, tropical bands included), 5 kHz channels.
pub const HF_5K: Service = Service {
    name: "HF broadcasting, 5 kHz raster",
    step_hz: 5e3,
    bands: &[
        (2300e3, 2495e3),
        (3200e3, 3400e3),
        (3900e3, 4000e3),
        (4750e3, 5060e3),
        (5900e3, 6200e3),
        (7200e3, 7450e3),
        (9400e3, 9900e3),
        (11600e3, 12100e3),
        (13570e3, 13870e3),
        (15100e3, 15800e3),
        (17480e3, 17900e3),
        (18900e3, 19020e3),
        (21450e3, 21850e3),
        (25670e3, 26100e3),
    ],
};
/// VHF FM broadcasting 87.5-108 MHz on a 100 kHz raster (common practice).
pub const FM_100K: Service = Service {
    name: "VHF FM broadcasting, 100 kHz raster",
    step_hz: 100e3,
    bands: &[(87.5e6, 108e6)],
};

/// A line offered to the broadcast stage.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Offered {
    pub freq_hz: f64,
    pub sigma_hz: f64,
    /// Narrow enough to be one carrier.
    pub narrow: bool,
    /// The ambient scans show an emission at this frequency.
    pub in_ambient: bool,
}

/// A service that explains some lines.
#[derive(Debug, Clone, PartialEq)]
pub struct RasterMatch {
    pub service: Service,
    /// Indices into the offered lines, with their channel numbers (frequency / step).
    pub members: Vec<(usize, u32)>,
    /// Chance of at least this many lines on the raster if they fell at random.
    pub p_value: f64,
    /// Members the ambient scans show too.
    pub in_ambient: usize,
}

/// Fewest carriers that make a set.
pub const MIN_CARRIERS: usize = 3;
/// A set is claimed when its raster alignment has a chance below this ...
pub const MAX_RASTER_CHANCE: f64 = 0.01;
/// ... or when at least this many of its carriers are in the ambient scans too.
pub const MIN_IN_AMBIENT: usize = 2;

/// The broadcast sets among `lines`: LF/MF on 9 kHz or MF on 10 kHz (whichever explains more),
/// HF on 5 kHz, FM on 100 kHz. Each line joins at most one set.
pub fn broadcast_sets(lines: &[Offered]) -> Vec<RasterMatch> {
    let mut out = Vec::new();
    let mw = [test_service(lines, LF_MF_9K), test_service(lines, MF_10K)]
        .into_iter()
        .flatten()
        .filter(accepted)
        .max_by(|a, b| {
            a.members
                .len()
                .cmp(&b.members.len())
                .then(b.p_value.total_cmp(&a.p_value))
        });
    out.extend(mw);
    for s in [HF_5K, FM_100K] {
        out.extend(test_service(lines, s).filter(accepted));
    }
    out
}

fn accepted(m: &RasterMatch) -> bool {
    m.members.len() >= MIN_CARRIERS
        && (m.p_value < MAX_RASTER_CHANCE || m.in_ambient >= MIN_IN_AMBIENT)
}

fn in_bands(s: &Service, f: f64) -> bool {
    s.bands.iter().any(|&(a, b)| f >= a && f <= b)
}

fn test_service(lines: &[Offered], s: Service) -> Option<RasterMatch> {
    let in_band: Vec<usize> = (0..lines.len())
        .filter(|&i| lines[i].narrow && in_bands(&s, lines[i].freq_hz))
        .collect();
    if in_band.is_empty() {
        return None;
    }
    let mut members = Vec::new();
    let mut tol_sum = 0.0;
    for &i in &in_band {
        let l = lines[i];
        let tol = (3.0 * l.sigma_hz).min(0.25 * s.step_hz);
        tol_sum += tol;
        let k = (l.freq_hz / s.step_hz).round();
        if (l.freq_hz - k * s.step_hz).abs() <= tol {
            members.push((i, k as u32));
        }
    }
    // chance that one line falls within ± tol of a channel
    let p_one = (2.0 * tol_sum / in_band.len() as f64 / s.step_hz).clamp(1e-9, 1.0);
    let binom = Binomial::new(p_one, in_band.len() as u64).ok()?;
    let hits = members.len() as u64;
    let p_value = if hits == 0 { 1.0 } else { binom.sf(hits - 1) };
    let in_ambient = members.iter().filter(|(i, _)| lines[*i].in_ambient).count();
    Some(RasterMatch {
        service: s,
        members,
        p_value,
        in_ambient,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn offered(freqs: &[f64], sigma: f64, in_ambient: bool) -> Vec<Offered> {
        freqs
            .iter()
            .map(|&f| Offered {
                freq_hz: f,
                sigma_hz: sigma,
                narrow: true,
                in_ambient,
            })
            .collect()
    }

    #[test]
    fn stations_on_the_9_khz_raster_are_recognised_by_alignment() {
        // source: ITU RR Region 1 MF broadcasting, channels at multiples of 9 kHz
        let lines = offered(
            &[594.15e3, 693.15e3, 909.15e3, 1089.15e3, 1422.15e3],
            400.0,
            false,
        );
        let sets = broadcast_sets(&lines);
        assert_eq!(sets.len(), 1);
        assert_eq!(sets[0].service.step_hz, 9e3);
        assert_eq!(sets[0].members.len(), 5);
        assert!(sets[0].p_value < MAX_RASTER_CHANCE);
    }

    #[test]
    fn region_2_stations_on_10_khz() {
        let lines = offered(&[560e3, 770e3, 1010e3, 1130e3, 1510e3], 400.0, false);
        assert_eq!(broadcast_sets(&lines)[0].service.step_hz, 10e3);
    }

    #[test]
    fn lines_at_random_are_not_a_raster() {
        let lines = offered(
            &[601.3e3, 744.7e3, 862.2e3, 1003.9e3, 1337.6e3],
            400.0,
            false,
        );
        assert!(broadcast_sets(&lines).is_empty());
    }

    #[test]
    fn shortwave_needs_the_ambient_too() {
        // source: METHODS §7 HF broadcasting 5900-6200 kHz, 5 kHz channels. A 5 kHz raster with
        // a 2 kHz tolerance matches most frequencies, so alignment alone proves nothing.
        let f = [5_950e3, 6_005e3, 6_070e3, 6_155e3];
        assert!(broadcast_sets(&offered(&f, 700.0, false)).is_empty());
        let sets = broadcast_sets(&offered(&f, 700.0, true));
        assert_eq!(sets.len(), 1);
        assert_eq!(sets[0].service.step_hz, 5e3);
    }

    #[test]
    fn lines_outside_the_bands_are_not_broadcast() {
        // 6.5 MHz lies between the 49 m and 41 m bands
        let f = [6_500e3, 6_505e3, 6_510e3, 6_515e3];
        assert!(broadcast_sets(&offered(&f, 300.0, true)).is_empty());
    }
}
