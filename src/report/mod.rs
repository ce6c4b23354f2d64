//! Plots, the HTML report and the keyboard-driven review page.
//!
//! Every plot is a function from plain data to a [`Figure`] (an in-memory RGB image
//! with PNG encoding), drawn with plotters in the embedded DejaVu Sans font and the
//! viridis colour map, so the same input gives the same pixels on every machine.

pub mod activity;
pub mod candidate_data;
pub mod candidate_plot;
pub mod dm_curve;
pub mod figure;
pub mod html;
pub mod load;
pub mod overview;
pub mod periodicity;
pub mod review;
pub mod source;
pub mod stretch;
pub mod waterfall;

pub use candidate_plot::{Detection, candidate_figure, candidate_figure_from_file};
pub use figure::Figure;
