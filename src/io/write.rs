//! Atomic output files.
//!
//! A run either leaves all its result files complete or leaves the previous
//! ones untouched. Every file is first written to a temporary name in its
//! final directory and flushed to disk; only then is it renamed into place.
//! A rename within one directory replaces the target in a single step, so a
//! reader sees either the old file or the new one, never a partial file.
//!
//! Temporary names start with `.taumap-tmp-` and are removed again when a
//! write fails.

use std::fs::{self, File, OpenOptions};
use std::io::{self, Write};
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicU64, Ordering};

use crate::error::{Error, Result};

/// Prefix of the temporary files written next to the final ones.
pub const TEMP_PREFIX: &str = ".taumap-tmp-";

/// Writes `bytes` to `path` atomically.
///
/// The data goes to a temporary file in the same directory, which is synced
/// and then renamed over `path`. The directory must exist. On failure the
/// temporary file is removed, any previous `path` is left as it was, and
/// [`Error::Io`] names `path`.
pub fn write_atomic(path: &Path, bytes: &[u8]) -> Result<()> {
    let io_err = |source| Error::Io {
        path: path.to_path_buf(),
        source,
    };
    if path.file_name().is_none() {
        return Err(io_err(invalid("not a file name")));
    }
    let dir = parent_dir(path);
    let tmp = temp_path(dir);
    if let Err(e) = write_synced(&tmp, bytes) {
        remove_quietly(&tmp);
        return Err(io_err(e));
    }
    if let Err(e) = fs::rename(&tmp, path) {
        remove_quietly(&tmp);
        return Err(io_err(e));
    }
    sync_dir(dir);
    Ok(())
}

/// A set of output files staged in memory and written together.
///
/// Nothing touches the disk before [`OutputSet::commit`], so a run that
/// fails while computing its results leaves the output directory as it was.
#[derive(Debug, Default)]
pub struct OutputSet {
    dir: PathBuf,
    files: Vec<(String, Vec<u8>)>,
    /// Files streamed to disk already ([`StreamFile`]), renamed into place
    /// with the others.
    staged: Vec<(String, StagedFile)>,
    /// Names an earlier run may have left in `dir` that this set replaces:
    /// those it does not write are removed after a successful commit.
    owned: Vec<String>,
}

impl OutputSet {
    /// An empty set of files to be written into `dir`.
    pub fn new(dir: impl Into<PathBuf>) -> Self {
        OutputSet {
            dir: dir.into(),
            files: Vec::new(),
            staged: Vec::new(),
            owned: Vec::new(),
        }
    }

    /// Declares the file names this kind of run owns in its directory: after
    /// a successful commit, every owned name that this set did not write is
    /// removed, so a directory never holds the plots of one run beside the
    /// summary of another. Other files in the directory are never touched.
    #[must_use]
    pub fn owning(mut self, names: &[&str]) -> Self {
        self.owned = names.iter().map(|n| n.to_string()).collect();
        self
    }

    /// The directory the files will be written into.
    pub fn dir(&self) -> &Path {
        &self.dir
    }

    /// Number of staged files.
    pub fn len(&self) -> usize {
        self.files.len() + self.staged.len()
    }

    /// Whether no file has been staged.
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }

    /// Names of the staged files: those held in memory in the order they
    /// were added, then the streamed ones.
    pub fn names(&self) -> impl Iterator<Item = &str> {
        self.files
            .iter()
            .map(|(name, _)| name.as_str())
            .chain(self.staged.iter().map(|(name, _)| name.as_str()))
    }

    /// Adds a file streamed to disk ([`StreamFile::finish`]) under `name`;
    /// it must have been created in this set's directory. The same checks
    /// as [`Self::add`].
    pub fn add_streamed(&mut self, name: impl Into<String>, file: StagedFile) -> Result<()> {
        let name = name.into();
        self.check_name(&name)?;
        if file.path.parent() != Some(self.dir.as_path()) {
            return Err(Error::Io {
                path: self.dir.join(&name),
                source: invalid("streamed into another directory"),
            });
        }
        self.staged.push((name, file));
        Ok(())
    }

    /// Stages a file called `name` (a plain file name, no directories).
    ///
    /// Fails with [`Error::Io`] naming `dir/name` when `name` is empty,
    /// contains a path separator, is `.` or `..`, or was already added.
    pub fn add(&mut self, name: impl Into<String>, bytes: impl Into<Vec<u8>>) -> Result<()> {
        let name = name.into();
        self.check_name(&name)?;
        self.files.push((name, bytes.into()));
        Ok(())
    }

    fn check_name(&self, name: &str) -> Result<()> {
        let plain =
            !name.is_empty() && name != "." && name != ".." && !name.contains(['/', '\\', '\0']);
        let problem = if !plain {
            Some("not a plain file name")
        } else if self.names().any(|n| n == name) {
            Some("added twice to the same set of outputs")
        } else {
            None
        };
        match problem {
            Some(msg) => Err(Error::Io {
                path: self.dir.join(name),
                source: invalid(msg),
            }),
            None => Ok(()),
        }
    }

    /// Writes every staged file into the directory, creating it if needed,
    /// and returns the final paths in the order the files were added.
    ///
    /// All files are first written and synced under temporary names; only
    /// when every one succeeded are they renamed into place. On failure the
    /// temporary files are removed and [`Error::Io`] names the file (or the
    /// directory) concerned. Each rename is atomic; should a rename fail
    /// part-way (a rare event once the data is on disk), the files renamed
    /// before it are new and the rest are old.
    pub fn commit(self) -> Result<Vec<PathBuf>> {
        self.commit_with(write_synced)
    }

    /// [`Self::commit`] with the temporary-file writer as a parameter, so
    /// tests can make a write fail part-way.
    fn commit_with(self, write: impl Fn(&Path, &[u8]) -> io::Result<()>) -> Result<Vec<PathBuf>> {
        let OutputSet {
            dir,
            files,
            mut staged,
            owned,
        } = self;
        if fs::metadata(&dir).is_ok_and(|m| !m.is_dir()) {
            return Err(Error::Io {
                path: dir.clone(),
                source: io::Error::new(
                    io::ErrorKind::AlreadyExists,
                    "is a file, not a folder (choose another output folder)",
                ),
            });
        }
        fs::create_dir_all(&dir).map_err(|source| Error::Io {
            path: dir.clone(),
            source,
        })?;
        let targets: Vec<PathBuf> = files
            .iter()
            .map(|(n, _)| dir.join(n))
            .chain(staged.iter().map(|(n, _)| dir.join(n)))
            .collect();

        // A directory in the way would only make the rename fail, after
        // other files were replaced already; refuse before writing anything.
        for target in &targets {
            if fs::symlink_metadata(target).is_ok_and(|m| m.is_dir()) {
                return Err(Error::Io {
                    path: target.clone(),
                    source: io::Error::new(
                        io::ErrorKind::IsADirectory,
                        "a directory is in the way",
                    ),
                });
            }
        }

        let mut temps: Vec<PathBuf> = Vec::with_capacity(targets.len());
        for ((_, bytes), target) in files.iter().zip(&targets) {
            let tmp = temp_path(&dir);
            let written = write(&tmp, bytes);
            temps.push(tmp);
            if let Err(source) = written {
                // The streamed files remove themselves when dropped.
                temps.iter().for_each(|t| remove_quietly(t));
                return Err(Error::Io {
                    path: target.clone(),
                    source,
                });
            }
        }
        temps.extend(staged.iter().map(|(_, f)| f.path.clone()));

        for (i, (tmp, target)) in temps.iter().zip(&targets).enumerate() {
            if let Err(source) = fs::rename(tmp, target) {
                temps[i..].iter().for_each(|t| remove_quietly(t));
                return Err(Error::Io {
                    path: target.clone(),
                    source,
                });
            }
            if let Some((_, f)) = i.checked_sub(files.len()).and_then(|k| staged.get_mut(k)) {
                f.placed = true;
            }
        }
        // Only now, with every new file in place: results of an earlier run
        // that this one does not replace would be read as this run's.
        for name in &owned {
            if files.iter().any(|(n, _)| n == name) || staged.iter().any(|(n, _)| n == name) {
                continue;
            }
            let stale = dir.join(name);
            if fs::symlink_metadata(&stale).is_ok_and(|m| m.is_file()) {
                fs::remove_file(&stale).map_err(|source| Error::Io {
                    path: stale.clone(),
                    source,
                })?;
            }
        }
        sync_dir(&dir);
        Ok(targets)
    }
}

/// A file written piece by piece (a table of many spectra) under a
/// temporary name in its final directory, so that memory does not grow
/// with its size. [`Self::finish`] syncs it for an [`OutputSet`]; dropped
/// before that, or never committed, it removes itself: an output
/// directory never holds a half-written table under a final name.
#[derive(Debug)]
pub struct StreamFile {
    path: PathBuf,
    out: Option<io::BufWriter<File>>,
}

impl StreamFile {
    /// Creates a temporary file in `dir`, creating `dir` if needed (a
    /// folder left empty by a failed run is the only trace it can leave).
    pub fn create(dir: &Path) -> Result<Self> {
        if fs::metadata(dir).is_ok_and(|m| !m.is_dir()) {
            return Err(Error::Io {
                path: dir.to_path_buf(),
                source: io::Error::new(
                    io::ErrorKind::AlreadyExists,
                    "is a file, not a folder (choose another output folder)",
                ),
            });
        }
        let io_err = |source| Error::Io {
            path: dir.to_path_buf(),
            source,
        };
        fs::create_dir_all(dir).map_err(io_err)?;
        let path = temp_path(dir);
        let file = OpenOptions::new()
            .write(true)
            .create_new(true)
            .open(&path)
            .map_err(io_err)?;
        Ok(Self {
            path,
            out: Some(io::BufWriter::with_capacity(1 << 16, file)),
        })
    }

    /// Flushes and syncs the file, ready for [`OutputSet::add_streamed`].
    pub fn finish(mut self) -> Result<StagedFile> {
        let out = self.out.take().expect("a stream is finished once");
        let path = std::mem::take(&mut self.path);
        let synced = out
            .into_inner()
            .map_err(|e| e.into_error())
            .and_then(|f| f.sync_all());
        let staged = StagedFile {
            path,
            placed: false,
        };
        synced.map_err(|source| Error::Io {
            path: staged.path.clone(),
            source,
        })?;
        Ok(staged)
    }
}

impl Write for StreamFile {
    fn write(&mut self, buf: &[u8]) -> io::Result<usize> {
        self.out.as_mut().expect("no write after finish").write(buf)
    }

    fn flush(&mut self) -> io::Result<()> {
        self.out.as_mut().expect("no write after finish").flush()
    }
}

impl Drop for StreamFile {
    fn drop(&mut self) {
        if self.out.take().is_some() {
            remove_quietly(&self.path);
        }
    }
}

/// A finished [`StreamFile`], waiting for [`OutputSet::commit`]; removed
/// when dropped uncommitted.
#[derive(Debug)]
pub struct StagedFile {
    path: PathBuf,
    placed: bool,
}

impl Drop for StagedFile {
    fn drop(&mut self) {
        if !self.placed {
            remove_quietly(&self.path);
        }
    }
}

/// The directory holding `path`; `.` for a bare file name.
fn parent_dir(path: &Path) -> &Path {
    match path.parent() {
        Some(p) if !p.as_os_str().is_empty() => p,
        _ => Path::new("."),
    }
}

/// A fresh temporary name in `dir`, unique within this process and, through
/// the process id, among concurrent runs.
fn temp_path(dir: &Path) -> PathBuf {
    static COUNTER: AtomicU64 = AtomicU64::new(0);
    let n = COUNTER.fetch_add(1, Ordering::Relaxed);
    dir.join(format!("{TEMP_PREFIX}{}-{n}", std::process::id()))
}

/// Creates `path` (which must not exist), writes `bytes` and syncs it.
fn write_synced(path: &Path, bytes: &[u8]) -> io::Result<()> {
    let mut file = OpenOptions::new().write(true).create_new(true).open(path)?;
    file.write_all(bytes)?;
    file.sync_all()
}

/// Removes a temporary file, ignoring errors: it may never have been created,
/// and the error being reported is the one that matters.
fn remove_quietly(path: &Path) {
    let _ = fs::remove_file(path);
}

/// Makes the renames in `dir` durable where the platform supports it. Best
/// effort: the files themselves are already synced, and some platforms and
/// file systems cannot open or sync a directory.
fn sync_dir(dir: &Path) {
    if cfg!(unix) {
        if let Ok(d) = File::open(dir) {
            let _ = d.sync_all();
        }
    }
}

fn invalid(msg: &'static str) -> io::Error {
    io::Error::new(io::ErrorKind::InvalidInput, msg)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn entries(dir: &Path) -> Vec<String> {
        let mut names: Vec<String> = fs::read_dir(dir)
            .unwrap()
            .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
            .collect();
        names.sort();
        names
    }

    #[test]
    fn write_atomic_creates_and_replaces() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("gamma.csv");
        write_atomic(&path, b"old").unwrap();
        assert_eq!(fs::read(&path).unwrap(), b"old");
        write_atomic(&path, b"new contents").unwrap();
        assert_eq!(fs::read(&path).unwrap(), b"new contents");
        assert_eq!(entries(dir.path()), ["gamma.csv"]);
    }

    #[test]
    fn write_atomic_failure_names_path_and_keeps_nothing() {
        let dir = tempfile::tempdir().unwrap();
        let missing = dir.path().join("no_such_dir").join("x.csv");
        let e = write_atomic(&missing, b"x").unwrap_err();
        assert!(matches!(e, Error::Io { .. }));
        assert!(
            e.to_string()
                .starts_with(&format!("{}: ", missing.display()))
        );

        // Renaming a file over a directory fails; the directory survives and
        // the temporary file is gone.
        let blocker = dir.path().join("blocker");
        fs::create_dir(&blocker).unwrap();
        let e = write_atomic(&blocker, b"x").unwrap_err();
        assert!(
            e.to_string()
                .starts_with(&format!("{}: ", blocker.display()))
        );
        assert!(blocker.is_dir());
        assert_eq!(entries(dir.path()), ["blocker"]);

        let e = write_atomic(Path::new("/"), b"x").unwrap_err();
        assert_eq!(e.to_string(), "/: not a file name");
    }

    #[test]
    fn commit_creates_directory_and_writes_in_order() {
        let root = tempfile::tempdir().unwrap();
        let out = root.path().join("a").join("b");
        let mut set = OutputSet::new(&out);
        set.add("summary.json", b"{}".to_vec()).unwrap();
        set.add("gamma.csv", "tau_s,gamma_ohm\n").unwrap();
        assert_eq!(set.len(), 2);
        assert!(!set.is_empty());
        assert_eq!(set.dir(), out);
        assert_eq!(
            set.names().collect::<Vec<_>>(),
            ["summary.json", "gamma.csv"]
        );
        let paths = set.commit().unwrap();
        assert_eq!(paths, [out.join("summary.json"), out.join("gamma.csv")]);
        assert_eq!(fs::read(&paths[0]).unwrap(), b"{}");
        assert_eq!(fs::read_to_string(&paths[1]).unwrap(), "tau_s,gamma_ohm\n");
        assert_eq!(entries(&out), ["gamma.csv", "summary.json"]);

        assert_eq!(
            OutputSet::new(&out).commit().unwrap(),
            Vec::<PathBuf>::new()
        );
    }

    #[test]
    fn bad_names_are_rejected_when_added() {
        let mut set = OutputSet::new("out");
        for bad in ["", ".", "..", "a/b", "a\\b", "nul\0"] {
            let e = set.add(bad, Vec::new()).unwrap_err();
            assert!(
                e.to_string().ends_with(": not a plain file name"),
                "{bad:?}: {e}"
            );
        }
        set.add("x.csv", Vec::new()).unwrap();
        assert_eq!(
            set.add("x.csv", Vec::new()).unwrap_err().to_string(),
            format!(
                "{}: added twice to the same set of outputs",
                Path::new("out").join("x.csv").display()
            )
        );
        assert_eq!(set.len(), 1);
    }

    /// Owned names the new set does not write are removed after the commit;
    /// files the run does not own stay; a failed commit removes nothing.
    #[test]
    fn commit_removes_stale_owned_files_only() {
        let dir = tempfile::tempdir().unwrap();
        let owned = ["a.csv", "b.png", "c.json"];
        let mut first = OutputSet::new(dir.path()).owning(&owned);
        first.add("a.csv", "1").unwrap();
        first.add("b.png", "2").unwrap();
        first.commit().unwrap();
        fs::write(dir.path().join("notes.txt"), "mine").unwrap();
        // A failing second run leaves everything as it was.
        let mut failing = OutputSet::new(dir.path()).owning(&owned);
        failing.add("a.csv", "x").unwrap();
        let fail = |_: &Path, _: &[u8]| -> io::Result<()> { Err(io::Error::other("disk full")) };
        assert!(failing.commit_with(fail).is_err());
        assert!(dir.path().join("b.png").exists());
        let mut second = OutputSet::new(dir.path()).owning(&owned);
        second.add("a.csv", "3").unwrap();
        second.add("c.json", "4").unwrap();
        second.commit().unwrap();
        assert_eq!(fs::read_to_string(dir.path().join("a.csv")).unwrap(), "3");
        assert!(!dir.path().join("b.png").exists(), "stale plot left behind");
        assert!(dir.path().join("c.json").exists());
        assert_eq!(
            fs::read_to_string(dir.path().join("notes.txt")).unwrap(),
            "mine"
        );
    }

    #[test]
    fn failed_write_keeps_old_results_and_removes_temporaries() {
        let dir = tempfile::tempdir().unwrap();
        fs::write(dir.path().join("a.csv"), "old a").unwrap();
        fs::write(dir.path().join("b.csv"), "old b").unwrap();
        let mut set = OutputSet::new(dir.path());
        set.add("a.csv", "new a").unwrap();
        set.add("b.csv", "new b").unwrap();
        set.add("c.csv", "new c").unwrap();
        let calls = std::cell::Cell::new(0);
        let e = set
            .commit_with(|path, bytes| {
                calls.set(calls.get() + 1);
                if calls.get() == 2 {
                    // Leave a partial temporary behind, as a full disk would.
                    fs::write(path, &bytes[..1])?;
                    return Err(io::Error::other("disk full"));
                }
                write_synced(path, bytes)
            })
            .unwrap_err();
        assert_eq!(
            e.to_string(),
            format!("{}: disk full", dir.path().join("b.csv").display())
        );
        assert_eq!(calls.get(), 2);
        assert_eq!(
            fs::read_to_string(dir.path().join("a.csv")).unwrap(),
            "old a"
        );
        assert_eq!(
            fs::read_to_string(dir.path().join("b.csv")).unwrap(),
            "old b"
        );
        assert_eq!(entries(dir.path()), ["a.csv", "b.csv"]);
    }

    #[test]
    fn directory_in_the_way_is_refused_before_writing() {
        let dir = tempfile::tempdir().unwrap();
        fs::write(dir.path().join("a.csv"), "old a").unwrap();
        fs::create_dir(dir.path().join("b.csv")).unwrap();
        let mut set = OutputSet::new(dir.path());
        set.add("a.csv", "new a").unwrap();
        set.add("b.csv", "new b").unwrap();
        let e = set.commit().unwrap_err();
        assert_eq!(
            e.to_string(),
            format!(
                "{}: a directory is in the way",
                dir.path().join("b.csv").display()
            )
        );
        assert_eq!(
            fs::read_to_string(dir.path().join("a.csv")).unwrap(),
            "old a"
        );
        assert_eq!(entries(dir.path()), ["a.csv", "b.csv"]);
    }

    #[test]
    fn output_directory_that_is_a_file_is_an_error() {
        let dir = tempfile::tempdir().unwrap();
        let file = dir.path().join("out");
        fs::write(&file, "not a dir").unwrap();
        let mut set = OutputSet::new(&file);
        set.add("a.csv", "x").unwrap();
        let e = set.commit().unwrap_err();
        assert!(
            e.to_string().starts_with(&format!("{}: ", file.display())),
            "{e}"
        );
        assert_eq!(fs::read_to_string(&file).unwrap(), "not a dir");
    }

    #[test]
    fn streamed_files_join_the_commit_and_leave_nothing_when_dropped() {
        let dir = tempfile::tempdir().unwrap();
        let out = dir.path().join("series");
        // Dropped unfinished: no file stays.
        {
            let mut s = StreamFile::create(&out).unwrap();
            s.write_all(b"half").unwrap();
        }
        assert!(entries(&out).is_empty(), "{:?}", entries(&out));
        // Finished but never committed: removed when dropped.
        drop(StreamFile::create(&out).unwrap().finish().unwrap());
        assert!(entries(&out).is_empty());
        // Committed with a file held in memory; an owned stale name goes.
        fs::write(out.join("old.csv"), "stale").unwrap();
        let mut s = StreamFile::create(&out).unwrap();
        for i in 0..1000 {
            writeln!(s, "{i}").unwrap();
        }
        let mut set = OutputSet::new(&out).owning(&["old.csv", "rows.csv", "summary.json"]);
        set.add("summary.json", "{}").unwrap();
        set.add_streamed("rows.csv", s.finish().unwrap()).unwrap();
        assert_eq!(
            set.names().collect::<Vec<_>>(),
            ["summary.json", "rows.csv"]
        );
        let written = set.commit().unwrap();
        assert_eq!(written, [out.join("summary.json"), out.join("rows.csv")]);
        assert_eq!(entries(&out), ["rows.csv", "summary.json"]);
        let rows = fs::read_to_string(out.join("rows.csv")).unwrap();
        assert_eq!(rows.lines().count(), 1000);
        // A failed commit removes the streamed temporary too and keeps the
        // earlier files.
        let mut s = StreamFile::create(&out).unwrap();
        s.write_all(b"new rows").unwrap();
        let mut set = OutputSet::new(&out);
        set.add("summary.json", "{\"new\": 1}").unwrap();
        set.add_streamed("rows.csv", s.finish().unwrap()).unwrap();
        assert!(set.add("rows.csv", "twice").is_err());
        let fail = |_: &Path, _: &[u8]| Err(io::Error::other("disk full"));
        assert!(set.commit_with(fail).is_err());
        assert_eq!(entries(&out), ["rows.csv", "summary.json"]);
        assert_eq!(fs::read_to_string(out.join("rows.csv")).unwrap(), rows);
    }
}
