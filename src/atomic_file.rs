//! Output files that appear whole or not at all.
//!
//! Every file burstbook produces is written through [`AtomicFile`]: the bytes go to a
//! hidden temporary file in the destination's directory, which is flushed, synced and
//! renamed onto the final name only by [`AtomicFile::commit`]. A failure before that
//! (an error, a full disk, a killed process) leaves any older file at that name as it
//! was, and dropping an uncommitted file removes the temporary one.
//!
//! Destinations that are not regular files (a pipe, a terminal), and any path under
//! `/dev` or `/proc`, are written in place, as a stream, appending: `/dev/stdout` may
//! lead to a file the shell opened with `>>`, which a rename would replace and a
//! truncating open would empty.

use std::fs::{File, OpenOptions};
use std::io::{self, BufWriter, Write};
use std::os::unix::fs::OpenOptionsExt;
use std::path::{Path, PathBuf};

use tempfile::NamedTempFile;

use crate::error::{Error, Result};

/// Buffer between the callers' small writes and the file.
const BUFFER_BYTES: usize = 1 << 16;

/// A file being written; it takes its final name at [`AtomicFile::commit`].
///
/// Writes are buffered. I/O errors from [`Write`] keep their kind (a closed pipe
/// stays recognisable); [`AtomicFile::commit`] names the final path in its error.
pub struct AtomicFile {
    /// The name the caller asked for, used in errors.
    path: PathBuf,
    out: BufWriter<Destination>,
}

enum Destination {
    /// A temporary file renamed onto `target` (the final path, symbolic links
    /// resolved so a link keeps pointing at the new file).
    Replace {
        temp: NamedTempFile,
        target: PathBuf,
    },
    /// A device or pipe, written directly (appending).
    Stream(File),
}

impl AtomicFile {
    /// Starts writing `path`: nothing appears under that name until
    /// [`AtomicFile::commit`].
    ///
    /// A new file gets the usual permissions (`0o666` less the umask); one replacing
    /// an existing file keeps that file's permissions.
    ///
    /// # Errors
    /// [`Error::Io`] naming `path` when the temporary file (or the stream) cannot be
    /// opened, e.g. because the directory does not exist.
    pub fn create(path: &Path) -> Result<Self> {
        let io_err = |e| Error::io(path, e);
        let dest = match std::fs::metadata(path) {
            // A directory also lands here, so it fails now and not after all the work.
            Ok(meta) if !meta.is_file() || is_special(path) => {
                let file = OpenOptions::new().append(true).open(path);
                Destination::Stream(file.map_err(io_err)?)
            }
            existing => {
                let target = match &existing {
                    Ok(_) => std::fs::canonicalize(path).map_err(io_err)?,
                    Err(_) => path.to_path_buf(),
                };
                let temp = create_temp(&target).map_err(io_err)?;
                if let Ok(meta) = existing {
                    temp.as_file()
                        .set_permissions(meta.permissions())
                        .map_err(io_err)?;
                }
                Destination::Replace { temp, target }
            }
        };
        Ok(AtomicFile {
            path: path.to_path_buf(),
            out: BufWriter::with_capacity(BUFFER_BYTES, dest),
        })
    }

    /// The final path, as given to [`AtomicFile::create`].
    pub fn path(&self) -> &Path {
        &self.path
    }

    /// Flushes and syncs everything written, then renames the temporary file onto
    /// the final path (replacing any file there).
    ///
    /// # Errors
    /// [`Error::Io`] naming the final path; the temporary file is then removed and
    /// an older file at the final path is untouched.
    pub fn commit(self) -> Result<()> {
        let path = self.path;
        let io_err = |e| Error::io(&path, e);
        match self.out.into_inner().map_err(|e| io_err(e.into_error()))? {
            // Syncing first means a crash soon after the rename cannot leave the new
            // name pointing at data that never reached the disk, and a full disk
            // that some file systems report only at sync time is still caught here.
            Destination::Replace { temp, target } => {
                temp.as_file().sync_all().map_err(io_err)?;
                temp.persist(&target).map_err(|e| io_err(e.error))?;
            }
            Destination::Stream(mut file) => file.flush().map_err(io_err)?,
        }
        Ok(())
    }
}

/// Whether `path` is spelt under `/dev` or `/proc`, whose links (`/dev/stdout`,
/// `/proc/self/fd/1`) stand for a descriptor of this process, not a file to replace.
fn is_special(path: &Path) -> bool {
    std::path::absolute(path).is_ok_and(|p| p.starts_with("/dev") || p.starts_with("/proc"))
}

/// Opens a new hidden file beside `target`, named after it so a leftover one (from a
/// killed process) says where it came from.
fn create_temp(target: &Path) -> io::Result<NamedTempFile> {
    let dir = match target.parent() {
        Some(d) if !d.as_os_str().is_empty() => d,
        _ => Path::new("."),
    };
    let name = target.file_name().unwrap_or_default().to_string_lossy();
    // `make_in` (not `tempfile_in`) so an error is the bare OS error, for one clear
    // line naming the final path, and so the mode is that of a normal new file.
    tempfile::Builder::new()
        .prefix(&format!(".{name}."))
        .suffix(".tmp")
        .make_in(dir, |p| {
            OpenOptions::new()
                .write(true)
                .create_new(true)
                .mode(0o666)
                .open(p)
        })
}

impl Write for AtomicFile {
    fn write(&mut self, buf: &[u8]) -> io::Result<usize> {
        self.out.write(buf)
    }

    fn flush(&mut self) -> io::Result<()> {
        self.out.flush()
    }
}

impl Write for Destination {
    fn write(&mut self, buf: &[u8]) -> io::Result<usize> {
        match self {
            Destination::Replace { temp, .. } => temp.write(buf),
            Destination::Stream(file) => file.write(buf),
        }
    }

    fn flush(&mut self) -> io::Result<()> {
        match self {
            Destination::Replace { temp, .. } => temp.flush(),
            Destination::Stream(file) => file.flush(),
        }
    }
}

/// Writes `contents` to `path` atomically.
///
/// # Errors
/// [`Error::Io`] naming `path`.
pub fn write(path: &Path, contents: impl AsRef<[u8]>) -> Result<()> {
    let mut file = AtomicFile::create(path)?;
    file.write_all(contents.as_ref())
        .map_err(|e| Error::io(path, e))?;
    file.commit()
}

/// A folder of files that appear together or not at all. They are written into a
/// hidden staging folder inside `dir` ([`StagedDir::path`]); [`StagedDir::commit`]
/// renames each into `dir`, the one named `last` after all the others (a report's
/// index, which so never names a figure not yet in place). Dropping an uncommitted
/// one removes the staging folder and leaves `dir` as it was: a report that fails
/// half-way does not mix its figures into the one before. A process killed before
/// either leaves its staging folder behind; the next [`StagedDir::create`] in the same
/// place removes those untouched for [`STALE_STAGING`].
pub struct StagedDir {
    dir: PathBuf,
    staging: tempfile::TempDir,
}

impl StagedDir {
    /// Creates `dir` if needed, and an empty staging folder in it; removes staging
    /// folders that killed runs left in `dir` (see [`STALE_STAGING`]).
    ///
    /// # Errors
    /// [`Error::Io`] naming `dir`.
    pub fn create(dir: &Path) -> Result<StagedDir> {
        std::fs::create_dir_all(dir).map_err(|e| Error::io(dir, e))?;
        remove_stale_staging(dir);
        let staging = tempfile::Builder::new()
            .prefix(STAGING_PREFIX)
            .tempdir_in(dir)
            .map_err(|e| Error::io(dir, e))?;
        Ok(StagedDir {
            dir: dir.to_path_buf(),
            staging,
        })
    }

    /// The staging folder to write the files into.
    pub fn path(&self) -> &Path {
        self.staging.path()
    }

    /// Moves every staged file into the folder, `last` last, and removes the staging
    /// folder; returns the final path of `last`.
    ///
    /// # Errors
    /// [`Error::Io`] naming the file that could not be moved.
    pub fn commit(self, last: &str) -> Result<PathBuf> {
        let staged = self.staging.path();
        let mut names: Vec<std::ffi::OsString> = std::fs::read_dir(staged)
            .and_then(|entries| entries.map(|e| e.map(|e| e.file_name())).collect())
            .map_err(|e| Error::io(staged, e))?;
        // Sorted for a repeatable order; `last` sorts after everything.
        names.sort_by_key(|n| (n == last, n.clone()));
        for name in names {
            let to = self.dir.join(&name);
            std::fs::rename(staged.join(&name), &to).map_err(|e| Error::io(&to, e))?;
        }
        Ok(self.dir.join(last))
    }
}

const STAGING_PREFIX: &str = ".burstbook-staging-";

/// How long a staging folder must go unmodified before another run may take it for
/// the leftover of a killed one. A live run adds a file to its folder every few
/// seconds (each figure), so an hour without one means no run owns it.
pub const STALE_STAGING: std::time::Duration = std::time::Duration::from_secs(3600);

/// Best effort: a leftover that cannot be removed (permissions, a race with another
/// cleaner) only stays hidden where it was.
fn remove_stale_staging(dir: &Path) {
    let Ok(entries) = std::fs::read_dir(dir) else {
        return;
    };
    for entry in entries.flatten() {
        let stale = entry
            .file_name()
            .to_string_lossy()
            .starts_with(STAGING_PREFIX)
            && entry.metadata().is_ok_and(|m| {
                m.is_dir()
                    && m.modified()
                        .is_ok_and(|t| t.elapsed().is_ok_and(|age| age > STALE_STAGING))
            });
        if stale {
            let _ = std::fs::remove_dir_all(entry.path());
        }
    }
}

/// Flushes a CSV writer into its [`AtomicFile`] and commits it.
///
/// # Errors
/// [`Error::Io`] naming the final path.
pub fn commit_csv(writer: csv::Writer<AtomicFile>) -> Result<()> {
    let path = writer.get_ref().path().to_path_buf();
    writer
        .into_inner()
        .map_err(|e| Error::io(path, e.into_error()))?
        .commit()
}

#[cfg(test)]
pub(crate) mod tests {
    use super::*;

    /// Names in `dir`, sorted.
    pub(crate) fn listing(dir: &Path) -> Vec<String> {
        let mut names: Vec<String> = std::fs::read_dir(dir)
            .unwrap()
            .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
            .collect();
        names.sort();
        names
    }

    /// Writes `first`, then fails the way a caller's `?` would: by returning early
    /// and dropping the uncommitted file.
    fn write_then_fail(path: &Path, first: &[u8]) -> Result<()> {
        let mut f = AtomicFile::create(path)?;
        f.write_all(first).map_err(|e| Error::io(path, e))?;
        f.flush().map_err(|e| Error::io(path, e))?;
        Err(Error::Numerical("stopped midway".into()))
    }

    #[test]
    fn a_staged_folder_appears_whole_at_commit_or_not_at_all() {
        let dir = tempfile::tempdir().unwrap();
        let out = dir.path().join("report");
        std::fs::create_dir(&out).unwrap();
        std::fs::write(out.join("index.html"), "old").unwrap();
        std::fs::write(out.join("a.png"), "old a").unwrap();
        // Failing half-way: nothing changes, and no staging folder is left.
        {
            let staged = StagedDir::create(&out).unwrap();
            write(&staged.path().join("a.png"), "new a").unwrap();
            assert_eq!(
                listing(&out).len(),
                3,
                "the staging folder is hidden inside"
            );
        }
        assert_eq!(listing(&out), ["a.png", "index.html"]);
        assert_eq!(std::fs::read_to_string(out.join("a.png")).unwrap(), "old a");
        // Committed: every file replaced or added, the staging folder gone.
        let staged = StagedDir::create(&out).unwrap();
        for (name, text) in [("index.html", "new"), ("a.png", "new a"), ("b.png", "b")] {
            write(&staged.path().join(name), text).unwrap();
        }
        let index = staged.commit("index.html").unwrap();
        assert_eq!(index, out.join("index.html"));
        assert_eq!(listing(&out), ["a.png", "b.png", "index.html"]);
        assert_eq!(std::fs::read_to_string(&index).unwrap(), "new");
        assert_eq!(std::fs::read_to_string(out.join("a.png")).unwrap(), "new a");
    }

    #[test]
    fn a_killed_runs_staging_folder_is_removed_once_stale() {
        let dir = tempfile::tempdir().unwrap();
        let age_folder = |name: &str, age: std::time::Duration| {
            let path = dir.path().join(name);
            std::fs::create_dir(&path).unwrap();
            std::fs::write(path.join("a.png"), "half-drawn").unwrap();
            let when = std::time::SystemTime::now() - age;
            std::fs::File::open(&path)
                .unwrap()
                .set_modified(when)
                .unwrap();
        };
        let hour = STALE_STAGING;
        age_folder(".burstbook-staging-killed", hour * 2);
        age_folder(".burstbook-staging-live", hour / 2);
        age_folder("old-figures", hour * 2);
        let staged = StagedDir::create(dir.path()).unwrap();
        let mut left = listing(dir.path());
        left.retain(|n| !staged.path().ends_with(n));
        assert_eq!(left, [".burstbook-staging-live", "old-figures"]);
    }

    #[test]
    fn nothing_appears_until_commit() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("out.csv");
        let mut f = AtomicFile::create(&path).unwrap();
        f.write_all(b"a,b\n").unwrap();
        f.flush().unwrap();
        assert!(!path.exists());
        assert_eq!(listing(dir.path()).len(), 1, "only the temporary file");
        f.commit().unwrap();
        assert_eq!(std::fs::read(&path).unwrap(), b"a,b\n");
        assert_eq!(listing(dir.path()), ["out.csv"]);
    }

    #[test]
    fn failure_midway_leaves_no_file_and_no_temporary() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("out.json");
        let e = write_then_fail(&path, b"{\"half\": ").unwrap_err();
        assert!(e.to_string().contains("midway"), "{e}");
        assert!(listing(dir.path()).is_empty(), "{:?}", listing(dir.path()));
    }

    #[test]
    fn failure_midway_keeps_the_old_file() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("out.json");
        std::fs::write(&path, b"old and whole").unwrap();
        write_then_fail(&path, b"new but ").unwrap_err();
        assert_eq!(std::fs::read(&path).unwrap(), b"old and whole");
        assert_eq!(listing(dir.path()), ["out.json"]);
    }

    #[test]
    fn success_replaces_the_old_file_keeping_its_mode_and_links() {
        use std::os::unix::fs::PermissionsExt;
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("real.csv");
        std::fs::write(&path, b"old contents, longer than the new").unwrap();
        std::fs::set_permissions(&path, std::fs::Permissions::from_mode(0o640)).unwrap();
        let link = dir.path().join("link.csv");
        std::os::unix::fs::symlink(&path, &link).unwrap();
        write(&link, b"new").unwrap();
        assert_eq!(std::fs::read(&path).unwrap(), b"new");
        assert!(link.symlink_metadata().unwrap().file_type().is_symlink());
        let mode = path.metadata().unwrap().permissions().mode() & 0o777;
        assert_eq!(mode, 0o640);
        assert_eq!(listing(dir.path()), ["link.csv", "real.csv"]);
    }

    #[test]
    fn new_files_get_ordinary_permissions() {
        use std::os::unix::fs::PermissionsExt;
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("new.txt");
        write(&path, b"x").unwrap();
        // Readable by the group as with a plain create (the 0o600 of a bare temporary
        // file would fail this under any usual umask).
        let mode = path.metadata().unwrap().permissions().mode();
        assert_eq!(mode & 0o040, 0o040, "{mode:o}");
    }

    #[test]
    fn missing_directory_is_one_line_naming_the_path() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("no-such-dir").join("out.csv");
        let e = AtomicFile::create(&path).err().unwrap();
        let text = e.to_string();
        assert!(matches!(e, Error::Io { .. }));
        assert!(text.starts_with(&path.display().to_string()), "{text}");
        assert!(
            !text.contains(".out.csv."),
            "names no temporary file: {text}"
        );
        assert!(!text.contains('\n'), "{text}");
    }

    #[test]
    fn a_directory_is_refused_at_once() {
        let dir = tempfile::tempdir().unwrap();
        assert!(AtomicFile::create(dir.path()).is_err());
        assert!(listing(dir.path()).is_empty());
    }

    #[test]
    fn devices_are_written_in_place() {
        use std::os::unix::fs::FileTypeExt;
        let mut f = AtomicFile::create(Path::new("/dev/null")).unwrap();
        f.write_all(b"discarded").unwrap();
        f.commit().unwrap();
        assert!(
            Path::new("/dev/null")
                .metadata()
                .unwrap()
                .file_type()
                .is_char_device()
        );
    }

    #[test]
    fn csv_writers_commit() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("t.csv");
        let mut w = csv::Writer::from_writer(AtomicFile::create(&path).unwrap());
        w.write_record(["x", "y"]).unwrap();
        assert!(!path.exists());
        commit_csv(w).unwrap();
        assert_eq!(std::fs::read_to_string(&path).unwrap(), "x,y\n");
    }
}
