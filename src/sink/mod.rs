//! Where results go: readable text and JSON lines.

pub mod json;
pub mod log;
pub mod text;
