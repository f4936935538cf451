//! The recorder: a thread that appends chunks to the file, off the link's path.
//!
//! Calls never block: items go into a queue; past a byte cap they are dropped, counted, and the
//! loss is written into the file as a link event when the writer catches up. The file is flushed
//! at least once a second, so a killed process loses at most the last second. A write that
//! fails ends the thread and shows at once in [`Recorder::failure`], not only at `finish`.

use std::fs::File;
use std::io::{self, BufWriter, Write};
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicU64, Ordering};
use std::sync::mpsc;
use std::sync::{Arc, OnceLock};
use std::time::{Duration, Instant};

use super::format::{ChunkKind, Header, RecordingError, encode_chunk, encode_header};
use super::note::LinkNote;

/// Queue cap before items are dropped (and the drop reported).
pub const BACKLOG_CAP: u64 = 64 << 20;
/// Data arriving within this of a chunk's first byte shares the chunk.
const MERGE_NS: u64 = 10_000_000;
/// Largest data chunk the writer builds.
const MAX_CHUNK: usize = 256 << 10;

enum Item {
    Data(u64, Vec<u8>),
    Mark(u64, String),
    Link(u64, String),
}

/// Live counters of the recorder.
#[derive(Debug, Default)]
pub struct RecStats {
    /// Bytes written to the file (header and chunks).
    pub file_bytes: AtomicU64,
    /// Probe bytes recorded.
    pub data_bytes: AtomicU64,
    /// Chunks written.
    pub chunks: AtomicU64,
    /// Bytes waiting in the queue.
    pub backlog: AtomicU64,
    /// Probe bytes dropped because the queue was full.
    pub dropped: AtomicU64,
    /// Marks written.
    pub marks: AtomicU64,
    /// Why the writer thread stopped, when a write failed.
    failure: OnceLock<(io::ErrorKind, String)>,
}

/// A copy of the counters.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct RecCounts {
    /// Bytes in the file.
    pub file_bytes: u64,
    /// Probe bytes recorded.
    pub data_bytes: u64,
    /// Chunks.
    pub chunks: u64,
    /// Queue backlog, bytes.
    pub backlog: u64,
    /// Dropped probe bytes.
    pub dropped: u64,
    /// Marks.
    pub marks: u64,
}

impl RecStats {
    fn counts(&self) -> RecCounts {
        RecCounts {
            file_bytes: self.file_bytes.load(Ordering::Relaxed),
            data_bytes: self.data_bytes.load(Ordering::Relaxed),
            chunks: self.chunks.load(Ordering::Relaxed),
            backlog: self.backlog.load(Ordering::Relaxed),
            dropped: self.dropped.load(Ordering::Relaxed),
            marks: self.marks.load(Ordering::Relaxed),
        }
    }
}

/// An open recording being written.
pub struct Recorder {
    tx: Option<mpsc::Sender<Item>>,
    stats: Arc<RecStats>,
    thread: Option<std::thread::JoinHandle<io::Result<()>>>,
    /// The file.
    pub path: PathBuf,
}

impl Recorder {
    /// Create the file (refusing to overwrite an existing one) and start the writer thread.
    pub fn create(path: &Path, header: &Header) -> Result<Recorder, RecordingError> {
        let io_err = |err| RecordingError::Write {
            path: path.display().to_string(),
            err,
        };
        let file = File::options()
            .write(true)
            .create_new(true)
            .open(path)
            .map_err(|err| {
                if err.kind() == std::io::ErrorKind::AlreadyExists {
                    RecordingError::Exists {
                        path: path.display().to_string(),
                    }
                } else {
                    io_err(err)
                }
            })?;
        let mut w = BufWriter::with_capacity(1 << 20, file);
        let head = encode_header(header);
        w.write_all(&head).map_err(io_err)?;
        w.flush().map_err(io_err)?;
        let stats = Arc::new(RecStats::default());
        stats.file_bytes.store(head.len() as u64, Ordering::Relaxed);
        let (tx, rx) = mpsc::channel();
        let s2 = stats.clone();
        let thread = std::thread::Builder::new()
            .name("recorder".into())
            .spawn(move || {
                let r = write_loop(w, rx, &s2);
                if let Err(e) = &r {
                    let _ = s2.failure.set((e.kind(), e.to_string()));
                }
                r
            })
            .map_err(io_err)?;
        Ok(Recorder {
            tx: Some(tx),
            stats,
            thread: Some(thread),
            path: path.to_path_buf(),
        })
    }

    fn send(&self, item: Item, bytes: u64) {
        let backlog = self.stats.backlog.load(Ordering::Relaxed);
        if backlog + bytes > BACKLOG_CAP {
            self.stats.dropped.fetch_add(bytes, Ordering::Relaxed);
            return;
        }
        self.stats.backlog.fetch_add(bytes, Ordering::Relaxed);
        if let Some(tx) = &self.tx
            && tx.send(item).is_err()
        {
            self.stats.dropped.fetch_add(bytes, Ordering::Relaxed);
        }
    }

    /// Bytes as received at `host_ns` (never blocks).
    pub fn data(&self, host_ns: u64, bytes: Vec<u8>) {
        let n = bytes.len() as u64;
        self.send(Item::Data(host_ns, bytes), n);
    }

    /// A user mark.
    pub fn mark(&self, host_ns: u64, text: &str) {
        self.send(Item::Mark(host_ns, text.to_string()), text.len() as u64);
    }

    /// A link event.
    pub fn link(&self, host_ns: u64, note: &LinkNote) {
        let json = note.to_json();
        let n = json.len() as u64;
        self.send(Item::Link(host_ns, json), n);
    }

    /// Current counters.
    pub fn counts(&self) -> RecCounts {
        self.stats.counts()
    }

    /// The write that failed, as soon as the writer thread has stopped on it (nothing more
    /// reaches the file after that).
    pub fn failure(&self) -> Option<RecordingError> {
        self.stats
            .failure
            .get()
            .map(|(kind, msg)| self.write_error(*kind, msg))
    }

    fn write_error(&self, kind: io::ErrorKind, msg: &str) -> RecordingError {
        RecordingError::Write {
            path: self.path.display().to_string(),
            err: io::Error::new(kind, msg.to_string()),
        }
    }

    /// Write everything queued, close the file, return the final counters.
    pub fn finish(mut self) -> Result<RecCounts, RecordingError> {
        self.tx.take();
        if let Some(t) = self.thread.take() {
            match t.join() {
                Ok(Ok(())) => {}
                Ok(Err(e)) => return Err(self.write_error(e.kind(), &e.to_string())),
                Err(_) => {
                    return Err(self.write_error(io::ErrorKind::Other, "recorder thread panicked"));
                }
            }
        }
        Ok(self.stats.counts())
    }
}

impl Drop for Recorder {
    fn drop(&mut self) {
        self.tx.take();
        if let Some(t) = self.thread.take() {
            let _ = t.join();
        }
    }
}

fn write_loop(
    mut w: BufWriter<File>,
    rx: mpsc::Receiver<Item>,
    stats: &RecStats,
) -> io::Result<()> {
    let mut pending: Option<(u64, Vec<u8>)> = None;
    let mut buf = Vec::with_capacity(MAX_CHUNK + 64);
    let mut last_flush = Instant::now();
    let mut dirty = false;
    let mut reported_drop = 0u64;
    let mut last_t = 0u64;
    let emit =
        |w: &mut BufWriter<File>, buf: &mut Vec<u8>, kind, t, payload: &[u8]| -> io::Result<()> {
            buf.clear();
            encode_chunk(kind, t, payload, buf);
            w.write_all(buf)?;
            stats
                .file_bytes
                .fetch_add(buf.len() as u64, Ordering::Relaxed);
            stats.chunks.fetch_add(1, Ordering::Relaxed);
            Ok(())
        };
    loop {
        let item = match rx.recv_timeout(Duration::from_millis(200)) {
            Ok(i) => Some(i),
            Err(mpsc::RecvTimeoutError::Timeout) => None,
            Err(mpsc::RecvTimeoutError::Disconnected) => break,
        };
        if item.is_some() {
            dirty = true;
        }
        match item {
            Some(Item::Data(t, bytes)) => {
                last_t = t;
                stats
                    .backlog
                    .fetch_sub(bytes.len() as u64, Ordering::Relaxed);
                stats
                    .data_bytes
                    .fetch_add(bytes.len() as u64, Ordering::Relaxed);
                match &mut pending {
                    Some((t0, p))
                        if t.saturating_sub(*t0) < MERGE_NS
                            && p.len() + bytes.len() <= MAX_CHUNK =>
                    {
                        p.extend_from_slice(&bytes)
                    }
                    _ => {
                        if let Some((t0, p)) = pending.take() {
                            emit(&mut w, &mut buf, ChunkKind::Data, t0, &p)?;
                        }
                        pending = Some((t, bytes));
                    }
                }
            }
            Some(Item::Mark(t, text)) => {
                stats
                    .backlog
                    .fetch_sub(text.len() as u64, Ordering::Relaxed);
                if let Some((t0, p)) = pending.take() {
                    emit(&mut w, &mut buf, ChunkKind::Data, t0, &p)?;
                }
                emit(&mut w, &mut buf, ChunkKind::Mark, t, text.as_bytes())?;
                stats.marks.fetch_add(1, Ordering::Relaxed);
            }
            Some(Item::Link(t, json)) => {
                stats
                    .backlog
                    .fetch_sub(json.len() as u64, Ordering::Relaxed);
                if let Some((t0, p)) = pending.take() {
                    emit(&mut w, &mut buf, ChunkKind::Data, t0, &p)?;
                }
                emit(&mut w, &mut buf, ChunkKind::Link, t, json.as_bytes())?;
            }
            None => {}
        }
        let dropped = stats.dropped.load(Ordering::Relaxed);
        if dropped > reported_drop {
            if let Some((t0, p)) = pending.take() {
                emit(&mut w, &mut buf, ChunkKind::Data, t0, &p)?;
            }
            let json = LinkNote::RecorderOverflow {
                dropped_bytes: dropped - reported_drop,
            }
            .to_json();
            emit(&mut w, &mut buf, ChunkKind::Link, last_t, json.as_bytes())?;
            reported_drop = dropped;
        }
        if dirty && last_flush.elapsed() >= Duration::from_millis(500) {
            if let Some((t0, p)) = pending.take() {
                emit(&mut w, &mut buf, ChunkKind::Data, t0, &p)?;
            }
            w.flush()?;
            last_flush = Instant::now();
            dirty = false;
        }
    }
    if let Some((t0, p)) = pending.take() {
        emit(&mut w, &mut buf, ChunkKind::Data, t0, &p)?;
    }
    w.flush()?;
    w.get_ref().sync_data()?;
    Ok(())
}
