//! Views of models, findings and traces: DOT and JSON graphs, markdown, HTML and SVG.

pub mod graph;
pub mod text;
