//! The daemon's event sources, each a small worker feeding one channel of [`WatchEvent`].
//!
//! - file events: notify's recommended watcher (inotify on Linux) through the full debouncer,
//!   or notify's poll watcher with `--poll`;
//! - a rescan tick, because events can be missed (a network share delivers none for files
//!   written by other machines, and an overflowing event queue drops some);
//! - SIGINT/SIGTERM.
//!
//! notify's types stay in this file; the rest of the daemon sees only paths.

use std::path::{Path, PathBuf};
use std::sync::Arc;
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::mpsc::{self, RecvTimeoutError, Sender};
use std::thread::JoinHandle;
use std::time::Duration;

use notify::{PollWatcher, RecommendedWatcher, RecursiveMode};
use notify_debouncer_full::{
    DebounceEventResult, Debouncer, NoCache, RecommendedCache, new_debouncer, new_debouncer_opt,
};

use super::WatchError;
use super::job::Done;

/// Everything the daemon's coordinator reacts to.
#[derive(Debug)]
pub(crate) enum WatchEvent {
    /// These paths were created, changed, renamed or removed (not yet filtered).
    Changed(Vec<PathBuf>),
    /// Time for a full rescan.
    Rescan,
    /// An event source reported a problem; the daemon goes on.
    SourceError(String),
    /// SIGINT or SIGTERM arrived (a second one cuts the grace period short).
    Shutdown,
    /// A worker finished one input.
    Done(Box<Done>),
}

/// The running sources; dropping this stops them all.
pub(crate) struct Sources {
    files: Option<FileEvents>,
    ticker_stop: Option<Sender<()>>,
    ticker: Option<JoinHandle<()>>,
    signals: Option<signal_hook::iterator::Handle>,
    signal_thread: Option<JoinHandle<()>>,
}

impl Drop for Sources {
    fn drop(&mut self) {
        if let Some(handle) = self.signals.take() {
            handle.close();
        }
        // Stopping joins the debouncer's thread, so no event arrives after this.
        match self.files.take() {
            Some(FileEvents::Native(d)) => d.stop(),
            Some(FileEvents::Poll(d)) => d.stop(),
            None => {}
        }
        // Dropping the sender wakes the ticker at once.
        self.ticker_stop.take();
        for thread in [self.ticker.take(), self.signal_thread.take()]
            .into_iter()
            .flatten()
        {
            let _ = thread.join();
        }
    }
}

enum FileEvents {
    Native(Debouncer<RecommendedWatcher, RecommendedCache>),
    Poll(Debouncer<PollWatcher, NoCache>),
}

/// What the sources need to know.
pub(crate) struct SourceConfig<'a> {
    pub(crate) dir: &'a Path,
    pub(crate) recursive: bool,
    pub(crate) poll: Option<Duration>,
    pub(crate) settle: Duration,
    pub(crate) rescan: Duration,
    /// Install SIGINT/SIGTERM handlers that set `stop` and send [`WatchEvent::Shutdown`].
    pub(crate) signals: bool,
}

/// Starts all sources, sending into `tx`.
pub(crate) fn start(
    config: &SourceConfig<'_>,
    tx: &Sender<WatchEvent>,
    stop: &Arc<AtomicBool>,
) -> Result<Sources, WatchError> {
    // Signals first, so that a Ctrl-C while a large tree is being registered with inotify
    // is already ours.
    let (signals, signal_thread) = if config.signals {
        let (handle, thread) = start_signals(tx.clone(), stop.clone())?;
        (Some(handle), Some(thread))
    } else {
        (None, None)
    };
    let files = start_file_events(config, tx.clone())?;
    let (ticker_stop, ticker) = start_ticker(config.rescan, tx.clone())?;
    Ok(Sources {
        files: Some(files),
        ticker_stop: Some(ticker_stop),
        ticker: Some(ticker),
        signals,
        signal_thread,
    })
}

fn start_file_events(
    config: &SourceConfig<'_>,
    tx: Sender<WatchEvent>,
) -> Result<FileEvents, WatchError> {
    let dir = config.dir;
    // The debouncer only merges bursts of events; whether a file has finished being written
    // is decided by the settle check afterwards.
    let timeout = (config.settle / 2).clamp(Duration::from_millis(50), Duration::from_millis(500));
    let mode = if config.recursive {
        RecursiveMode::Recursive
    } else {
        RecursiveMode::NonRecursive
    };
    let handler = move |result: DebounceEventResult| {
        let event = match result {
            Ok(events) => {
                let paths: Vec<PathBuf> = events.into_iter().flat_map(|e| e.event.paths).collect();
                if paths.is_empty() {
                    return;
                }
                WatchEvent::Changed(paths)
            }
            Err(errors) => WatchEvent::SourceError(
                errors
                    .iter()
                    .map(runtime_error_text)
                    .collect::<Vec<_>>()
                    .join("; "),
            ),
        };
        let _ = tx.send(event);
    };
    let setup = |e: notify::Error| setup_error(dir, e);
    match config.poll {
        None => {
            let mut debouncer = new_debouncer(timeout, None, handler).map_err(setup)?;
            debouncer.watch(dir, mode).map_err(setup)?;
            Ok(FileEvents::Native(debouncer))
        }
        Some(interval) => {
            let notify_config = notify::Config::default().with_poll_interval(interval);
            let mut debouncer = new_debouncer_opt::<_, PollWatcher, NoCache>(
                timeout,
                None,
                handler,
                NoCache,
                notify_config,
            )
            .map_err(setup)?;
            debouncer.watch(dir, mode).map_err(setup)?;
            Ok(FileEvents::Poll(debouncer))
        }
    }
}

/// Whether `e` is the kernel refusing another watch (inotify watches or instances used up).
fn is_watch_limit(e: &notify::Error) -> bool {
    const ENOSPC: i32 = 28; // inotify_add_watch: max_user_watches reached
    const EMFILE: i32 = 24; // inotify_init: max_user_instances reached
    match &e.kind {
        notify::ErrorKind::MaxFilesWatch => true,
        notify::ErrorKind::Io(io) => matches!(io.raw_os_error(), Some(ENOSPC | EMFILE)),
        _ => false,
    }
}

fn setup_error(dir: &Path, e: notify::Error) -> WatchError {
    if is_watch_limit(&e) {
        WatchError::WatchLimit {
            dir: dir.to_path_buf(),
        }
    } else {
        WatchError::Notify {
            dir: dir.to_path_buf(),
            message: e.to_string(),
        }
    }
}

fn runtime_error_text(e: &notify::Error) -> String {
    if is_watch_limit(e) {
        "the system's limit on watched folders was reached, so new sub-folders are not \
         watched (the rescan still finds their files); raise fs.inotify.max_user_watches \
         or use --poll SECS"
            .to_string()
    } else {
        e.to_string()
    }
}

fn start_ticker(
    every: Duration,
    tx: Sender<WatchEvent>,
) -> Result<(Sender<()>, JoinHandle<()>), WatchError> {
    let (stop_tx, stop_rx) = mpsc::channel::<()>();
    let every = every.max(Duration::from_millis(10));
    let thread = std::thread::Builder::new()
        .name("watch-rescan".into())
        .spawn(move || {
            while let Err(RecvTimeoutError::Timeout) = stop_rx.recv_timeout(every) {
                if tx.send(WatchEvent::Rescan).is_err() {
                    break;
                }
            }
        })
        .map_err(WatchError::Thread)?;
    Ok((stop_tx, thread))
}

fn start_signals(
    tx: Sender<WatchEvent>,
    stop: Arc<AtomicBool>,
) -> Result<(signal_hook::iterator::Handle, JoinHandle<()>), WatchError> {
    use signal_hook::consts::{SIGINT, SIGTERM};
    let mut signals =
        signal_hook::iterator::Signals::new([SIGINT, SIGTERM]).map_err(WatchError::Signals)?;
    let handle = signals.handle();
    let thread = std::thread::Builder::new()
        .name("watch-signals".into())
        .spawn(move || {
            for signal in signals.forever() {
                tracing::info!(signal, "shutdown requested");
                // The flag lets the coordinator see it between queued events; the event wakes
                // it when idle.
                stop.store(true, Ordering::SeqCst);
                if tx.send(WatchEvent::Shutdown).is_err() {
                    break;
                }
            }
        })
        .map_err(WatchError::Thread)?;
    Ok((handle, thread))
}
