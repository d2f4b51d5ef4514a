//! Synthetic analyzer traces: a declared scene (receiver setting, noise floor, switching
//! converters, clocks, carriers, broadband humps) rendered as the [`Scan`](crate::Scan) a
//! positive-peak, average, rms or sample detector would show. Used for demos and for
//! ground-truth tests of the analysis stages.
//!
//! [`scene`] reads and checks the TOML description; [`render`](render::render) turns it into a
//! trace. A seed reproduces a trace exactly.
//!
//! ```
//! use spurhound::synth::{parse_scene, render};
//! let text = r#"
//! [scan]
//! start_hz = 150e3
//! stop_hz = 1e6
//! points = 851
//! rbw_hz = 9e3
//! seed = 7
//! [floor]
//! level_dbuv = 0.0
//! [[carrier]]
//! freq_hz = 500e3
//! level_dbuv = 50.0
//! am_depth = 0.0
//! "#;
//! let scene = parse_scene(text, "demo.toml")?;
//! let scan = render(&scene)?;
//! assert_eq!(scan.len(), 851);
//! let i = 350; // 150 kHz + 350 · 1 kHz = 500 kHz
//! assert!((scan.level_dbuv[i] - 50.0).abs() < 0.5);
//! # Ok::<(), spurhound::synth::SceneError>(())
//! ```

pub mod day;
pub mod detect;
pub mod random;
pub mod render;
pub mod scene;

pub use detect::render_detector;
pub use render::{render, render_sweeps, trapezoid_harmonic_peak};
pub use scene::{Scene, parse_scene, read_scene_file};

/// What can be wrong with a scene. Every variant names the file; field errors name the field
/// (`scan.stop_hz`, `switching[0].duty`, ...), the value found and what was expected.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum SceneError {
    /// The scene file cannot be read.
    #[error("{file}: cannot read the scene file: {reason}")]
    Io { file: String, reason: String },
    /// TOML syntax, an unknown or missing key, or a value of the wrong type.
    #[error("{file}: not a valid scene: {message}")]
    Toml { file: String, message: String },
    /// A value out of range, or a scene too large to render.
    #[error("{file}: `{field}` = {value}: expected {expected}")]
    BadField {
        file: String,
        field: String,
        value: String,
        expected: String,
    },
    /// The rendered points do not make a valid scan (e.g. log-spaced points too dense to stay
    /// distinct in floating point).
    #[error("{file}: the rendered trace is not a valid scan: {reason}")]
    Render { file: String, reason: String },
}
