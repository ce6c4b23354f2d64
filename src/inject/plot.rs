//! The completeness curve as a PNG: binned recovered fractions with binomial error
//! bars, the fitted probit curve, and the ideal Gaussian-noise curve Φ(s − T) of a
//! search that loses nothing, for comparison.

use plotters::prelude::*;
use statrs::distribution::{ContinuousCDF, Normal};

use super::run::InjectionResult;
use crate::error::{Error, Result};
use crate::report::Figure;
use crate::report::figure::{draw_axes, draw_err, draw_legend, text, verdict_colour};

/// Figure size in pixels.
pub const SIZE: (u32, u32) = (900, 520);

/// Draws the completeness against expected S/N for a search with threshold
/// `snr_threshold`.
///
/// # Errors
/// [`Error::Config`] when no burst was injected.
pub fn completeness_figure(result: &InjectionResult, snr_threshold: f64) -> Result<Figure> {
    let s = &result.summary;
    let bins: Vec<_> = s.by_snr.iter().filter(|b| b.n > 0).collect();
    let (Some(first), Some(last)) = (bins.first(), bins.last()) else {
        return Err(Error::Config("no injected bursts to plot".into()));
    };
    let (x0, x1) = (first.lo, last.hi);
    let mut fig = Figure::blank(SIZE.0, SIZE.1);
    {
        let root = BitMapBackend::with_buffer(&mut fig.rgb, SIZE).into_drawing_area();
        let level = |v: Option<f64>| v.map_or("-".to_string(), |x| format!("{x:.2}"));
        let title = format!(
            "{} bursts: 50 % at S/N {}, 90 % at S/N {} (threshold {snr_threshold})",
            s.n_injected,
            level(s.snr50),
            level(s.snr90)
        );
        let mut chart = ChartBuilder::on(&root)
            .caption(title, text(16))
            .margin(12)
            .x_label_area_size(44)
            .y_label_area_size(64)
            .build_cartesian_2d(x0..x1, -0.02..1.05)
            .map_err(draw_err)?;
        draw_axes(&mut chart, "expected S/N", "fraction recovered", true)?;
        let grid: Vec<f64> = (0..=200)
            .map(|i| x0 + (x1 - x0) * f64::from(i) / 200.0)
            .collect();
        let phi = Normal::standard();
        let grey = RGBColor(120, 120, 120);
        chart
            .draw_series(DashedLineSeries::new(
                grid.iter().map(|&x| (x, phi.cdf(x - snr_threshold))),
                6,
                4,
                grey.stroke_width(1),
            ))
            .map_err(draw_err)?
            .label("ideal: Φ(S/N − threshold)")
            .legend(move |(x, y)| PathElement::new([(x, y), (x + 16, y)], grey.stroke_width(1)));
        if let Some(fit) = s.snr_fit {
            let blue = verdict_colour(crate::Verdict::Astrophysical);
            chart
                .draw_series(LineSeries::new(
                    grid.iter().map(|&x| (x, fit.at(x))),
                    blue.stroke_width(2),
                ))
                .map_err(draw_err)?
                .label(format!(
                    "probit fit μ = {:.2}, σ = {:.2}",
                    fit.mu, fit.sigma
                ))
                .legend(move |(x, y)| {
                    PathElement::new([(x, y), (x + 16, y)], blue.stroke_width(2))
                });
        }
        let points: Vec<(f64, f64, f64)> = bins
            .iter()
            .filter_map(|b| Some((0.5 * (b.lo + b.hi), b.fraction?, b.fraction_err?)))
            .collect();
        chart
            .draw_series(points.iter().map(|&(x, f, e)| {
                PathElement::new(
                    [(x, (f - e).max(0.0)), (x, (f + e).min(1.0))],
                    BLACK.stroke_width(1),
                )
            }))
            .map_err(draw_err)?;
        chart
            .draw_series(
                points
                    .iter()
                    .map(|&(x, f, _)| Circle::new((x, f), 3, BLACK.filled())),
            )
            .map_err(draw_err)?
            .label("binned fraction ± binomial error")
            .legend(|(x, y)| Circle::new((x + 8, y), 3, BLACK.filled()));
        draw_legend(&mut chart, SeriesLabelPosition::LowerRight)?;
        root.present().map_err(draw_err)?;
    }
    Ok(fig)
}
