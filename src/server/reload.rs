//! The served index and its live reload: a new build is loaded beside the old and swapped in.
//!
//! Takes the index folder; gives [`LiveIndex`], which hands each request an `Arc` of the
//! generation live when the request started (so a request finishes on the index it began
//! with, and the old generation is dropped when its last request ends). A reload opens the
//! generation `CURRENT` names — every part checked against the manifest — on a blocking
//! thread while the old one keeps serving, then swaps the pointer. A generation that cannot
//! be opened (corrupt, half-copied, wrong version) is refused with a log line and counted;
//! the old one stays. Reloads are triggered by a file watcher on the folder (`notify`) and
//! by SIGHUP. It holds no request handling.

use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicU64, Ordering};
use std::sync::{Arc, Mutex, RwLock};
use std::time::{Duration, SystemTime};

use notify::Watcher;

use crate::index::OpenIndex;

/// How long the watcher waits after a change for the folder to settle before reloading.
pub const SETTLE: Duration = Duration::from_millis(150);

/// One loaded generation and when it was loaded.
pub struct Loaded {
    /// The opened generation.
    pub index: OpenIndex,
    /// When this server finished opening it.
    pub loaded_at: SystemTime,
    /// Bytes of every part of the generation, from its manifest.
    pub bytes: u64,
}

impl Loaded {
    /// Wraps a freshly opened index.
    pub fn new(index: OpenIndex) -> Loaded {
        let bytes = index
            .generation
            .manifest
            .parts
            .values()
            .map(|p| p.bytes)
            .sum();
        Loaded {
            index,
            loaded_at: SystemTime::now(),
            bytes,
        }
    }

    /// The name of the generation folder (`gen-<build id>`).
    pub fn generation_name(&self) -> String {
        self.index
            .generation
            .dir
            .file_name()
            .map(|n| n.to_string_lossy().into_owned())
            .unwrap_or_default()
    }
}

/// What a reload attempt did.
#[derive(Clone, Debug, PartialEq, Eq)]
pub enum ReloadOutcome {
    /// A new generation is now served.
    Swapped { from: Option<String>, to: String },
    /// `CURRENT` still names the generation being served.
    Unchanged,
    /// The new generation could not be opened; the old one keeps serving.
    Refused(String),
}

/// The index being served, swappable while requests run.
pub struct LiveIndex {
    dir: PathBuf,
    current: RwLock<Option<Arc<Loaded>>>,
    reloads: AtomicU64,
    failures: AtomicU64,
    last_error: Mutex<Option<String>>,
    /// One reload at a time: a burst of watcher events and a SIGHUP never open twice.
    reloading: tokio::sync::Mutex<()>,
    log: bool,
}

impl LiveIndex {
    /// A live index of `dir` with nothing loaded yet. `log` prints reloads on stderr.
    pub fn new(dir: &Path, log: bool) -> LiveIndex {
        LiveIndex {
            dir: dir.to_path_buf(),
            current: RwLock::new(None),
            reloads: AtomicU64::new(0),
            failures: AtomicU64::new(0),
            last_error: Mutex::new(None),
            reloading: tokio::sync::Mutex::new(()),
            log,
        }
    }

    /// The index folder.
    pub fn dir(&self) -> &Path {
        &self.dir
    }

    /// The generation live now, if one is loaded. Requests hold this `Arc` until they end.
    pub fn current(&self) -> Option<Arc<Loaded>> {
        // A poisoned lock means a panic while swapping an `Arc`; the value is still whole.
        self.current
            .read()
            .unwrap_or_else(|p| p.into_inner())
            .clone()
    }

    /// Generations swapped in after the first.
    pub fn reloads(&self) -> u64 {
        self.reloads.load(Ordering::Relaxed)
    }

    /// Reload attempts refused.
    pub fn failures(&self) -> u64 {
        self.failures.load(Ordering::Relaxed)
    }

    /// Why the last attempt was refused, when the last attempt was refused.
    pub fn last_error(&self) -> Option<String> {
        self.last_error
            .lock()
            .unwrap_or_else(|p| p.into_inner())
            .clone()
    }

    fn set_last_error(&self, e: Option<String>) {
        *self.last_error.lock().unwrap_or_else(|p| p.into_inner()) = e;
    }

    /// Installs `loaded` as the live generation.
    pub fn install(&self, loaded: Loaded) {
        let mut slot = self.current.write().unwrap_or_else(|p| p.into_inner());
        *slot = Some(Arc::new(loaded));
    }

    /// The generation folder `CURRENT` names now, if it can be read.
    fn named_by_current(&self) -> Option<String> {
        std::fs::read_to_string(self.dir.join("CURRENT"))
            .ok()
            .map(|t| t.trim().to_string())
    }

    /// Opens the generation `CURRENT` names and swaps it in. Unless `force`, does nothing
    /// when `CURRENT` names the generation already served.
    pub async fn reload(&self, force: bool) -> ReloadOutcome {
        let _one_at_a_time = self.reloading.lock().await;
        let served = self.current();
        let served_name = served.as_ref().map(|l| l.generation_name());
        if !force && served_name.is_some() && self.named_by_current() == served_name {
            return ReloadOutcome::Unchanged;
        }
        let dir = self.dir.clone();
        let opened = tokio::task::spawn_blocking(move || OpenIndex::open(&dir)).await;
        let opened = match opened {
            Ok(Ok(index)) => index,
            Ok(Err(e)) => return self.refuse(e.to_string(), served_name.as_deref()),
            Err(join) => {
                return self.refuse(format!("opening panicked: {join}"), served_name.as_deref())
            }
        };
        let loaded = Loaded::new(opened);
        let to = loaded.generation_name();
        if served_name.as_deref() == Some(to.as_str()) {
            self.set_last_error(None);
            return ReloadOutcome::Unchanged;
        }
        let first = served.is_none();
        self.install(loaded);
        self.set_last_error(None);
        if !first {
            self.reloads.fetch_add(1, Ordering::Relaxed);
        }
        if self.log {
            match &served_name {
                Some(from) => {
                    eprintln!("quarry: reloaded the index: now serving {to} (was {from})")
                }
                None => eprintln!("quarry: loaded the index {to}"),
            }
        }
        ReloadOutcome::Swapped {
            from: served_name,
            to,
        }
    }

    fn refuse(&self, why: String, served: Option<&str>) -> ReloadOutcome {
        self.failures.fetch_add(1, Ordering::Relaxed);
        if self.log {
            match served {
                Some(s) => eprintln!("quarry: refused the new index, still serving {s}: {why}"),
                None => eprintln!("quarry: cannot load the index: {why}"),
            }
        }
        self.set_last_error(Some(why.clone()));
        ReloadOutcome::Refused(why)
    }
}

/// Keeps the folder watcher alive; dropping it stops watching.
pub struct WatchGuard {
    _watcher: notify::RecommendedWatcher,
}

/// Watches the index folder and reloads after each change settles. Must be called inside a
/// tokio runtime.
pub fn watch(live: Arc<LiveIndex>) -> Result<WatchGuard, notify::Error> {
    let (tx, mut rx) = tokio::sync::mpsc::unbounded_channel::<()>();
    let mut watcher = notify::recommended_watcher(move |event: notify::Result<notify::Event>| {
        if event.is_ok() {
            // The receiver is gone only when the server is shutting down.
            let _ = tx.send(());
        }
    })?;
    watcher.watch(live.dir(), notify::RecursiveMode::NonRecursive)?;
    tokio::spawn(async move {
        while rx.recv().await.is_some() {
            tokio::time::sleep(SETTLE).await;
            while rx.try_recv().is_ok() {}
            live.reload(false).await;
        }
    });
    Ok(WatchGuard { _watcher: watcher })
}

/// Reloads (forced) on every SIGHUP. Must be called inside a tokio runtime.
#[cfg(unix)]
pub fn reload_on_sighup(live: Arc<LiveIndex>) -> std::io::Result<()> {
    use tokio::signal::unix::{signal, SignalKind};
    let mut hangups = signal(SignalKind::hangup())?;
    tokio::spawn(async move {
        while hangups.recv().await.is_some() {
            live.reload(true).await;
        }
    });
    Ok(())
}
