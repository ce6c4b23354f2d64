//! End to end: a synthetic observation on disk and a candidates.csv as the search
//! writes it → `burstbook report` → a self-contained folder whose figures show the burst.

mod cli_common;
use cli_common::assert_success;

use std::process::Command;

mod report_common;

use report_common::{DM, N_TIME, TSAMP_S, header, mjd_at, write_observation};

#[test]
fn report_from_search_csv_is_self_contained_and_shows_the_burst() {
    let dir = tempfile::tempdir().unwrap();
    let obs = dir.path().join("night1.json");
    let t_inf = write_observation(&obs);
    let search = dir.path().join("search");
    std::fs::create_dir(&search).unwrap();
    let csv = format!(
        "file,t_inf_s,mjd_inf,dm,dm_lo,dm_hi,width_ms,snr,cluster_size,verdict,reasons,\
         snr_dm0_ratio,dm_curve_misfit,band_fraction,modulation_index,fluence_jy_ms\n\
         {o},{t_inf},{m1},{DM},248,252,3,25.0,9,astrophysical,peaks away from DM 0,0.1,0.05,0.9,0.3,\n\
         {o},6.2,{m2},12,0,30,16,7.5,40,rfi,bright at DM 0 <&>,0.95,0.6,0.2,2.5,\n",
        o = obs.display(),
        m1 = mjd_at(t_inf),
        m2 = mjd_at(6.2),
    );
    std::fs::write(search.join("candidates.csv"), csv).unwrap();
    let out = dir.path().join("report");
    let status = Command::new(env!("CARGO_BIN_EXE_burstbook"))
        .args([
            "report",
            search.to_str().unwrap(),
            "--out",
            out.to_str().unwrap(),
        ])
        .status()
        .unwrap();
    assert!(status.success());

    let html = std::fs::read_to_string(out.join("index.html")).unwrap();
    assert!(html.contains("TESTSRC-A") && html.contains("bright at DM 0 &lt;&amp;&gt;"));
    assert!(!html.contains("http://") && !html.contains("https://") && !html.contains("<script"));
    // Sorted by S/N: the astrophysical one is #1.
    let first = html.find("#1: DM").unwrap();
    assert!(html[first..].starts_with(&format!("#1: DM {DM:.2}")));
    let mut pngs = Vec::new();
    for part in html.split("src=\"").skip(1) {
        let name = &part[..part.find('"').unwrap()];
        let img = image::open(out.join(name)).unwrap().to_rgb8();
        assert!(img.width() >= 1000 && img.height() >= 400, "{name}");
        pngs.push(name.to_string());
    }
    assert_eq!(pngs.len(), 3, "overview + two candidates: {pngs:?}");

    // The burst's figure: the brightest waterfall column sits at the burst time. The
    // panel's pixel box is recomputed by drawing the same figure in-process.
    let cands = burstbook::report::load::load_candidates(&search).unwrap();
    let best = cands.iter().find(|c| c.snr == 25.0).unwrap();
    let fig = burstbook::report::candidate_figure_from_file(&obs, best, &[]).unwrap();
    let on_disk = image::open(out.join("obs00-cand0000.png"))
        .unwrap()
        .to_rgb8();
    let wf = fig.panels["waterfall"];
    let lum = |x: i32| -> f64 {
        (wf.y0..wf.y1)
            .map(|y| {
                let p = on_disk.get_pixel(x as u32, y as u32).0;
                0.3 * p[0] as f64 + 0.59 * p[1] as f64 + 0.11 * p[2] as f64
            })
            .sum()
    };
    let best_x = (wf.x0 + 2..wf.x1 - 2)
        .max_by(|&a, &b| lum(a).total_cmp(&lum(b)))
        .unwrap();
    let cut = burstbook::report::candidate_data::Cut::new(&header(), best);
    let (t0, t1) = (cut.col_ms(0.0, TSAMP_S), cut.col_ms(128.0, TSAMP_S));
    let ms = t0 + (best_x - wf.x0) as f64 / (wf.x1 - wf.x0) as f64 * (t1 - t0);
    assert!(
        (-0.5..3.5).contains(&ms),
        "brightest column at {ms} ms; burst spans 0–3 ms"
    );
}

#[test]
fn missing_observation_is_one_clear_error() {
    let dir = tempfile::tempdir().unwrap();
    let csv = "file,t_inf_s,mjd_inf,dm,dm_lo,dm_hi,width_ms,snr,cluster_size,verdict,reasons,\
               snr_dm0_ratio,dm_curve_misfit,band_fraction,modulation_index,fluence_jy_ms\n\
               gone.json,1,60000,10,10,10,1,8,1,unsure,,0,0,0,0,\n";
    std::fs::write(dir.path().join("candidates.csv"), csv).unwrap();
    let out = Command::new(env!("CARGO_BIN_EXE_burstbook"))
        .args(["report", dir.path().to_str().unwrap(), "--out"])
        .arg(dir.path().join("r"))
        .output()
        .unwrap();
    assert!(!out.status.success());
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(
        err.contains("gone.json") && err.contains("--obs FILE") && !err.contains("--obs-dir"),
        "{err}"
    );
    assert_eq!(err.lines().count(), 1, "{err}");
    for bad in ["-5", "nan"] {
        let out = Command::new(env!("CARGO_BIN_EXE_burstbook"))
            .args([
                "report",
                dir.path().to_str().unwrap(),
                "--neighbourhood-s",
                bad,
            ])
            .output()
            .unwrap();
        cli_common::assert_one_line_failure(&out, &["--neighbourhood-s must be a finite"]);
    }
}

// A single `--obs` file also serves candidates whose recorded path does not resolve,
// but only if it can be their recording: one that starts elsewhere, or ends before
// a candidate arrives, is refused in one line naming it, and no report is written.
#[test]
fn a_file_that_cannot_hold_the_candidates_is_refused() {
    let dir = tempfile::tempdir().unwrap();
    let obs = dir.path().join("night3.json");
    write_observation(&obs);
    let duration = N_TIME as f64 * TSAMP_S;
    for (t, mjd, needle) in [
        (
            2.0,
            mjd_at(2.0) + 1.0,
            "found in a recording starting at MJD",
        ),
        (duration + 1.0, mjd_at(duration + 1.0), "arrives at t = 9"),
    ] {
        let csv = format!(
            "file,t_inf_s,mjd_inf,dm,dm_lo,dm_hi,width_ms,snr,cluster_size,verdict,reasons,\
             snr_dm0_ratio,dm_curve_misfit,band_fraction,modulation_index,fluence_jy_ms\n\
             elsewhere/other.json,{t},{mjd},{DM},248,252,3,25.0,9,astrophysical,,0.1,0.05,0.9,0.3,\n"
        );
        std::fs::write(dir.path().join("candidates.csv"), csv).unwrap();
        let out = dir.path().join("r");
        let run = Command::new(env!("CARGO_BIN_EXE_burstbook"))
            .args(["report", dir.path().to_str().unwrap(), "--obs"])
            .arg(&obs)
            .arg("--out")
            .arg(&out)
            .output()
            .unwrap();
        let name = obs.display().to_string();
        cli_common::assert_one_line_failure(&run, &[&name, needle, "give its own file"]);
        assert!(!out.join("index.html").exists());
    }
}

#[test]
fn source_report_from_the_catalogue_has_timeline_and_figures() {
    use burstbook::catalogue::{Catalogue, ObservationRecord, synthetic};
    let dir = tempfile::tempdir().unwrap();
    let obs = dir.path().join("night2.json");
    let t_inf = write_observation(&obs);
    let csv = format!(
        "file,t_inf_s,mjd_inf,dm,dm_lo,dm_hi,width_ms,snr,cluster_size,verdict,reasons,\
         snr_dm0_ratio,dm_curve_misfit,band_fraction,modulation_index,fluence_jy_ms\n\
         {o},{t_inf},{m},{DM},248,252,3,25.0,9,astrophysical,,0.1,0.05,0.9,0.3,\n",
        o = obs.display(),
        m = mjd_at(t_inf),
    );
    std::fs::write(dir.path().join("candidates.csv"), csv).unwrap();
    let cands =
        burstbook::report::load::load_candidates(&dir.path().join("candidates.csv")).unwrap();
    let db = dir.path().join("book.sqlite");
    let mut cat = Catalogue::open(&db).unwrap();
    let record = ObservationRecord::from_file(&obs, &header()).unwrap();
    cat.record_search(&record, &synthetic::run(6.0), &cands)
        .unwrap();
    drop(cat);

    let out = dir.path().join("src-report");
    let run = Command::new(env!("CARGO_BIN_EXE_burstbook"))
        .args(["report", "--source", "TESTSRC-A", "--catalogue"])
        .arg(&db)
        .arg("--out")
        .arg(&out)
        .output()
        .unwrap();
    assert_success(&run);
    let html = std::fs::read_to_string(out.join("index.html")).unwrap();
    assert!(html.contains("lead00.png"), "timeline of sessions shown");
    assert!(html.contains("obs00-cand0000.png") && html.contains("night2.json"));
    let timeline = image::open(out.join("lead00.png")).unwrap();
    assert!(timeline.width() >= 1000);

    let unknown = Command::new(env!("CARGO_BIN_EXE_burstbook"))
        .args(["report", "--source", "NOBODY", "--catalogue"])
        .arg(&db)
        .arg("--out")
        .arg(dir.path().join("x"))
        .output()
        .unwrap();
    assert!(!unknown.status.success());
    let err = String::from_utf8_lossy(&unknown.stderr);
    assert!(
        err.contains("NOBODY") && err.contains("book.sqlite"),
        "{err}"
    );

    // Files moved since the search: the error suggests the option `--source` takes,
    // and that option finds them.
    let moved = dir.path().join("moved");
    std::fs::create_dir(&moved).unwrap();
    for ext in ["json", "npy"] {
        let from = obs.with_extension(ext);
        std::fs::rename(&from, moved.join(from.file_name().unwrap())).unwrap();
    }
    let report = |extra: &[&std::ffi::OsStr]| {
        Command::new(env!("CARGO_BIN_EXE_burstbook"))
            .args(["report", "--source", "TESTSRC-A", "--catalogue"])
            .arg(&db)
            .arg("--out")
            .arg(&out)
            .args(extra)
            .output()
            .unwrap()
    };
    let lost = report(&[]);
    let err = String::from_utf8_lossy(&lost.stderr);
    assert!(!lost.status.success());
    assert_eq!(err.lines().count(), 1, "{err}");
    assert!(
        err.contains("night2.json") && err.contains("--obs-dir DIR") && !err.contains("--obs FILE"),
        "{err}"
    );
    let found = report(&["--obs-dir".as_ref(), moved.as_os_str()]);
    assert_success(&found);
    // `--obs` would be ignored here, so it is refused.
    let moved_obs = moved.join("night2.json");
    let refused = report(&["--obs".as_ref(), moved_obs.as_os_str()]);
    assert!(!refused.status.success());
    assert!(String::from_utf8_lossy(&refused.stderr).contains("--obs"));
}

#[test]
fn help_shows_examples() {
    for cmd in ["report", "review"] {
        let out = Command::new(env!("CARGO_BIN_EXE_burstbook"))
            .args([cmd, "--help"])
            .output()
            .unwrap();
        let text = String::from_utf8_lossy(&out.stdout);
        assert!(
            out.status.success() && text.contains("Examples:"),
            "{cmd}: {text}"
        );
    }
}
