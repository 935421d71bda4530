//! Views of models, findings and traces: DOT and JSON graphs, VCD waveforms, SVG plots,
//! markdown and HTML reports.

pub mod graph;
pub mod graph_svg;
pub mod html;
pub mod plot;
pub mod text;
pub mod vcd;
