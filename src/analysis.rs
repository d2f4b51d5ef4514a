//! stub
#[derive(Debug, thiserror::Error)]
#[error("stub")]
pub struct SettingsError;
pub struct Analysis; pub struct Context; pub struct Verdict; pub fn analyze() {}
