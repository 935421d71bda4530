//! The trace plot as SVG (placeholder until the plotting view lands).

use crate::sim::trace::Trace;

pub fn svg(trace: &Trace) -> String {
    format!(
        "<svg xmlns=\"http://www.w3.org/2000/svg\"><title>{}</title></svg>\n",
        trace.scenario
    )
}
