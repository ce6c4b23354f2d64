//! The self-contained HTML report: one folder with `index.html` and its PNGs, no
//! scripts, no external style sheets, readable offline.

use std::fmt::Write as _;
use std::path::{Path, PathBuf};

use super::candidate_plot::{Detection, candidate_figure_from_file};
use super::figure::CaptionedFigure;
use super::overview::{bandpass, overview_figure};
use crate::candidate::Candidate;
use crate::error::{Error, Result};
use crate::obs::Header;
use crate::units::SECONDS_PER_DAY;

/// One observation and its candidates.
#[derive(Debug, Clone)]
pub struct ObsSection {
    /// The observation file the plots are re-read from.
    pub obs_path: PathBuf,
    pub header: Header,
    pub candidates: Vec<Candidate>,
}

impl ObsSection {
    /// Opens `obs_path` for its header, and checks that it can be the recording the
    /// candidates were found in: each candidate's `mjd_inf` less its `t_inf_s` is the
    /// start of its recording, which must be this file's start (to [`SAME_START_S`]),
    /// and no candidate arrives after the file ends.
    ///
    /// # Errors
    /// The file cannot be opened, starts elsewhere or ends too soon
    /// ([`Error::BadInput`] naming it).
    pub fn new(obs_path: &Path, candidates: Vec<Candidate>) -> Result<Self> {
        let header = crate::obs::open(obs_path)?.header().clone();
        let start_mjd = header.start.to_mjd_f64();
        if let Some(c) = candidates.iter().find(|c| {
            let found_in = c.mjd_inf - c.t_inf_s / SECONDS_PER_DAY;
            let apart_s = (found_in - start_mjd).abs() * SECONDS_PER_DAY;
            apart_s.is_nan() || apart_s > SAME_START_S
        }) {
            return Err(Error::bad_input(
                obs_path,
                format!(
                    "starts at MJD {start_mjd:.6}, but the candidate of {} at t = {} s was \
                     found in a recording starting at MJD {:.6}; give its own file",
                    c.file,
                    c.t_inf_s,
                    c.mjd_inf - c.t_inf_s / SECONDS_PER_DAY
                ),
            ));
        }
        if let Some(c) = candidates.iter().find(|c| c.t_inf_s > header.duration_s()) {
            return Err(Error::bad_input(
                obs_path,
                format!(
                    "lasts {:.3} s, but the candidate of {} arrives at t = {} s; give its own file",
                    header.duration_s(),
                    c.file,
                    c.t_inf_s
                ),
            ));
        }
        Ok(ObsSection {
            obs_path: obs_path.to_path_buf(),
            header,
            candidates,
        })
    }
}

/// How far apart (seconds) two recordings' starts may be and still be taken for one
/// recording: far above the rounding of `mjd_inf` (written to full f64 precision,
/// ~1 µs at today's MJDs), far below the gap between two separate recordings.
pub const SAME_START_S: f64 = 0.01;

/// Report settings.
#[derive(Debug, Clone)]
pub struct ReportOptions {
    /// Page title.
    pub title: String,
    /// Draw diagnostic figures for at most this many candidates per observation (by S/N);
    /// the rest are listed in the table only.
    pub max_plots: usize,
    /// Detections within this many seconds appear in a candidate's neighbourhood panel.
    pub neighbourhood_s: f64,
}

impl Default for ReportOptions {
    fn default() -> Self {
        ReportOptions {
            title: "burstbook report".into(),
            max_plots: 50,
            neighbourhood_s: 5.0,
        }
    }
}

/// Writes `out_dir/index.html` and every PNG it shows, all or none of them (see
/// [`crate::atomic_file::StagedDir`]); returns the index path.
/// `lead_figures` (caption, figure) are shown first, e.g. a source's timeline.
///
/// # Errors
/// The output folder cannot be written, or an observation cannot be read.
pub fn write_report(
    out_dir: &Path,
    sections: &[ObsSection],
    opts: &ReportOptions,
    lead_figures: &[CaptionedFigure],
) -> Result<PathBuf> {
    // Everything is drawn into a staging folder first: a report that fails
    // half-way leaves the one before as it was.
    let staged = crate::atomic_file::StagedDir::create(out_dir)?;
    let out_dir = staged.path();
    let mut lead = String::new();
    for (i, (caption, fig)) in lead_figures.iter().enumerate() {
        let name = format!("lead{i:02}.png");
        fig.save_png(&out_dir.join(&name))?;
        let _ = write!(
            lead,
            "<figure><img src=\"{name}\" alt=\"{c}\" width=\"{w}\"><figcaption>{c}</figcaption></figure>",
            c = esc(caption),
            w = fig.width,
        );
    }
    let total: usize = sections
        .iter()
        .map(|s| s.candidates.len().min(opts.max_plots))
        .sum();
    let bar = crate::progress::bar(total as u64, "plots");
    let mut body = String::new();
    for (i, s) in sections.iter().enumerate() {
        body += &write_section(out_dir, i, s, opts, &bar)?;
    }
    if sections.is_empty() {
        // Without it, a search that found nothing gave a page that could as well be
        // a report that failed to draw.
        body += "<p><strong>No candidates</strong>: there is nothing to plot.</p>";
    }
    bar.finish_and_clear();
    let page = format!(
        "<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">\
         <title>{t}</title><style>{STYLE}</style></head><body><h1>{t}</h1>\
         <p class=\"note\">Made by burstbook {v}. Colours: <span class=\"astrophysical\">astrophysical</span>, \
         <span class=\"unsure\">unsure</span>, <span class=\"rfi\">rfi</span>. Each figure: \
         profile and dedispersed waterfall (left), S/N against trial DM with the curve a dispersed \
         pulse of that width would follow (right, top), other detections nearby (right, bottom).</p>\
         {lead}{body}</body></html>\n",
        t = esc(&opts.title),
        v = env!("CARGO_PKG_VERSION"),
    );
    crate::atomic_file::write(&out_dir.join("index.html"), page)?;
    staged.commit("index.html")
}

fn write_section(
    out_dir: &Path,
    index: usize,
    s: &ObsSection,
    opts: &ReportOptions,
    bar: &indicatif::ProgressBar,
) -> Result<String> {
    let h = &s.header;
    let mut cands = s.candidates.clone();
    cands.sort_by(|a, b| b.snr.total_cmp(&a.snr));
    let bp = bandpass(crate::obs::open(&s.obs_path)?)?;
    let overview = format!("obs{index:02}-overview.png");
    overview_figure(h, &cands, &bp)?.save_png(&out_dir.join(&overview))?;

    let masked = h.weights.iter().filter(|&&w| w == 0.0).count();
    let mut html = String::new();
    let _ = write!(
        html,
        "<section><h2>{src} — {file}</h2><table class=\"summary\">\
         <tr><th>telescope</th><td>{tel}</td><th>start</th><td>MJD {mjd:.6}</td></tr>\
         <tr><th>duration</th><td>{dur:.2} s</td><th>sample time</th><td>{ts:.1} µs</td></tr>\
         <tr><th>band</th><td>{lo:.1}–{hi:.1} MHz, {nc} channels</td><th>masked channels</th><td>{masked}</td></tr>\
         <tr><th>candidates</th><td colspan=\"3\">{n}</td></tr></table>\
         <img src=\"{overview}\" alt=\"overview of {src}\" width=\"1100\">",
        src = esc(&h.source),
        file = esc(&s.obs_path.display().to_string()),
        tel = esc(&h.telescope),
        mjd = h.start.to_mjd_f64(),
        dur = h.duration_s(),
        ts = h.tsamp_s * 1e6,
        lo = h.freq_lo_mhz(),
        hi = h.freq_hi_mhz(),
        nc = h.n_chan(),
        n = cands.len(),
    );
    html += "<table class=\"cands\"><tr><th>#</th><th>t (s)</th><th>MJD (ν→∞)</th><th>DM</th>\
             <th>width (ms)</th><th>S/N</th><th>verdict</th><th>reasons</th></tr>";
    for (rank, c) in cands.iter().enumerate() {
        let id = format!("o{index}c{rank}");
        let link = if rank < opts.max_plots {
            format!("<a href=\"#{id}\">{}</a>", rank + 1)
        } else {
            format!("{}", rank + 1)
        };
        let _ = write!(
            html,
            "<tr><td>{link}</td><td>{:.4}</td><td>{:.9}</td><td>{:.2}</td><td>{:.3}</td>\
             <td>{:.1}</td><td class=\"{v}\">{v}</td><td>{}</td></tr>",
            c.t_inf_s,
            c.mjd_inf,
            c.dm,
            c.width_ms,
            c.snr,
            esc(&c.reasons.join("; ")),
            v = c.verdict,
        );
    }
    html += "</table>";
    for (rank, c) in cands.iter().take(opts.max_plots).enumerate() {
        let neighbours: Vec<Detection> = cands
            .iter()
            .filter(|o| {
                !std::ptr::eq(*o, c) && (o.t_inf_s - c.t_inf_s).abs() <= opts.neighbourhood_s
            })
            .map(Detection::from)
            .collect();
        let png = format!("obs{index:02}-cand{rank:04}.png");
        let figure = candidate_figure_from_file(&s.obs_path, c, &neighbours)?;
        figure.save_png(&out_dir.join(&png))?;
        bar.inc(1);
        let _ = write!(
            html,
            "<div class=\"cand\" id=\"o{index}c{rank}\"><h3>#{n}: DM {dm:.2} pc cm⁻³, S/N {snr:.1}, \
             <span class=\"{v}\">{v}</span></h3>{numbers}<img src=\"{png}\" alt=\"candidate {n}\" width=\"1100\"></div>",
            n = rank + 1,
            dm = c.dm,
            snr = c.snr,
            v = c.verdict,
            numbers = numbers_table(c),
        );
    }
    html += "</section>";
    Ok(html)
}

/// A candidate's numbers as a small HTML table (shared with the review page).
pub fn numbers_table(c: &Candidate) -> String {
    let f = &c.features;
    let fluence = c
        .fluence_jy_ms
        .map_or("—".to_string(), |v| format!("{v:.3} Jy ms"));
    format!(
        "<table class=\"numbers\"><tr><th>t after start</th><td>{:.6} s</td><th>MJD (ν→∞, UTC)</th><td>{:.9}</td></tr>\
         <tr><th>DM</th><td>{:.3} pc cm⁻³ ({:.2}–{:.2})</td><th>width</th><td>{:.3} ms</td></tr>\
         <tr><th>S/N</th><td>{:.2}</td><th>fluence</th><td>{}</td></tr>\
         <tr><th>S/N at DM 0 / peak</th><td>{:.3}</td><th>DM-curve misfit</th><td>{:.3}</td></tr>\
         <tr><th>band fraction</th><td>{:.3}</td><th>modulation index</th><td>{:.3}</td></tr>\
         <tr><th>detections merged</th><td>{}</td><th>reasons</th><td>{}</td></tr></table>",
        c.t_inf_s,
        c.mjd_inf,
        c.dm,
        c.dm_lo,
        c.dm_hi,
        c.width_ms,
        c.snr,
        fluence,
        f.snr_dm0_ratio,
        f.dm_curve_misfit,
        f.band_fraction,
        f.modulation_index,
        c.cluster_size,
        esc(&c.reasons.join("; ")),
    )
}

/// Escapes text for HTML element content and attribute values.
pub fn esc(s: &str) -> String {
    let mut out = String::with_capacity(s.len());
    for ch in s.chars() {
        match ch {
            '&' => out.push_str("&amp;"),
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '"' => out.push_str("&quot;"),
            '\'' => out.push_str("&#39;"),
            c => out.push(c),
        }
    }
    out
}

/// The page style, shared with the review page.
pub const STYLE: &str = "body{font-family:sans-serif;margin:1.5em;color:#222;max-width:1200px}\
h1{font-size:1.5em}h2{font-size:1.2em;border-bottom:1px solid #ccc;margin-top:2em}\
h3{font-size:1em}table{border-collapse:collapse;margin:.6em 0}\
td,th{border:1px solid #ddd;padding:2px 8px;text-align:left;font-size:.9em}\
th{background:#f3f3f3}img{max-width:100%;height:auto;border:1px solid #eee}\
.astrophysical{color:#0072b2;font-weight:bold}.rfi{color:#d55e00;font-weight:bold}\
.unsure{color:#cc79a7;font-weight:bold}.note{color:#555;font-size:.9em}";

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_report_without_candidates_says_so() {
        let dir = tempfile::tempdir().unwrap();
        let out = dir.path().join("report");
        let index = write_report(&out, &[], &ReportOptions::default(), &[]).unwrap();
        let page = std::fs::read_to_string(index).unwrap();
        assert!(page.contains("No candidates"), "{page}");
    }

    #[test]
    fn escapes_markup() {
        assert_eq!(
            esc("<a href=\"x\">&'"),
            "&lt;a href=&quot;x&quot;&gt;&amp;&#39;"
        );
    }
}
