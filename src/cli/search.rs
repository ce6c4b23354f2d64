//! `burstbook search FILE... --out DIR`.

use std::path::PathBuf;

use anyhow::Context;
use burstbook::catalogue::{Catalogue, EarlierRun, ObservationRecord, RecordOutcome};
use burstbook::search::output::{self, FileOutcome};
use burstbook::search::{self, SearchConfig};

/// Arguments of `search`.
#[derive(clap::Args, Debug)]
#[command(after_help = "Examples:
  burstbook search demo-data/*.json --out results
  burstbook search obs.fits --out results --dm-max 500 --snr 8 --mask-mhz 1270:1290
  burstbook search obs.json --out results --config search.toml --zero-dm
  burstbook search demo-data/demo.json --out results --catalogue survey.sqlite
  burstbook search demo-data/demo.json --out results --search-again
  burstbook search obs.fits --out results --threads 1     # one worker on a shared machine
  burstbook search lowband.fits --out results --average-samples 16 --average-channels 4
  burstbook search night/part-*.fits --out results   # consecutive files are read on into
  burstbook search survey.fits --out results --smearing-fraction 0.75   # faster, a little less S/N

A file that another one listed continues (the same set-up, starting where it ends) is
searched on into that file's first seconds, so a burst whose sweep crosses from one
file into the next is found, and reported once, by the file it starts in.

A file whose content the catalogue already holds a finished search of, with the same
configuration, is not searched again: one line says so, and its candidates are taken
from the catalogue into the outputs. --search-again searches it anyway; the catalogue
keeps its earlier run (review labels and bursts refer to those candidates), so nothing
is recorded twice.")]
pub struct Args {
    /// Observation files (.json native header or FITS search mode).
    #[arg(required = true)]
    pub files: Vec<PathBuf>,
    /// Directory for candidates.csv and candidates.json (created if missing).
    #[arg(long)]
    pub out: PathBuf,
    /// TOML file with search settings; the flags below override it.
    #[arg(long)]
    pub config: Option<PathBuf>,
    /// Lowest trial DM in pc cm⁻³.
    #[arg(long)]
    pub dm_min: Option<f64>,
    /// Highest trial DM in pc cm⁻³.
    #[arg(long)]
    pub dm_max: Option<f64>,
    /// Detection threshold on the matched-filter S/N.
    #[arg(long)]
    pub snr: Option<f64>,
    /// Widest boxcar in milliseconds (a baseline window the configuration does not
    /// set follows it: max(1 s, 10 × this)).
    #[arg(long)]
    pub max_width_ms: Option<f64>,
    /// Apply the zero-DM filter.
    #[arg(long)]
    pub zero_dm: bool,
    /// Skip the spectral-kurtosis test.
    #[arg(long)]
    pub no_kurtosis: bool,
    /// Mask a frequency range LO:HI in MHz (repeatable).
    #[arg(long, value_name = "LO:HI", value_parser = parse_range)]
    pub mask_mhz: Vec<[f64; 2]>,
    /// New samples per block in seconds.
    #[arg(long)]
    pub block_s: Option<f64>,
    /// Largest fraction of the channel smearing one downsampled sample may span
    /// ([plan] smearing_fraction; default 0.5; 0.75 is about 25 % faster on a wide
    /// band at high time resolution, for about 2 % of the S/N of narrow bursts: see
    /// the README's measured performance).
    #[arg(long, value_name = "F")]
    pub smearing_fraction: Option<f64>,
    /// Average N adjacent time samples as the data are read (long sweeps at low
    /// frequencies; see `[average]` in docs/search.md).
    #[arg(long, value_name = "N")]
    pub average_samples: Option<usize>,
    /// Average N adjacent channels as the data are read (N must divide the channels).
    #[arg(long, value_name = "N")]
    pub average_channels: Option<usize>,
    /// Memory the search may use, in GiB [default: 90 % of physical memory]. A search
    /// whose blocks and plan would need more is refused before it starts.
    #[arg(long, value_name = "GIB")]
    pub memory_limit_gib: Option<f64>,
    /// Catalogue that records each searched file [default: $BURSTBOOK_CATALOGUE, else ./burstbook.sqlite].
    #[arg(long, value_name = "PATH")]
    pub catalogue: Option<PathBuf>,
    /// Do not record the search in a catalogue (nor skip files already in one).
    #[arg(long, conflicts_with = "catalogue")]
    pub no_catalogue: bool,
    /// Search every file, even one the catalogue holds a finished search of with the
    /// same configuration (that earlier run stays; nothing is recorded twice).
    #[arg(long)]
    pub search_again: bool,
    /// Candidates listed in the terminal summary.
    #[arg(long, default_value_t = 10)]
    pub top: usize,
    /// Search each file on its own. By default a file that another one listed
    /// continues (the same set-up, starting where it ends) is read on into that one's
    /// first seconds, so bursts whose sweep crosses from one file into the next are
    /// found.
    #[arg(long)]
    pub no_join: bool,
}

fn parse_range(s: &str) -> Result<[f64; 2], String> {
    let (lo, hi) = s
        .split_once(':')
        .ok_or_else(|| format!("expected LO:HI in MHz, got {s:?}"))?;
    let lo: f64 = lo.trim().parse().map_err(|e| format!("{lo:?}: {e}"))?;
    let hi: f64 = hi.trim().parse().map_err(|e| format!("{hi:?}: {e}"))?;
    Ok([lo, hi])
}

/// The configuration from the file (or defaults) with the flags applied.
fn config(args: &Args) -> anyhow::Result<SearchConfig> {
    let mut c = match &args.config {
        Some(p) => SearchConfig::from_toml_file(p)?,
        None => SearchConfig::default(),
    };
    if let Some(v) = args.dm_min {
        c.plan.dm_min = v;
    }
    if let Some(v) = args.dm_max {
        c.plan.dm_max = v;
    }
    if let Some(v) = args.snr {
        c.snr_threshold = v;
    }
    if let Some(v) = args.max_width_ms {
        c.set_max_width_s(v * 1e-3);
    }
    if let Some(v) = args.block_s {
        c.block_s = v;
    }
    if let Some(v) = args.smearing_fraction {
        c.plan.smearing_fraction = v;
    }
    c.average.samples = args.average_samples.unwrap_or(c.average.samples);
    c.average.channels = args.average_channels.unwrap_or(c.average.channels);
    c.memory_limit_gib = args.memory_limit_gib.or(c.memory_limit_gib);
    c.clean.zero_dm |= args.zero_dm;
    c.clean.kurtosis &= !args.no_kurtosis;
    c.clean.masks_mhz.extend(&args.mask_mhz);
    c.validate()?;
    Ok(c)
}

pub fn run(args: Args) -> anyhow::Result<()> {
    let config = config(&args)?;
    let paths = distinct_files(&args.files);
    // Every file checked before any is searched, or a bad one stops the run late.
    let headers = search::check_files(&paths, &config, !args.no_join)?;
    let continuations = match args.no_join {
        true => vec![None; paths.len()],
        false => {
            let continuations = search::join::continuations(&headers);
            note_near_misses(&paths, &headers, &continuations);
            continuations
        }
    };
    // For each file, the files its search reads on into.
    let chains: Vec<Vec<usize>> = (0..paths.len())
        .map(|i| search::join::run_on_chain(i, &headers, &continuations, &config))
        .collect();
    std::fs::create_dir_all(&args.out)
        .with_context(|| format!("cannot create output directory {}", args.out.display()))?;
    // Opened first, so a bad catalogue stops us before hours of searching.
    let mut catalogue = match args.no_catalogue {
        true => None,
        false => Some(Catalogue::open(&Catalogue::resolve_path(
            args.catalogue.as_deref(),
        ))?),
    };
    let config_hash = config.hash();
    let mut files = Vec::new();
    // Recordings of one shape reuse one set of buffers.
    let mut workspace = search::Workspace::default();
    // A file that fails part-way (its header passed, a later sample did not) is
    // reported and the others are searched all the same; a catalogue error stops all.
    let several = paths.len() > 1;
    let fail = |files: &mut Vec<FileOutcome>, file: String, error: String| {
        if several {
            note!("burstbook: error: {error}; the other files are searched all the same");
        }
        files.push(FileOutcome::Failed { file, error });
    };
    // A file after the files it continues, so that it can leave out the pulses they
    // found across the cut.
    let order = search::join::search_order(&continuations);
    for &i in &order {
        let path = paths[i];
        let started_utc = burstbook::catalogue::now_utc();
        let label = path.display().to_string();
        let source = match burstbook::obs::open(path) {
            Ok(source) => source,
            Err(e) => {
                fail(&mut files, label, e.to_string());
                continue;
            }
        };
        // Hashed before searching: the hash both finds an earlier search and records this one.
        let record = match catalogue {
            Some(_) => match ObservationRecord::from_file(path, source.header()) {
                Ok(record) => Some(record),
                Err(e) => {
                    fail(&mut files, label, e.to_string());
                    continue;
                }
            },
            None => None,
        };
        let earlier = match (&catalogue, &record) {
            (Some(cat), Some(obs)) => match cat.finished_run(obs, &config_hash) {
                Ok(earlier) => earlier,
                // The same samples under another header: refused before searching.
                Err(e @ burstbook::Error::BadInput { .. }) => {
                    fail(&mut files, label, e.to_string());
                    continue;
                }
                Err(e) => return Err(e.into()),
            },
            _ => None,
        };
        // A search that did not read on into the file that continues it (or is not
        // known to have) missed the sweeps crossing into it: searched again, joined,
        // it completes that run.
        let completes = match (&earlier, chains[i].first()) {
            (Some(earlier), Some(_)) => earlier.run_on_s.is_none_or(|s| s <= 0.0),
            _ => false,
        };
        if let (Some(cat), Some(earlier)) = (catalogue.as_mut(), earlier) {
            if completes {
                say!(
                    "{label}: searched again, reading on into {}, which continues it: its \
                     search in catalogue {} (run {}) {}",
                    paths[chains[i][0]].display(),
                    cat.path().display(),
                    earlier.run_id,
                    match earlier.run_on_s {
                        Some(_) => "did not",
                        None => "is not known to have",
                    }
                )?;
            } else if !args.search_again {
                say!(
                    "{label}: skipped, the catalogue {} holds a finished search of this recording \
                     with this configuration (run {} finished {}, candidates: {}{}); --search-again searches it anyway",
                    cat.path().display(),
                    earlier.run_id,
                    earlier.finished_utc,
                    earlier.candidates.len(),
                    match earlier.recorded_path == label {
                        true => String::new(),
                        false => format!(", recorded as {}", earlier.recorded_path),
                    },
                )?;
                let cuts = Cuts {
                    headers: &headers,
                    chains: &chains,
                    order: &order,
                    config: &config,
                };
                let earlier = cuts.take_out_repeats(cat, i, earlier, &files, &label)?;
                files.push(FileOutcome::skipped(label, earlier));
                continue;
            }
        }
        let next_labels: Vec<String> = chains[i]
            .iter()
            .map(|&j| paths[j].display().to_string())
            .collect();
        let next = open_run_on(&next_labels, &label);
        let bar = burstbook::progress::bar(source.header().n_samples, &label);
        let clock = std::time::Instant::now();
        let result =
            search::search_run_on_in(&mut workspace, source, next, &label, &config, Some(&bar));
        bar.finish_and_clear();
        let mut result = match result {
            Ok(result) => result,
            Err(e) => {
                fail(&mut files, label, e.to_string());
                continue;
            }
        };
        let cuts = Cuts {
            headers: &headers,
            chains: &chains,
            order: &order,
            config: &config,
        };
        for (p, repeats) in cuts.repeats(i, &result.header, &mut result.candidates, &files) {
            say!(
                "{label}: {} candidate(s) near its start left out, the same pulses as found \
                 by {}, which it continues, across the cut",
                repeats.len(),
                paths[p].display()
            )?;
        }
        let wall_s = clock.elapsed().as_secs_f64();
        if result.run_on_s > 0.0 {
            let run_on_s = result.run_on_s;
            let reached: Vec<&str> = next_labels
                .iter()
                .take(search::join::reached(&chains[i], &headers, run_on_s).len())
                .map(String::as_str)
                .collect();
            match &reached[..] {
                [.., last] if reached.len() > 1 => say!(
                    "{label}: read on {run_on_s:.2} s through {} into {last}, which continue \
                     it one after another, so that sweeps crossing into them were searched",
                    reached[..reached.len() - 1].join(", ")
                )?,
                _ => say!(
                    "{label}: read on {run_on_s:.2} s into {}, which continues it, so that \
                     sweeps crossing into it were searched",
                    reached.join("")
                )?,
            }
        }
        if result.fraction_masked >= 1.0 {
            note!(
                "{label}: every channel was masked throughout (flagged, --mask-mhz or zero \
                 weights): nothing in it was searched, and it adds no exposure"
            );
        }
        if let (Some(cat), Some(obs)) = (catalogue.as_mut(), &record) {
            // One transaction per file: a killed search keeps every file finished so far.
            let outcome = cat.record_file_result(obs, &result, &config, started_utc)?;
            match outcome {
                RecordOutcome::Inserted { .. } => {
                    say!("{label}: recorded in catalogue {}", cat.path().display())?
                }
                RecordOutcome::AlreadyPresent { run_id } => say!(
                    "{label}: already in catalogue {} as run {run_id}, which is kept \
                     (this search is in the outputs only)",
                    cat.path().display()
                )?,
                RecordOutcome::Completed { run_id, completion } => say!(
                    "{label}: run {run_id} in catalogue {} completed: {} candidate(s) added{}",
                    cat.path().display(),
                    completion.added,
                    match completion.replaced {
                        0 => String::new(),
                        n => format!(
                            ", in place of {n} it had found from part of their sweep \
                             (none reviewed or promoted)"
                        ),
                    }
                )?,
            }
        }
        say!(
            "{label}: searched {:.1} s of data in {wall_s:.1} s ({:.1}x real time)",
            result.header.duration_s(),
            result.header.duration_s() / wall_s.max(1e-9)
        )?;
        let t = &result.seconds;
        say!(
            "{label}: wall time by stage: reading {:.1} s, cleaning {:.1} s, dedispersion {:.1} s, \
             matched filter {:.1} s, triage {:.1} s",
            t.reading,
            t.cleaning,
            t.dedispersion,
            t.matched_filter,
            t.triage
        )?;
        files.push(FileOutcome::Searched(Box::new(result)));
    }
    let failed: Vec<(&str, &str)> = files
        .iter()
        .filter_map(|f| match f {
            FileOutcome::Failed { file, error } => Some((file.as_str(), error.as_str())),
            _ => None,
        })
        .collect();
    // With nothing searched, outputs are not replaced by empty ones.
    match failed[..] {
        [(_, error)] if !several => anyhow::bail!("{error}"),
        _ if failed.len() == files.len() => {
            anyhow::bail!("none of the {} files could be searched", files.len())
        }
        _ => {}
    }
    let csv = args.out.join("candidates.csv");
    let json = args.out.join("candidates.json");
    output::write_csv(&csv, &files)?;
    output::write_json(&json, &files, &config)?;
    print_summary(&files, args.top, &config)?;
    say!("wrote {} and {}", csv.display(), json.display())?;
    match failed.len() {
        0 => Ok(()),
        n => anyhow::bail!(
            "{n} of {} files could not be searched ({}): the errors are above and under \
             \"failed\" in {}",
            files.len(),
            failed.iter().map(|f| f.0).collect::<Vec<_>>().join(", "),
            json.display()
        ),
    }
}

/// How the listed files continue one another, for leaving out repeats across cuts.
struct Cuts<'a> {
    /// The files' headers as read (before averaging).
    headers: &'a [burstbook::obs::Header],
    chains: &'a [Vec<usize>],
    /// The order files are searched in; the outcomes so far are of its first ones.
    order: &'a [usize],
    config: &'a SearchConfig,
}

impl Cuts<'_> {
    /// Removes from `candidates`, those of file `i` as searched with `header` (after
    /// averaging), the
    /// repeats of pulses found whole across the cut by the files it continues
    /// (`files`, the outcomes so far), and returns them with the file that found
    /// each pulse.
    fn repeats(
        &self,
        i: usize,
        header: &burstbook::obs::Header,
        candidates: &mut Vec<burstbook::Candidate>,
        files: &[FileOutcome],
    ) -> Vec<(usize, Vec<burstbook::Candidate>)> {
        let mut found = Vec::new();
        for (p, offset_s) in search::join::read_on_from(i, self.headers, self.chains) {
            let Some(at) = self.order[..files.len()].iter().position(|&j| j == p) else {
                continue;
            };
            let before = candidates.clone();
            let earlier_end_s = search::join::owned_end_s(&self.headers[p], self.config);
            search::drop_repeats_across_cut(
                header,
                files[at].candidates(),
                offset_s,
                earlier_end_s,
                candidates,
            );
            let repeats: Vec<_> = before
                .into_iter()
                .filter(|c| !candidates.contains(c))
                .collect();
            if !repeats.is_empty() {
                found.push((p, repeats));
            }
        }
        found
    }

    /// The earlier run of skipped file `i` (labelled `label`) without its repeats of
    /// pulses that the files it continues, searched since while reading on, found
    /// whole across the cut: taken out of the run in `cat` too, unless reviewed or
    /// promoted (those stay in both).
    fn take_out_repeats(
        &self,
        cat: &mut Catalogue,
        i: usize,
        mut earlier: EarlierRun,
        files: &[FileOutcome],
        label: &str,
    ) -> anyhow::Result<EarlierRun> {
        // As searched: averaged, with the group its end falls in.
        let Ok(header) = self.config.average.run_on_header(&self.headers[i]) else {
            return Ok(earlier);
        };
        let found = self.repeats(i, &header, &mut earlier.candidates, files);
        if found.is_empty() {
            return Ok(earlier);
        }
        let repeats: Vec<_> = found.into_iter().flat_map(|f| f.1).collect();
        let run_id = earlier.run_id;
        let taken = cat.take_out_repeats(run_id, &repeats)?;
        say!(
            "{label}: {} of its candidate(s) near its start taken out of run {run_id} in \
             catalogue {}: the same pulses as found whole, across the cut, by the file it \
             continues{}",
            taken.len(),
            cat.path().display(),
            match repeats.len() - taken.len() {
                0 => String::new(),
                n => format!(" ({n} reviewed or promoted, kept)"),
            }
        )?;
        // Those kept stay in the outputs, as in the catalogue.
        let kept = repeats.into_iter().filter(|r| !taken.contains(r));
        earlier.candidates.extend(kept);
        earlier
            .candidates
            .sort_by(|a, b| a.t_inf_s.total_cmp(&b.t_inf_s));
        Ok(earlier)
    }
}

/// A note for each file that starts within a sample of where another listed file
/// ends yet is not joined to it ([`search::join::near_misses`]).
fn note_near_misses(
    paths: &[&PathBuf],
    headers: &[burstbook::obs::Header],
    continuations: &[Option<usize>],
) {
    for (i, j, why) in search::join::near_misses(headers, continuations) {
        note!(
            "{}: not joined to {}, which it follows, as {why}: each is searched on its \
             own, and a sweep crossing from one into the other is missed",
            paths[j].display(),
            paths[i].display()
        );
    }
}

/// The files of `next` (each continuing the one before) opened and read on into one
/// another, for the search of `label` to read on into; the chain stops before a file
/// that cannot be opened (with a note), and `None` if the first cannot be.
fn open_run_on(next: &[String], label: &str) -> Option<Box<dyn burstbook::obs::SampleSource>> {
    let mut opened = Vec::new();
    for (k, path) in next.iter().enumerate() {
        match (burstbook::obs::open(std::path::Path::new(path)), k) {
            (Ok(source), _) => opened.push(source),
            (Err(e), 0) => {
                note!(
                    "{label}: searched on its own, as {path}, which continues it, cannot be \
                     read: {e}"
                );
                return None;
            }
            (Err(e), _) => {
                note!(
                    "{label}: read on only as far as the end of {}, as {path}, which \
                     continues it, cannot be read: {e}",
                    next[k - 1]
                );
                break;
            }
        }
    }
    let mut run_on: Option<Box<dyn burstbook::obs::SampleSource>> = None;
    for source in opened.into_iter().rev() {
        run_on = Some(match run_on {
            None => source,
            Some(rest) => {
                let extra = rest.header().n_samples;
                Box::new(burstbook::obs::RunOn::new(source, rest, extra).ok()?)
            }
        });
    }
    run_on
}

/// `paths` without the repeats of a file named twice (by the same or another path
/// to it), which would list its candidates twice; each repeat gets a note.
fn distinct_files(paths: &[PathBuf]) -> Vec<&PathBuf> {
    let mut seen = std::collections::HashSet::new();
    paths
        .iter()
        .filter(|path| {
            // A path that cannot be resolved is kept: opening it reports the problem.
            let key = std::fs::canonicalize(path).unwrap_or_else(|_| path.to_path_buf());
            let first = seen.insert(key);
            if !first {
                note!("{}: listed more than once; searched once", path.display());
            }
            first
        })
        .collect()
}

/// Undispersed candidates in one file from which the summary suggests the zero-DM
/// filter: a few are ordinary, dozens mean an impulsive transmitter nearby.
const UNDISPERSED_HINT_COUNT: usize = 10;

/// Prints per-file totals and the `top` brightest candidates. `config.plan.dm_max` is
/// the highest DM asked for, which a short recording may not reach.
fn print_summary(files: &[FileOutcome], top: usize, config: &SearchConfig) -> std::io::Result<()> {
    use burstbook::Verdict;
    let dm_max = config.plan.dm_max;
    let searched = files.iter().filter_map(|f| match f {
        FileOutcome::Searched(r) => Some(&**r),
        _ => None,
    });
    for r in searched {
        let count = |v: Verdict| r.candidates.iter().filter(|c| c.verdict == v).count();
        say!(
            "{}: {:.1} s, {:.1} % masked, {} DM trials, {:.2e} effective trials \
             ({:.2} false alarms expected); candidates: {} astrophysical, {} unsure, {} rfi",
            r.file,
            r.header.duration_s(),
            100.0 * r.fraction_masked,
            r.trials.dm_trials,
            r.trials.effective_trials,
            r.trials.expected_false_alarms,
            count(Verdict::Astrophysical),
            count(Verdict::Unsure),
            count(Verdict::Rfi),
        )?;
        match r.highest_dm_searched() {
            Some(dm) if dm >= dm_max => {}
            // `readable`: a --dm-max of 1e300 is not written out in 301 digits.
            Some(dm) => say!(
                "  note: {} is shorter than the sweep at DM {}: searched only up to DM {dm:.1}",
                r.file,
                burstbook::units::readable(dm_max)
            )?,
            None => say!(
                "  note: {} is shorter than every trial's sweep: nothing was searched",
                r.file
            )?,
        }
        let undispersed = r
            .candidates
            .iter()
            .filter(|c| c.features.snr_dm0_ratio >= config.triage.ambiguous_dm0_ratio)
            .count();
        if undispersed >= UNDISPERSED_HINT_COUNT && !config.clean.zero_dm {
            say!(
                "  note: {undispersed} candidates in {} are nearly as bright at DM 0 as at \
                 their best DM (undispersed interference?); --zero-dm removes such signals \
                 before dedispersion",
                r.file
            )?;
        }
    }
    let mut all: Vec<_> = files.iter().flat_map(FileOutcome::candidates).collect();
    all.sort_by(|a, b| b.snr.total_cmp(&a.snr));
    if all.is_empty() {
        return Ok(());
    }
    say!(
        "{:>8} {:>12} {:>9} {:>9} {:>14}  file",
        "S/N",
        "t_inf (s)",
        "DM",
        "width ms",
        "verdict"
    )?;
    for c in all.iter().take(top) {
        say!(
            "{:>8.1} {:>12.4} {:>9.2} {:>9.3} {:>14}  {}",
            c.snr,
            c.t_inf_s,
            c.dm,
            c.width_ms,
            c.verdict,
            c.file
        )?;
    }
    Ok(())
}
