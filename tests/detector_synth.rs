//! The demo's predicted QP/AV verdicts against QP and AV traces that `synth` renders with the
//! CISPR 16-1-1 receiver model in the time domain (`synth::render_detector`).

use spurhound::compare::reading_at;
use spurhound::correct::{Transducer, TransducerChain};
use spurhound::synth::{read_scene_file, render, render_detector};
use spurhound::{Context, Detector, analyze, limits};
use std::path::Path;

fn chain() -> TransducerChain {
    TransducerChain {
        items: vec![
            Transducer::read_file(Path::new("fixtures/transducers/limiter-10db.csv")).unwrap(),
        ],
    }
}

#[test]
fn predicted_qp_and_av_agree_with_the_rendered_traces() {
    let scene = read_scene_file(Path::new("fixtures/scenes/demo-board.toml")).unwrap();
    let peak = render(&scene).unwrap();
    let qp = chain()
        .apply(&render_detector(&scene, Detector::QuasiPeak).unwrap())
        .unwrap();
    let av = chain()
        .apply(&render_detector(&scene, Detector::Average).unwrap())
        .unwrap();
    let ctx = Context {
        limits: vec![
            limits::resolve("cispr32-b-qp").unwrap(),
            limits::resolve("cispr32-b-av").unwrap(),
        ],
        transducers: chain(),
        ..Context::default()
    };
    let a = analyze(&peak, &ctx).unwrap();
    let (qp_limit, av_limit) = (&ctx.limits[0], &ctx.limits[1]);
    let (mut compared, mut within, mut sign_checked) = (0, 0, 0);
    for p in &a.peaks {
        let Some(pp) = p.prediction else { continue };
        if pp.basis.is_none() {
            continue; // an upper bound, not a prediction
        }
        let half = 0.5 * p.width_hz.max(9e3);
        let (Some(mq), Some(ma)) = (
            reading_at(&qp, p.freq_hz, half),
            reading_at(&av, p.freq_hz, half),
        ) else {
            continue;
        };
        compared += 1;
        // the rendered traces carry the trace's own noise, and the table sits 1 dB from the
        // model at most between grid points: 1 dB of slack beyond the stated uncertainty
        if (pp.qp_dbuv - mq).abs() <= pp.qp_uncertainty_db + 1.0
            && (pp.av_dbuv - ma).abs() <= pp.av_uncertainty_db + 1.0
        {
            within += 1;
        }
        // where the prediction is sure (margin beyond its uncertainty), the rendered trace gives
        // the same pass or fail (limits: CISPR 32 Class B QP and AV)
        for (pred, u, measured, limit) in [
            (pp.qp_dbuv, pp.qp_uncertainty_db, mq, qp_limit),
            (pp.av_dbuv, pp.av_uncertainty_db, ma, av_limit),
        ] {
            let Some(l) = limit.at(p.freq_hz) else {
                continue;
            };
            if (l - pred).abs() > u + 1.0 {
                sign_checked += 1;
                assert_eq!(
                    l - pred >= 0.0,
                    l - measured >= 0.0,
                    "{} Hz: predicted {pred:.1} ± {u:.1}, rendered {measured:.1}, limit {l:.1}",
                    p.freq_hz
                );
            }
        }
    }
    println!(
        "{within} of {compared} peaks within the uncertainty; {sign_checked} sure verdicts checked"
    );
    assert!(
        compared > 50 && sign_checked > 50,
        "{compared} {sign_checked}"
    );
    assert!(
        within as f64 >= 0.9 * compared as f64,
        "{within} of {compared} within the uncertainty"
    );
    // the verdicts: the rendered QP and AV traces fail where the prediction says they do
    let fails = |trace: &spurhound::Scan, l: &spurhound::limits::Limit| {
        trace
            .freq_hz
            .iter()
            .zip(trace.level_dbuv.iter())
            .any(|(&f, &x)| l.at(f).is_some_and(|lim| x > lim))
    };
    let rendered_pass = !fails(&qp, qp_limit) && !fails(&av, av_limit);
    assert_eq!(a.detectors.predicted_pass, Some(rendered_pass));
}
