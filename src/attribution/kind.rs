//! The kind of oscillator behind a family, from evidence: the fundamental's range, standard
//! crystal values, the odd/even pattern, dither, and where the family comes from. The priors
//! (crystal values, converter and ballast ranges, broadcast allocations) add to the evidence;
//! none decides alone.

use crate::analysis::{Kind, Origin};
use crate::families::FamilyFit;
use crate::families::sieve::Pattern;

/// Standard crystal and oscillator frequencies (Hz): METHODS.md §10 (32.768 kHz; UART and
/// video divisors; the round values; USB, Ethernet and radio references).
pub const CRYSTALS_HZ: [f64; 27] = [
    32.768e3, 1.8432e6, 3.579545e6, 4e6, 8e6, 10e6, 11.0592e6, 12e6, 14.31818e6, 16e6, 19.2e6,
    19.6608e6, 20e6, 24e6, 25e6, 26e6, 27e6, 32e6, 38.4e6, 40e6, 48e6, 50e6, 66.666e6, 100e6,
    125e6, 133.333e6, 156.25e6,
];

/// A fundamental this close to a crystal value (relative) matches it: ±200 ppm covers a
/// crystal's tolerance and the fit's error at ordinary display steps (common practice).
pub const CRYSTAL_MATCH: f64 = 200e-6;

/// The kind, and the reasons that decided it.
pub fn classify(fit: &FamilyFit, origin: Origin) -> (Kind, Vec<String>) {
    if let Some(name) = fit.raster {
        return (Kind::Broadcast, vec![format!("lines on the {name}")]);
    }
    let f0 = fit.fundamental_hz;
    let mut reasons = Vec::new();
    let (mut clock, mut switching, mut lighting) = (0.0, 0.0, 0.0);
    if let Some(x) = crystal_match(f0) {
        clock += 2.0;
        switching -= 1.0;
        reasons.push(format!(
            "{} is within {:.0} ppm of the standard crystal value {}",
            hz(f0),
            (f0 / x - 1.0).abs() * 1e6,
            hz(x)
        ));
    }
    let odd = fit.pattern == Pattern::OddOnly || fit.envelope.even_fraction < 0.25;
    if odd {
        clock += 1.0;
        lighting += 0.5;
        reasons.push("odd harmonics dominate: a duty cycle near 50 %".into());
    } else {
        switching += 1.0;
        reasons.push("even harmonics present: a duty cycle away from 50 %".into());
    }
    if (20e3..=5e6).contains(&f0) {
        switching += 1.5;
        reasons.push(format!(
            "{} lies in the range of switching converters (20 kHz to 5 MHz)",
            hz(f0)
        ));
    }
    if f0 >= 1e6 {
        clock += 1.0;
    }
    if f0 < 300e3 {
        clock -= 1.0;
    }
    if fit.envelope.spread_pct.is_some() {
        switching += 0.5;
        clock += 0.5;
    }
    if (20e3..=100e3).contains(&f0) {
        lighting += 1.0;
        if origin == Origin::Ambient {
            lighting += 2.0;
            reasons.push(format!(
                "{} in the electronic-ballast range (20 to 100 kHz) and in the ambient",
                hz(f0)
            ));
        }
    }
    let best = [
        (Kind::Clock, clock),
        (Kind::Switching, switching),
        (Kind::Lighting, lighting),
    ]
    .into_iter()
    .fold(
        (Kind::Other, 1.0),
        |acc, k| if k.1 > acc.1 { k } else { acc },
    );
    (best.0, reasons)
}

/// The standard crystal value within [`CRYSTAL_MATCH`] of a fundamental, if any.
pub fn crystal_match(f0_hz: f64) -> Option<f64> {
    CRYSTALS_HZ
        .iter()
        .copied()
        .find(|&x| (f0_hz / x - 1.0).abs() <= CRYSTAL_MATCH)
}

fn hz(f: f64) -> String {
    crate::analysis::fmt_hz(f)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::families::envelope::Envelope;

    fn fit(f0: f64, pattern: Pattern, even_fraction: f64, spread: Option<f64>) -> FamilyFit {
        FamilyFit {
            fundamental_hz: f0,
            sigma_hz: 1.0,
            pattern,
            members: vec![],
            misses: 0,
            envelope: Envelope {
                slope_db_per_decade: None,
                odd_over_even_db: None,
                even_fraction,
                width_growth_hz: None,
                spread_pct: spread,
                width_growth_se_hz: None,
            },
            raster: None,
        }
    }

    #[test]
    fn crystal_square_wave_is_a_clock() {
        // source: METHODS §10, 25 MHz Ethernet reference (common practice)
        assert_eq!(
            classify(&fit(25.0012e6, Pattern::OddOnly, 0.0, None), Origin::Dut).0,
            Kind::Clock
        );
    }

    #[test]
    fn converter_range_with_even_harmonics_is_switching() {
        assert_eq!(
            classify(&fit(412.3e3, Pattern::All, 0.9, None), Origin::Dut).0,
            Kind::Switching
        );
        assert_eq!(
            classify(&fit(65.4e3, Pattern::All, 0.8, None), Origin::Dut).0,
            Kind::Switching
        );
    }

    #[test]
    fn ambient_ballast_is_lighting() {
        assert_eq!(
            classify(&fit(42.1e3, Pattern::OddOnly, 0.0, None), Origin::Ambient).0,
            Kind::Lighting
        );
        // the same comb from the DUT is not called lighting on the prior alone
        assert_ne!(
            classify(&fit(42.1e3, Pattern::All, 0.9, None), Origin::Dut).0,
            Kind::Lighting
        );
    }

    #[test]
    fn converter_above_a_megahertz_is_not_a_clock() {
        // 2.2 MHz with even harmonics is a converter, not a clock
        assert_eq!(
            classify(&fit(2.2e6, Pattern::All, 1.0, None), Origin::Dut).0,
            Kind::Switching
        );
    }
}
