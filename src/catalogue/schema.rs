//! Forward-only schema migrations kept as SQL files in `migrations/`.
//!
//! Migration `i` (1-based) upgrades a catalogue from version `i - 1` to `i`; the
//! version lives in `PRAGMA user_version`, and `PRAGMA application_id` marks the
//! file as a burstbook catalogue.

use rusqlite::Connection;

use super::{Catalogue, catalogue_error};
use crate::error::Result;

/// The migrations, in order. Never edit a shipped file: add a new one.
pub(crate) const MIGRATIONS: &[&str] = &[
    include_str!("../../migrations/0001_core.sql"),
    include_str!("../../migrations/0002_review_and_completeness.sql"),
    include_str!("../../migrations/0003_run_statistics.sql"),
    include_str!("../../migrations/0004_recording_identity.sql"),
    include_str!("../../migrations/0005_burst_ids_never_reused.sql"),
    include_str!("../../migrations/0006_run_read_on.sql"),
];

/// The schema version this burstbook writes.
pub const SCHEMA_VERSION: i64 = MIGRATIONS.len() as i64;

/// `PRAGMA application_id` of a burstbook catalogue: ASCII "BbCt".
pub const APPLICATION_ID: i64 = 0x4262_4374;

/// Brings the catalogue to [`SCHEMA_VERSION`], refusing foreign or newer files.
pub(crate) fn upgrade(cat: &mut Catalogue) -> Result<()> {
    let (version, _, _) = read_identity(cat)?;
    if version == SCHEMA_VERSION {
        return Ok(());
    }
    cat.write(|tx| {
        // Re-read inside the write lock: another process may have upgraded meanwhile.
        let now: i64 = tx
            .query_row("PRAGMA user_version", [], |r| r.get(0))
            .map_err(|e| cat_err(tx, e))?;
        apply_from(tx, now)
    })
    .map_err(|e| match e {
        crate::Error::Catalogue { path, msg } => crate::Error::Catalogue {
            path,
            msg: format!("{msg} (while upgrading the schema; the file is unchanged)"),
        },
        other => other,
    })
}

fn cat_err(tx: &Connection, e: rusqlite::Error) -> crate::Error {
    let path = tx.path().unwrap_or("").to_string();
    super::sql_error(std::path::Path::new(&path), e)
}

/// Applies migrations after `from` on an open transaction.
pub(crate) fn apply_from(tx: &Connection, from: i64) -> Result<()> {
    for (i, sql) in MIGRATIONS.iter().enumerate().skip(from.max(0) as usize) {
        tx.execute_batch(sql).map_err(|e| cat_err(tx, e))?;
        tx.pragma_update(None, "user_version", i as i64 + 1)
            .map_err(|e| cat_err(tx, e))?;
    }
    tx.pragma_update(None, "application_id", APPLICATION_ID)
        .map_err(|e| cat_err(tx, e))
}

/// The file's schema version, application id and table count, read in one
/// statement so they come from one snapshot: read one by one, a process creating
/// the catalogue could commit between them, and a half-seen fresh file (tables but
/// no id yet) would be refused as foreign.
fn read_identity(cat: &Catalogue) -> Result<(i64, i64, i64)> {
    cat.conn()
        .query_row(
            "SELECT (SELECT user_version FROM pragma_user_version), \
                    (SELECT application_id FROM pragma_application_id), \
                    (SELECT count(*) FROM sqlite_master WHERE type = 'table')",
            [],
            |r| Ok((r.get(0)?, r.get(1)?, r.get(2)?)),
        )
        .map_err(|e| cat.err(e))
}

/// Every (table, column) of a database, tables in name order and columns in
/// declaration order; SQLite's own tables left out.
const COLUMNS_SQL: &str = "SELECT m.name, p.name FROM sqlite_master m, pragma_table_info(m.name) p \
     WHERE m.type = 'table' AND m.name NOT LIKE 'sqlite_%' ORDER BY m.name, p.cid";

fn columns(conn: &Connection) -> rusqlite::Result<Vec<(String, String)>> {
    let mut stmt = conn.prepare(COLUMNS_SQL)?;
    stmt.query_map([], |r| Ok((r.get(0)?, r.get(1)?)))?
        .collect()
}

/// Refuses a catalogue lacking a table or column that its recorded schema `version`
/// has: the expected ones come from the migrations up to `version`, applied to an
/// empty in-memory database. Migrations only ever add (a table rebuilt keeps its
/// columns), so a catalogue that another process upgrades meanwhile still has them all.
fn check_tables(cat: &Catalogue, version: i64) -> Result<()> {
    let reference = Connection::open_in_memory().map_err(|e| cat.err(e))?;
    for sql in MIGRATIONS.iter().take(version.max(0) as usize) {
        reference.execute_batch(sql).map_err(|e| cat.err(e))?;
    }
    let expected = columns(&reference).map_err(|e| cat.err(e))?;
    let held = columns(cat.conn()).map_err(|e| cat.err(e))?;
    let Some((table, column)) = expected.iter().find(|c| !held.contains(c)) else {
        return Ok(());
    };
    let missing = if held.iter().any(|(t, _)| t == table) {
        format!("column {table}.{column}")
    } else {
        format!("table {table}")
    };
    Err(catalogue_error(
        cat.path(),
        format!("is missing {missing} (damaged?); refusing to use it"),
    ))
}

/// Refuses a foreign SQLite file, one from a newer burstbook, and one lacking a
/// table or column of its schema version; reads only.
pub(crate) fn check_identity(cat: &Catalogue) -> Result<()> {
    let (version, app_id, n_tables) = read_identity(cat)?;
    let fresh = version == 0 && app_id == 0 && n_tables == 0;
    if !fresh && app_id != APPLICATION_ID {
        return Err(catalogue_error(
            cat.path(),
            "is an SQLite database but not a burstbook catalogue; refusing to change it",
        ));
    }
    if version > SCHEMA_VERSION {
        return Err(catalogue_error(
            cat.path(),
            format!(
                "has schema version {version}, newer than this burstbook {} understands ({SCHEMA_VERSION}); use a newer burstbook",
                env!("CARGO_PKG_VERSION")
            ),
        ));
    }
    check_tables(cat, version)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn migrations_apply_in_order_and_set_version() {
        let conn = Connection::open_in_memory().unwrap();
        apply_from(&conn, 0).unwrap();
        let v: i64 = conn
            .query_row("PRAGMA user_version", [], |r| r.get(0))
            .unwrap();
        assert_eq!(v, SCHEMA_VERSION);
        // Applying from the current version is a no-op.
        apply_from(&conn, v).unwrap();
        let n: i64 = conn
            .query_row(
                "SELECT count(*) FROM sqlite_master WHERE name = 'review_label'",
                [],
                |r| r.get(0),
            )
            .unwrap();
        assert_eq!(n, 1);
    }

    #[test]
    fn a_missing_table_or_column_of_the_recorded_version_is_named() {
        let dir = tempfile::tempdir().unwrap();
        for (version, damage, expected) in [
            (
                SCHEMA_VERSION,
                "DROP TABLE review_label",
                Some("table review_label"),
            ),
            (
                SCHEMA_VERSION,
                "ALTER TABLE exposure DROP COLUMN fluence_limit_jy_ms",
                Some("column exposure.fluence_limit_jy_ms"),
            ),
            // Version 1 had no labels: nothing is missing, and opening upgrades it.
            (1, "DROP TABLE IF EXISTS review_label", None),
        ] {
            let path = dir
                .path()
                .join(format!("v{version}-{}.sqlite", damage.len()));
            let conn = Connection::open(&path).unwrap();
            for (i, sql) in MIGRATIONS.iter().take(version as usize).enumerate() {
                conn.execute_batch(sql).unwrap();
                conn.pragma_update(None, "user_version", i as i64 + 1)
                    .unwrap();
            }
            conn.pragma_update(None, "application_id", APPLICATION_ID)
                .unwrap();
            conn.execute_batch(damage).unwrap();
            drop(conn);
            let opened = Catalogue::open(&path);
            match expected {
                Some(missing) => {
                    let err = opened.err().expect("refused").to_string();
                    assert!(
                        err.contains(&format!("is missing {missing} (damaged?)")),
                        "{err}"
                    );
                }
                None => {
                    opened.unwrap();
                }
            }
        }
    }
}
