//! The burst catalogue: one SQLite file holding sources, searched observations,
//! search runs with their full configuration, every candidate, exposure, review
//! labels, confirmed bursts and injection completeness.
//!
//! Guarantees (see `docs/catalogue.md`):
//! - a search run is written in one transaction, so it is either wholly present
//!   or absent, even if the writing process is killed;
//! - recording the same file content with the same configuration hash twice
//!   changes nothing ([`RecordOutcome::AlreadyPresent`]);
//! - several processes may write at once (WAL journal, busy timeout, and every
//!   write transaction retried while the database is busy);
//! - the schema lives in `migrations/`, is upgraded forward only, and a file
//!   written by a newer burstbook is refused.

mod bursts;
mod exposure;
mod query;
mod record;
mod review;
mod schema;
mod sources;
mod summary;
pub mod synthetic;
mod voevent;

pub use bursts::{BurstTiming, CompletenessRecord};
pub use exposure::{ExposureInterval, exposure_hours, merge_intervals};
pub use query::{BurstFilter, BurstRow, CandidateFilter, CandidateRow};
pub use record::{ObservationRecord, RecordOutcome, RunRecord, config_hash, content_hash};
pub use review::{AssignTolerance, Label, Promotion};
pub use schema::SCHEMA_VERSION;
pub use sources::SourceRecord;
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

/// How long one statement waits for another writer before SQLite reports busy.
const BUSY_TIMEOUT: Duration = Duration::from_secs(10);

/// How many times a whole write transaction is retried when the database stays busy.
const WRITE_ATTEMPTS: u32 = 6;

/// An open catalogue. One connection; open one per thread or process.
pub struct Catalogue {
    conn: Connection,
    path: PathBuf,
}

impl Catalogue {
    /// Opens (creating if absent) the catalogue at `path` and upgrades its schema.
    ///
    /// # Errors
    /// [`Error::Catalogue`] with a one-line reason when the file is not an SQLite
    /// database, belongs to another program, was written by a newer burstbook,
    /// stays locked, or cannot be created or written where it lies.
    pub fn open(path: &Path) -> Result<Catalogue> {
        check_sqlite_magic(path)?;
        let flags = OpenFlags::SQLITE_OPEN_READ_WRITE
            | OpenFlags::SQLITE_OPEN_CREATE
            | OpenFlags::SQLITE_OPEN_NO_MUTEX;
        let conn = Connection::open_with_flags(path, flags).map_err(|e| sql_error(path, e))?;
        let mut cat = Catalogue {
            conn,
            path: path.to_path_buf(),
        };
        cat.conn
            .busy_timeout(BUSY_TIMEOUT)
            .map_err(|e| sql_error(path, e))?;
        cat.configure()?;
        schema::upgrade(&mut cat)?;
        Ok(cat)
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
        let path = self.path.clone();
        retry_busy(&path, || {
            let mode: String =
                self.conn
                    .pragma_update_and_check(None, "journal_mode", "WAL", |r| r.get(0))?;
            if !mode.eq_ignore_ascii_case("wal") {
                // e.g. an in-memory or read-only file; writes still work, only
                // concurrency is reduced, so carry on.
                log_once_non_wal(&path, &mode);
            }
            self.conn.pragma_update(None, "foreign_keys", "ON")?;
            self.conn.pragma_update(None, "synchronous", "NORMAL")
        })
    }

    /// Runs `work` inside one `BEGIN IMMEDIATE` transaction, committing on
    /// success and retrying the whole transaction while the database is busy.
    pub(crate) fn write<T>(
        &mut self,
        mut work: impl FnMut(&Transaction<'_>) -> Result<T>,
    ) -> Result<T> {
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
                Err(e) if is_busy_error(&e) && attempt < WRITE_ATTEMPTS => {
                    std::thread::sleep(Duration::from_millis(50 * u64::from(attempt)));
                }
                other => return other,
            }
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

    /// Checks the file with SQLite's own integrity check; `Ok(())` when sound.
    ///
    /// # Errors
    /// The first problem SQLite reports.
    pub fn integrity_check(&self) -> Result<()> {
        let verdict: String = self
            .conn
            .query_row("PRAGMA integrity_check", [], |r| r.get(0))
            .map_err(|e| self.err(e))?;
        if verdict == "ok" {
            Ok(())
        } else {
            Err(catalogue_error(
                &self.path,
                format!("integrity check failed: {verdict}"),
            ))
        }
    }
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
    eprintln!(
        "burstbook: warning: catalogue {} uses journal mode {mode}, not WAL; concurrent writers will wait longer",
        path.display()
    );
}

/// Retries an SQLite call while it reports busy/locked.
fn retry_busy<T>(path: &Path, mut f: impl FnMut() -> rusqlite::Result<T>) -> Result<T> {
    let mut attempt = 0;
    loop {
        attempt += 1;
        match f() {
            Err(e)
                if matches!(
                    e.sqlite_error_code(),
                    Some(ErrorCode::DatabaseBusy | ErrorCode::DatabaseLocked)
                ) && attempt < WRITE_ATTEMPTS =>
            {
                std::thread::sleep(Duration::from_millis(50 * u64::from(attempt)));
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
        Some(ErrorCode::DatabaseBusy | ErrorCode::DatabaseLocked) => format!(
            "{LOCKED_MSG} (waited {} s); try again when it has finished",
            BUSY_TIMEOUT.as_secs()
        ),
        Some(ErrorCode::ReadOnly) => {
            "is read-only here (file or directory not writable, or a read-only file system)".into()
        }
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
pub(crate) fn now_utc() -> String {
    chrono::Utc::now()
        .format("%Y-%m-%dT%H:%M:%S%.3fZ")
        .to_string()
}
