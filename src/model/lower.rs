//! Lowering (placeholder).
use super::Model;
use crate::diag::Diagnostic;
pub fn lower(_src: &str) -> Result<Model, Vec<Diagnostic>> {
    Err(Vec::new())
}
