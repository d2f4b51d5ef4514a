//! Published limit tables, built in.
//!
//! Values and their status (confirmed in a stored public copy, or from memory) are listed in
//! each table's `source`; the tests in `tests/limits.rs` check them against the published
//! check values.

use super::Limit;
use crate::scan::Detector;
use crate::units::Quantity;

/// One row of a published table: from `start_mhz` to `stop_mhz` the limit goes from
/// `start_db` to `stop_db` linearly in log10(f) (equal values: flat).
struct Band(f64, f64, f64, f64);

fn table(
    name: &str,
    title: &str,
    detector: Detector,
    quantity: Quantity,
    source: &str,
    bands: &[Band],
) -> Limit {
    let vertices = bands
        .iter()
        .flat_map(|b| [(b.0 * 1e6, b.2), (b.1 * 1e6, b.3)])
        .collect();
    Limit {
        name: name.to_string(),
        title: title.to_string(),
        detector,
        quantity,
        source: source.to_string(),
        vertices,
    }
}

const CISPR_MAINS: &str = "CISPR 22 / EN 55022 mains-port limits (confirmed in a stored copy of the EN 55022 levels \
     table); CISPR 32 keeps the same AC mains values (from memory: check the current edition). Limits fall \
     linearly with log10(f) from 0.15 to 0.5 MHz; the lower limit applies at the transition frequencies.";
const FCC_107: &str = "47 CFR 15.107 (revisions of 2008 and 2014, confirmed); (a) Class B, (b) Class A; the \
     lower limit applies at the band edges and boundaries.";
const CISPR_RAD_B: &str = "CISPR 32:2012 Table A.4, clauses A4.1 (10 m) and A4.2 (3 m), OATS/SAC, quasi-peak \
     120 kHz (confirmed in a stored public quotation of the table); the lower limit applies at 230 MHz.";
const CISPR_RAD_A: &str = "CISPR 32 Class A radiated limits up to 1 GHz, quasi-peak 120 kHz (confirmed in a \
     stored test-report table citing CISPR 32; table number from memory: A.2); the lower limit applies at 230 MHz.";
const FCC_109: &str = "47 CFR 15.109 (revisions of 2010 and 2011, confirmed): (a) 3 m, 100/150/200/500 µV/m; \
     (b) Class A 10 m, 90/150/210/300 µV/m; dBµV/m = 20·log10(µV/m); the tighter limit applies at the band \
     edges (15.109(c)). Quasi-peak below 1 GHz (15.35, from memory); above 1 GHz not included.";

/// Every built-in limit, in listing order.
#[rustfmt::skip]
pub fn all() -> Vec<Limit> {
    use Detector::{Average as Av, QuasiPeak as Qp};
    use Quantity::{FieldStrength as E, Voltage as V};
    let db = |uv_per_m: f64| 20.0 * uv_per_m.log10();
    vec![
        table("cispr32-a-qp", "CISPR 32 Class A, AC mains, quasi-peak", Qp, V, CISPR_MAINS,
            &[Band(0.15, 0.5, 79.0, 79.0), Band(0.5, 30.0, 73.0, 73.0)]),
        table("cispr32-a-av", "CISPR 32 Class A, AC mains, average", Av, V, CISPR_MAINS,
            &[Band(0.15, 0.5, 66.0, 66.0), Band(0.5, 30.0, 60.0, 60.0)]),
        table("cispr32-b-qp", "CISPR 32 Class B, AC mains, quasi-peak", Qp, V, CISPR_MAINS,
            &[Band(0.15, 0.5, 66.0, 56.0), Band(0.5, 5.0, 56.0, 56.0), Band(5.0, 30.0, 60.0, 60.0)]),
        table("cispr32-b-av", "CISPR 32 Class B, AC mains, average", Av, V, CISPR_MAINS,
            &[Band(0.15, 0.5, 56.0, 46.0), Band(0.5, 5.0, 46.0, 46.0), Band(5.0, 30.0, 50.0, 50.0)]),
        table("cispr32-a-rad-10m", "CISPR 32 Class A, radiated 10 m, quasi-peak", Qp, E, CISPR_RAD_A,
            &[Band(30.0, 230.0, 40.0, 40.0), Band(230.0, 1000.0, 47.0, 47.0)]),
        table("cispr32-a-rad-3m", "CISPR 32 Class A, radiated 3 m, quasi-peak", Qp, E, CISPR_RAD_A,
            &[Band(30.0, 230.0, 50.0, 50.0), Band(230.0, 1000.0, 57.0, 57.0)]),
        table("cispr32-b-rad-10m", "CISPR 32 Class B, radiated 10 m, quasi-peak", Qp, E, CISPR_RAD_B,
            &[Band(30.0, 230.0, 30.0, 30.0), Band(230.0, 1000.0, 37.0, 37.0)]),
        table("cispr32-b-rad-3m", "CISPR 32 Class B, radiated 3 m, quasi-peak", Qp, E, CISPR_RAD_B,
            &[Band(30.0, 230.0, 40.0, 40.0), Band(230.0, 1000.0, 47.0, 47.0)]),
        table("fcc15-a-qp", "FCC Part 15 Class A, AC power line, quasi-peak", Qp, V, FCC_107,
            &[Band(0.15, 0.5, 79.0, 79.0), Band(0.5, 30.0, 73.0, 73.0)]),
        table("fcc15-a-av", "FCC Part 15 Class A, AC power line, average", Av, V, FCC_107,
            &[Band(0.15, 0.5, 66.0, 66.0), Band(0.5, 30.0, 60.0, 60.0)]),
        table("fcc15-b-qp", "FCC Part 15 Class B, AC power line, quasi-peak", Qp, V, FCC_107,
            &[Band(0.15, 0.5, 66.0, 56.0), Band(0.5, 5.0, 56.0, 56.0), Band(5.0, 30.0, 60.0, 60.0)]),
        table("fcc15-b-av", "FCC Part 15 Class B, AC power line, average", Av, V, FCC_107,
            &[Band(0.15, 0.5, 56.0, 46.0), Band(0.5, 5.0, 46.0, 46.0), Band(5.0, 30.0, 50.0, 50.0)]),
        table("fcc15-a-rad-10m", "FCC Part 15 Class A, radiated 10 m, quasi-peak", Qp, E, FCC_109,
            &[Band(30.0, 88.0, db(90.0), db(90.0)), Band(88.0, 216.0, db(150.0), db(150.0)),
              Band(216.0, 960.0, db(210.0), db(210.0)), Band(960.0, 1000.0, db(300.0), db(300.0))]),
        table("fcc15-b-rad-3m", "FCC Part 15 Class B, radiated 3 m, quasi-peak", Qp, E, FCC_109,
            &[Band(30.0, 88.0, db(100.0), db(100.0)), Band(88.0, 216.0, db(150.0), db(150.0)),
              Band(216.0, 960.0, db(200.0), db(200.0)), Band(960.0, 1000.0, db(500.0), db(500.0))]),
    ]
}
