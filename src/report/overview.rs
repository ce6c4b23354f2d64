//! The observation overview: every detection in time and DM (size by S/N, colour by
//! verdict), the S/N distribution per verdict, and the bandpass with masked channels.

use std::collections::BTreeMap;

use plotters::coord::Shift;
use plotters::prelude::*;

use super::candidate_plot::marker_radius;
use super::figure::{
    Figure, MASKED_GREY, PanelRect, draw_axes, draw_err, draw_legend, panel_rect, text,
    verdict_colour,
};
use crate::candidate::{Candidate, Verdict};
use crate::error::Result;
use crate::obs::{BlockReader, Header, SampleSource};

/// Figure size in pixels.
pub const SIZE: (u32, u32) = (1100, 760);
const VERDICTS: [Verdict; 3] = [Verdict::Astrophysical, Verdict::Unsure, Verdict::Rfi];
const HIST_BINS: usize = 20;

type Area<'a> = DrawingArea<BitMapBackend<'a>, Shift>;

/// Mean of every channel over the whole observation (the bandpass), streamed in blocks.
/// NaN samples are skipped.
///
/// # Errors
/// Whatever the source reports.
pub fn bandpass<S: SampleSource>(source: S) -> Result<Vec<f64>> {
    let n_chan = source.header().n_chan();
    let (mut sum, mut count) = (vec![0.0f64; n_chan], vec![0u64; n_chan]);
    for block in BlockReader::new(source, 8192, 0)? {
        for row in block?.data.chunks_exact(n_chan) {
            for ((s, n), &x) in sum.iter_mut().zip(&mut count).zip(row) {
                if x.is_finite() {
                    *s += x as f64;
                    *n += 1;
                }
            }
        }
    }
    Ok(sum
        .iter()
        .zip(&count)
        .map(|(&s, &n)| if n > 0 { s / n as f64 } else { f64::NAN })
        .collect())
}

/// Counts per S/N bin and verdict: `(bin edges, counts[verdict][bin])`, verdicts in
/// the order astrophysical, unsure, rfi.
pub fn snr_histogram(cands: &[Candidate], n_bins: usize) -> (Vec<f64>, [Vec<usize>; 3]) {
    let lo = cands.iter().map(|c| c.snr).fold(f64::INFINITY, f64::min);
    let hi = cands
        .iter()
        .map(|c| c.snr)
        .fold(f64::NEG_INFINITY, f64::max);
    let (lo, hi) = if lo.is_finite() {
        (lo.floor(), hi.ceil().max(lo.floor() + 1.0))
    } else {
        (0.0, 1.0)
    };
    let width = (hi - lo) / n_bins as f64;
    let edges = (0..=n_bins).map(|i| lo + i as f64 * width).collect();
    let mut counts = [vec![0; n_bins], vec![0; n_bins], vec![0; n_bins]];
    for c in cands {
        let bin = (((c.snr - lo) / width) as usize).min(n_bins - 1);
        let v = VERDICTS
            .iter()
            .position(|&v| v == c.verdict)
            .expect("all verdicts listed");
        counts[v][bin] += 1;
    }
    (edges, counts)
}

/// Draws the overview of one observation.
///
/// # Errors
/// Only a drawing failure (a bug).
pub fn overview_figure(header: &Header, cands: &[Candidate], bandpass: &[f64]) -> Result<Figure> {
    let mut fig = Figure::blank(SIZE.0, SIZE.1);
    let mut rects = BTreeMap::new();
    {
        let root = BitMapBackend::with_buffer(&mut fig.rgb, SIZE).into_drawing_area();
        let (head, body) = root.split_vertically(40);
        let counts: Vec<String> = VERDICTS
            .iter()
            .map(|&v| format!("{} {v}", cands.iter().filter(|c| c.verdict == v).count()))
            .collect();
        head.draw(&Text::new(
            format!(
                "{}   {:.1} s from MJD {:.6}   {} candidates: {}",
                header.source,
                header.duration_s(),
                header.start.to_mjd_f64(),
                cands.len(),
                counts.join(", ")
            ),
            (12, 12),
            text(16),
        ))
        .map_err(draw_err)?;
        let (top, bottom) = body.split_vertically(400);
        let (hist, band) = bottom.split_horizontally(550);
        rects.insert("time_dm", draw_time_dm(&top, header, cands)?);
        rects.insert("snr_hist", draw_histogram(&hist, cands)?);
        rects.insert("bandpass", draw_bandpass(&band, header, bandpass)?);
        root.present().map_err(draw_err)?;
    }
    fig.panels = rects;
    Ok(fig)
}

fn draw_time_dm(area: &Area, header: &Header, cands: &[Candidate]) -> Result<PanelRect> {
    let dm_hi = cands.iter().map(|c| c.dm).fold(10.0, f64::max) * 1.08;
    let mut chart = ChartBuilder::on(area)
        .margin(10)
        .x_label_area_size(40)
        .y_label_area_size(60)
        .build_cartesian_2d(0.0..header.duration_s().max(1e-3), 0.0..dm_hi)
        .map_err(draw_err)?;
    draw_axes(
        &mut chart,
        "time after start (s, arrival at ν→∞)",
        "DM (pc cm⁻³)",
        true,
    )?;
    // Weakest first so bright events sit on top.
    let mut order: Vec<&Candidate> = cands.iter().collect();
    order.sort_by(|a, b| a.snr.total_cmp(&b.snr));
    for v in VERDICTS {
        let colour = verdict_colour(v);
        chart
            .draw_series(std::iter::empty::<Circle<(f64, f64), i32>>())
            .map_err(draw_err)?
            .label(v.as_str())
            .legend(move |(x, y)| Circle::new((x + 6, y), 5, colour.filled()));
    }
    chart
        .draw_series(order.iter().map(|c| {
            Circle::new(
                (c.t_inf_s, c.dm),
                marker_radius(c.snr),
                verdict_colour(c.verdict).mix(0.75).filled(),
            )
        }))
        .map_err(draw_err)?;
    draw_legend(&mut chart, SeriesLabelPosition::UpperRight)?;
    Ok(panel_rect(&chart))
}

fn draw_histogram(area: &Area, cands: &[Candidate]) -> Result<PanelRect> {
    let (edges, counts) = snr_histogram(cands, HIST_BINS);
    let totals: Vec<usize> = (0..HIST_BINS)
        .map(|b| counts.iter().map(|c| c[b]).sum())
        .collect();
    let y_hi = totals.iter().copied().max().unwrap_or(0).max(1) as f64 * 1.1;
    let mut chart = ChartBuilder::on(area)
        .margin(10)
        .x_label_area_size(40)
        .y_label_area_size(50)
        .build_cartesian_2d(edges[0]..edges[HIST_BINS], 0.0..y_hi)
        .map_err(draw_err)?;
    draw_axes(&mut chart, "S/N", "candidates", false)?;
    // Stacked bars: astrophysical at the bottom, then unsure, then rfi.
    let mut base = [0usize; HIST_BINS];
    for (v, row) in VERDICTS.iter().zip(&counts) {
        let colour = verdict_colour(*v);
        let bars: Vec<_> = (0..HIST_BINS)
            .filter(|&b| row[b] > 0)
            .map(|b| {
                let r = Rectangle::new(
                    [
                        (edges[b], base[b] as f64),
                        (edges[b + 1], (base[b] + row[b]) as f64),
                    ],
                    colour.filled(),
                );
                base[b] += row[b];
                r
            })
            .collect();
        chart.draw_series(bars).map_err(draw_err)?;
    }
    Ok(panel_rect(&chart))
}

fn draw_bandpass(area: &Area, header: &Header, bandpass: &[f64]) -> Result<PanelRect> {
    let live =
        |c: usize| header.weights[c] != 0.0 && bandpass.get(c).is_some_and(|v| v.is_finite());
    let (lo, hi) = (0..header.n_chan())
        .filter(|&c| live(c))
        .map(|c| bandpass[c])
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), v| {
            (a.min(v), b.max(v))
        });
    let (lo, hi) = if lo.is_finite() {
        (lo, hi.max(lo + 1e-6))
    } else {
        (0.0, 1.0)
    };
    let pad = 0.1 * (hi - lo);
    let half = header.chan_bw_mhz / 2.0;
    let mut chart = ChartBuilder::on(area)
        .margin(10)
        .x_label_area_size(40)
        .y_label_area_size(60)
        .build_cartesian_2d(
            (header.freq_lo_mhz() - half)..(header.freq_hi_mhz() + half),
            (lo - pad)..(hi + pad),
        )
        .map_err(draw_err)?;
    draw_axes(
        &mut chart,
        "frequency (MHz)",
        "mean level (file units)",
        false,
    )?;
    let masked = (0..header.n_chan()).filter(|&c| header.weights[c] == 0.0);
    chart
        .draw_series(masked.map(|c| {
            let f = header.freqs_mhz[c];
            Rectangle::new(
                [(f - half, lo - pad), (f + half, hi + pad)],
                MASKED_GREY.filled(),
            )
        }))
        .map_err(draw_err)?
        .label("masked channels")
        .legend(|(x, y)| Rectangle::new([(x, y - 5), (x + 14, y + 5)], MASKED_GREY.filled()));
    let mut by_freq: Vec<usize> = (0..header.n_chan()).filter(|&c| live(c)).collect();
    by_freq.sort_by(|&a, &b| header.freqs_mhz[a].total_cmp(&header.freqs_mhz[b]));
    chart
        .draw_series(LineSeries::new(
            by_freq.iter().map(|&c| (header.freqs_mhz[c], bandpass[c])),
            BLACK.stroke_width(1),
        ))
        .map_err(draw_err)?
        .label("bandpass")
        .legend(|(x, y)| PathElement::new([(x, y), (x + 14, y)], BLACK.stroke_width(1)));
    draw_legend(&mut chart, SeriesLabelPosition::LowerRight)?;
    Ok(panel_rect(&chart))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::candidate::TriageFeatures;
    use crate::obs::MemorySource;
    use crate::report::waterfall::tests::test_header;

    fn cand(t: f64, dm: f64, snr: f64, verdict: Verdict) -> Candidate {
        Candidate {
            file: "x.json".into(),
            t_inf_s: t,
            mjd_inf: 60000.0,
            dm,
            dm_lo: dm,
            dm_hi: dm,
            width_ms: 1.0,
            snr,
            cluster_size: 1,
            verdict,
            reasons: vec![],
            features: TriageFeatures::default(),
            fluence_jy_ms: None,
        }
    }

    #[test]
    fn bandpass_is_the_channel_mean() {
        let h = test_header(3, 10_000);
        let data: Vec<f32> = (0..30_000).map(|i| (i % 3) as f32 * 2.0 + 1.0).collect();
        let bp = bandpass(MemorySource::new(h, data)).unwrap();
        assert_eq!(bp, vec![1.0, 3.0, 5.0]);
    }

    #[test]
    fn histogram_counts_every_candidate_once_by_verdict() {
        let cs = [
            cand(1.0, 10.0, 6.0, Verdict::Rfi),
            cand(2.0, 20.0, 26.0, Verdict::Astrophysical),
            cand(3.0, 30.0, 7.2, Verdict::Unsure),
            cand(4.0, 30.0, 6.4, Verdict::Rfi),
        ];
        let (edges, counts) = snr_histogram(&cs, 20);
        assert_eq!((edges[0], edges[20]), (6.0, 26.0));
        assert_eq!(counts[0][19], 1, "S/N 26 falls in the last bin");
        assert_eq!(counts[1][1], 1);
        assert_eq!(counts[2][0], 2);
        assert_eq!(counts.iter().flatten().sum::<usize>(), 4);
    }

    #[test]
    fn overview_marks_detections_where_they_are_and_greys_masked_channels() {
        let mut h = test_header(64, 100_000);
        h.tsamp_s = 1e-3; // 100 s
        h.weights[0..8].fill(0.0); // top 50 MHz masked
        let cs = [
            cand(25.0, 100.0, 40.0, Verdict::Astrophysical),
            cand(75.0, 300.0, 9.0, Verdict::Rfi),
        ];
        let bp: Vec<f64> = (0..64).map(|c| 10.0 + c as f64 * 0.1).collect();
        let fig = overview_figure(&h, &cs, &bp).unwrap();
        assert_eq!((fig.width, fig.height), SIZE);
        let r = fig.panels["time_dm"];
        let dm_hi = 300.0 * 1.08;
        let at = |t: f64, dm: f64| {
            let x = r.x0 as f64 + t / 100.0 * (r.x1 - r.x0) as f64;
            let y = r.y1 as f64 - dm / dm_hi * (r.y1 - r.y0) as f64;
            fig.pixel(x as u32, y as u32)
        };
        // Each marker's pixel is nearest in colour to its own verdict's colour.
        let nearest = |p: [u8; 3]| {
            let d = |c: RGBColor| {
                [c.0, c.1, c.2]
                    .iter()
                    .zip(p)
                    .map(|(&a, b)| (a as i32 - b as i32).pow(2))
                    .sum::<i32>()
            };
            *VERDICTS
                .iter()
                .min_by_key(|&&v| d(verdict_colour(v)))
                .unwrap()
        };
        for (t, dm, v) in [
            (25.0, 100.0, Verdict::Astrophysical),
            (75.0, 300.0, Verdict::Rfi),
        ] {
            let got = at(t, dm);
            assert_ne!(got, [255, 255, 255], "marker at ({t}, {dm}) missing");
            assert_eq!(nearest(got), v, "marker at ({t}, {dm}) is {got:?}");
        }
        let b = fig.panels["bandpass"];
        // 1190..1610 MHz shown; masked 1550–1600 MHz lies right of x(1560).
        let x = b.x0 + ((1575.0 - 1190.0) / 420.0 * (b.x1 - b.x0) as f64) as i32;
        assert_eq!(fig.pixel(x as u32, (b.y0 + 10) as u32), [205, 205, 205]);
        let h_rect = fig.panels["snr_hist"];
        let inked = (h_rect.x0..h_rect.x1)
            .filter(|&x| fig.pixel(x as u32, (h_rect.y1 - 3) as u32) != [255, 255, 255])
            .count();
        assert!(inked > 10, "histogram bars drawn");
    }
}
