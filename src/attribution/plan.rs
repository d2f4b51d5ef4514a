//! Fix planning inside an analysis: families matched to the board's declared oscillators
//! ([`crate::sources`]), and remedies sized for the families that fail
//! ([`super::sizing`]).

use super::sizing::{SizedRemedies, SizingError, SizingParams, Subject, size_remedies};
use crate::analysis::{Family, Kind, Origin};
use crate::sources::{FamilyObservation, Inventory, match_sources};
use serde::Serialize;

/// How the families of an analysis met a source inventory.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct InventoryUse {
    /// The inventory file.
    pub file: String,
    /// Declared sources no family matched, in file order: a source that is off, quiet, or
    /// running off its declared frequency.
    pub unused_sources: Vec<String>,
    /// Ids of the board's families that match no declared source: a missing or misbehaving
    /// oscillator (a converter's subharmonic mode, a clock's undeclared divider).
    pub not_on_inventory: Vec<usize>,
    /// One sentence per family, by id.
    pub notes: Vec<(usize, String)>,
}

/// Matches the DUT families (not the ambient ones, not broadcast sets) to the inventory's
/// sources and records each family's `declared_source`.
pub fn declare(families: &mut [Family], inventory: &Inventory) -> InventoryUse {
    let candidates: Vec<usize> = (0..families.len())
        .filter(|&i| families[i].origin != Origin::Ambient && families[i].kind != Kind::Broadcast)
        .collect();
    let obs: Vec<FamilyObservation> = candidates
        .iter()
        .map(|&i| FamilyObservation::from(&families[i]))
        .collect();
    let matching = match_sources(&obs, inventory);
    let mut not_on_inventory = Vec::new();
    let mut notes = Vec::new();
    for a in matching.families {
        let Some(&i) = candidates.get(a.family) else {
            continue;
        };
        let f = &mut families[i];
        if a.matched.is_none() {
            not_on_inventory.push(f.id);
        }
        f.declared_source = a.matched;
        notes.push((f.id, a.note));
    }
    not_on_inventory.sort_unstable();
    notes.sort_by_key(|n| n.0);
    InventoryUse {
        file: inventory.file.clone(),
        unused_sources: matching.unused_sources,
        not_on_inventory,
        notes,
    }
}

/// Sizes remedies for every DUT family with harmonics over a limit. What the inventory declares
/// of the family's source (edge time, duty, present spread) goes into the models; what it does
/// not declare comes from the family's fingerprint when that estimates it (a bound is not used);
/// without either the models say what they assumed.
///
/// # Errors
/// [`SizingError`] when the sizing settings are out of range.
pub fn size(
    families: &mut [Family],
    inventory: Option<&Inventory>,
    conducted: bool,
    params: &SizingParams,
) -> Result<(), SizingError> {
    params.check()?;
    for f in families.iter_mut() {
        if f.origin == Origin::Ambient || f.kind == Kind::Broadcast || f.exceedances.is_empty() {
            continue;
        }
        let declared = f
            .declared_source
            .as_ref()
            .and_then(|m| inventory.and_then(|inv| inv.sources.get(m.source_index)));
        let measured_spread = f.envelope.as_ref().and_then(|e| e.spread_pct);
        // the fingerprint's estimates (never its bounds) stand in for what is not declared
        let fingerprint = f.fingerprint.as_ref();
        let subject = Subject {
            fundamental_hz: f.fundamental_hz,
            kind: f.kind,
            conducted,
            edge_time_s: declared
                .and_then(|s| s.edge_time_s)
                .or(fingerprint.and_then(|p| p.edge_time_s)),
            duty: declared
                .and_then(|s| s.duty)
                .or(fingerprint.and_then(|p| p.duty)),
            spread_pct: declared.and_then(|s| s.spread_pct).or(measured_spread),
        };
        f.sized = Some(size_remedies(&subject, &f.exceedances, params)?);
    }
    Ok(())
}

/// The sentences of a family's sized remedies, or none.
pub fn sized_sentences(sized: Option<&SizedRemedies>) -> Vec<String> {
    sized.map(SizedRemedies::sentences).unwrap_or_default()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::attribution::sizing::Exceedance;
    use crate::sources::parse_inventory;

    fn family(id: usize, f0: f64, sigma: f64, kind: Kind, origin: Origin) -> Family {
        Family {
            id,
            fundamental_hz: f0,
            fundamental_sigma_hz: sigma,
            kind,
            origin,
            ..Family::default()
        }
    }

    const INVENTORY: &str = r#"
[[source]]
name = "primary flyback"
kind = "switching"
frequency_hz = 65000
tolerance_pct = 6
edge_time_s = 30e-9

[[source]]
name = "mcu crystal"
kind = "clock"
frequency_hz = 8e6
tolerance_ppm = 50
"#;

    #[test]
    fn families_get_their_declared_source_and_the_rest_are_listed() {
        let inv = parse_inventory(INVENTORY, "board.toml").unwrap();
        let mut fams = vec![
            family(1, 65_012.0, 2.0, Kind::Switching, Origin::Dut),
            family(2, 412_000.0, 5.0, Kind::Switching, Origin::Dut),
            family(3, 9_000.0, 0.0, Kind::Broadcast, Origin::Ambient),
        ];
        let used = declare(&mut fams, &inv);
        assert_eq!(
            fams[0].declared_source.as_ref().map(|m| m.source.as_str()),
            Some("primary flyback")
        );
        assert!(fams[1].declared_source.is_none());
        assert!(fams[2].declared_source.is_none());
        assert_eq!(used.not_on_inventory, vec![2]);
        assert_eq!(used.unused_sources, vec!["mcu crystal".to_string()]);
    }

    #[test]
    fn only_failing_board_families_are_sized_with_the_declared_edges() {
        let inv = parse_inventory(INVENTORY, "board.toml").unwrap();
        let mut fams = vec![
            family(1, 65_012.0, 2.0, Kind::Switching, Origin::Dut),
            family(2, 9_000.0, 0.0, Kind::Broadcast, Origin::Ambient),
            family(3, 400e3, 2.0, Kind::Switching, Origin::Dut),
        ];
        fams[0].exceedances = vec![Exceedance {
            freq_hz: 195e3,
            over_db: 8.0,
        }];
        fams[1].exceedances = fams[0].exceedances.clone();
        declare(&mut fams, &inv);
        size(&mut fams, Some(&inv), true, &SizingParams::default()).unwrap();
        let sized = fams[0].sized.as_ref().unwrap();
        // 8 dB over plus the 6 dB design margin (common practice, sizing::DESIGN_MARGIN_DB)
        assert_eq!(sized.needs[0].needed_db, 14.0);
        assert!(sized.lc_filter.is_some());
        assert!(fams[1].sized.is_none(), "ambient families are not sized");
        assert!(fams[2].sized.is_none(), "a passing family needs nothing");
        assert!(!sized_sentences(fams[0].sized.as_ref()).is_empty());
    }

    /// A fingerprint of a 100 kHz converter, duty 0.3, 100 ns ramps (80 ns 10-90 %), fitted to
    /// the synth's trapezoid harmonics (METHODS.md §5 formula).
    fn fingerprint() -> crate::families::fingerprint::Fingerprint {
        use crate::families::fingerprint::{FamilyLevels, FitParams, HarmonicLevel};
        let levels: Vec<HarmonicLevel> = (2..=150)
            .map(|n| {
                let c = crate::synth::trapezoid_harmonic_peak(n, 1.0, 10e-6, 0.3, 100e-9);
                HarmonicLevel {
                    n,
                    level_dbuv: 20.0 * (c / 2f64.sqrt() / 1e-6).log10(),
                    sigma_db: 0.5,
                    threshold_dbuv: None,
                }
            })
            .filter(|h| h.level_dbuv > 60.0)
            .collect();
        let fam = FamilyLevels {
            fundamental_hz: 100e3,
            harmonics: &levels,
            absent: &[],
            envelope: None,
            rbw_hz: Some(9e3),
            conducted: true,
        };
        crate::families::fingerprint::fingerprint(&fam, &FitParams::default()).unwrap()
    }

    #[test]
    fn the_fingerprint_stands_in_for_an_undeclared_edge_time_and_duty() {
        let inv = parse_inventory(INVENTORY, "board.toml").unwrap();
        let mut fams = vec![
            family(1, 65_012.0, 2.0, Kind::Switching, Origin::Dut),
            family(2, 100e3, 2.0, Kind::Switching, Origin::Dut),
        ];
        for f in &mut fams {
            f.exceedances = vec![Exceedance {
                freq_hz: 20e6,
                over_db: 8.0,
            }];
            f.fingerprint = Some(fingerprint());
        }
        declare(&mut fams, &inv);
        size(&mut fams, Some(&inv), true, &SizingParams::default()).unwrap();
        let edges = |f: &Family| {
            f.sized
                .as_ref()
                .unwrap()
                .edges
                .as_ref()
                .unwrap()
                .rise_time_s
        };
        // source: INVENTORY above, the flyback declares 30 ns: the declaration wins
        assert_eq!(edges(&fams[0]), Some(30e-9));
        // family 2 is not on the inventory: its fingerprint's 80 ns (the synth's 100 ns ramps)
        let t = edges(&fams[1]).unwrap();
        assert!((t - 80e-9).abs() < 2e-9, "{t}");
    }
}
