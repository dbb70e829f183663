//! Rendering layer: the chart description shared by HTML and PDF reports ([`chart`]) and the
//! PDF document model and renderer ([`pdf`]).
//!
//! Charts are drawn by one plotters function into either plotters' SVG backend (inline in HTML)
//! or our PDF backend (vector operations for printpdf). Text in both is measured with the
//! embedded DejaVu Sans faces, parsed once per process and shared across threads.

pub mod chart;
mod font;
pub mod pdf;
mod plotters_pdf;
mod tagged;
