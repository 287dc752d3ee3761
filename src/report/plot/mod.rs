//! Every plot copyloop writes, as a standalone SVG document written by hand: no plotting
//! crate, and no fonts to write it (the viewer renders the text in its sans-serif face).
//!
//! Two shapes cover every plot: the x–y [`Chart`] (time courses with mean ± SD bands, noise
//! against copy number, motif fluxes with error bars, a one-dimensional sweep) and the
//! [`HeatMap`] (a two-dimensional sweep). One file per job:
//!
//! - `text.rs`: escaping of every text, and estimated text widths for the layout;
//! - `axis.rs`: scales (linear, log₁₀), round ticks, tick labels;
//! - `ramp.rs`: the heat maps' perceptually ordered ramp and the series' palette;
//! - `canvas.rs`: the document writer (finite coordinates only);
//! - `frame.rs`: the title, frame, axis labels and notes every plot draws;
//! - `chart.rs` and `heat.rs`: the two shapes.
//!
//! Every element carries a `class` saying what it is, so that programs (and the tests) can
//! read a plot back: `title`, `x-label`, `y-label`, `x-tick`, `y-tick`, `frame`, `note`; a
//! chart has one `series` group per series (markers `marker`, error bars `error-bar`, bands
//! `band`, lines `line`), `point-label`s, and a `legend` of `legend-entry` groups in series
//! order, each with its `legend-label`; a heat map has `cell`s or `dot`s and a `colour-bar`
//! with its `bar-label` and `bar-tick`s.

pub mod axis;
pub mod canvas;
pub mod chart;
pub mod frame;
pub mod heat;
pub mod ramp;
pub mod text;

pub use axis::AxisSpec;
pub use chart::{Chart, Dash, Datum, Interval, Marker, Series};
pub use heat::{Cell, Dot, HeatMap};
