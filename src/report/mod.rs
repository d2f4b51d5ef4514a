//! Renderers of an [`Analysis`]: text for people (80 columns), JSON of the
//! `spurhound.analysis/1` contract, CSV of the peak table, and an SVG plot; and of an ambient
//! [`crate::survey::Survey`] ([`survey`], [`survey_svg`]): text, `spurhound.survey/1` JSON, SVG.
//! The library returns the rendered text; only the CLI writes files or prints.

pub mod compare;
pub mod csv;
pub mod model;
pub mod survey;
pub mod survey_svg;
pub mod svg;
pub mod text;

use crate::analysis::Analysis;

/// A text format of the report.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Format {
    Text,
    Json,
    Csv,
    /// The re-measure list as CSV.
    Remeasure,
}

/// One renderer per format.
pub trait Renderer {
    /// The report as text.
    ///
    /// # Errors
    /// [`RenderError`] when the report cannot be serialised.
    fn render(&self, analysis: &Analysis) -> Result<String, RenderError>;
}

/// Renders `analysis` in `format`.
///
/// # Errors
/// As [`Renderer::render`].
pub fn render(analysis: &Analysis, format: Format) -> Result<String, RenderError> {
    match format {
        Format::Text => text::TextReport.render(analysis),
        Format::Json => model::JsonReport.render(analysis),
        Format::Csv => csv::PeakTable.render(analysis),
        Format::Remeasure => csv::RemeasureTable.render(analysis),
    }
}

/// What can go wrong rendering.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum RenderError {
    #[error("cannot serialise the report: {reason}")]
    Serialise { reason: String },
    #[error("cannot draw the plot: {reason}")]
    Plot { reason: String },
}
