//! The CISPR 16-1-1 detector model against its reference values.
//!
//! Check values and their sources:
//! - "METHODS.md §3 [DER]": the idealised model's derived values (the envelope diode law,
//!   `ModelSettings::idealised()`, must reproduce them tightly, ±0.3 dB);
//! - "CISPR 16-1-1, quasi-peak pulse response [from memory] (METHODS.md §3)": the standard's
//!   table as remembered, not confirmed; the default model (carrier diode law) is held to the
//!   standard's tolerance at every tabulated PRF of every band;
//! - "derived": a formula written out beside the check.

use proptest::prelude::*;
use spurhound::detectors::{
    Band, DetectorError, Evidence, Gated, ModelSettings, Profile, Signal, dither_response,
    dither_table_axes, dwell_s, impulse_response, impulse_table_prfs, model_dither_response,
    model_impulse_response, predict, qp_settling_s, simulate, simulate_dwell,
    standard_pulse_response_db,
};

fn settings() -> ModelSettings {
    ModelSettings::default()
}

fn train(area_uv_s: f64, prf_hz: f64) -> Signal {
    Signal::PulseTrain {
        area_uv_s,
        prf_hz,
        offset_hz: 0.0,
    }
}

/// QP reading of impulses of 1 µV·s at `prf` (`None`: isolated), dBµV.
fn qp(band: Band, prf: Option<f64>, settings: &ModelSettings) -> f64 {
    let s = match prf {
        Some(p) => train(1.0, p),
        None => Signal::Impulse { area_uv_s: 1.0 },
    };
    simulate(band, &s, settings).unwrap().quasi_peak_dbuv
}

/// Relative equivalent level of the model: QP(reference PRF) − QP(PRF), dB.
fn relative_with(band: Band, reference_hz: f64, prf: Option<f64>, s: &ModelSettings) -> f64 {
    qp(band, Some(reference_hz), s) - qp(band, prf, s)
}

/// Relative equivalent level of the default model.
fn relative(band: Band, reference_hz: f64, prf: Option<f64>) -> f64 {
    relative_with(band, reference_hz, prf, &settings())
}

/// (PRF, idealised model [DER], CISPR 16-1-1 [MEM]); None = isolated.
type Row = (Option<f64>, f64, f64);

// source: METHODS.md §3, both rows of each band's quasi-peak pulse-response table.
const BAND_B: [Row; 6] = [
    (Some(1000.0), -4.6, -4.5),
    (Some(20.0), 7.5, 6.5),
    (Some(10.0), 11.9, 10.0),
    (Some(2.0), 23.1, 20.5),
    (Some(1.0), 25.5, 22.5),
    (None, 25.8, 23.5),
];
const BAND_A: [Row; 6] = [
    (Some(60.0), -2.7, -3.0),
    (Some(10.0), 4.1, 4.0),
    (Some(5.0), 8.1, 7.5),
    (Some(2.0), 14.0, 13.0),
    (Some(1.0), 17.7, 17.0),
    (None, 19.6, 19.0),
];
const BAND_CD: [Row; 6] = [
    (Some(1000.0), -8.6, -8.0),
    (Some(20.0), 10.6, 9.0),
    (Some(10.0), 16.0, 14.0),
    (Some(2.0), 28.6, 26.0),
    (Some(1.0), 32.3, 28.5),
    (None, 34.3, 31.5),
];

fn tables() -> [(Band, f64, &'static [Row; 6]); 3] {
    [
        (Band::A, 25.0, &BAND_A),
        (Band::B, 100.0, &BAND_B),
        (Band::CD, 100.0, &BAND_CD),
    ]
}

#[test]
fn qp_pulse_response_matches_the_idealised_model() {
    // source: METHODS.md §3 [DER], "idealised model" rows, bands A, B, C/D; ±0.3 dB
    let idealised = ModelSettings::idealised();
    for (band, reference, rows) in tables() {
        for &(prf, derived, _) in rows {
            let got = relative_with(band, reference, prf, &idealised);
            assert!(
                (got - derived).abs() <= 0.3,
                "{band} {prf:?}: model {got:.2} dB, METHODS.md §3 [DER] {derived}"
            );
        }
    }
}

#[test]
fn qp_pulse_response_against_the_standard() {
    // source: CISPR 16-1-1, quasi-peak pulse response [from memory] (METHODS.md §3), with
    // the standard's tolerances [from memory]: ±1 dB at and above the reference PRF,
    // ±1.5 dB down to 5 Hz, ±2 dB below. The default model (the diode rectifying the IF
    // carrier) meets them in every band at every tabulated PRF.
    for (band, reference, rows) in tables() {
        for &(prf, _, standard) in rows {
            let got = relative(band, reference, prf);
            let tolerance = match prf {
                Some(p) if p >= reference => 1.0,
                Some(p) if p >= 5.0 => 1.5,
                _ => 2.0,
            };
            assert!(
                (got - standard).abs() <= tolerance,
                "{band} {prf:?}: model {got:.2} dB, standard {standard} ± {tolerance}"
            );
        }
    }
}

#[test]
fn the_envelope_law_reads_high_at_low_prf() {
    // source: METHODS.md §3: the idealised model is higher than the table by 1 to 4 dB at low
    // PRF; the carrier law removes most of that gap (a test that fails if the default were
    // still the idealised law)
    let idealised = ModelSettings::idealised();
    for (band, reference, rows) in tables() {
        if band == Band::A {
            continue;
        }
        let &(prf, _, standard) = rows.last().unwrap();
        let ideal_gap = relative_with(band, reference, prf, &idealised) - standard;
        let carrier_gap = relative(band, reference, prf) - standard;
        assert!((1.0..=4.0).contains(&ideal_gap), "{band}: {ideal_gap:.2}");
        assert!(
            carrier_gap.abs() < ideal_gap - 1.0,
            "{band}: {carrier_gap:.2}"
        );
    }
}

#[test]
fn band_a_at_100_hz_overlapping_pulses_tuned_to_a_line() {
    // source: CISPR 16-1-1, quasi-peak pulse response [from memory] (METHODS.md §3): band A
    // 100 Hz −4.0 dB ± 1 dB. METHODS.md leaves this point out of the idealised model (the
    // filtered pulses overlap and add coherently, tuning-dependent); tuned to a comb line
    // they add in phase.
    let got = relative(Band::A, 25.0, Some(100.0));
    assert!((got + 4.0).abs() <= 1.0, "{got:.2}");
}

#[test]
fn reference_impulses_read_like_66_dbuv() {
    // source: METHODS.md §3: reference impulses [MEM] read like a 66 dBµV sine (CISPR
    // 16-1-1 calibration, ±1 dB here); the idealised model reads 65.9, 66.6, 65.9 [DER]
    for (band, area, prf, derived) in [
        (Band::A, 13.5, 25.0, 65.9),
        (Band::B, 0.316, 100.0, 66.6),
        (Band::CD, 0.044, 100.0, 65.9),
    ] {
        let ideal = simulate(band, &train(area, prf), &ModelSettings::idealised()).unwrap();
        assert!(
            (ideal.quasi_peak_dbuv - derived).abs() <= 0.1,
            "{band}: {:.2} vs [DER] {derived}",
            ideal.quasi_peak_dbuv
        );
        let r = simulate(band, &train(area, prf), &settings()).unwrap();
        assert!(
            (r.quasi_peak_dbuv - 66.02).abs() <= 1.0,
            "{band}: {:.2}",
            r.quasi_peak_dbuv
        );
    }
}

#[test]
fn peak_of_an_impulse_is_root2_area_times_impulse_bandwidth() {
    // source: METHODS.md §3 [DER]: PK = √2·IS·B_imp; band B, 0.316 µV·s: 4.28 mV = 72.6 dBµV
    let r = simulate(Band::B, &train(0.316, 100.0), &settings()).unwrap();
    let derived = 20.0 * (2f64.sqrt() * 0.316 * 1.064_467 * 9e3).log10();
    assert!((r.peak_dbuv - derived).abs() < 0.005, "{}", r.peak_dbuv);
    assert!((r.peak_dbuv - 72.6).abs() < 0.05);
    for band in Band::ALL {
        for prf in [0.5, 10.0, 30.0, 300.0] {
            if prf > band.impulse_bandwidth_hz() / 6.0 {
                continue; // filtered pulses overlap: not "PRF well below B_imp"
            }
            let r = simulate(band, &train(1.0, prf), &settings()).unwrap();
            let derived = 20.0 * (2f64.sqrt() * band.impulse_bandwidth_hz()).log10();
            assert!((r.peak_dbuv - derived).abs() < 0.005, "{band} {prf}");
        }
    }
}

#[test]
fn average_of_impulses_is_the_mean_envelope() {
    // source: METHODS.md §3 [DER]: AV = √2·IS·PRF, AV − PK = 20·log10(PRF/B_imp) for
    // PRF ≫ 1/T_L; band B, 0.316 µV·s at 100 Hz: 33.0 dBµV, AV − PK = −39.6 dB
    let r = simulate(Band::B, &train(0.316, 100.0), &settings()).unwrap();
    assert!((r.average_dbuv - 33.0).abs() < 0.05, "{}", r.average_dbuv);
    assert!((r.av_minus_peak_db() + 39.6).abs() < 0.05);
    for band in Band::ALL {
        for prf in [100.0, 1000.0] {
            if prf > band.impulse_bandwidth_hz() / 6.0 {
                continue; // filtered pulses overlap: not "PRF well below B_imp"
            }
            let r = simulate(band, &train(1.0, prf), &settings()).unwrap();
            let derived = 20.0 * (prf / band.impulse_bandwidth_hz()).log10();
            assert!(
                (r.av_minus_peak_db() - derived).abs() < 0.05,
                "{band} {prf}: {:.3} vs {derived:.3}",
                r.av_minus_peak_db()
            );
        }
    }
}

#[test]
fn qp_relative_to_peak_in_band_b() {
    // source: METHODS.md §3 [DER]: QP − PK ≈ −6.0 dB at 100 Hz in the idealised model, −6.6
    // with the standard's calibration; the carrier law gives −6.55 (±0.15 dB here)
    let ideal = simulate(Band::B, &train(0.316, 100.0), &ModelSettings::idealised()).unwrap();
    assert!(
        (ideal.qp_minus_peak_db() + 6.0).abs() < 0.15,
        "{}",
        ideal.qp_minus_peak_db()
    );
    let r = simulate(Band::B, &train(0.316, 100.0), &settings()).unwrap();
    assert!(
        (r.qp_minus_peak_db() + 6.6).abs() < 0.15,
        "{}",
        r.qp_minus_peak_db()
    );
}

#[test]
fn a_cw_reads_the_same_on_all_three_detectors() {
    // source: METHODS.md §2: a CW signal reads the same on peak, QP and average [C: S8]
    for band in Band::ALL {
        for (amp, offset) in [(1.0, 0.0), (2000.0, 0.0), (50.0, 0.3 * band.rbw_6db_hz())] {
            let s = Signal::Cw {
                amplitude_uv: amp,
                offset_hz: offset,
            };
            let r = simulate(band, &s, &settings()).unwrap();
            let level = 20.0 * (amp * band.filter_gain(offset)).log10();
            for got in [r.peak_dbuv, r.quasi_peak_dbuv, r.average_dbuv] {
                assert!((got - level).abs() < 0.1, "{band} {amp} {offset}: {got}");
            }
        }
    }
}

#[test]
fn a_long_burst_reads_like_its_line_and_a_fast_one_averages_to_its_duty() {
    // source: derived: a tuned line gated on for on_s ≫ T_L charges QP and AV fully; gated at
    // 100 Hz (≫ 1/T_L) its average is duty × amplitude, 20·log10(0.1) = −20 dB
    let cw = |on_s: f64, rate_hz: f64| Signal::Burst {
        carrier: Gated::Cw {
            amplitude_uv: 1000.0,
            offset_hz: 0.0,
        },
        on_s,
        rate_hz,
    };
    let long = simulate(Band::B, &cw(2.0, 0.25), &settings()).unwrap();
    assert!((long.peak_dbuv - 60.0).abs() < 1e-6);
    assert!(long.qp_minus_peak_db().abs() < 0.1);
    assert!(long.av_minus_peak_db().abs() < 0.1);
    let fast = simulate(Band::B, &cw(1e-3, 100.0), &settings()).unwrap();
    assert!((fast.av_minus_peak_db() + 20.0).abs() < 0.05, "{fast:?}");
    assert!(fast.quasi_peak_dbuv > fast.average_dbuv);
}

#[test]
fn a_very_short_burst_reads_like_an_impulse() {
    // source: derived: a tuned line of rms A gated on for T ≪ 1/B_imp has the envelope of
    // an impulse with √2·IS = A·T (both A·T·B·exp(−π(Bt)²)), so the same readings
    let (amp, on_s, rate) = (1e6, 1e-6, 100.0);
    let burst = Signal::Burst {
        carrier: Gated::Cw {
            amplitude_uv: amp,
            offset_hz: 0.0,
        },
        on_s,
        rate_hz: rate,
    };
    let b = simulate(Band::B, &burst, &settings()).unwrap();
    let p = simulate(Band::B, &train(amp * on_s / 2f64.sqrt(), rate), &settings()).unwrap();
    for (x, y) in [
        (b.peak_dbuv, p.peak_dbuv),
        (b.quasi_peak_dbuv, p.quasi_peak_dbuv),
        (b.average_dbuv, p.average_dbuv),
    ] {
        assert!((x - y).abs() < 0.05, "{b:?} {p:?}");
    }
}

#[test]
fn a_burst_of_pulses_reads_below_the_continuous_train() {
    // source: derived: gating removes pulses, so QP and AV fall, the peak stays
    let cont = simulate(Band::B, &train(1.0, 1000.0), &settings()).unwrap();
    let gated = Signal::Burst {
        carrier: Gated::Pulses {
            area_uv_s: 1.0,
            prf_hz: 1000.0,
            offset_hz: 0.0,
        },
        on_s: 0.02,
        rate_hz: 5.0,
    };
    let g = simulate(Band::B, &gated, &settings()).unwrap();
    assert!((g.peak_dbuv - cont.peak_dbuv).abs() < 0.005);
    assert!(g.quasi_peak_dbuv < cont.quasi_peak_dbuv - 1.0);
    // duty 0.1: the mean falls by 20 dB; the meter (T_L = 160 ms at 5 Hz) shows a little more
    let drop = cont.average_dbuv - g.average_dbuv;
    assert!((17.0..20.0).contains(&drop), "{drop}");
}

fn dithered(deviation_hz: f64, rate_hz: f64, profile: Profile, offset_hz: f64) -> Signal {
    Signal::Dithered {
        amplitude_uv: 1.0,
        deviation_hz,
        rate_hz,
        profile,
        offset_hz,
    }
}

#[test]
fn a_dithered_line_keeps_its_peak_when_slow() {
    // source: derived (quasi-static): with the dwell covering a modulation period the line
    // crosses the tuning, so the peak is the line's level; the loss of a sweep through the
    // Gaussian filter is 5·log10(1 + κ²), κ = 2·D·f_m/B_imp² (triangular)
    let b = Band::B.impulse_bandwidth_hz();
    for rate in [10.0, 300.0, 900.0] {
        let r = simulate(
            Band::B,
            &dithered(40e3, rate, Profile::Triangular, 0.0),
            &settings(),
        )
        .unwrap();
        let kappa = 2.0 * 40e3 * rate / (b * b);
        let derived = -5.0 * (1.0 + kappa * kappa).log10();
        assert!(
            (r.peak_dbuv - derived).abs() < 0.01,
            "{rate}: {}",
            r.peak_dbuv
        );
    }
}

#[test]
fn spread_spectrum_rule_of_thumb() {
    // source: METHODS.md §9 [CP, upper estimate]: the reduction of a dithered harmonic is
    // about 10·log10(Δf/RBW); check value [DER]: ±4 kHz on the 5th harmonic of 100 kHz,
    // Δf = 40 kHz, RBW 9 kHz: 6.5 dB.
    // In the model (dwell ≥ one modulation period) the rule is the power's reduction: the
    // rms falls by 10·log10(√2·Δf/B_imp) = 7.7 dB (derived: the line spends B_imp/(√2·Δf)
    // of the time's power in the filter, ∫|H|² df = B_imp/√2), 1.2 dB beyond the rule; the
    // peak falls far less (5·log10(1 + κ²)), within the rule as an upper estimate; the
    // average falls by 20·log10(Δf/(B_imp·√(1 + κ²))) (derived, mean envelope), more.
    let rule = 10.0 * (40e3_f64 / 9e3).log10();
    assert!((rule - 6.5).abs() < 0.05);
    let b = Band::B.impulse_bandwidth_hz();
    for rate in [30.0, 300.0, 900.0] {
        let r = simulate(
            Band::B,
            &dithered(40e3, rate, Profile::Triangular, 0.0),
            &settings(),
        )
        .unwrap();
        let rms_drop = -r.rms_dbuv.unwrap();
        let derived = 10.0 * (2f64.sqrt() * 40e3 / b).log10();
        assert!((rms_drop - derived).abs() < 0.02, "{rate}: {rms_drop}");
        assert!((rms_drop - rule).abs() < 1.3);
        assert!(-r.peak_dbuv <= rule);
        let kappa = 2.0 * 40e3 * rate / (b * b);
        let av_derived = 20.0 * (b * (1.0 + kappa * kappa).sqrt() / 40e3).log10();
        assert!(
            (r.av_minus_peak_db() - av_derived).abs() < 0.1,
            "{rate}: {} vs {av_derived}",
            r.av_minus_peak_db()
        );
        assert!(
            -r.quasi_peak_dbuv <= rule,
            "{rate}: QP falls within the rule"
        );
    }
}

#[test]
fn a_dithered_lines_power_is_shared_over_its_sweep() {
    // source: derived: a triangular sweep over D spends the fraction B_imp/(√2·D) of its power
    // in the filter (∫|H|² df = B_imp/√2, uniform time per Hz) at any tuning inside the sweep,
    // whatever the sweep rate (the local-sweep gain keeps ∫e² dt), so the rms reads
    // 10·log10(B_imp/(√2·D)); a check on the time grid over wide sweeps and many tunings
    // (tunings well inside the sweep, away from the turning points)
    for band in Band::ALL {
        let b = band.impulse_bandwidth_hz();
        for ratio in [3.0, 75.0, 100.0, 133.0, 420.0, 1000.0] {
            let d = ratio * band.rbw_6db_hz();
            for rate in [1.0, 0.0111 * b, 0.1 * b] {
                // inside the sweep by 4 widths of the swept response, B_imp·√(1 + κ²)
                let kappa = 2.0 * d * rate / (b * b);
                let width = b * (1.0 + kappa * kappa).sqrt();
                for share in [0.0, 0.3, 0.77] {
                    let offset = share * (0.5 * d - 4.0 * width).max(0.0);
                    let s = dithered(d, rate, Profile::Triangular, offset);
                    let r = simulate(band, &s, &settings()).unwrap();
                    let derived = 10.0 * (b / (2f64.sqrt() * d)).log10();
                    let got = r.rms_dbuv.unwrap();
                    assert!(
                        (got - derived).abs() < 0.02,
                        "{band} D/B6 {ratio} f_m {rate} offset {offset}: {got} vs {derived}"
                    );
                }
            }
        }
    }
}

#[test]
fn detectors_are_ordered_for_a_dithered_line_across_its_sweep() {
    // source: fact of the trade, peak ≥ QP ≥ AV
    for profile in [Profile::Triangular, Profile::Sinusoidal] {
        for offset in [0.0, 10e3, 19e3, 21e3, 30e3] {
            let r = simulate(
                Band::B,
                &dithered(40e3, 200.0, profile, offset),
                &settings(),
            )
            .unwrap();
            assert!(r.peak_dbuv >= r.quasi_peak_dbuv - 1e-9, "{r:?}");
            assert!(r.quasi_peak_dbuv >= r.average_dbuv - 1e-9, "{r:?}");
        }
    }
}

/// A random valid signal in a random band.
fn any_signal() -> impl Strategy<Value = (Band, Signal)> {
    let band = prop_oneof![Just(Band::A), Just(Band::B), Just(Band::CD)];
    (
        band,
        0usize..5,
        -2.0f64..4.0,
        0.0f64..1.0,
        0.0f64..1.0,
        -1.0f64..1.0,
    )
        .prop_map(|(band, kind, lg, u, v, w)| {
            let b = band.impulse_bandwidth_hz();
            let rbw = band.rbw_6db_hz();
            let signal = match kind {
                0 => Signal::Cw {
                    amplitude_uv: 10f64.powf(lg),
                    offset_hz: w * rbw,
                },
                1 => Signal::PulseTrain {
                    area_uv_s: 10f64.powf(lg),
                    prf_hz: 10f64.powf(-0.5 + u * (b * 3.0).log10()),
                    offset_hz: w * 1e3,
                },
                2 => {
                    let rate_hz = 10f64.powf(-0.5 + 2.5 * u);
                    let on_s = (v * 0.9 + 0.01) / rate_hz;
                    Signal::Burst {
                        carrier: Gated::Cw {
                            amplitude_uv: 10f64.powf(lg),
                            offset_hz: 0.0,
                        },
                        on_s,
                        rate_hz,
                    }
                }
                3 => {
                    let rate_hz = 10f64.powf(-0.5 + 1.5 * u);
                    let gap = 6.0 / b;
                    let on_s = (v * (1.0 / rate_hz - gap)).max(1e-4);
                    Signal::Burst {
                        carrier: Gated::Pulses {
                            area_uv_s: 10f64.powf(lg),
                            prf_hz: 10f64.powf(1.0 + 2.0 * v),
                            offset_hz: 0.0,
                        },
                        on_s,
                        rate_hz,
                    }
                }
                _ => Signal::Dithered {
                    amplitude_uv: 10f64.powf(lg),
                    deviation_hz: 30.0 * u * rbw,
                    rate_hz: 10f64.powf(v * (0.1 * b).log10()),
                    profile: if w > 0.0 {
                        Profile::Triangular
                    } else {
                        Profile::Sinusoidal
                    },
                    offset_hz: w * 20.0 * rbw * u,
                },
            };
            (band, signal)
        })
        .prop_filter("modelled signal", |(band, s)| s.check(*band).is_ok())
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 256, ..ProptestConfig::default() })]

    #[test]
    fn peak_is_at_least_qp_and_qp_at_least_average((band, signal) in any_signal()) {
        // source: fact of the trade, peak ≥ QP ≥ AV for every signal. Allowance 0.05 dB: where
        // both read nearly the full line (a burst a few meter time constants long), QP trails
        // AV by the charge stage's lag on top of the meter's; with the carrier law's slow final
        // approach (π·R/θ = 76 ms in band A) that is at most 0.023 dB (band A, 0.93 s bursts;
        // bands B and C/D: none), found by a sweep of burst lengths.
        let r = simulate(band, &signal, &ModelSettings::coarse()).unwrap();
        prop_assert!(r.peak_dbuv >= r.quasi_peak_dbuv - 1e-6, "{signal:?} {r:?}");
        prop_assert!(r.quasi_peak_dbuv >= r.average_dbuv - 0.05, "{signal:?} {r:?}");
    }
}

#[test]
fn the_integration_converges() {
    // source: numerical oracle: the default resolution against four times finer steps (the
    // scheme is second order; pulses agree to about 0.002 dB, a dithered line to 0.01 dB)
    let fine = ModelSettings {
        pulse_core_steps: 640,
        coarse_divisor: 160.0,
        sweep_steps_per_bimp: 160.0,
        ..settings()
    };
    let cases = [
        (Band::B, train(1.0, 1000.0)),
        (Band::A, train(1.0, 60.0)),
        (Band::CD, Signal::Impulse { area_uv_s: 1.0 }),
        (
            Band::B,
            Signal::Burst {
                carrier: Gated::Cw {
                    amplitude_uv: 1.0,
                    offset_hz: 2e3,
                },
                on_s: 3e-3,
                rate_hz: 20.0,
            },
        ),
        (Band::B, dithered(40e3, 300.0, Profile::Sinusoidal, 15e3)),
    ];
    for (band, s) in cases {
        let a = simulate(band, &s, &settings()).unwrap();
        let b = simulate(band, &s, &fine).unwrap();
        for (x, y) in [
            (a.peak_dbuv, b.peak_dbuv),
            (a.quasi_peak_dbuv, b.quasi_peak_dbuv),
            (a.average_dbuv, b.average_dbuv),
        ] {
            assert!((x - y).abs() < 0.01, "{band} {s:?}: {a:?} {b:?}");
        }
    }
}

#[test]
fn the_default_dwell_settles_the_slowest_case_and_one_second_does_not() {
    // source: derived with the model (dwell.rs, QP_SETTLING_S): band C/D impulses at 2.4 Hz
    // settle to 0.1 dB within 2.6 s, not in 1 s; METHODS.md §9 gives ≥ 1 s for unknown signals (S7) and a
    // reported worst case about 70 % longer (S41)
    let s = train(1.0, 2.37);
    let settled = simulate(Band::CD, &s, &settings()).unwrap();
    let dwell = dwell_s(Band::CD, None).unwrap();
    assert!((dwell - qp_settling_s(Band::CD)).abs() < 1e-12);
    let long = simulate_dwell(Band::CD, &s, dwell, &settings()).unwrap();
    assert!(settled.quasi_peak_dbuv - long.quasi_peak_dbuv <= 0.1);
    let short = simulate_dwell(Band::CD, &s, 1.0, &settings()).unwrap();
    assert!(settled.quasi_peak_dbuv - short.quasi_peak_dbuv > 1.0);
}

#[test]
fn impulse_table_agrees_with_the_model_at_a_few_points() {
    // source: the time-domain model (default settings, the ones that wrote the table)
    for band in Band::ALL {
        let prfs = impulse_table_prfs(band);
        for &prf in prfs.iter().step_by(9) {
            let m = model_impulse_response(band, Some(prf), &settings()).unwrap();
            let t = impulse_response(band, Some(prf)).unwrap();
            assert!(
                (m.qp_minus_peak_db - t.qp_minus_peak_db).abs() < 0.002,
                "{band} {prf}"
            );
            assert!(
                (m.av_minus_peak_db - t.av_minus_peak_db).abs() < 0.002,
                "{band} {prf}"
            );
        }
    }
}

#[test]
fn dither_table_agrees_with_the_model_at_a_few_points() {
    // source: the time-domain model (coarse settings) against the table at grid points
    for (band, i_ratio, i_rate) in [(Band::A, 6, 2), (Band::B, 8, 10), (Band::CD, 3, 15)] {
        let (ratios, rates) = dither_table_axes(band);
        let sweep = ratios[i_ratio] * band.rbw_6db_hz();
        for profile in [Profile::Triangular, Profile::Sinusoidal] {
            let m = model_dither_response(
                band,
                sweep,
                rates[i_rate],
                profile,
                &ModelSettings::coarse(),
            )
            .unwrap();
            let t = dither_response(band, sweep, rates[i_rate], profile).unwrap();
            assert!(
                (m.qp_minus_peak_db - t.qp_minus_peak_db).abs() < 0.1,
                "{band} {profile:?}: {m:?} {t:?}"
            );
            assert!(
                (m.av_minus_peak_db - t.av_minus_peak_db).abs() < 0.1,
                "{band} {profile:?}: {m:?} {t:?}"
            );
        }
    }
}

#[test]
#[ignore = "every table entry against the model: run in release (CI does)"]
fn every_table_entry_matches_the_model() {
    // source: the time-domain model at default settings, the one that wrote the tables
    for band in Band::ALL {
        for prf in impulse_table_prfs(band) {
            let m = model_impulse_response(band, Some(prf), &settings()).unwrap();
            let t = impulse_response(band, Some(prf)).unwrap();
            assert!((m.qp_minus_peak_db - t.qp_minus_peak_db).abs() < 0.002);
            assert!((m.av_minus_peak_db - t.av_minus_peak_db).abs() < 0.002);
        }
        let (ratios, rates) = dither_table_axes(band);
        for &rate in &rates {
            for &ratio in &ratios {
                for profile in [Profile::Triangular, Profile::Sinusoidal] {
                    let sweep = ratio * band.rbw_6db_hz();
                    let m = model_dither_response(band, sweep, rate, profile, &settings()).unwrap();
                    let t = dither_response(band, sweep, rate, profile).unwrap();
                    assert!((m.qp_minus_peak_db - t.qp_minus_peak_db).abs() < 0.002);
                    assert!((m.av_minus_peak_db - t.av_minus_peak_db).abs() < 0.002);
                }
            }
        }
    }
}

#[test]
#[ignore = "interpolation between table points against the model: run in release"]
fn table_interpolation_error_is_small() {
    // source: the time-domain model at the midpoints of the table grids; bounds: 0.1 dB for
    // impulses (found: 0.07 dB), 0.6 dB for dithered lines (coarser grid, two axes; found:
    // median 0.09 dB, 99 % under 0.39 dB, largest 0.54 dB)
    let mut worst_impulse: f64 = 0.0;
    for band in Band::ALL {
        let prfs = impulse_table_prfs(band);
        for pair in prfs.windows(2) {
            let prf = (pair[0] * pair[1]).sqrt();
            let m = model_impulse_response(band, Some(prf), &settings()).unwrap();
            let t = impulse_response(band, Some(prf)).unwrap();
            worst_impulse = worst_impulse
                .max((m.qp_minus_peak_db - t.qp_minus_peak_db).abs())
                .max((m.av_minus_peak_db - t.av_minus_peak_db).abs());
        }
    }
    assert!(worst_impulse < 0.1, "{worst_impulse}");
    let mut worst_dither: f64 = 0.0;
    for band in Band::ALL {
        let (ratios, rates) = dither_table_axes(band);
        for r in rates.windows(2) {
            for x in ratios.windows(2) {
                let (rate, ratio) = ((r[0] * r[1]).sqrt(), (x[0] * x[1]).sqrt());
                for profile in [Profile::Triangular, Profile::Sinusoidal] {
                    let sweep = ratio * band.rbw_6db_hz();
                    let m = model_dither_response(band, sweep, rate, profile, &settings()).unwrap();
                    let t = dither_response(band, sweep, rate, profile).unwrap();
                    worst_dither = worst_dither
                        .max((m.qp_minus_peak_db - t.qp_minus_peak_db).abs())
                        .max((m.av_minus_peak_db - t.av_minus_peak_db).abs());
                }
            }
        }
    }
    assert!(worst_dither < 0.6, "{worst_dither}");
}

#[test]
#[ignore = "search for the slowest settling: run in release"]
fn settling_constants_bound_the_model() {
    // source: derived with the model, the search that set dwell.rs's QP_SETTLING_S
    // (0.1 dB on QP and AV; pulses from 1 Hz at 8 PRFs a decade, CW, tuned bursts)
    let settle = |band: Band, s: &Signal| {
        let st = simulate(band, s, &settings()).unwrap();
        let ok = |t: f64| {
            let d = simulate_dwell(band, s, t, &settings()).unwrap();
            st.quasi_peak_dbuv - d.quasi_peak_dbuv <= 0.1 && st.average_dbuv - d.average_dbuv <= 0.1
        };
        // every case settles between 0.5 s and 4 s (one that does not reads 4 s and fails)
        let (mut lo, mut hi) = (0.5, 4.0);
        for _ in 0..12 {
            let m = 0.5 * (lo + hi);
            if ok(m) {
                hi = m;
            } else {
                lo = m;
            }
        }
        hi
    };
    for band in Band::ALL {
        let mut worst: f64 = settle(
            band,
            &Signal::Cw {
                amplitude_uv: 1.0,
                offset_hz: 0.0,
            },
        );
        for k in 0.. {
            let prf = 10f64.powf(k as f64 / 8.0);
            if prf > 4.0 * band.impulse_bandwidth_hz() {
                break;
            }
            worst = worst.max(settle(band, &train(1.0, prf)));
        }
        for rate in [1.0, 2.0, 5.0, 10.0, 20.0, 50.0] {
            for duty in [0.001, 0.01, 0.1, 0.5] {
                let s = Signal::Burst {
                    carrier: Gated::Cw {
                        amplitude_uv: 1.0,
                        offset_hz: 0.0,
                    },
                    on_s: duty / rate,
                    rate_hz: rate,
                };
                worst = worst.max(settle(band, &s));
            }
        }
        let constant = qp_settling_s(band);
        assert!(
            worst <= constant && worst > constant - 0.2,
            "{band}: {worst}"
        );
    }
}

#[test]
fn predictions_per_evidence() {
    // source: METHODS.md §3 [DER]: band B QP − PK ≈ −6.6 dB at 100 Hz with the standard's
    // calibration (the default model gives −6.55); −16.6 dB at 10 Hz (standard);
    // AV − PK = −39.6 dB
    let line = predict(Band::B, 60.0, &Evidence::StableLine).unwrap();
    assert_eq!((line.quasi_peak_dbuv, line.average_dbuv), (60.0, 60.0));
    let p = predict(Band::B, 72.63, &Evidence::Impulsive { prf_hz: 100.0 }).unwrap();
    let (lo, hi) = (
        p.quasi_peak_dbuv - p.quasi_peak_uncertainty_db,
        p.quasi_peak_dbuv + p.quasi_peak_uncertainty_db,
    );
    for expected in [72.63 - 6.6, 72.63 - 6.55] {
        assert!((lo..=hi).contains(&expected), "{p:?}");
    }
    assert!((p.average_dbuv - (72.63 - 39.6)).abs() < 0.05);
    let p10 = predict(Band::B, 72.63, &Evidence::Impulsive { prf_hz: 10.0 }).unwrap();
    let expected = 72.63 - 16.6;
    assert!(
        (p10.quasi_peak_dbuv - expected).abs() <= p10.quasi_peak_uncertainty_db,
        "{p10:?}"
    );
    // source: METHODS.md §3 [C: S8]: resolved lines (PRF > B_imp) read as CWs
    let comb = predict(Band::B, 50.0, &Evidence::Impulsive { prf_hz: 100e3 }).unwrap();
    assert_eq!(comb.quasi_peak_dbuv, 50.0);
    // a dithered line with unknown rate: a wider interval than with a known one
    let unknown = Evidence::Dithered {
        sweep_hz: 40e3,
        rate_hz: None,
        profile: None,
    };
    let known = Evidence::Dithered {
        sweep_hz: 40e3,
        rate_hz: Some(300.0),
        profile: Some(Profile::Triangular),
    };
    let (u, k) = (
        predict(Band::B, 60.0, &unknown).unwrap(),
        predict(Band::B, 60.0, &known).unwrap(),
    );
    assert!(u.quasi_peak_uncertainty_db > k.quasi_peak_uncertainty_db);
    assert!(u.average_dbuv < 60.0 && k.average_dbuv < 60.0);
    // source: derived, a 10 % duty burst at 100 Hz averages to −20 dB
    let burst = predict(
        Band::B,
        60.0,
        &Evidence::Burst {
            rate_hz: 100.0,
            duty: 0.1,
        },
    )
    .unwrap();
    assert!((burst.average_dbuv - 40.0).abs() < 0.1, "{burst:?}");
    assert!(burst.quasi_peak_dbuv <= 60.0 && burst.quasi_peak_dbuv > burst.average_dbuv);
}

#[test]
fn the_standard_curve_gives_the_methods_qp_relative_values() {
    // source: METHODS.md §3 [DER]: QP − PK (band B) ≈ −6.6 dB at 100 Hz minus the table entry
    // at other PRFs: about −16.6 dB at 10 Hz and −2.1 dB at 1 kHz
    let pk = 20.0 * (2f64.sqrt() * 0.316 * Band::B.impulse_bandwidth_hz()).log10();
    let anchor = 66.02 - pk;
    assert!((anchor + 6.6).abs() < 0.05);
    for (prf, expected) in [(10.0, -16.6), (1000.0, -2.1)] {
        let rel = standard_pulse_response_db(Band::B, Some(prf)).unwrap();
        assert!((anchor - rel - expected).abs() < 0.05, "{prf}");
    }
}

#[test]
fn bad_input_gives_errors_not_panics() {
    assert!(matches!(
        predict(Band::B, f64::NAN, &Evidence::StableLine),
        Err(DetectorError::LevelNotFinite { .. })
    ));
    assert!(matches!(
        predict(Band::B, 60.0, &Evidence::Impulsive { prf_hz: -1.0 }),
        Err(DetectorError::NotPositive { .. })
    ));
    assert!(matches!(
        predict(
            Band::B,
            60.0,
            &Evidence::Burst {
                rate_hz: 10.0,
                duty: 1.5
            }
        ),
        Err(DetectorError::DutyOutOfRange { .. })
    ));
    let bad = ModelSettings {
        pulse_core_steps: 7,
        ..ModelSettings::default()
    };
    assert!(matches!(
        simulate(Band::B, &train(1.0, 10.0), &bad),
        Err(DetectorError::Settings { .. })
    ));
    assert!(simulate_dwell(Band::B, &train(1.0, 10.0), 0.0, &settings()).is_err());
    // a repetition of hours needs too many steps: an error, not a memory blow-up
    assert!(matches!(
        simulate(Band::B, &train(1.0, 1e-5), &settings()),
        Err(DetectorError::GridTooLarge { .. })
    ));
    let endless = Signal::Burst {
        carrier: Gated::Pulses {
            area_uv_s: 1.0,
            prf_hz: 5e4,
            offset_hz: 0.0,
        },
        on_s: 1e6,
        rate_hz: 1e-7,
    };
    assert!(matches!(
        simulate(Band::B, &endless, &settings()),
        Err(DetectorError::GridTooLarge { .. })
    ));
    assert!(matches!(
        simulate_dwell(Band::CD, &train(1.0, 1e4), 1e6, &settings()),
        Err(DetectorError::DwellTooLong { .. })
    ));
    assert!(
        Signal::Impulse {
            area_uv_s: f64::INFINITY
        }
        .check(Band::B)
        .is_err()
    );
}
