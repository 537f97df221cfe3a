//! Writing outputs safely: every file is written under a temporary name in its final folder and
//! renamed into place only when complete, so a crash or a full disk never leaves a half-written
//! file that a later analysis could trust.

use crate::error::{Error, Result};
use std::fs::File;
use std::io::{BufWriter, Write};
use std::path::{Path, PathBuf};

/// A file being written; it appears under its final name only after [`AtomicFile::commit`].
/// Dropping it uncommitted removes the temporary file.
pub struct AtomicFile {
    final_path: PathBuf,
    temp_path: PathBuf,
    writer: Option<BufWriter<File>>,
}

impl AtomicFile {
    /// Starts writing `path` (through a temporary sibling).
    pub fn create(path: &Path) -> Result<AtomicFile> {
        let name = path
            .file_name()
            .map(|n| n.to_string_lossy().to_string())
            .unwrap_or_default();
        let temp_path = path.with_file_name(format!(".{name}.partial-{}", std::process::id()));
        let file = File::create(&temp_path).map_err(|e| Error::output(path, e))?;
        Ok(AtomicFile {
            final_path: path.to_path_buf(),
            temp_path,
            writer: Some(BufWriter::with_capacity(1 << 16, file)),
        })
    }

    /// The final path.
    pub fn path(&self) -> &Path {
        &self.final_path
    }

    /// Flushes, syncs and renames into place.
    pub fn commit(mut self) -> Result<()> {
        let writer = self.writer.take().expect("not yet committed");
        let file = writer
            .into_inner()
            .map_err(|e| Error::output(&self.final_path, e.into_error()))?;
        file.sync_all().map_err(|e| Error::output(&self.final_path, e))?;
        drop(file);
        std::fs::rename(&self.temp_path, &self.final_path).map_err(|e| Error::output(&self.final_path, e))
    }

    /// Wraps an I/O error from writing this file.
    pub fn error(&self, e: std::io::Error) -> Error {
        Error::output(&self.final_path, e)
    }
}

/// Commits ([`AtomicFile::commit`]) running on threads of their own, waited for together:
/// most of a commit is waiting for the disk to confirm the file (`sync_all`, a few to 25 ms a
/// file), time in which the cores can go on with the run instead of idling. Dropped without
/// [`Commits::wait`] (a caller returning early with an error), it still waits for them, so
/// that no commit outlives the folder it writes into.
#[derive(Default)]
pub struct Commits(Vec<Started<Result<()>>>);

impl Drop for Commits {
    fn drop(&mut self) {
        self.0.drain(..).for_each(Started::wait_quietly);
    }
}

impl Commits {
    /// Starts committing `file` on a thread of its own (in place, where none can start).
    pub fn start(&mut self, file: AtomicFile) {
        self.0.push(Started::start(move || file.commit()));
    }

    /// Waits for every commit; the first error in the order they were started.
    pub fn wait(mut self) -> Result<()> {
        let results: Vec<Result<()>> = std::mem::take(&mut self.0).into_iter().map(Started::wait).collect();
        results.into_iter().collect()
    }
}

/// The work in `slot`, taken out by the one thread that runs it.
fn taken_once<W>(slot: &std::sync::Mutex<Option<W>>) -> W {
    let work = slot.lock().unwrap_or_else(|e| e.into_inner()).take();
    work.expect("work is taken once: by its thread, or here when the thread never started")
}

/// Work started on a thread of its own, or already done where no thread could be started:
/// what [`Commits`] and [`Removal`] hold.
#[derive(Debug)]
enum Started<T> {
    OnThread(std::thread::JoinHandle<T>),
    Done(T),
}

impl<T: Send + 'static> Started<T> {
    /// Starts `work` on a thread of its own; where none can start, does it here and now.
    fn start<W: FnOnce() -> T + Send + 'static>(work: W) -> Started<T> {
        // Shared so that the work can be taken back from a thread that never started.
        let shared = std::sync::Arc::new(std::sync::Mutex::new(Some(work)));
        let on_thread = std::sync::Arc::clone(&shared);
        let spawned = std::thread::Builder::new().spawn(move || taken_once(&on_thread)());
        match spawned {
            Ok(handle) => Started::OnThread(handle),
            Err(_) => Started::Done(taken_once(&shared)()),
        }
    }

    /// Its result, once its thread is done (a panic there is passed on).
    fn wait(self) -> T {
        match self {
            Started::OnThread(handle) => handle.join().unwrap_or_else(|panic| std::panic::resume_unwind(panic)),
            Started::Done(result) => result,
        }
    }

    /// Waits for its thread, whatever it gives (for a drop, which cannot report).
    fn wait_quietly(self) {
        if let Started::OnThread(handle) = self {
            let _ = handle.join();
        }
    }
}

impl Write for AtomicFile {
    fn write(&mut self, buf: &[u8]) -> std::io::Result<usize> {
        self.writer.as_mut().expect("not yet committed").write(buf)
    }
    fn flush(&mut self) -> std::io::Result<()> {
        self.writer.as_mut().expect("not yet committed").flush()
    }
}

impl std::io::Seek for AtomicFile {
    fn seek(&mut self, pos: std::io::SeekFrom) -> std::io::Result<u64> {
        self.writer.as_mut().expect("not yet committed").seek(pos)
    }
}

impl Drop for AtomicFile {
    fn drop(&mut self) {
        if self.writer.take().is_some() {
            let _ = std::fs::remove_file(&self.temp_path);
        }
    }
}

/// A hidden folder inside a run folder where all of a run's outputs are written; they are
/// moved into the run folder together only when every one of them is complete, so a run that
/// fails half-way (a full disk, a bad frame at the end) leaves the earlier run's outputs as
/// they were. Removed when dropped without publishing.
pub struct Staging {
    dir: PathBuf,
    work: PathBuf,
    published: bool,
}

impl Staging {
    /// Creates `dir/.staging-PID`.
    ///
    /// # Errors
    /// [`Error::Output`] when it cannot be created.
    pub fn new(dir: &Path) -> Result<Staging> {
        let work = dir.join(format!(".staging-{}", std::process::id()));
        let _ = std::fs::remove_dir_all(&work);
        std::fs::create_dir_all(&work).map_err(|e| Error::output(&work, e))?;
        Ok(Staging {
            dir: dir.to_path_buf(),
            work,
            published: false,
        })
    }

    /// Where outputs are written.
    pub fn path(&self) -> &Path {
        &self.work
    }

    /// Moves the staged files named in `names` (those that exist) into the run folder, in
    /// order (put the run record last), and takes the folder's `stale` names (outputs of an
    /// earlier run that this one does not replace) out of it. What an earlier run left under
    /// those names is set aside in the staging folder rather than deleted in place (a file
    /// stays where it is until the staged one replaces it in one rename), and the staging
    /// folder is then removed on a thread of its own ([`Removal`]): freeing the blocks of an
    /// earlier movie and review page takes the file system a while, and nothing needs to wait
    /// for it but the end of the process.
    ///
    /// # Errors
    /// [`Error::Output`] when a rename fails.
    pub fn publish(mut self, names: &[&str], stale: &[&str]) -> Result<Removal> {
        let aside = self.work.join(".replaced");
        std::fs::create_dir_all(&aside).map_err(|e| Error::output(&aside, e))?;
        for name in names {
            let from = self.work.join(name);
            if from.exists() {
                let to = self.dir.join(name);
                set_aside(&to, &aside.join(name), false)?;
                std::fs::rename(&from, &to).map_err(|e| Error::output(&to, e))?;
            }
        }
        for name in stale {
            // As before publishing set aside: an earlier output that cannot be moved stays.
            let _ = set_aside(&self.dir.join(name), &aside.join(name), true);
        }
        self.published = true;
        // Renamed first, so that a later staging folder of this process is never the one
        // being removed.
        let removing = self.dir.join(format!(
            ".staging-{}-removing-{}",
            std::process::id(),
            REMOVALS.fetch_add(1, std::sync::atomic::Ordering::Relaxed)
        ));
        let gone = if std::fs::rename(&self.work, &removing).is_ok() {
            removing
        } else {
            self.work.clone()
        };
        Ok(Removal::start(gone))
    }
}

/// Staging folders of this process set for removal so far (each gets a name of its own).
static REMOVALS: std::sync::atomic::AtomicUsize = std::sync::atomic::AtomicUsize::new(0);

/// Moves an earlier output at `path` out of the way, to `aside`: a folder is renamed (a
/// rename cannot replace a non-empty one), a file `taken_out` (not replaced) is renamed too,
/// and a file about to be replaced is linked there, so that it stays in place until the
/// rename that replaces it and its blocks are freed with the staging folder. Where the file
/// system has no links, the replacing rename frees it. Nothing there: nothing to do.
fn set_aside(path: &Path, aside: &Path, taken_out: bool) -> Result<()> {
    let Ok(meta) = std::fs::symlink_metadata(path) else {
        return Ok(());
    };
    if taken_out || meta.is_dir() {
        std::fs::rename(path, aside).map_err(|e| Error::output(path, e))
    } else {
        let _ = std::fs::hard_link(path, aside);
        Ok(())
    }
}

/// A folder being removed on a thread of its own, and any other clean-up handed to it
/// ([`Removal::also`]); dropping this waits until all of it is done (so that the process does
/// not end half-way through). [`Staging::publish`] makes one.
#[derive(Debug)]
pub struct Removal(Vec<Started<()>>);

impl Removal {
    /// Starts removing `path`; where no thread can be started, removes it before returning.
    fn start(path: PathBuf) -> Removal {
        Removal(Vec::new()).also(move || {
            let _ = std::fs::remove_dir_all(&path);
        })
    }

    /// Also runs `work` (clean-up nothing else waits for) on a thread of its own, waited for
    /// with the rest; where no thread can be started, runs it before returning.
    pub fn also(mut self, work: impl FnOnce() + Send + 'static) -> Removal {
        self.0.push(Started::start(work));
        self
    }
}

impl Drop for Removal {
    fn drop(&mut self) {
        self.0.drain(..).for_each(Started::wait_quietly);
    }
}

impl Drop for Staging {
    fn drop(&mut self) {
        if !self.published {
            let _ = std::fs::remove_dir_all(&self.work);
        }
    }
}

/// Writes a whole file atomically.
pub fn write_atomic(path: &Path, bytes: &[u8]) -> Result<()> {
    let mut f = AtomicFile::create(path)?;
    f.write_all(bytes).map_err(|e| f.error(e))?;
    f.commit()
}

/// Creates an output folder (and parents) or explains why it cannot.
pub fn ensure_dir(path: &Path) -> Result<()> {
    std::fs::create_dir_all(path).map_err(|e| Error::output(path, e))
}

/// CRC-32 (the ISO-HDLC/zlib polynomial) of a file, streamed. Recorded in run.json so a
/// result can be tied to its exact input; `zlib.crc32` or `crc32` on the command line gives
/// the same number. The crc32fast crate folds with carry-less multiplication, so even a
/// multi-GB recording costs a fraction of a second (a byte-wise hash cost a tenth of a run).
pub fn crc32_file(path: &Path) -> std::io::Result<u32> {
    use std::io::Read;
    let mut f = File::open(path)?;
    let mut buf = vec![0u8; 1 << 20];
    let mut hasher = crc32fast::Hasher::new();
    loop {
        let n = f.read(&mut buf)?;
        if n == 0 {
            return Ok(hasher.finalize());
        }
        hasher.update(&buf[..n]);
    }
}

/// The modification time of a file in whole seconds since 1970; `None` for a folder or where
/// the file system does not say.
pub fn modified_unix_s(path: &Path) -> Option<u64> {
    let meta = std::fs::metadata(path).ok().filter(|m| m.is_file())?;
    let since = meta.modified().ok()?.duration_since(std::time::UNIX_EPOCH).ok()?;
    Some(since.as_secs())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn commits_on_threads_put_every_file_in_place_and_report_a_failure() {
        // Source: the file system, read back with std::fs: each file committed on a thread
        // is under its final name with the bytes written and no temporary left; a commit whose
        // folder is gone fails, and waiting returns that failure naming the file.
        let dir = tempfile::tempdir().unwrap();
        let mut commits = Commits::default();
        for k in 0..5 {
            let mut file = AtomicFile::create(&dir.path().join(format!("t{k}.csv"))).unwrap();
            writeln!(file, "table {k}").unwrap();
            commits.start(file);
        }
        commits.wait().unwrap();
        let mut names: Vec<String> = std::fs::read_dir(dir.path())
            .unwrap()
            .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
            .collect();
        names.sort();
        assert_eq!(names, ["t0.csv", "t1.csv", "t2.csv", "t3.csv", "t4.csv"]);
        assert_eq!(std::fs::read_to_string(dir.path().join("t3.csv")).unwrap(), "table 3\n");

        let gone = dir.path().join("gone");
        std::fs::create_dir(&gone).unwrap();
        let mut commits = Commits::default();
        let mut file = AtomicFile::create(&gone.join("lost.csv")).unwrap();
        writeln!(file, "x").unwrap();
        std::fs::remove_dir_all(&gone).unwrap();
        commits.start(file);
        let err = commits.wait().expect_err("its folder is gone");
        assert!(err.to_string().contains("lost.csv"), "{err}");
    }

    #[test]
    fn crc32_matches_published_check_values() {
        // Source: the CRC catalogue's check value of CRC-32/ISO-HDLC, "123456789" -> cbf43926
        // (R. Williams (1993), "A painless guide to CRC error detection algorithms"; also
        // Python's zlib.crc32); of "" the initial value xor the final xor, 0.
        let dir = tempfile::tempdir().unwrap();
        for (text, want) in [("", 0u32), ("123456789", 0xcbf4_3926)] {
            let p = dir.path().join("x");
            std::fs::write(&p, text).unwrap();
            assert_eq!(crc32_file(&p).unwrap(), want, "{text:?}");
        }
    }

    #[test]
    fn publishing_replaces_earlier_outputs_and_removes_them_in_the_background() {
        // Source: the contract of Staging::publish (the staged names replace the folder's,
        // the stale names leave it, nothing of the staging folder is left once the removal
        // is dropped, nor of what was handed to it with `also`), checked by reading the folder
        // back.
        let dir = tempfile::tempdir().unwrap();
        let d = dir.path();
        let write = |p: &Path, text: &str| {
            std::fs::create_dir_all(p.parent().unwrap()).unwrap();
            std::fs::write(p, text).unwrap();
        };
        write(&d.join("table.csv"), "old table");
        write(&d.join("page/index.html"), "old page");
        write(&d.join("page/frames/1.jpg"), "old frame");
        write(&d.join("movie.gif"), "old movie");
        write(&d.join("keep.txt"), "not an output");
        write(&d.join(".spool/frames.bin"), "a run's own temporary");
        let staging = Staging::new(d).unwrap();
        write(&staging.path().join("table.csv"), "new table");
        write(&staging.path().join("page/index.html"), "new page");
        let removal = staging
            .publish(&["table.csv", "page", "absent.json"], &["movie.gif"])
            .unwrap();
        // Clean-up handed to the removal is done by the time it is dropped, however late it
        // finishes.
        let spool = d.join(".spool");
        let removal = removal.also(move || {
            std::thread::sleep(std::time::Duration::from_millis(50));
            let _ = std::fs::remove_dir_all(spool);
        });
        drop(removal);
        let read = |p: &str| std::fs::read_to_string(d.join(p)).ok();
        assert_eq!(read("table.csv").as_deref(), Some("new table"));
        assert_eq!(read("page/index.html").as_deref(), Some("new page"));
        assert!(!d.join("page/frames").exists(), "a folder is replaced whole");
        assert!(!d.join("movie.gif").exists() && !d.join("absent.json").exists());
        assert_eq!(read("keep.txt").as_deref(), Some("not an output"));
        let mut names: Vec<String> = std::fs::read_dir(d)
            .unwrap()
            .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
            .collect();
        names.sort();
        assert_eq!(names, ["keep.txt", "page", "table.csv"], "no staging folder left");
    }

    #[test]
    fn uncommitted_file_leaves_nothing() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("out.csv");
        {
            let mut f = AtomicFile::create(&p).unwrap();
            f.write_all(b"half").unwrap();
        }
        assert_eq!(std::fs::read_dir(dir.path()).unwrap().count(), 0);
        write_atomic(&p, b"whole").unwrap();
        assert_eq!(std::fs::read(&p).unwrap(), b"whole");
    }
}
