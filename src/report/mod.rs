//! Views of models, findings and traces: DOT and JSON graphs, VCD waveforms, SVG plots,
//! markdown and HTML reports.

pub mod graph;
pub mod plot;
pub mod text;
pub mod vcd;
