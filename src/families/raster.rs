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

/// The broadcast sets among `lines`: LF/MF on 9 kHz or MF on 10 kHz, HF on 5 kHz, FM on
/// 100 kHz. Each line joins at most one set. Of the two medium-wave rasters the one whose
/// channels explain the members' positions better wins ([`raster_log_lr`] summed over each set's
/// members, by more than one nat); when the positions cannot tell them apart, the one with more
/// members; when that ties too (a grid too coarse to name a channel), 9 kHz, the raster of ITU
/// Regions 1 and 3.
pub fn broadcast_sets(lines: &[Offered]) -> Vec<RasterMatch> {
    let mut out = Vec::new();
    let mut mw: Option<(f64, RasterMatch)> = None;
    for m in [test_service(lines, LF_MF_9K), test_service(lines, MF_10K)]
        .into_iter()
        .flatten()
        .filter(accepted)
    {
        let score: f64 = m
            .members
            .iter()
            .map(|&(i, _)| raster_log_lr(lines[i].freq_hz, lines[i].sigma_hz, m.service.step_hz))
            .sum();
        let wins = mw.as_ref().is_none_or(|(best, b)| {
            if (score - best).abs() > 1.0 {
                score > *best
            } else {
                m.members.len() > b.members.len()
            }
        });
        if wins {
            mw = Some((score, m));
        }
    }
    out.extend(mw.map(|(_, m)| m));
    for s in [HF_5K, FM_100K] {
        out.extend(test_service(lines, s).filter(accepted));
    }
    out
}

/// How much better a raster of step Δ explains a line seen at f ± σ than a position at random:
/// the log of the ratio of the wrapped normal density (the line is on some channel kΔ, seen
/// with a Gaussian error σ) to the uniform density 1/Δ. Near 0 when σ is a good part of Δ (the
/// position says nothing about the raster), up to ln(Δ/(σ·√(2π))) for a line right on a
/// channel, and strongly negative for a well-placed line between channels.
///
/// # Formula
/// ```text
/// LR = Σ_k (Δ/σ)·φ((f − kΔ)/σ)                               (σ < 0.3·Δ: nearest channels)
///    = 1 + 2·Σ_{m≥1} exp(−2π²m²σ²/Δ²)·cos(2πm·f/Δ)             (σ ≥ 0.3·Δ: Fourier series)
/// ```
/// # Source
/// The wrapped normal distribution and its Fourier series (Poisson summation of the normal
/// density); standard results of circular statistics.
pub fn raster_log_lr(freq_hz: f64, sigma_hz: f64, step_hz: f64) -> f64 {
    let sigma = sigma_hz.max(1e-9 * step_hz);
    let r = sigma / step_hz;
    let x = freq_hz / step_hz;
    let lr = if r < 0.3 {
        let k0 = x.round();
        (-3..=3)
            .map(|d| {
                let z = (x - (k0 + f64::from(d))) / r;
                (-0.5 * z * z).exp() / (r * (2.0 * std::f64::consts::PI).sqrt())
            })
            .sum::<f64>()
    } else {
        1.0 + 2.0
            * (1..=6)
                .map(|m| {
                    let m = f64::from(m);
                    let a = 2.0 * std::f64::consts::PI * std::f64::consts::PI * m * m * r * r;
                    (-a).exp() * (2.0 * std::f64::consts::PI * m * x).cos()
                })
                .sum::<f64>()
    };
    lr.max(1e-300).ln()
}

fn accepted(m: &RasterMatch) -> bool {
    m.members.len() >= MIN_CARRIERS
        && (m.p_value < MAX_RASTER_CHANCE || m.in_ambient >= MIN_IN_AMBIENT)
}

fn in_bands(s: &Service, f: f64) -> bool {
    s.bands.iter().any(|&(a, b)| f >= a && f <= b)
}

/// Whether a line's position is too uncertain to tell one channel from the next: its ±3σ
/// window is wider than half the step (on a grid much coarser than the raster, a displayed
/// point stands for a bucket many channels wide).
fn raster_unresolved(l: &Offered, step_hz: f64) -> bool {
    3.0 * l.sigma_hz > 0.25 * step_hz
}

/// The lines of `lines` that service `s` explains, and the chance of its raster alignment.
///
/// A line placed well enough to name its channel is a member when it lies within
/// min(3σ, step/4) of one; the alignment is tested against chance with the binomial law of the
/// tested lines (each falls within ±tol of a channel with probability p = 2·tol/step). A line
/// whose channel cannot be named ([`raster_unresolved`]) says nothing about the raster: it joins
/// only when the ambient scans show it too, and it counts neither as a trial nor as a hit, so
/// such a set stands on the ambient evidence alone.
fn test_service(lines: &[Offered], s: Service) -> Option<RasterMatch> {
    let in_band: Vec<usize> = (0..lines.len())
        .filter(|&i| lines[i].narrow && in_bands(&s, lines[i].freq_hz))
        .collect();
    if in_band.is_empty() {
        return None;
    }
    let mut members = Vec::new();
    let (mut tol_sum, mut trials, mut hits) = (0.0, 0u64, 0u64);
    for &i in &in_band {
        let l = lines[i];
        let k = (l.freq_hz / s.step_hz).round();
        if raster_unresolved(&l, s.step_hz) {
            if l.in_ambient {
                members.push((i, k as u32));
            }
            continue;
        }
        let tol = 3.0 * l.sigma_hz;
        tol_sum += tol;
        trials += 1;
        if (l.freq_hz - k * s.step_hz).abs() <= tol {
            members.push((i, k as u32));
            hits += 1;
        }
    }
    let p_value = if hits == 0 {
        1.0
    } else {
        // chance that one line falls within ± tol of a channel
        let p_one = (2.0 * tol_sum / trials as f64 / s.step_hz).clamp(1e-9, 1.0);
        Binomial::new(p_one, trials).ok()?.sf(hits - 1)
    };
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
    fn on_a_coarse_grid_only_the_ambient_decides() {
        // source: METHODS §7 / common practice, VHF FM 87.5-108 MHz on 100 kHz channels. A
        // 1 MHz display step places a carrier within ±0.3 MHz, three channels either way.
        let f = [91.3e6, 96.9e6, 101.4e6, 105.5e6];
        let sigma = 1e6 / 12f64.sqrt();
        let sets = broadcast_sets(&offered(&f, sigma, true));
        assert_eq!(sets.len(), 1);
        assert_eq!(sets[0].service.step_hz, 100e3);
        assert_eq!(sets[0].members.len(), 4);
        assert_eq!(sets[0].p_value, 1.0, "alignment can prove nothing here");
        // the same lines, not in the ambient: no evidence at all (a clock's harmonics in the
        // FM band look the same on this grid)
        assert!(broadcast_sets(&offered(&f, sigma, false)).is_empty());
    }

    #[test]
    fn raster_likelihood_ratio_matches_the_wrapped_normal() {
        // source: wrapped normal density, direct sum over channels (circular statistics);
        // the two forms of raster_log_lr must agree where they meet and reach their limits
        let direct = |f: f64, s: f64, d: f64| -> f64 {
            let x = f / d;
            let r = s / d;
            (-200..=200)
                .map(|k| {
                    let z = (x - f64::from(k) - x.floor()) / r;
                    (-0.5 * z * z).exp() / (r * (2.0 * std::f64::consts::PI).sqrt())
                })
                .sum::<f64>()
                .ln()
        };
        for &(f, s) in &[
            (612e3, 2.6e3),
            (612e3, 2.8e3),
            (615e3, 3e3),
            (616.5e3, 9e3),
            (613e3, 500.0),
        ] {
            let a = raster_log_lr(f, s, 9e3);
            let b = direct(f, s, 9e3);
            assert!((a - b).abs() < 1e-6, "{f} {s}: {a} vs {b}");
        }
        // right on a channel with σ = Δ/100: ln(100/√(2π)) = 3.686
        assert!(
            (raster_log_lr(900e3, 90.0, 9e3) - (100.0 / (2.0 * std::f64::consts::PI).sqrt()).ln())
                .abs()
                < 1e-6
        );
        // σ of a whole step: no evidence
        assert!(raster_log_lr(904e3, 9e3, 9e3).abs() < 1e-6);
    }

    #[test]
    fn well_placed_lines_choose_their_raster() {
        // 10 kHz channels seen with σ = 300 Hz: the 9 kHz raster explains them worse
        let f = [560e3, 770e3, 1010e3, 1130e3, 1510e3];
        let l = offered(&f, 300.0, true);
        assert!(
            f.iter()
                .map(|&x| raster_log_lr(x, 300.0, 10e3))
                .sum::<f64>()
                > 5.0
        );
        assert_eq!(broadcast_sets(&l)[0].service.step_hz, 10e3);
    }

    #[test]
    fn half_resolved_lines_still_tell_10_from_9_khz() {
        // σ = 1 kHz: too loose for the alignment test (3σ > step/4) on either raster, so both
        // sets take the same four ambient lines; their positions still favour 10 kHz channels
        let f = [600e3, 830e3, 1070e3, 1390e3];
        let sets = broadcast_sets(&offered(&f, 1e3, true));
        assert_eq!(sets.len(), 1);
        assert_eq!(sets[0].members.len(), 4);
        assert_eq!(sets[0].service.step_hz, 10e3);
    }

    #[test]
    fn an_unresolved_medium_wave_set_takes_the_9_khz_raster() {
        // a 50 kHz display step (601 points over 30 MHz) cannot name a 9 or 10 kHz channel;
        // both rasters explain the same lines, and the tie goes to 9 kHz (ITU Regions 1 and 3)
        let f = [612e3, 810e3, 1053e3, 1440e3];
        let sets = broadcast_sets(&offered(&f, 50e3 / 12f64.sqrt(), true));
        assert_eq!(sets.len(), 1);
        assert_eq!(sets[0].service.step_hz, 9e3);
    }

    #[test]
    fn lines_outside_the_bands_are_not_broadcast() {
        // 6.5 MHz lies between the 49 m and 41 m bands
        let f = [6_500e3, 6_505e3, 6_510e3, 6_515e3];
        assert!(broadcast_sets(&offered(&f, 300.0, true)).is_empty());
    }
}
