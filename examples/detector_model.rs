//! The detector model at a glance: the quasi-peak pulse response per band against the
//! CISPR 16-1-1 table, a few predictions, and how long 200 predictions take.
//!
//!     cargo run --release --example detector_model
//!
//! Look at the "model − standard" column (within the standard's tolerance, ±1 to ±2 dB, at
//! every PRF; the idealised envelope law of METHODS.md §3 would read 1 to 4 dB high at low
//! PRF in bands B and C/D) and at the prediction time at the end.

use spurhound::detectors::{
    Band, Evidence, ModelSettings, Profile, Signal, predict, simulate, standard_pulse_response_db,
};
use std::time::Instant;

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let settings = ModelSettings::default();
    println!("quasi-peak pulse response, dB relative to the reference PRF");
    println!("band   PRF (Hz)   model   standard [from memory]   model − standard");
    for (band, reference, prfs) in [
        (Band::A, 25.0, &[100.0, 60.0, 10.0, 5.0, 2.0, 1.0][..]),
        (Band::B, 100.0, &[1000.0, 20.0, 10.0, 2.0, 1.0][..]),
        (Band::CD, 100.0, &[1000.0, 20.0, 10.0, 2.0, 1.0][..]),
    ] {
        let qp = |prf: Option<f64>| -> Result<f64, Box<dyn std::error::Error>> {
            let s = match prf {
                Some(prf_hz) => Signal::PulseTrain {
                    area_uv_s: 1.0,
                    prf_hz,
                    offset_hz: 0.0,
                },
                None => Signal::Impulse { area_uv_s: 1.0 },
            };
            Ok(simulate(band, &s, &settings)?.quasi_peak_dbuv)
        };
        let at_ref = qp(Some(reference))?;
        let rows = prfs.iter().map(|&p| Some(p)).chain(std::iter::once(None));
        for prf in rows {
            let model = at_ref - qp(prf)?;
            let standard = standard_pulse_response_db(band, prf)?;
            let label = prf.map_or("isolated".to_string(), |p| format!("{p}"));
            println!(
                "{:<6} {label:>9} {model:>7.2} {standard:>10.1} {:>24.2}",
                band.name(),
                model - standard
            );
        }
    }

    let families = [
        (Band::B, 62.0, Evidence::StableLine),
        (Band::B, 70.0, Evidence::Impulsive { prf_hz: 100.0 }),
        (Band::B, 58.0, Evidence::Impulsive { prf_hz: 5.0 }),
        (
            Band::B,
            61.0,
            Evidence::Dithered {
                sweep_hz: 40e3,
                rate_hz: None,
                profile: None,
            },
        ),
        (
            Band::CD,
            45.0,
            Evidence::Dithered {
                sweep_hz: 1e6,
                rate_hz: Some(30.0),
                profile: Some(Profile::Triangular),
            },
        ),
        (
            Band::B,
            66.0,
            Evidence::Burst {
                rate_hz: 10.0,
                duty: 0.05,
            },
        ),
    ];
    println!("\npredictions (dBµV, ± half-width in dB)");
    for (band, peak, evidence) in &families {
        let p = predict(*band, *peak, evidence)?;
        println!(
            "{:<4} PK {peak:5.1}  QP {:5.1} ± {:.1}  AV {:5.1} ± {:.1}  {}",
            band.name(),
            p.quasi_peak_dbuv,
            p.quasi_peak_uncertainty_db,
            p.average_dbuv,
            p.average_uncertainty_db,
            p.basis.describe()
        );
    }

    for (label, pick) in [
        ("from the tables (line, impulsive, dithered)", 5usize),
        ("mixed, one burst in six simulated", 6),
    ] {
        let start = Instant::now();
        let mut sum = 0.0;
        for i in 0..200 {
            let (band, peak, evidence) = &families[i % pick];
            sum += predict(*band, *peak, evidence)?.quasi_peak_dbuv;
        }
        println!(
            "200 predictions {label}: {:.2} ms (checksum {sum:.1})",
            start.elapsed().as_secs_f64() * 1e3
        );
    }
    Ok(())
}
