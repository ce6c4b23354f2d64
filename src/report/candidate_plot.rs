//! The per-candidate diagnostic figure: a header line, the dedispersed waterfall
//! under its band-summed profile (boxcar shaded), S/N against trial DM with the curve a
//! real pulse would follow, and the time–DM neighbourhood of other detections.

use std::collections::BTreeMap;
use std::path::Path;

use plotters::coord::Shift;
use plotters::prelude::*;

use super::candidate_data::{self, Cut, Panels};
use super::dm_curve::{DmCurve, expected_ratio};
use super::figure::{
    Figure, MASKED_GREY, PanelRect, draw_axes, draw_err, draw_legend, panel_rect, text,
    verdict_colour, viridis,
};
use crate::candidate::{Candidate, Verdict};
use crate::error::Result;
use crate::obs::{Averaging, Block, Header};

/// Figure size in pixels.
pub const SIZE: (u32, u32) = (1100, 780);

/// Lower end of the waterfall colour scale, in σ.
const WATERFALL_LO_SIGMA: f64 = -2.0;

/// Another detection near the candidate, for the neighbourhood panel.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Detection {
    /// Arrival at infinite frequency, seconds after the observation start.
    pub t_s: f64,
    /// DM in pc cm⁻³.
    pub dm: f64,
    pub snr: f64,
    /// Triage verdict if known (grey otherwise).
    pub verdict: Option<Verdict>,
}

impl From<&Candidate> for Detection {
    fn from(c: &Candidate) -> Self {
        Detection {
            t_s: c.t_inf_s,
            dm: c.dm,
            snr: c.snr,
            verdict: Some(c.verdict),
        }
    }
}

/// Draws the figure from an already-read `stretch` (rows from `Cut::new(header,
/// cand).window.start`, at least `stretch_len` of them), with an optional measured
/// S/N-versus-DM curve and nearby detections.
///
/// # Errors
/// The stretch does not cover the cut ([`crate::Error::Config`]).
pub fn candidate_figure(
    header: &Header,
    stretch: &Block,
    cand: &Candidate,
    dm_curve: Option<&DmCurve>,
    neighbours: &[Detection],
) -> Result<Figure> {
    let cut = Cut::new(header, cand);
    let input = candidate_data::normalise_for(header, stretch, &cut)?;
    let panels = candidate_data::panels(header, &input, &cut, cand.dm);
    draw(
        header,
        cand,
        &panels,
        dm_curve,
        neighbours,
        Averaging::default(),
    )
}

/// Re-reads the needed stretch of `path`, measures S/N against DM around the
/// candidate and draws the figure: all a candidate row needs. A stretch larger than
/// [`candidate_data::STRETCH_BUDGET_BYTES`] (the minutes-long sweeps of low
/// frequencies) is averaged as it is read, and the figure's header line shows the
/// averaged sample time and channels.
///
/// # Errors
/// The observation cannot be opened or read.
pub fn candidate_figure_from_file(
    path: &Path,
    cand: &Candidate,
    neighbours: &[Detection],
) -> Result<Figure> {
    figure_from_file_within(path, cand, neighbours, candidate_data::STRETCH_BUDGET_BYTES)
}

fn figure_from_file_within(
    path: &Path,
    cand: &Candidate,
    neighbours: &[Detection],
    budget_bytes: usize,
) -> Result<Figure> {
    let read = candidate_data::read_for(path, cand, budget_bytes)?;
    let (header, cut) = (&read.header, &read.cut);
    let input = candidate_data::normalise_for(header, &read.stretch, cut)?;
    let curve = candidate_data::dm_curve(header, &input, cut);
    let panels = candidate_data::panels(header, &input, cut, cand.dm);
    draw(
        header,
        cand,
        &panels,
        Some(&curve),
        neighbours,
        read.averaging,
    )
}

fn draw(
    header: &Header,
    cand: &Candidate,
    panels: &Panels,
    dm_curve: Option<&DmCurve>,
    neighbours: &[Detection],
    averaged: Averaging,
) -> Result<Figure> {
    let mut fig = Figure::blank(SIZE.0, SIZE.1);
    let mut rects = BTreeMap::new();
    {
        let root = BitMapBackend::with_buffer(&mut fig.rgb, SIZE).into_drawing_area();
        let (head, body) = root.split_vertically(68);
        draw_header(&head, header, cand, averaged)?;
        let (left, right) = body.split_horizontally(640);
        let (prof_area, wf_area) = left.split_vertically(190);
        let (wf_area, bar_area) = wf_area.split_horizontally(570);
        let (dm_area, nb_area) = right.split_vertically(359);
        rects.insert("profile", draw_profile(&prof_area, header, cand, panels)?);
        let (wf_rect, lo, hi) = draw_waterfall(&wf_area, header, panels, cand.dm)?;
        rects.insert("waterfall", wf_rect);
        draw_colour_bar(&bar_area, lo, hi)?;
        rects.insert("dm_curve", draw_dm_curve(&dm_area, header, cand, dm_curve)?);
        rects.insert("neighbours", draw_neighbours(&nb_area, cand, neighbours)?);
        root.present().map_err(draw_err)?;
    }
    fig.panels = rects;
    Ok(fig)
}

type Area<'a> = DrawingArea<BitMapBackend<'a>, Shift>;

fn draw_header(area: &Area, header: &Header, c: &Candidate, averaged: Averaging) -> Result<()> {
    let line1 = format!(
        "{}   t₀ = {:.4} s after start (MJD {:.9}, ν→∞)   DM {:.2} pc cm⁻³ [{:.1}–{:.1}]   width {:.3} ms   S/N {:.1}",
        header.source, c.t_inf_s, c.mjd_inf, c.dm, c.dm_lo, c.dm_hi, c.width_ms, c.snr
    );
    let mut line2 = format!("{}", c.verdict);
    if !c.reasons.is_empty() {
        line2 += &format!(": {}", c.reasons.join("; "));
    }
    let mut line3 = format!("{} detections merged", c.cluster_size);
    if let Some(f) = c.fluence_jy_ms {
        line3 += &format!("   fluence {f:.2} Jy ms");
    }
    line3 += &format!("   {}", c.file);
    if !averaged.is_none() {
        line3 += &format!(
            "   (read averaged: {} samples × {} channels, a long sweep)",
            averaged.samples, averaged.channels
        );
    }
    let grey = RGBColor(90, 90, 90);
    for (line, y, style) in [
        (line1, 6, text(16)),
        (line2, 29, text(14).color(&verdict_colour(c.verdict))),
        (line3, 49, text(13).color(&grey)),
    ] {
        area.draw(&Text::new(line, (12, y), style))
            .map_err(draw_err)?;
    }
    Ok(())
}

fn time_range_ms(panels: &Panels, tsamp_s: f64) -> std::ops::Range<f64> {
    let cut = &panels.cut;
    let rel = |col: f64| {
        let file_sample = col * cut.window.bin as f64 + cut.window.start as f64;
        (file_sample - cut.top_arrival as f64) * tsamp_s * 1e3
    };
    rel(0.0)..rel(cut.window.n_cols as f64)
}

fn draw_profile(area: &Area, header: &Header, c: &Candidate, p: &Panels) -> Result<PanelRect> {
    let x = time_range_ms(p, header.tsamp_s);
    let col_ms = (x.end - x.start) / p.cut.window.n_cols as f64;
    let prof = &p.waterfall.profile;
    let lo = prof.iter().copied().fold(f32::INFINITY, f32::min).min(-1.0) as f64;
    let hi = prof
        .iter()
        .copied()
        .fold(f32::NEG_INFINITY, f32::max)
        .max(1.0) as f64;
    let pad = 0.08 * (hi - lo);
    let mut chart = ChartBuilder::on(area)
        .margin_top(6)
        .margin_right(8)
        .x_label_area_size(24)
        .y_label_area_size(64)
        .build_cartesian_2d(x.clone(), (lo - pad)..(hi + pad))
        .map_err(draw_err)?;
    draw_axes(&mut chart, "", "S/N per bin", false)?;
    let box_ms = p.cut.width as f64 * header.tsamp_s * 1e3;
    chart
        .draw_series(std::iter::once(Rectangle::new(
            [(0.0, lo - pad), (box_ms, hi + pad)],
            verdict_colour(c.verdict).mix(0.25).filled(),
        )))
        .map_err(draw_err)?
        .label(format!("boxcar {box_ms:.3} ms"))
        .legend(move |(x, y)| {
            Rectangle::new(
                [(x, y - 5), (x + 14, y + 5)],
                verdict_colour(c.verdict).mix(0.4).filled(),
            )
        });
    let steps = prof.iter().enumerate().flat_map(|(i, &v)| {
        let t0 = x.start + i as f64 * col_ms;
        [(t0, v as f64), (t0 + col_ms, v as f64)]
    });
    chart
        .draw_series(LineSeries::new(steps, BLACK.stroke_width(1)))
        .map_err(draw_err)?;
    draw_legend(&mut chart, SeriesLabelPosition::UpperLeft)?;
    Ok(panel_rect(&chart))
}

fn draw_waterfall(
    area: &Area,
    header: &Header,
    p: &Panels,
    dm: f64,
) -> Result<(PanelRect, f64, f64)> {
    let wf = &p.waterfall;
    let x = time_range_ms(p, header.tsamp_s);
    let col_ms = (x.end - x.start) / wf.n_cols as f64;
    let f_top = header.freq_hi_mhz() + header.chan_bw_mhz / 2.0;
    let f_bot = header.freq_lo_mhz() - header.chan_bw_mhz / 2.0;
    let band_h = (f_top - f_bot) / wf.n_bands() as f64;
    let hi = wf
        .data
        .iter()
        .copied()
        .filter(|v| v.is_finite())
        .fold(4.0f32, f32::max) as f64;
    let lo = WATERFALL_LO_SIGMA;
    let mut chart = ChartBuilder::on(area)
        .margin_right(4)
        .margin_bottom(6)
        .x_label_area_size(40)
        .y_label_area_size(64)
        .build_cartesian_2d(x.clone(), f_bot..f_top)
        .map_err(draw_err)?;
    chart
        .draw_series((0..wf.n_bands()).flat_map(|b| {
            (0..wf.n_cols).map(move |col| {
                let v = wf.at(b, col);
                let colour = if v.is_nan() {
                    MASKED_GREY
                } else {
                    viridis(v as f64, lo, hi)
                };
                let (x0, y1) = (x.start + col as f64 * col_ms, f_top - b as f64 * band_h);
                Rectangle::new([(x0, y1), (x0 + col_ms, y1 - band_h)], colour.filled())
            })
        }))
        .map_err(draw_err)?;
    chart
        .configure_mesh()
        .disable_mesh()
        .x_desc(format!(
            "ms from t₀ at {:.1} MHz (dedispersed at DM {:.2})",
            header.freq_hi_mhz(),
            dm
        ))
        .y_desc("frequency (MHz)")
        .label_style(text(12))
        .axis_desc_style(text(13))
        .draw()
        .map_err(draw_err)?;
    Ok((panel_rect(&chart), lo, hi))
}

fn draw_colour_bar(area: &Area, lo: f64, hi: f64) -> Result<()> {
    let mut chart = ChartBuilder::on(area)
        .margin_top(4)
        .margin_bottom(46)
        .margin_right(30)
        .y_label_area_size(0)
        .right_y_label_area_size(0)
        .build_cartesian_2d(0.0..1.0, lo..hi)
        .map_err(draw_err)?;
    let n = 64;
    let step = (hi - lo) / n as f64;
    chart
        .draw_series((0..n).map(|i| {
            let v = lo + i as f64 * step;
            Rectangle::new([(0.0, v), (1.0, v + step)], viridis(v, lo, hi).filled())
        }))
        .map_err(draw_err)?;
    let (px, py) = chart.plotting_area().get_pixel_range();
    for (v, y) in [(hi, py.start), (lo, py.end - 12)] {
        area.draw(&Text::new(
            format!("{v:.0}σ"),
            (
                px.end - area.get_base_pixel().0 + 2,
                y - area.get_base_pixel().1,
            ),
            text(11),
        ))
        .map_err(draw_err)?;
    }
    Ok(())
}

fn draw_dm_curve(
    area: &Area,
    header: &Header,
    c: &Candidate,
    curve: Option<&DmCurve>,
) -> Result<PanelRect> {
    let Some(curve) = curve.filter(|k| !k.dms.is_empty()) else {
        area.draw(&Text::new(
            "S/N against DM: not computed",
            (30, 150),
            text(14),
        ))
        .map_err(draw_err)?;
        return Ok(PanelRect::from_ranges(0..0, 0..0));
    };
    let (d0, d1) = (
        curve.dms[0],
        curve.dms[curve.dms.len() - 1].max(curve.dms[0] + 1e-3),
    );
    let at_dm = curve
        .dms
        .iter()
        .zip(&curve.snr)
        .min_by(|a, b| (a.0 - c.dm).abs().total_cmp(&(b.0 - c.dm).abs()))
        .map_or(c.snr, |(_, &s)| s);
    let hi = curve.snr.iter().copied().fold(at_dm, f64::max).max(1.0) * 1.1;
    let lo = curve.snr.iter().copied().fold(0.0, f64::min);
    let mut chart = ChartBuilder::on(area)
        .margin(8)
        .x_label_area_size(40)
        .y_label_area_size(52)
        .build_cartesian_2d(d0..d1, lo..hi)
        .map_err(draw_err)?;
    draw_axes(&mut chart, "trial DM (pc cm⁻³)", "S/N", true)?;
    let bw = header.bandwidth_mhz();
    let centre_ghz = (header.freq_lo_mhz() + header.freq_hi_mhz()) / 2e3;
    let expected = (0..=200).map(|i| {
        let dm = d0 + (d1 - d0) * i as f64 / 200.0;
        (
            dm,
            at_dm * expected_ratio(dm - c.dm, bw, centre_ghz, c.width_ms),
        )
    });
    let blue = verdict_colour(Verdict::Astrophysical);
    chart
        .draw_series(DashedLineSeries::new(expected, 6, 4, blue.stroke_width(2)))
        .map_err(draw_err)?
        .label("expected for a dispersed pulse")
        .legend(move |(x, y)| PathElement::new([(x, y), (x + 16, y)], blue.stroke_width(2)));
    let points: Vec<(f64, f64)> = curve
        .dms
        .iter()
        .copied()
        .zip(curve.snr.iter().copied())
        .collect();
    chart
        .draw_series(LineSeries::new(
            points.iter().copied(),
            BLACK.stroke_width(1),
        ))
        .map_err(draw_err)?
        .label("measured")
        .legend(|(x, y)| Circle::new((x + 8, y), 3, BLACK.filled()));
    chart
        .draw_series(points.iter().map(|&p| Circle::new(p, 2, BLACK.filled())))
        .map_err(draw_err)?;
    chart
        .draw_series(std::iter::once(PathElement::new(
            [(c.dm, lo), (c.dm, hi)],
            RGBColor(120, 120, 120).stroke_width(1),
        )))
        .map_err(draw_err)?;
    draw_legend(&mut chart, SeriesLabelPosition::UpperRight)?;
    Ok(panel_rect(&chart))
}

/// Marker radius in pixels for an S/N value (area grows with S/N).
pub(crate) fn marker_radius(snr: f64) -> i32 {
    (1.2 * snr.max(1.0).sqrt()).clamp(2.0, 14.0) as i32
}

fn draw_neighbours(area: &Area, c: &Candidate, others: &[Detection]) -> Result<PanelRect> {
    let span_s = others
        .iter()
        .map(|d| (d.t_s - c.t_inf_s).abs())
        .fold(1.0, f64::max)
        * 1.1;
    let (dm_lo, dm_hi) = others
        .iter()
        .map(|d| d.dm)
        .fold((c.dm, c.dm), |(a, b), v| (a.min(v), b.max(v)));
    let dm_pad = (0.1 * (dm_hi - dm_lo)).max(0.1 * c.dm).max(5.0);
    let mut chart = ChartBuilder::on(area)
        .margin(8)
        .x_label_area_size(40)
        .y_label_area_size(52)
        .build_cartesian_2d(
            (c.t_inf_s - span_s)..(c.t_inf_s + span_s),
            (dm_lo - dm_pad).max(0.0)..(dm_hi + dm_pad),
        )
        .map_err(draw_err)?;
    draw_axes(
        &mut chart,
        "time after start (s, ν→∞)",
        "DM (pc cm⁻³)",
        true,
    )?;
    chart
        .draw_series(others.iter().map(|d| {
            let colour = d.verdict.map_or(RGBColor(120, 120, 120), verdict_colour);
            Circle::new(
                (d.t_s, d.dm),
                marker_radius(d.snr),
                colour.mix(0.7).filled(),
            )
        }))
        .map_err(draw_err)?;
    chart
        .draw_series(std::iter::once(Circle::new(
            (c.t_inf_s, c.dm),
            marker_radius(c.snr) + 3,
            BLACK.stroke_width(2),
        )))
        .map_err(draw_err)?;
    let note = if others.is_empty() {
        "no other detections nearby".to_string()
    } else {
        format!("other detections: {}; ring = this one", others.len())
    };
    let (px, py) = chart.plotting_area().get_pixel_range();
    let base = area.get_base_pixel();
    area.draw(&Text::new(
        note,
        (px.start - base.0 + 6, py.start - base.1 + 4),
        text(12),
    ))
    .map_err(draw_err)?;
    Ok(panel_rect(&chart))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::candidate::TriageFeatures;
    use crate::obs::MemorySource;
    use crate::report::candidate_data::averaging_within;
    use crate::report::stretch::read_stretch;
    use crate::report::waterfall::tests::test_header;
    use crate::report::waterfall::tests::{Pulse, noisy_burst};
    use crate::units::delay_to_infinity_s;

    const DM: f64 = 300.0;
    const T_TOP: usize = 3000;

    /// A 64-channel, 1 ms observation with one 4 ms burst at DM 300 whose top-of-band
    /// arrival is sample 3000, and its candidate row.
    pub(crate) fn burst_fixture() -> (Header, Vec<f32>, Candidate) {
        let mut h = test_header(64, 6000);
        h.tsamp_s = 1e-3;
        h.weights[40..44].fill(0.0);
        let block = noisy_burst(
            &h.freqs_mhz,
            h.tsamp_s,
            6000,
            Pulse {
                t_top: T_TOP,
                dm: DM,
                width: 4,
                amp: 2.0,
            },
            11,
        );
        let t_inf_s = T_TOP as f64 * h.tsamp_s - delay_to_infinity_s(DM, h.freq_hi_mhz());
        let cand = Candidate {
            file: "synthetic.json".into(),
            t_inf_s,
            mjd_inf: h.start.plus_seconds(t_inf_s).to_mjd_f64(),
            dm: DM,
            dm_lo: 298.0,
            dm_hi: 302.5,
            width_ms: 4.0,
            snr: 30.0,
            cluster_size: 12,
            verdict: Verdict::Astrophysical,
            reasons: vec!["peaks away from DM 0".into()],
            features: TriageFeatures::default(),
            fluence_jy_ms: None,
        };
        (h, block.data, cand)
    }

    fn render(h: &Header, data: Vec<f32>, cand: &Candidate) -> Figure {
        let cut = Cut::new(h, cand);
        let src = MemorySource::new(h.clone(), data);
        let stretch = read_stretch(src, cut.window.start as u64, cut.stretch_len).unwrap();
        let input = candidate_data::normalise_for(h, &stretch, &cut).unwrap();
        let curve = candidate_data::dm_curve(h, &input, &cut);
        let others = [Detection {
            t_s: cand.t_inf_s + 0.4,
            dm: 20.0,
            snr: 8.0,
            verdict: Some(Verdict::Rfi),
        }];
        candidate_figure(h, &stretch, cand, Some(&curve), &others).unwrap()
    }

    fn luminance(p: [u8; 3]) -> f64 {
        0.3 * p[0] as f64 + 0.59 * p[1] as f64 + 0.11 * p[2] as f64
    }

    /// Milliseconds from the top-of-band arrival to the waterfall's brightest pixel
    /// column (mean luminance over the panel's height), on the cut planned on `h`.
    fn brightest_waterfall_ms(fig: &Figure, h: &Header, cand: &Candidate) -> f64 {
        let wf = fig.panels["waterfall"];
        let col_lum = |x: i32| {
            (wf.y0..wf.y1)
                .map(|y| luminance(fig.pixel(x as u32, y as u32)))
                .sum::<f64>()
                / (wf.y1 - wf.y0) as f64
        };
        let best_x = (wf.x0 + 2..wf.x1 - 2)
            .max_by(|&a, &b| col_lum(a).total_cmp(&col_lum(b)))
            .unwrap();
        let cut = Cut::new(h, cand);
        let t_lo = cut.col_ms(0.0, h.tsamp_s);
        let t_hi = cut.col_ms(128.0, h.tsamp_s);
        t_lo + (best_x - wf.x0) as f64 / (wf.x1 - wf.x0) as f64 * (t_hi - t_lo)
    }

    /// A stretch over the budget is averaged on read: 1024 channels go down to the
    /// 64 sub-bands the figure shows before time is averaged; within the budget
    /// nothing is.
    #[test]
    fn a_stretch_over_the_budget_is_averaged_channels_first() {
        let (_, _, cand) = burst_fixture();
        let mut h = test_header(1024, 6000);
        h.tsamp_s = 1e-3;
        let cut = Cut::new(&h, &cand);
        let bytes = cut.stretch_len * 1024 * 4;
        assert!(averaging_within(&h, &cut, bytes).is_none());
        let a = averaging_within(&h, &cut, bytes / 16);
        assert_eq!((a.samples, a.channels), (1, 16));
        let a = averaging_within(&h, &cut, bytes / 40);
        assert_eq!((a.samples, a.channels), (3, 16));
    }

    /// The figure of a file whose stretch exceeds the budget is drawn from the
    /// averaged recording, with the burst still where it arrived.
    #[test]
    fn a_figure_over_the_budget_still_shows_the_burst_in_place() {
        let (h, data, cand) = burst_fixture();
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("long-sweep.json");
        let mut sink = crate::obs::create(&path, &h, crate::obs::Container::Native).unwrap();
        sink.write_rows(&data).unwrap();
        sink.finish().unwrap();
        let full = Cut::new(&h, &cand).stretch_len * 64 * 4;
        let read = candidate_data::read_for(&path, &cand, full / 2).unwrap();
        assert_eq!((read.averaging.samples, read.averaging.channels), (2, 1));
        assert_eq!(read.header.tsamp_s, 2e-3);
        let fig = figure_from_file_within(&path, &cand, &[], full / 2).unwrap();
        let ms = brightest_waterfall_ms(&fig, &read.header, &cand);
        assert!(
            (-1.0..5.0).contains(&ms),
            "brightest column at {ms} ms, pulse at 0–4 ms"
        );
    }

    #[test]
    fn cut_centres_the_boxcar_and_reads_enough_for_the_highest_trial() {
        let (h, _, cand) = burst_fixture();
        let cut = Cut::new(&h, &cand);
        assert_eq!((cut.top_arrival, cut.width, cut.window.bin), (3000, 4, 1));
        assert_eq!(cut.window.start, 3000 + 2 - 64);
        assert!(cut.dm_range.0 < 298.0 && cut.dm_range.1 > 302.5);
        let max_delay = crate::dedisperse::channel_delays(&h.freqs_mhz, cut.dm_range.1, 1e-3);
        assert_eq!(cut.stretch_len, 128 + max_delay.iter().max().unwrap() + 1);
    }

    #[test]
    fn bright_burst_is_brightest_where_expected_in_the_rendered_waterfall() {
        let (h, data, cand) = burst_fixture();
        let fig = render(&h, data, &cand);
        assert_eq!((fig.width, fig.height), SIZE);
        let ms = brightest_waterfall_ms(&fig, &h, &cand);
        assert!(
            (-0.5..4.5).contains(&ms),
            "brightest column at {ms} ms, pulse at 0–4 ms"
        );
        let wf = fig.panels["waterfall"];
        // Masked channels 40..44 (one of the 64 sub-bands) are drawn grey.
        let band_h = (wf.y1 - wf.y0) as f64 / 64.0;
        let y = wf.y0 + (40.5 * band_h) as i32;
        assert_eq!(fig.pixel((wf.x0 + 20) as u32, y as u32), [205, 205, 205]);
    }

    #[test]
    fn every_panel_has_ink_and_the_profile_peaks_on_the_boxcar() {
        let (h, data, cand) = burst_fixture();
        let fig = render(&h, data, &cand);
        for (name, r) in &fig.panels {
            let inked = (r.y0..r.y1)
                .flat_map(|y| (r.x0..r.x1).map(move |x| (x, y)))
                .filter(|&(x, y)| fig.pixel(x as u32, y as u32) != [255, 255, 255])
                .count();
            let area = ((r.x1 - r.x0) * (r.y1 - r.y0)) as usize;
            assert!(
                inked > area / 200,
                "panel {name} nearly blank: {inked}/{area}"
            );
        }
        // Axis labels: the strip left of the waterfall holds dark text pixels.
        let wf = fig.panels["waterfall"];
        let dark = (wf.y0..wf.y1)
            .flat_map(|y| (wf.x0 - 60..wf.x0 - 2).map(move |x| (x, y)))
            .filter(|&(x, y)| luminance(fig.pixel(x as u32, y as u32)) < 100.0)
            .count();
        assert!(
            dark > 200,
            "frequency axis labels missing ({dark} dark pixels)"
        );
        // The profile's highest black pixel lies over the shaded boxcar.
        let p = fig.panels["profile"];
        let top = (p.y0..p.y1)
            .find_map(|y| {
                (p.x0 + 1..p.x1 - 1).find(|&x| fig.pixel(x as u32, y as u32) == [0, 0, 0])
            })
            .unwrap();
        let cut = Cut::new(&h, &cand);
        let (t_lo, t_hi) = (cut.col_ms(0.0, 1e-3), cut.col_ms(128.0, 1e-3));
        let ms = t_lo + (top - p.x0) as f64 / (p.x1 - p.x0) as f64 * (t_hi - t_lo);
        assert!((-1.5..5.5).contains(&ms), "profile peak at {ms} ms");
    }

    #[test]
    fn short_stretch_is_a_clear_error() {
        let (h, data, cand) = burst_fixture();
        let block = Block {
            start_sample: 0,
            overlap: 0,
            n_chan: 64,
            data: data[..64 * 100].to_vec(),
        };
        let err = candidate_figure(&h, &block, &cand, None, &[]).unwrap_err();
        assert!(err.to_string().contains("does not cover"), "{err}");
    }
}
