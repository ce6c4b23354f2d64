//! Reading the search's output back (`candidates.json` or `candidates.csv`) and
//! matching each candidate with its observation file.

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

use serde::Deserialize;

use crate::candidate::Candidate;
use crate::error::{Error, Result};

#[derive(Deserialize)]
#[serde(untagged)]
enum JsonCandidates {
    Wrapped { candidates: Vec<Candidate> },
    Bare(Vec<Candidate>),
}

/// Loads candidates from a search output folder (its `candidates.json`, else its
/// `candidates.csv`), or from one of those files directly.
///
/// # Errors
/// [`Error::BadInput`] naming the file when it is missing or not a candidate list.
pub fn load_candidates(path: &Path) -> Result<Vec<Candidate>> {
    let path = if path.is_dir() {
        let json = path.join("candidates.json");
        if json.exists() {
            json
        } else {
            path.join("candidates.csv")
        }
    } else {
        path.to_path_buf()
    };
    let text = std::fs::read_to_string(&path).map_err(|e| Error::io(&path, e))?;
    let is_csv = path
        .extension()
        .is_some_and(|e| e.eq_ignore_ascii_case("csv"));
    if is_csv {
        crate::search::output::parse_csv(&path, &text)
    } else {
        match serde_json::from_str::<JsonCandidates>(&text) {
            Ok(JsonCandidates::Wrapped { candidates } | JsonCandidates::Bare(candidates)) => {
                Ok(candidates)
            }
            Err(e) => Err(Error::bad_input(
                &path,
                format!("not a candidate list: {e}"),
            )),
        }
    }
}

/// Where observation files are looked for by name, ahead of the paths recorded in the
/// candidates. It also decides which option a missing file's error suggests, since
/// `report` takes files for a search output and a folder for a catalogue source.
#[derive(Debug, Clone, Copy)]
pub enum ObsLookup<'a> {
    /// Files given one by one (`report --obs FILE...`); a single one also serves
    /// candidates whose recorded path does not resolve.
    Files(&'a [PathBuf]),
    /// A folder holding moved files (`report --source NAME --obs-dir DIR`), if given.
    Dir(Option<&'a Path>),
}

/// Groups candidates by observation and finds each observation's file: by file name
/// in `lookup`, else the path recorded in the candidate if it exists (relative paths
/// are tried from `search_dir` as well), else the only file of
/// [`ObsLookup::Files`].
///
/// # Errors
/// [`Error::Config`] naming a recorded file that none of these resolve and the
/// option that would supply it.
pub fn group_by_observation(
    cands: Vec<Candidate>,
    search_dir: Option<&Path>,
    lookup: ObsLookup,
) -> Result<Vec<(PathBuf, Vec<Candidate>)>> {
    let mut groups: BTreeMap<String, Vec<Candidate>> = BTreeMap::new();
    for c in cands {
        groups.entry(c.file.clone()).or_default().push(c);
    }
    groups
        .into_iter()
        .map(|(file, cs)| Ok((resolve(&file, search_dir, lookup)?, cs)))
        .collect()
}

fn resolve(file: &str, search_dir: Option<&Path>, lookup: ObsLookup) -> Result<PathBuf> {
    if let Some(p) = locate(file, search_dir, lookup) {
        return Ok(p);
    }
    let hint = match lookup {
        ObsLookup::Files([only]) => return Ok(only.clone()),
        ObsLookup::Files(_) => "; pass it with --obs FILE".to_string(),
        ObsLookup::Dir(None) => "; pass the folder it was moved to with --obs-dir DIR".to_string(),
        ObsLookup::Dir(Some(d)) => format!(
            ", nor in {}; pass the folder holding it with --obs-dir DIR",
            d.display()
        ),
    };
    Err(Error::Config(format!(
        "cannot find observation {file:?} named in the candidates{hint}"
    )))
}

/// The observation file recorded as `file`: by file name in `lookup`, else the
/// recorded path if it exists (a relative one is tried from `search_dir` as well).
pub fn locate(file: &str, search_dir: Option<&Path>, lookup: ObsLookup) -> Option<PathBuf> {
    let recorded = Path::new(file);
    let name = recorded.file_name();
    let by_name = match lookup {
        ObsLookup::Files(files) => files.iter().find(|p| p.file_name() == name).cloned(),
        ObsLookup::Dir(dir) => dir.zip(name).map(|(d, n)| d.join(n)).filter(|p| p.exists()),
    };
    by_name
        .or_else(|| recorded.exists().then(|| recorded.to_path_buf()))
        .or_else(|| search_dir.map(|d| d.join(recorded)).filter(|p| p.exists()))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::candidate::Verdict;
    use crate::search::output::parse_csv;

    const CSV: &str = "file,t_inf_s,mjd_inf,dm,dm_lo,dm_hi,width_ms,snr,cluster_size,verdict,reasons,\
snr_dm0_ratio,dm_curve_misfit,band_fraction,modulation_index,fluence_jy_ms\n\
a/obs1.json,1.5,60000.1,300,299,301,2,12.5,7,astrophysical,peaks away from DM 0; broadband,0.1,0.05,0.9,0.3,\n\
a/obs2.json,3.0,60000.2,20,10,40,8,7.1,30,rfi,bright at DM 0,0.9,0.5,0.1,2.0,1.25\n";

    #[test]
    fn reads_the_search_csv_and_json() {
        let dir = tempfile::tempdir().unwrap();
        let csv = dir.path().join("candidates.csv");
        std::fs::write(&csv, CSV).unwrap();
        let cs = load_candidates(dir.path()).unwrap();
        assert_eq!(cs.len(), 2);
        assert_eq!(cs[0].reasons, vec!["peaks away from DM 0", "broadband"]);
        assert_eq!(
            (cs[1].verdict, cs[1].fluence_jy_ms),
            (Verdict::Rfi, Some(1.25))
        );
        assert_eq!(cs[0].fluence_jy_ms, None);
        let json = dir.path().join("candidates.json");
        let wrapped = serde_json::json!({ "config_hash": "x", "candidates": cs });
        std::fs::write(&json, wrapped.to_string()).unwrap();
        assert_eq!(
            load_candidates(dir.path()).unwrap(),
            cs,
            "folder prefers the JSON"
        );
        std::fs::write(&json, serde_json::to_string(&cs).unwrap()).unwrap();
        assert_eq!(load_candidates(&json).unwrap(), cs);
        std::fs::write(&json, "{\"nope\": 1}").unwrap();
        let err = load_candidates(&json).unwrap_err().to_string();
        assert!(
            err.contains("candidates.json") && err.contains("not a candidate list"),
            "{err}"
        );
    }

    #[test]
    fn groups_and_resolves_observation_files() {
        let cs = load_candidates_from_str();
        let given = [
            PathBuf::from("/data/obs2.json"),
            PathBuf::from("/data/obs1.json"),
        ];
        let groups = group_by_observation(cs.clone(), None, ObsLookup::Files(&given)).unwrap();
        assert_eq!(groups[0].0, PathBuf::from("/data/obs1.json"));
        assert_eq!(groups[1].0, PathBuf::from("/data/obs2.json"));
        let only = [PathBuf::from("/data/obs1.json")];
        let groups = group_by_observation(cs.clone(), None, ObsLookup::Files(&only)).unwrap();
        assert!(
            groups.iter().all(|(p, _)| p == &only[0]),
            "one file serves all"
        );
        let err = group_by_observation(cs, None, ObsLookup::Files(&[]))
            .unwrap_err()
            .to_string();
        assert!(
            err.contains("a/obs1.json") && err.contains("--obs FILE"),
            "{err}"
        );
    }

    #[test]
    fn a_source_report_looks_in_its_folder_and_suggests_one() {
        let cs = load_candidates_from_str();
        let err = group_by_observation(cs.clone(), None, ObsLookup::Dir(None))
            .unwrap_err()
            .to_string();
        assert!(
            err.contains("--obs-dir DIR") && !err.contains("--obs FILE"),
            "{err}"
        );
        // A folder holding one of the two observations: that one is found by name,
        // the other is missing (never stood in for by the one found).
        let dir = tempfile::tempdir().unwrap();
        std::fs::write(dir.path().join("obs1.json"), "{}").unwrap();
        let err = group_by_observation(cs.clone(), None, ObsLookup::Dir(Some(dir.path())))
            .unwrap_err()
            .to_string();
        assert!(
            err.contains("a/obs2.json") && err.contains("--obs-dir DIR"),
            "{err}"
        );
        assert!(err.contains(&dir.path().display().to_string()), "{err}");
        std::fs::write(dir.path().join("obs2.json"), "{}").unwrap();
        let groups = group_by_observation(cs, None, ObsLookup::Dir(Some(dir.path()))).unwrap();
        assert_eq!(groups[0].0, dir.path().join("obs1.json"));
        assert_eq!(groups[1].0, dir.path().join("obs2.json"));
    }

    fn load_candidates_from_str() -> Vec<Candidate> {
        parse_csv(Path::new("x.csv"), CSV).unwrap()
    }
}
