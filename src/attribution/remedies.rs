//! Remedies: which kind of fix, where and why, as short sentences. Sizing (how much of it)
//! comes from the fix-planning stage.

use crate::analysis::{Kind, Origin};

/// Below about 5 MHz conducted noise is mostly differential mode, above it mostly common mode
/// (rule of thumb, METHODS.md §9; a measured DM/CM split wins).
pub const DM_CM_BOUNDARY_HZ: f64 = 5e6;

/// What one family needs: the frequencies of its harmonics over the limit.
#[derive(Debug, Clone, PartialEq)]
pub struct Need<'a> {
    pub kind: Kind,
    pub origin: Origin,
    pub fundamental_hz: f64,
    pub failing_hz: &'a [f64],
    pub dithered: bool,
    pub conducted: bool,
}

/// Remedies for a family, most useful first.
pub fn remedies(need: &Need) -> Vec<String> {
    if need.origin == Origin::Ambient {
        return vec![ambient_remedy(need.kind)];
    }
    if need.failing_hz.is_empty() {
        return Vec::new();
    }
    let f0 = crate::analysis::fmt_hz(need.fundamental_hz);
    let low = need.failing_hz.iter().any(|&f| f < DM_CM_BOUNDARY_HZ);
    let high = need.failing_hz.iter().any(|&f| f >= DM_CM_BOUNDARY_HZ);
    let mut out = Vec::new();
    match need.kind {
        Kind::Switching => {
            if need.conducted && low {
                out.push(format!(
                    "differential mode (failures below 5 MHz): add or enlarge the input filter of the {f0} converter (X capacitor, DM inductor, bulk capacitor ESR) next to its input"
                ));
            }
            if !need.conducted || high {
                out.push(format!(
                    "common mode (failures above 5 MHz): slow the switch-node edges of the {f0} converter (gate resistor, snubber), shrink the hot loop, add a common-mode choke or Y capacitors"
                ));
            }
            if !need.dithered {
                out.push(format!(
                    "spread-spectrum modulation of the {f0} switching frequency lowers peak and quasi-peak readings of its higher harmonics"
                ));
            }
        }
        Kind::Clock => {
            out.push(format!(
                "the {f0} clock: series-terminate the clock line at the driver, keep it short over an unbroken ground plane, filter its supply pin"
            ));
            out.push(format!("spread-spectrum clocking or a slower edge rate on the {f0} clock lowers its harmonics"));
            if !need.conducted || high {
                out.push("a ferrite clamp on the cable that carries it, or shielding of the cable".into());
            }
        }
        Kind::Lighting | Kind::Broadcast | Kind::Other => out.push(format!(
            "find the {f0} source on the board (probe near converters, clocks and cables); filter or shield where it couples out"
        )),
    }
    out
}

fn ambient_remedy(kind: Kind) -> String {
    match kind {
        Kind::Broadcast => "ambient broadcast: not the DUT; take the ambient scan again to confirm, or measure in a shielded room".into(),
        Kind::Lighting => "ambient lighting: switch off or move the bench lights (or their ballasts) and rescan".into(),
        _ => "ambient: present with the DUT off; find the lab's source (other equipment, test gear) or measure in a shielded room".into(),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn conducted_converter_below_5_mhz_gets_a_differential_mode_filter() {
        let need = Need {
            kind: Kind::Switching,
            origin: Origin::Dut,
            fundamental_hz: 65e3,
            failing_hz: &[325e3],
            dithered: false,
            conducted: true,
        };
        let r = remedies(&need);
        assert!(r[0].starts_with("differential mode"), "{r:?}");
        assert!(!r.iter().any(|s| s.starts_with("common mode")));
    }

    #[test]
    fn failures_above_5_mhz_get_common_mode_fixes() {
        let need = Need {
            kind: Kind::Switching,
            origin: Origin::Dut,
            fundamental_hz: 400e3,
            failing_hz: &[12e6],
            dithered: true,
            conducted: true,
        };
        let r = remedies(&need);
        assert!(r[0].starts_with("common mode"), "{r:?}");
        assert!(
            !r.iter().any(|s| s.contains("spread-spectrum")),
            "already dithered"
        );
    }

    #[test]
    fn ambient_families_are_not_fixed_on_the_board() {
        let need = Need {
            kind: Kind::Broadcast,
            origin: Origin::Ambient,
            fundamental_hz: 9e3,
            failing_hz: &[],
            dithered: false,
            conducted: true,
        };
        assert!(remedies(&need)[0].starts_with("ambient broadcast"));
    }
}
