//! Watching data files: a [`FileWatch`] (the `notify` crate; the folder of each file is
//! watched, so a file replaced by a rename is still followed) reports changes to chosen
//! files, and a [`Debounce`] turns a burst of changes into one: a file is due once no change
//! has been seen for the quiet period and its size did not move over that period, because an
//! instrument writes its export in chunks.

use notify::{EventKind, RecursiveMode, Watcher, event::AccessKind, event::AccessMode};
use std::collections::{BTreeSet, HashMap};
use std::path::{Path, PathBuf};
use std::sync::{Arc, Mutex};
use std::time::{Duration, Instant};

/// How long a file must be quiet before it is read again.
pub const QUIET: Duration = Duration::from_millis(400);

/// Pending changes, each with the time of its last change and the size then.
#[derive(Debug)]
pub struct Debounce {
    quiet: Duration,
    pending: HashMap<PathBuf, (Instant, Option<u64>)>,
}

fn size(p: &Path) -> Option<u64> {
    std::fs::metadata(p).ok().map(|m| m.len())
}

impl Debounce {
    /// A debouncer with the given quiet period.
    pub fn new(quiet: Duration) -> Debounce {
        Debounce {
            quiet,
            pending: HashMap::new(),
        }
    }

    /// A change to `p` was seen now.
    pub fn touched(&mut self, p: PathBuf) {
        let s = size(&p);
        self.pending.insert(p, (Instant::now(), s));
    }

    /// How long until the next pending file may be due; `None` when nothing is pending.
    pub fn timeout(&self) -> Option<Duration> {
        let now = Instant::now();
        self.pending
            .values()
            .map(|(t, _)| (*t + self.quiet).saturating_duration_since(now))
            .min()
    }

    /// The files that are due now (quiet, and the same size as at their last change), in
    /// path order; a file whose size moved waits another quiet period.
    pub fn due(&mut self) -> Vec<PathBuf> {
        let now = Instant::now();
        let mut out = Vec::new();
        for (p, (t, s)) in self.pending.iter_mut() {
            if now.duration_since(*t) < self.quiet {
                continue;
            }
            let s_now = size(p);
            if s_now == *s {
                out.push(p.clone());
            } else {
                *t = now;
                *s = s_now;
            }
        }
        for p in &out {
            self.pending.remove(p);
        }
        out.sort();
        out
    }
}

/// Reports changes to a set of files through a callback.
pub struct FileWatch {
    watcher: Box<dyn Watcher + Send>,
    files: Arc<Mutex<BTreeSet<PathBuf>>>,
    dirs: BTreeSet<PathBuf>,
}

impl std::fmt::Debug for FileWatch {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("FileWatch")
            .field("dirs", &self.dirs)
            .finish()
    }
}

/// Whether an event can mean new content (opening or reading a file cannot).
fn may_change(kind: &EventKind) -> bool {
    match kind {
        EventKind::Access(AccessKind::Close(AccessMode::Write)) => true,
        EventKind::Access(_) => false,
        _ => true,
    }
}

impl FileWatch {
    /// A watcher calling `on_change` (from its own thread) with the path of a watched file
    /// that changed. Falls back to polling every 500 ms where the system's notification
    /// service cannot be used.
    pub fn new(on_change: impl Fn(PathBuf) + Send + Sync + 'static) -> Result<FileWatch, String> {
        let files: Arc<Mutex<BTreeSet<PathBuf>>> = Arc::default();
        let on_change = Arc::new(on_change);
        let handler = {
            let files = files.clone();
            let on_change = on_change.clone();
            move |res: notify::Result<notify::Event>| {
                let Ok(ev) = res else { return };
                if !may_change(&ev.kind) {
                    return;
                }
                let Ok(set) = files.lock() else { return };
                for p in ev.paths {
                    if set.contains(&p) {
                        on_change(p);
                    }
                }
            }
        };
        let watcher: Box<dyn Watcher + Send> = match notify::recommended_watcher(handler.clone()) {
            Ok(w) => Box::new(w),
            Err(e) => {
                eprintln!("partita: file notifications unavailable ({e}); polling instead");
                let cfg = notify::Config::default().with_poll_interval(Duration::from_millis(500));
                Box::new(
                    notify::PollWatcher::new(handler, cfg)
                        .map_err(|e| format!("cannot watch files: {e}"))?,
                )
            }
        };
        Ok(FileWatch {
            watcher,
            files,
            dirs: BTreeSet::new(),
        })
    }

    /// Follows exactly `files` (absolute paths) from now on.
    pub fn set(&mut self, files: &[PathBuf]) {
        if let Ok(mut set) = self.files.lock() {
            *set = files.iter().cloned().collect();
        }
        let wanted: BTreeSet<PathBuf> = files
            .iter()
            .filter_map(|f| f.parent().map(Path::to_path_buf))
            .collect();
        for d in self.dirs.difference(&wanted).cloned().collect::<Vec<_>>() {
            let _ = self.watcher.unwatch(&d);
            self.dirs.remove(&d);
        }
        for d in wanted {
            if self.dirs.contains(&d) {
                continue;
            }
            match self.watcher.watch(&d, RecursiveMode::NonRecursive) {
                Ok(()) => {
                    self.dirs.insert(d);
                }
                Err(e) => eprintln!("partita: cannot watch {}: {e}", d.display()),
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_burst_is_due_once_after_the_quiet_period() {
        let dir = std::env::temp_dir().join(format!("partita-debounce-{}", std::process::id()));
        std::fs::create_dir_all(&dir).unwrap();
        let p = dir.join("a.csv");
        std::fs::write(&p, "x\n1\n").unwrap();
        let mut d = Debounce::new(Duration::from_millis(50));
        assert_eq!(d.timeout(), None);
        d.touched(p.clone());
        d.touched(p.clone());
        assert!(d.due().is_empty(), "not quiet yet");
        assert!(d.timeout().unwrap() <= Duration::from_millis(50));
        std::thread::sleep(Duration::from_millis(60));
        // The size moved since the last change was seen: wait another period.
        std::fs::write(&p, "x\n1\n2\n").unwrap();
        assert!(d.due().is_empty());
        std::thread::sleep(Duration::from_millis(60));
        assert_eq!(d.due(), vec![p.clone()]);
        assert!(d.due().is_empty() && d.timeout().is_none());
        // A file that is gone is due too (the engine says it cannot be read).
        d.touched(p.clone());
        std::fs::remove_file(&p).unwrap();
        std::thread::sleep(Duration::from_millis(60));
        assert!(d.due().is_empty(), "size went from some to none");
        std::thread::sleep(Duration::from_millis(60));
        assert_eq!(d.due(), vec![p]);
    }

    #[test]
    fn changes_to_watched_files_are_reported_and_reads_are_not() {
        let dir = std::env::temp_dir().join(format!("partita-watch-{}", std::process::id()));
        std::fs::create_dir_all(&dir).unwrap();
        let dir = std::path::absolute(&dir).unwrap();
        let (a, b) = (dir.join("a.csv"), dir.join("b.csv"));
        std::fs::write(&a, "x\n").unwrap();
        std::fs::write(&b, "x\n").unwrap();
        let (tx, rx) = std::sync::mpsc::channel();
        let tx = Mutex::new(tx);
        let mut w = FileWatch::new(move |p| {
            let _ = tx.lock().unwrap().send(p);
        })
        .unwrap();
        w.set(std::slice::from_ref(&a));
        let _ = std::fs::read(&a).unwrap();
        std::fs::write(&b, "x\n2\n").unwrap();
        assert!(
            rx.recv_timeout(Duration::from_millis(300)).is_err(),
            "read of a, write of b"
        );
        std::fs::write(&a, "x\n2\n").unwrap();
        assert_eq!(rx.recv_timeout(Duration::from_secs(5)).unwrap(), a);
        // Replaced by a rename, as editors and exporters do: still followed.
        while rx.try_recv().is_ok() {}
        let tmp = dir.join(".a.tmp");
        std::fs::write(&tmp, "x\n3\n").unwrap();
        std::fs::rename(&tmp, &a).unwrap();
        assert_eq!(rx.recv_timeout(Duration::from_secs(5)).unwrap(), a);
        w.set(&[]);
        while rx.try_recv().is_ok() {}
        std::fs::write(&a, "x\n4\n").unwrap();
        assert!(
            rx.recv_timeout(Duration::from_millis(300)).is_err(),
            "no longer watched"
        );
    }
}
