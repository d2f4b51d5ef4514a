//! stub
#[derive(Debug, thiserror::Error)]
#[error("stub")]
pub struct CorrectError;
