//! Quasi-peak and average traces of a scene, with the CISPR 16-1-1 receiver model of
//! [`crate::detectors`] in the time domain.
//!
//! The peak trace is rendered as usual ([`super::render`]); at each display point the emission
//! that dominates it is then read by the model's detectors: a resolved steady line or carrier is
//! a CW (QP = AV = peak), a harmonic of a dithered source is a line swept over `n·f0·spread`
//! (triangular, at the source's modulation rate, 500 Hz when the scene renders its spread as a
//! continuous density), and a comb too fine to resolve is a pulse train at its repetition
//! frequency. The point's level moves by that emission's QP − PK or AV − PK from the model
//! (computed once per source, harmonic and band). Points that only noise fills read the noise's
//! rms (QP) or its Rayleigh mean, 1.05 dB under the rms (AV: 20·log10(√(π/4)), the mean of a
//! Rayleigh envelope over its rms, any communications text); noise is not in the model, so
//! those points are approximate.
//!
//! The scene's RBW should be the band's CISPR 16-1-1 bandwidth (the model's filter).

use super::random::{floor_at, relative_db, resolution};
use super::render::render;
use super::scene::Periodic;
use super::{Scene, SceneError};
use crate::detectors::{self, Band, ModelSettings, Profile};
use crate::scan::{Detector, Scan};
use std::collections::HashMap;

/// The dither rate taken for a source whose scene renders its spread as a density, Hz (the
/// model takes rates up to a tenth of the impulse bandwidth, 958 Hz in band B; faster declared
/// rates are read at that limit).
const DEFAULT_DITHER_RATE_HZ: f64 = 500.0;

/// AV of Rayleigh noise relative to its rms: 20·log10(√(π/4)) = −1.049 dB.
const NOISE_AV_MINUS_RMS_DB: f64 = -1.049;

/// An emission's QP − PK and AV − PK (dB).
type Relative = (f64, f64);

/// Renders `scene` as read by a quasi-peak or average detector (`detector` is
/// [`Detector::QuasiPeak`] or [`Detector::Average`]).
///
/// # Errors
/// [`SceneError::BadField`] for another detector; those of [`render`].
pub fn render_detector(scene: &Scene, detector: Detector) -> Result<Scan, SceneError> {
    if !matches!(detector, Detector::QuasiPeak | Detector::Average) {
        return Err(SceneError::BadField {
            file: scene.file.clone(),
            field: "detector".into(),
            value: format!("{detector:?}"),
            expected: "quasi-peak or average".into(),
        });
    }
    let mut peak_scene = scene.clone();
    peak_scene.scan.detector = Detector::Peak;
    let mut scan = render(&peak_scene)?;
    let settings = ModelSettings::coarse();
    let mut cache: HashMap<(usize, u32, Band), Relative> = HashMap::new();
    let mut comb_cache: HashMap<(usize, Band), Relative> = HashMap::new();
    let sources: Vec<(&Periodic, bool)> = scene
        .switching
        .iter()
        .map(|p| (p, false))
        .chain(scene.clock.iter().map(|p| (p, true)))
        .collect();
    let s = &scene.scan;
    let freqs = scan.freq_hz.to_vec();
    for (i, &f) in freqs.iter().enumerate() {
        let Ok(band) = Band::for_freq(f) else {
            continue;
        };
        let step = if i + 1 < freqs.len() {
            freqs[i + 1] - f
        } else if i > 0 {
            f - freqs[i - 1]
        } else {
            s.rbw_hz
        };
        // the dominant emission: (declared level, its QP/AV relative to peak)
        let mut best: Option<(f64, Relative)> = None;
        let mut offer = |level: f64, rel: Relative| {
            if best.is_none_or(|b| level > b.0) {
                best = Some((level, rel));
            }
        };
        for (k, &(p, is_clock)) in sources.iter().enumerate() {
            let n = (f / p.f0_hz).round().max(1.0) as u32;
            if p.max_harmonic > 0 && n > p.max_harmonic {
                continue;
            }
            let duty = p.duty.unwrap_or(if is_clock { 0.5 } else { 0.0 });
            let level = p.fundamental_dbuv + relative_db(p, duty, n, s.rbw_hz);
            if !level.is_finite() {
                continue;
            }
            if p.f0_hz <= resolution(s, f) {
                let rel = *comb_cache.entry((k, band)).or_insert_with(|| {
                    detectors::model_impulse_response(band, Some(p.f0_hz), &settings)
                        .map_or((0.0, 0.0), |r| (r.qp_minus_peak_db, r.av_minus_peak_db))
                });
                offer(level, rel);
                continue;
            }
            let sweep = f64::from(n) * p.f0_hz * p.spread_pct / 100.0;
            let reach = 0.5 * (s.rbw_hz + sweep) + 0.5 * step;
            if (f - f64::from(n) * p.f0_hz).abs() > reach {
                continue;
            }
            let rel = if sweep > 0.5 * s.rbw_hz {
                *cache.entry((k, n, band)).or_insert_with(|| {
                    let fastest =
                        0.99 * detectors::MAX_DITHER_RATE_PER_BIMP * band.impulse_bandwidth_hz();
                    let rate = if p.spread_rate_hz > 0.0 {
                        p.spread_rate_hz.min(fastest)
                    } else {
                        DEFAULT_DITHER_RATE_HZ.min(fastest)
                    };
                    detectors::model_dither_response(
                        band,
                        sweep,
                        rate,
                        Profile::Triangular,
                        &settings,
                    )
                    .map_or((0.0, 0.0), |r| (r.qp_minus_peak_db, r.av_minus_peak_db))
                })
            } else {
                (0.0, 0.0)
            };
            offer(level, rel);
        }
        for c in &scene.carrier {
            if (f - c.freq_hz).abs() <= 0.5 * (s.rbw_hz + step) {
                offer(c.level_dbuv, (0.0, 0.0));
            }
        }
        let noise_rms = floor_at(scene, f);
        let pk = scan.level_dbuv[i];
        let level = match best {
            // an emission the noise does not bury sets the reading
            Some((level, rel)) if level > noise_rms + 3.0 => {
                let d = if detector == Detector::QuasiPeak {
                    rel.0
                } else {
                    rel.1
                };
                (pk + d).max(noise_rms + noise_offset(detector))
            }
            _ => pk.min(noise_rms + noise_offset(detector)),
        };
        scan.level_dbuv[i] = level;
    }
    scan.meta.detector = Some(detector);
    Ok(scan)
}

fn noise_offset(detector: Detector) -> f64 {
    if detector == Detector::Average {
        NOISE_AV_MINUS_RMS_DB
    } else {
        0.0
    }
}
