//! The burst catalogue: one SQLite file holding sources, searched observations,
//! search runs with their full configuration, every candidate, exposure, review
//! labels, confirmed bursts and injection completeness.
//!
//! Guarantees (see `docs/catalogue.md`):
//! - a search run is written in one transaction, so it is either wholly present
//!   or absent, even if the writing process is killed;
//! - recording the same recording (the same file content, or the same samples
//!   under a header that says the same) with the same configuration hash twice
//!   changes nothing ([`RecordOutcome::AlreadyPresent`]), and the same samples
//!   under a header that says something else are refused, until the observation
//!   recorded first is forgotten ([`Catalogue::forget_observation`]);
//! - several processes may write at once (WAL journal, busy timeout, and every
//!   write transaction retried while the database is busy);
//! - the schema lives in `migrations/`, is upgraded forward only, and a file
//!   written by a newer burstbook is refused.

mod bursts;
mod complete_run;
mod demote;
mod exposure;
mod forget;
mod from_search;
mod identity;
mod query;
mod record;
mod review;
mod same_event;
mod schema;
mod sources;
mod summary;
pub mod synthetic;
mod voevent;

pub use bursts::{BurstTiming, CompletenessRecord};
pub use complete_run::Completion;
pub use demote::{DEMOTED, DemoteOptions, Demotion};
pub use exposure::{
    ExposureImport, ExposureInterval, exposure_hours, merge_intervals, sweep_window,
};
pub use forget::{ForgetOptions, Forgotten};
pub use from_search::EarlierRun;
pub use identity::content_hash;
pub use query::{Bounds, BurstFilter, BurstRow, CandidateFilter, CandidateRow};
pub use record::{ObservationRecord, RecordOutcome, RunRecord, config_hash};
pub use review::{AssignTolerance, Label, Promotion};
pub use same_event::TwinBursts;
pub use schema::{APPLICATION_ID, SCHEMA_VERSION};
pub use sources::{SourceEdit, SourceRecord, SourceUpdate};

pub use summary::{PoissonInterval, SourceSummary, poisson_interval};
pub use voevent::{BurstPacket, VoEventOptions, mjd_to_iso, voevent_xml};

use std::path::{Path, PathBuf};
use std::time::Duration;

use rusqlite::{Connection, ErrorCode, OpenFlags, Transaction, TransactionBehavior};

use crate::error::{Error, Result};

/// File name used when no catalogue path is given.
pub const DEFAULT_FILE_NAME: &str = "burstbook.sqlite";

/// Environment variable naming the catalogue file.
pub const ENV_VAR: &str = "BURSTBOOK_CATALOGUE";

/// How long a writer waits for another writer by default.
pub const DEFAULT_LOCK_WAIT: Duration = Duration::from_secs(10);

/// An open catalogue. One connection; open one per thread or process.
pub struct Catalogue {
    conn: Connection,
    path: PathBuf,
    lock_wait: Duration,
    /// Whether SQLite's quick check has passed on this connection (before the first write).
    sound: bool,
}

impl Catalogue {
    /// Opens (creating if absent) the catalogue at `path` and upgrades its schema,
    /// waiting up to [`DEFAULT_LOCK_WAIT`] for other writers.
    ///
    /// # Errors
    /// [`Error::Catalogue`] with a one-line reason when the file is not an SQLite
    /// database, belongs to another program, was written by a newer burstbook,
    /// stays locked, or cannot be created or written where it lies. A refused file
    /// is left exactly as it was.
    pub fn open(path: &Path) -> Result<Catalogue> {
        Catalogue::open_with_lock_wait(path, DEFAULT_LOCK_WAIT)
    }

    /// [`Catalogue::open`] with a chosen wait for other writers.
    ///
    /// # Errors
    /// As [`Catalogue::open`].
    pub fn open_with_lock_wait(path: &Path, lock_wait: Duration) -> Result<Catalogue> {
        check_sqlite_magic(path)?;
        let flags = OpenFlags::SQLITE_OPEN_READ_WRITE
            | OpenFlags::SQLITE_OPEN_CREATE
            | OpenFlags::SQLITE_OPEN_NO_MUTEX;
        let conn = Connection::open_with_flags(path, flags).map_err(|e| sql_error(path, e))?;
        let mut cat = Catalogue {
            conn,
            path: path.to_path_buf(),
            lock_wait,
            sound: false,
        };
        cat.conn
            .busy_timeout(lock_wait)
            .map_err(|e| sql_error(path, e))?;
        if cat
            .conn
            .is_readonly(rusqlite::MAIN_DB)
            .map_err(|e| sql_error(path, e))?
        {
            return Err(catalogue_error(path, READ_ONLY_MSG));
        }
        // Identify the file before anything (even the journal mode) is changed.
        schema::check_identity(&cat)?;
        cat.configure()?;
        schema::upgrade(&mut cat)?;
        Ok(cat)
    }

    /// [`Catalogue::open`] for commands that read or annotate what a search recorded:
    /// a missing or empty (0-byte) file is an error and nothing is created, so a
    /// mistyped path or a truncated file is not answered from a new, empty catalogue
    /// (nor turned into one).
    ///
    /// # Errors
    /// As [`Catalogue::open`], and [`Error::Catalogue`] when `path` does not exist
    /// or is an empty file.
    pub fn open_existing(path: &Path, lock_wait: Duration) -> Result<Catalogue> {
        if let Err(e) = std::fs::symlink_metadata(path)
            && e.kind() == std::io::ErrorKind::NotFound
        {
            return Err(catalogue_error(path, MISSING_MSG));
        }
        if std::fs::metadata(path).is_ok_and(|m| m.is_file() && m.len() == 0) {
            return Err(catalogue_error(path, EMPTY_MSG));
        }
        Catalogue::open_with_lock_wait(path, lock_wait)
    }

    /// The catalogue path chosen by flag, then `BURSTBOOK_CATALOGUE`, then
    /// `burstbook.sqlite` in the working directory.
    pub fn resolve_path(flag: Option<&Path>) -> PathBuf {
        if let Some(p) = flag {
            return p.to_path_buf();
        }
        match std::env::var_os(ENV_VAR) {
            Some(v) if !v.is_empty() => PathBuf::from(v),
            _ => PathBuf::from(DEFAULT_FILE_NAME),
        }
    }

    /// The file this catalogue lives in.
    pub fn path(&self) -> &Path {
        &self.path
    }

    /// WAL journal (readers never block the writer), foreign keys on.
    fn configure(&mut self) -> Result<()> {
        let (path, wait) = (self.path.clone(), self.lock_wait);
        retry_busy(&path, wait, || {
            let mode: String =
                self.conn
                    .pragma_update_and_check(None, "journal_mode", "WAL", |r| r.get(0))?;
            if !mode.eq_ignore_ascii_case("wal") {
                // e.g. an in-memory or read-only file; writes still work, only
                // concurrency is reduced, so carry on.
                log_once_non_wal(&path, &mode);
            }
            self.conn.pragma_update(None, "foreign_keys", "ON")?;
            // 64 MiB page cache (negative = KiB): index inserts of a large run stay
            // in memory instead of spilling to the WAL page by page.
            self.conn.pragma_update(None, "cache_size", -65536)?;
            self.conn.pragma_update(None, "synchronous", "NORMAL")
        })
    }

    /// Runs `work` inside one `BEGIN IMMEDIATE` transaction, committing on
    /// success and retrying the whole transaction while the database is busy.
    /// The first write on a connection runs [`Catalogue::check_sound`] before it,
    /// so a damaged file is refused unchanged rather than written into where its
    /// damage happens not to lie.
    pub(crate) fn write<T>(
        &mut self,
        mut work: impl FnMut(&Transaction<'_>) -> Result<T>,
    ) -> Result<T> {
        if !self.sound {
            self.check_sound()?;
            self.sound = true;
        }
        let start = std::time::Instant::now();
        let mut attempt = 0;
        loop {
            attempt += 1;
            let result = (|| {
                let tx = self
                    .conn
                    .transaction_with_behavior(TransactionBehavior::Immediate)
                    .map_err(|e| sql_error(&self.path, e))?;
                let value = work(&tx)?;
                tx.commit().map_err(|e| sql_error(&self.path, e))?;
                Ok(value)
            })();
            match result {
                Err(e) if is_busy_error(&e) && start.elapsed() < self.lock_wait => {
                    std::thread::sleep(backoff(attempt));
                }
                other => return other,
            }
        }
    }

    /// Runs `work` as [`Catalogue::write`] does or, for a dry run, in one read
    /// snapshot that is rolled back when done, so a dry run sees exactly what the
    /// write would (`work` itself leaves out its changes when it is a dry run).
    pub(crate) fn write_unless_dry_run<T>(
        &mut self,
        dry_run: bool,
        work: impl Fn(&Connection) -> Result<T>,
    ) -> Result<T> {
        if dry_run {
            let snapshot = self.conn.unchecked_transaction().map_err(|e| self.err(e))?;
            return work(&snapshot);
        }
        self.write(|tx| work(tx))
    }

    /// SQLite's `PRAGMA quick_check` (every page and record well formed; indexes
    /// are not compared with their tables, which `book check` does): reads the whole
    /// file once, changes nothing.
    ///
    /// # Errors
    /// [`Error::Catalogue`] saying the file is corrupt, with SQLite's first finding.
    fn check_sound(&self) -> Result<()> {
        let findings: Vec<String> = retry_busy(&self.path, self.lock_wait, || {
            let mut stmt = self.conn.prepare("PRAGMA quick_check")?;
            stmt.query_map([], |r| r.get(0))?.collect()
        })?;
        match findings.first().map(String::as_str) {
            Some("ok") | None => Ok(()),
            Some(first) => Err(catalogue_error(
                &self.path,
                format!("is corrupt (SQLite's quick check: {first}); nothing was changed"),
            )),
        }
    }

    /// The connection, for reads.
    pub(crate) fn conn(&self) -> &Connection {
        &self.conn
    }

    /// Wraps an SQLite error with this catalogue's path.
    pub(crate) fn err(&self, e: rusqlite::Error) -> Error {
        sql_error(&self.path, e)
    }

    /// Checks the file with SQLite's integrity check, then that every run holds
    /// exactly its `n_candidates` candidates and nothing points at a missing run.
    /// Returns the counts of observations, runs and candidates.
    ///
    /// # Errors
    /// The first problem found.
    pub fn verify(&self) -> Result<Counts> {
        let one = |sql: &str| -> Result<i64> {
            self.conn
                .query_row(sql, [], |r| r.get(0))
                .map_err(|e| self.err(e))
        };
        let verdict: String = self
            .conn
            .query_row("PRAGMA integrity_check", [], |r| r.get(0))
            .map_err(|e| self.err(e))?;
        if verdict != "ok" {
            return Err(catalogue_error(
                &self.path,
                format!("integrity check failed: {verdict}"),
            ));
        }
        let partial = one("SELECT count(*) FROM search_run r
             WHERE r.n_candidates != (SELECT count(*) FROM candidate WHERE run_id = r.id)")?;
        let orphans = one(
            "SELECT (SELECT count(*) FROM candidate WHERE run_id NOT IN (SELECT id FROM search_run))
                  + (SELECT count(*) FROM exposure WHERE run_id IS NOT NULL
                       AND run_id NOT IN (SELECT id FROM search_run))",
        )?;
        if partial + orphans > 0 {
            return Err(catalogue_error(
                &self.path,
                format!(
                    "{partial} run(s) with missing candidates, {orphans} row(s) of missing runs"
                ),
            ));
        }
        Ok(Counts {
            observations: one("SELECT count(*) FROM observation")?,
            runs: one("SELECT count(*) FROM search_run")?,
            candidates: one("SELECT count(*) FROM candidate")?,
        })
    }
}

/// What [`Catalogue::verify`] counted.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Counts {
    /// Distinct observations.
    pub observations: i64,
    /// Search runs.
    pub runs: i64,
    /// Candidates.
    pub candidates: i64,
}

/// Refuses a non-empty file that does not start with SQLite's magic string,
/// before SQLite gets a chance to touch it.
fn check_sqlite_magic(path: &Path) -> Result<()> {
    use std::io::Read;
    let Ok(mut f) = std::fs::File::open(path) else {
        return Ok(()); // absent (created later) or unreadable (SQLite reports it)
    };
    let mut head = [0u8; 16];
    let mut n = 0;
    while n < head.len() {
        match f.read(&mut head[n..]) {
            Ok(0) => break,
            Ok(k) => n += k,
            Err(e) => return Err(Error::io(path, e)),
        }
    }
    if n == 0 || (n == head.len() && &head == b"SQLite format 3\0") {
        Ok(())
    } else {
        Err(catalogue_error(
            path,
            "is not an SQLite database (corrupt, or another kind of file); refusing to touch it",
        ))
    }
}

fn log_once_non_wal(path: &Path, mode: &str) {
    use std::io::Write;
    // A closed standard error drops the warning rather than panicking.
    let _ = writeln!(
        std::io::stderr(),
        "burstbook: warning: catalogue {} uses journal mode {mode}, not WAL; concurrent writers will wait longer",
        path.display()
    );
}

/// Pause before retry `attempt` (1-based): 20, 40, ... ms, at most 500 ms.
fn backoff(attempt: u32) -> Duration {
    Duration::from_millis((20 * u64::from(attempt)).min(500))
}

/// Retries an SQLite call while it reports busy/locked, for at most `wait`.
fn retry_busy<T>(
    path: &Path,
    wait: Duration,
    mut f: impl FnMut() -> rusqlite::Result<T>,
) -> Result<T> {
    let start = std::time::Instant::now();
    let mut attempt = 0;
    loop {
        attempt += 1;
        match f() {
            Err(e)
                if matches!(
                    e.sqlite_error_code(),
                    Some(ErrorCode::DatabaseBusy | ErrorCode::DatabaseLocked)
                ) && start.elapsed() < wait =>
            {
                std::thread::sleep(backoff(attempt));
            }
            other => return other.map_err(|e| sql_error(path, e)),
        }
    }
}

/// Whether `e` is [`sql_error`]'s rendering of SQLITE_BUSY / SQLITE_LOCKED.
fn is_busy_error(e: &Error) -> bool {
    matches!(e, Error::Catalogue { msg, .. } if msg.starts_with(LOCKED_MSG))
}

const LOCKED_MSG: &str = "is locked by another process";
const MISSING_MSG: &str = "does not exist; nothing was created (a catalogue is made by \
                           `burstbook search` or `burstbook book source add`)";
const EMPTY_MSG: &str = "is an empty file (0 bytes), not a catalogue; left as it is (a catalogue \
                         is made by `burstbook search` or `burstbook book source add`)";
const READ_ONLY_MSG: &str = "is read-only here (file or directory not writable, or a read-only file system); nothing was changed";

pub(crate) fn catalogue_error(path: &Path, msg: impl Into<String>) -> Error {
    Error::Catalogue {
        path: path.to_path_buf(),
        msg: msg.into(),
    }
}

/// Turns the SQLite errors a user can cause into one plain sentence.
pub(crate) fn sql_error(path: &Path, e: rusqlite::Error) -> Error {
    let msg = match e.sqlite_error_code() {
        Some(ErrorCode::NotADatabase) => {
            "is not an SQLite database (corrupt, or another kind of file)".to_string()
        }
        Some(ErrorCode::DatabaseCorrupt) => "is corrupt (SQLite reports a malformed file)".into(),
        Some(ErrorCode::DatabaseBusy | ErrorCode::DatabaseLocked) => {
            format!("{LOCKED_MSG}; nothing was changed, try again when it has finished")
        }
        Some(ErrorCode::ReadOnly) => READ_ONLY_MSG.into(),
        Some(ErrorCode::CannotOpen) => {
            "cannot be opened or created (missing or unwritable directory?)".into()
        }
        Some(ErrorCode::PermissionDenied) => "permission denied".into(),
        Some(ErrorCode::DiskFull) => "disk full".into(),
        _ => {
            return Error::Sqlite {
                path: path.to_path_buf(),
                source: e,
            };
        }
    };
    catalogue_error(path, msg)
}

/// The current UTC time as ISO 8601 with milliseconds, as stored in `*_utc` columns.
pub fn now_utc() -> String {
    chrono::Utc::now()
        .format("%Y-%m-%dT%H:%M:%S%.3fZ")
        .to_string()
}
