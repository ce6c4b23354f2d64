//! Periodicity figures from plain arrays, so any period search can use them: the
//! periodogram with its best peak and false-alarm levels, burst counts folded at a
//! period beside the exposure in each phase bin, and the timeline of sessions, bursts
//! and predicted active windows.

use std::collections::BTreeMap;

use plotters::coord::ranged1d::ValueFormatter;
use plotters::coord::types::RangedCoordf64;
use plotters::prelude::*;

use super::figure::{
    Figure, PanelRect, draw_axes, draw_err, draw_legend, panel_rect, text, verdict_colour,
};
use crate::candidate::Verdict;
use crate::error::{Error, Result};

/// Size of each periodicity figure in pixels.
pub const SIZE: (u32, u32) = (1000, 460);

/// A periodogram: one statistic value per trial period.
#[derive(Debug, Clone, Copy)]
pub struct Periodogram<'a> {
    /// Trial periods (any unit, named in `period_label`), ascending.
    pub periods: &'a [f64],
    /// Statistic at each trial period.
    pub statistic: &'a [f64],
    /// Axis name of the statistic, e.g. "folded χ²" or "Z²₂".
    pub statistic_label: &'a str,
    /// Axis name of the period with its unit, e.g. "trial period (days)".
    pub period_label: &'a str,
    /// Statistic values at which the false-alarm probability equals the label's value,
    /// e.g. `(12.3, "FAP 1%")`.
    pub fap_levels: &'a [(f64, &'a str)],
}

/// Draws a periodogram, marking the highest peak and the false-alarm levels. The
/// period axis is logarithmic when the periods span more than a factor of 20.
///
/// # Errors
/// [`Error::Config`] when the arrays are empty or differ in length.
pub fn periodogram_figure(p: &Periodogram) -> Result<Figure> {
    if p.periods.is_empty() || p.periods.len() != p.statistic.len() {
        return Err(Error::Config(format!(
            "periodogram needs equal, non-empty arrays ({} periods, {} values)",
            p.periods.len(),
            p.statistic.len()
        )));
    }
    let best = (0..p.periods.len())
        .max_by(|&a, &b| p.statistic[a].total_cmp(&p.statistic[b]))
        .expect("non-empty");
    let (x0, x1) = (
        p.periods[0],
        p.periods[p.periods.len() - 1].max(p.periods[0] * 1.000001),
    );
    let top = p
        .fap_levels
        .iter()
        .map(|l| l.0)
        .fold(p.statistic[best], f64::max)
        * 1.12;
    let bottom = p.statistic.iter().copied().fold(0.0, f64::min);
    let mut fig = Figure::blank(SIZE.0, SIZE.1);
    let mut rects = BTreeMap::new();
    {
        let root = BitMapBackend::with_buffer(&mut fig.rgb, SIZE).into_drawing_area();
        let title = format!(
            "best peak: {} = {:.4} at period {:.6}",
            p.statistic_label, p.statistic[best], p.periods[best]
        );
        let mut builder = ChartBuilder::on(&root);
        builder
            .caption(title, text(16))
            .margin(12)
            .x_label_area_size(44)
            .y_label_area_size(64);
        if x1 / x0 > 20.0 && x0 > 0.0 {
            let mut chart = builder
                .build_cartesian_2d((x0..x1).log_scale(), bottom..top)
                .map_err(draw_err)?;
            rects.insert(
                "periodogram",
                draw_periodogram(&mut chart, p, best, (x0, x1))?,
            );
        } else {
            let mut chart = builder
                .build_cartesian_2d(x0..x1, bottom..top)
                .map_err(draw_err)?;
            rects.insert(
                "periodogram",
                draw_periodogram(&mut chart, p, best, (x0, x1))?,
            );
        }
        root.present().map_err(draw_err)?;
    }
    fig.panels = rects;
    Ok(fig)
}

type Chart<'a, X> = ChartContext<'a, BitMapBackend<'a>, Cartesian2d<X, RangedCoordf64>>;

fn draw_periodogram<X>(
    chart: &mut Chart<'_, X>,
    p: &Periodogram,
    best: usize,
    (x0, x1): (f64, f64),
) -> Result<PanelRect>
where
    X: Ranged<ValueType = f64> + ValueFormatter<f64>,
{
    draw_axes(chart, p.period_label, p.statistic_label, true)?;
    let grey = RGBColor(90, 90, 90);
    for (i, &(level, label)) in p.fap_levels.iter().enumerate() {
        chart
            .draw_series(DashedLineSeries::new(
                [(x0, level), (x1, level)],
                4 + 4 * i as u32,
                4,
                grey.stroke_width(1),
            ))
            .map_err(draw_err)?
            .label(format!("{label} at {level:.3}"))
            .legend(move |(x, y)| PathElement::new([(x, y), (x + 16, y)], grey.stroke_width(1)));
    }
    chart
        .draw_series(LineSeries::new(
            p.periods.iter().copied().zip(p.statistic.iter().copied()),
            BLACK.stroke_width(1),
        ))
        .map_err(draw_err)?;
    let peak = verdict_colour(Verdict::Astrophysical);
    chart
        .draw_series(std::iter::once(Circle::new(
            (p.periods[best], p.statistic[best]),
            7,
            peak.stroke_width(2),
        )))
        .map_err(draw_err)?
        .label("best peak")
        .legend(move |(x, y)| Circle::new((x + 8, y), 5, peak.stroke_width(2)));
    draw_legend(chart, SeriesLabelPosition::UpperLeft)?;
    Ok(panel_rect(chart))
}

/// Draws bursts per phase bin (bars) with the counts a constant rate would give
/// (`counts × exposure share`, dashed) above the exposure per bin.
///
/// `exposure` is on-source time per bin in `exposure_unit`; `title` names the period
/// and epoch.
///
/// # Errors
/// [`Error::Config`] when the arrays are empty or differ in length.
pub fn folded_figure(
    counts: &[u32],
    exposure: &[f64],
    exposure_unit: &str,
    title: &str,
) -> Result<Figure> {
    let n = counts.len();
    if n == 0 || exposure.len() != n {
        return Err(Error::Config(format!(
            "folded profile needs equal, non-empty arrays ({n} counts, {} exposures)",
            exposure.len()
        )));
    }
    let total: u32 = counts.iter().sum();
    let exp_total: f64 = exposure.iter().sum();
    let expected: Vec<f64> = exposure
        .iter()
        .map(|&e| {
            if exp_total > 0.0 {
                total as f64 * e / exp_total
            } else {
                0.0
            }
        })
        .collect();
    let width = 1.0 / n as f64;
    let mut fig = Figure::blank(SIZE.0, SIZE.1);
    let mut rects = BTreeMap::new();
    {
        let root = BitMapBackend::with_buffer(&mut fig.rgb, SIZE).into_drawing_area();
        let root = root.titled(title, text(16)).map_err(draw_err)?;
        let (upper, lower) = root.split_vertically(250);
        let c_hi = counts
            .iter()
            .map(|&c| c as f64)
            .chain(expected.iter().copied())
            .fold(1.0, f64::max)
            * 1.15;
        let mut chart = ChartBuilder::on(&upper)
            .margin(10)
            .x_label_area_size(20)
            .y_label_area_size(64)
            .build_cartesian_2d(0.0..1.0, 0.0..c_hi)
            .map_err(draw_err)?;
        draw_axes(&mut chart, "", "bursts", false)?;
        let blue = verdict_colour(Verdict::Astrophysical);
        chart
            .draw_series(counts.iter().enumerate().map(|(i, &c)| {
                let x = i as f64 * width;
                Rectangle::new([(x, 0.0), (x + width, c as f64)], blue.mix(0.8).filled())
            }))
            .map_err(draw_err)?
            .label("bursts per phase bin")
            .legend(move |(x, y)| Rectangle::new([(x, y - 5), (x + 14, y + 5)], blue.filled()));
        let steps = expected
            .iter()
            .enumerate()
            .flat_map(|(i, &e)| [(i as f64 * width, e), ((i + 1) as f64 * width, e)]);
        chart
            .draw_series(DashedLineSeries::new(steps, 6, 4, BLACK.stroke_width(2)))
            .map_err(draw_err)?
            .label("expected at a constant rate")
            .legend(|(x, y)| PathElement::new([(x, y), (x + 16, y)], BLACK.stroke_width(2)));
        draw_legend(&mut chart, SeriesLabelPosition::UpperRight)?;
        rects.insert("counts", panel_rect(&chart));

        let e_hi = exposure.iter().copied().fold(0.0, f64::max).max(1e-12) * 1.15;
        let mut chart = ChartBuilder::on(&lower)
            .margin(10)
            .x_label_area_size(40)
            .y_label_area_size(64)
            .build_cartesian_2d(0.0..1.0, 0.0..e_hi)
            .map_err(draw_err)?;
        draw_axes(
            &mut chart,
            "phase (cycles)",
            &format!("exposure ({exposure_unit})"),
            false,
        )?;
        chart
            .draw_series(exposure.iter().enumerate().map(|(i, &e)| {
                let x = i as f64 * width;
                Rectangle::new([(x, 0.0), (x + width, e)], RGBColor(150, 150, 150).filled())
            }))
            .map_err(draw_err)?;
        rects.insert("exposure", panel_rect(&chart));
        root.present().map_err(draw_err)?;
    }
    fig.panels = rects;
    Ok(fig)
}

/// Draws observing sessions (grey bars), burst arrival times (ticks) and predicted
/// active windows (shaded), all as MJD, on one time axis.
///
/// # Errors
/// [`Error::Config`] when there is nothing to draw or an interval ends before it starts.
pub fn timeline_figure(
    sessions_mjd: &[(f64, f64)],
    bursts_mjd: &[f64],
    windows_mjd: &[(f64, f64)],
) -> Result<Figure> {
    if let Some(bad) = sessions_mjd
        .iter()
        .chain(windows_mjd)
        .find(|(a, b)| b < a || a.is_nan() || b.is_nan())
    {
        return Err(Error::Config(format!(
            "interval {bad:?} ends before it starts"
        )));
    }
    let all = sessions_mjd
        .iter()
        .chain(windows_mjd)
        .flat_map(|&(a, b)| [a, b])
        .chain(bursts_mjd.iter().copied());
    let (lo, hi) = all.fold((f64::INFINITY, f64::NEG_INFINITY), |(l, h), v| {
        (l.min(v), h.max(v))
    });
    if !lo.is_finite() {
        return Err(Error::Config(
            "timeline has no sessions, bursts or windows".into(),
        ));
    }
    let pad = ((hi - lo) * 0.03).max(0.5);
    let mut fig = Figure::blank(SIZE.0, SIZE.1 / 2 + 60);
    let mut rects = BTreeMap::new();
    {
        let root =
            BitMapBackend::with_buffer(&mut fig.rgb, (fig.width, fig.height)).into_drawing_area();
        let mut chart = ChartBuilder::on(&root)
            .caption(
                format!(
                    "{} sessions, {} bursts, {} predicted active windows",
                    sessions_mjd.len(),
                    bursts_mjd.len(),
                    windows_mjd.len()
                ),
                text(16),
            )
            .margin(12)
            .x_label_area_size(44)
            .y_label_area_size(90)
            .build_cartesian_2d((lo - pad)..(hi + pad), 0.0..3.0)
            .map_err(draw_err)?;
        chart
            .configure_mesh()
            .disable_y_mesh()
            .light_line_style(RGBColor(235, 235, 235))
            .y_labels(4)
            .y_label_formatter(&|y: &f64| match y.round() as i32 {
                1 => "sessions".into(),
                2 => "bursts".into(),
                _ => String::new(),
            })
            .x_desc("MJD")
            .label_style(text(12))
            .axis_desc_style(text(13))
            .draw()
            .map_err(draw_err)?;
        let purple = verdict_colour(Verdict::Unsure);
        chart
            .draw_series(
                windows_mjd
                    .iter()
                    .map(|&(a, b)| Rectangle::new([(a, 0.0), (b, 3.0)], purple.mix(0.22).filled())),
            )
            .map_err(draw_err)?
            .label("predicted active window")
            .legend(move |(x, y)| {
                Rectangle::new([(x, y - 5), (x + 14, y + 5)], purple.mix(0.3).filled())
            });
        chart
            .draw_series(sessions_mjd.iter().map(|&(a, b)| {
                Rectangle::new([(a, 0.75), (b, 1.25)], RGBColor(110, 110, 110).filled())
            }))
            .map_err(draw_err)?
            .label("on source")
            .legend(|(x, y)| {
                Rectangle::new(
                    [(x, y - 5), (x + 14, y + 5)],
                    RGBColor(110, 110, 110).filled(),
                )
            });
        let blue = verdict_colour(Verdict::Astrophysical);
        chart
            .draw_series(
                bursts_mjd
                    .iter()
                    .map(|&t| PathElement::new([(t, 1.6), (t, 2.4)], blue.stroke_width(2))),
            )
            .map_err(draw_err)?
            .label("burst")
            .legend(move |(x, y)| {
                PathElement::new([(x + 7, y - 6), (x + 7, y + 6)], blue.stroke_width(2))
            });
        draw_legend(&mut chart, SeriesLabelPosition::UpperRight)?;
        rects.insert("timeline", panel_rect(&chart));
        root.present().map_err(draw_err)?;
    }
    fig.panels = rects;
    Ok(fig)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn column_has(fig: &Figure, x: i32, r: PanelRect, colour: impl Fn([u8; 3]) -> bool) -> bool {
        (r.y0..r.y1).any(|y| colour(fig.pixel(x as u32, y as u32)))
    }

    fn x_of(r: PanelRect, v: f64, lo: f64, hi: f64) -> i32 {
        r.x0 + ((v - lo) / (hi - lo) * (r.x1 - r.x0) as f64).round() as i32
    }

    #[test]
    fn periodogram_marks_the_peak_and_rejects_bad_arrays() {
        let periods: Vec<f64> = (0..500).map(|i| 5.0 + i as f64 * 0.1).collect();
        let stat: Vec<f64> = periods
            .iter()
            .map(|&p| 2.0 + 30.0 * (-(p - 16.0f64).powi(2) / 0.05).exp())
            .collect();
        let p = Periodogram {
            periods: &periods,
            statistic: &stat,
            statistic_label: "folded χ²",
            period_label: "trial period (days)",
            fap_levels: &[(20.0, "FAP 1%"), (25.0, "FAP 0.1%")],
        };
        let fig = periodogram_figure(&p).unwrap();
        let r = fig.panels["periodogram"];
        let blue = |px: [u8; 3]| px[2] > 150 && px[0] < 80;
        let x = x_of(r, 16.0, 5.0, 54.9);
        assert!(
            (x - 8..=x + 8).any(|x| column_has(&fig, x, r, blue)),
            "peak ring"
        );
        let far = x_of(r, 40.0, 5.0, 54.9);
        assert!(
            !column_has(&fig, far, r, blue),
            "no ring away from the peak"
        );
        let bad = Periodogram {
            statistic: &stat[..3],
            ..p
        };
        assert!(periodogram_figure(&bad).is_err());
    }

    // Over 0.1–7.9 s (a factor 79) the axis is logarithmic: the ring of a peak at
    // 1 s sits at 0.53 of the panel's width, not at 0.12 as on a linear axis.
    #[test]
    fn log_axis_is_used_for_wide_period_ranges() {
        let (lo, hi) = (0.1f64, 7.9f64);
        let periods: Vec<f64> = (0..400)
            .map(|i| lo * (hi / lo).powf(i as f64 / 399.0))
            .collect();
        let stat: Vec<f64> = periods
            .iter()
            .map(|&p| 2.0 + 30.0 * (-(p.ln() / 0.01).powi(2)).exp())
            .collect();
        let p = Periodogram {
            periods: &periods,
            statistic: &stat,
            statistic_label: "Z²₂",
            period_label: "period (s)",
            fap_levels: &[],
        };
        let fig = periodogram_figure(&p).unwrap();
        let r = fig.panels["periodogram"];
        let blue = |px: [u8; 3]| px[2] > 150 && px[0] < 80;
        let log_x = x_of(r, 1f64.ln(), lo.ln(), hi.ln());
        let linear_x = x_of(r, 1.0, lo, hi);
        assert!(
            (log_x - 8..=log_x + 8).any(|x| column_has(&fig, x, r, blue)),
            "peak ring at the logarithmic position"
        );
        assert!(
            !(linear_x - 8..=linear_x + 8).any(|x| column_has(&fig, x, r, blue)),
            "nothing at the linear position"
        );
    }

    #[test]
    fn folded_bars_follow_the_counts() {
        let counts = [0, 0, 5, 9, 3, 0, 0, 0, 0, 0];
        let exposure = [1.0; 10];
        let fig = folded_figure(&counts, &exposure, "h", "folded at 16.0 d").unwrap();
        let r = fig.panels["counts"];
        let blue = |px: [u8; 3]| px[2] > 150 && px[0] < 100;
        assert!(column_has(&fig, x_of(r, 0.35, 0.0, 1.0), r, blue));
        assert!(!column_has(&fig, x_of(r, 0.75, 0.0, 1.0), r, blue));
        let e = fig.panels["exposure"];
        let grey = |px: [u8; 3]| px == [150, 150, 150];
        assert!(column_has(&fig, x_of(e, 0.75, 0.0, 1.0), e, grey));
        assert!(folded_figure(&counts, &exposure[..3], "h", "").is_err());
    }

    #[test]
    fn timeline_places_bursts_inside_their_sessions() {
        let sessions = [(60000.0, 60000.2), (60010.0, 60010.3)];
        let bursts = [60000.1, 60010.15];
        let windows = [(59999.5, 60001.0)];
        let fig = timeline_figure(&sessions, &bursts, &windows).unwrap();
        let r = fig.panels["timeline"];
        let (lo, hi) = (59999.5 - 0.5, 60010.3 + 0.5);
        let blue = |px: [u8; 3]| px[2] > 150 && px[0] < 80;
        for b in bursts {
            let x = x_of(r, b, lo, hi);
            assert!(
                (x - 1..=x + 1).any(|x| column_has(&fig, x, r, blue)),
                "burst {b}"
            );
        }
        assert!(!column_has(&fig, x_of(r, 60005.0, lo, hi), r, blue));
        assert!(timeline_figure(&[(2.0, 1.0)], &[], &[]).is_err());
        assert!(timeline_figure(&[], &[], &[]).is_err());
    }
}
