//! Replay: a recording's bytes through the same decoder and engine as live data, as fast as
//! possible or paced at real time × speed, with the marks and link events where they were.

use std::fs::File;
use std::io::BufReader;
use std::path::Path;
use std::time::{Duration, Instant};

use serde::Serialize;

use super::format::{ChunkKind, ChunkReader, Damage, Parsed, RecordingError, parse_header};
use super::note::{Continuity, LinkNote};

/// What a replay feeds: the measurement engine's byte feed implements it (in `report`), so
/// this module needs no knowledge of the engine.
pub trait ReplaySink {
    /// Probe bytes as recorded.
    fn data(&mut self, bytes: &[u8]);
    /// The link came back (a recorded reconnection).
    fn reconnect(&mut self);
    /// The recording joined a running stream: restart sequence tracking, count nothing.
    fn joined(&mut self);
    /// Forget the statistics so far (the start of `--from`).
    fn reset(&mut self);
    /// Probe time reached, s (to place marks).
    fn probe_time_s(&self) -> f64;
}

/// A recording opened for reading.
pub struct Recording {
    /// File as given.
    pub path: String,
    /// Header and version.
    pub parsed: Parsed,
    /// File length.
    pub len: u64,
    reader: ChunkReader<BufReader<File>>,
}

/// A mark as replayed.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct MarkAt {
    /// Seconds since the recording started (host time).
    pub at_s: f64,
    /// Probe time when it was made, s.
    pub probe_s: f64,
    /// Text.
    pub text: String,
}

/// A link event as replayed.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct LinkAt {
    /// Seconds since the recording started (host time).
    pub at_s: f64,
    /// The event (JSON as written).
    pub event: serde_json::Value,
}

/// What a replay went through.
#[derive(Clone, Debug, Default, PartialEq, Serialize)]
pub struct ReplaySummary {
    /// Chunks read.
    pub chunks: u64,
    /// Probe bytes fed.
    pub data_bytes: u64,
    /// Host time covered, s.
    pub duration_s: f64,
    /// Marks.
    pub marks: Vec<MarkAt>,
    /// Link events.
    pub links: Vec<LinkAt>,
    /// Damage found.
    pub damage: Vec<Damage>,
    /// Host time of the first chunk taken after `from_s` (None: no `from_s`, or none came), s.
    pub from_at_s: Option<f64>,
    /// The replay stopped at `to_s`: the recording goes on past it.
    pub stopped_at_to: bool,
}

/// How to replay.
#[derive(Clone, Copy, Debug, Default)]
pub struct ReplayOptions {
    /// Start the statistics this many seconds into the recording (host time).
    pub from_s: Option<f64>,
    /// Stop this many seconds into the recording.
    pub to_s: Option<f64>,
    /// Pace at real time × speed (None: as fast as possible).
    pub speed: Option<f64>,
}

impl Recording {
    /// Open a recording and check its header.
    pub fn open(path: &Path) -> Result<Recording, RecordingError> {
        let p = path.display().to_string();
        let io_err = |err| RecordingError::Io {
            path: p.clone(),
            err,
        };
        let mut f = File::open(path).map_err(io_err)?;
        let len = f.metadata().map_err(io_err)?.len();
        // the header is at most 16 MiB + 18 bytes: read its length first
        use std::io::{Read, Seek, SeekFrom};
        let mut head = [0u8; 14];
        let n = f.read(&mut head).map_err(io_err)?;
        let hlen = if n == 14 {
            u32::from_le_bytes([head[10], head[11], head[12], head[13]])
                .min(super::format::MAX_PAYLOAD)
        } else {
            0
        };
        let mut start = vec![0u8; (14 + hlen as usize + 4).min(len as usize)];
        f.seek(SeekFrom::Start(0)).map_err(io_err)?;
        f.read_exact(&mut start).map_err(io_err)?;
        let parsed = parse_header(&p, &start)?;
        f.seek(SeekFrom::Start(parsed.data_offset))
            .map_err(io_err)?;
        let reader = ChunkReader::new(BufReader::with_capacity(1 << 20, f), parsed.data_offset);
        Ok(Recording {
            path: p,
            parsed,
            len,
            reader,
        })
    }

    /// The chunk reader (positioned after the header until read).
    pub fn chunk_reader(&mut self) -> &mut ChunkReader<BufReader<File>> {
        &mut self.reader
    }

    /// Feed every chunk into `feed`; `progress(bytes_read)` is called as it goes.
    pub fn replay(
        &mut self,
        feed: &mut impl ReplaySink,
        opts: ReplayOptions,
        mut progress: impl FnMut(u64),
    ) -> Result<ReplaySummary, RecordingError> {
        let t0 = self.parsed.header.start_unix_ns;
        let started = Instant::now();
        let mut s = ReplaySummary::default();
        let mut reset_done = opts.from_s.is_none();
        let mut first_data_ns = None;
        loop {
            let chunk = self.reader.next_chunk().map_err(|err| RecordingError::Io {
                path: self.path.clone(),
                err,
            })?;
            let Some(c) = chunk else { break };
            s.chunks += 1;
            let at_s = c.host_ns.saturating_sub(t0) as f64 * 1e-9;
            if opts.to_s.is_some_and(|to| at_s > to) {
                s.stopped_at_to = true;
                break;
            }
            if !reset_done && opts.from_s.is_some_and(|from| at_s >= from) {
                feed.reset();
                reset_done = true;
                s.from_at_s = Some(at_s);
            }
            if let Some(speed) = opts.speed {
                let first = *first_data_ns.get_or_insert(c.host_ns);
                let due = Duration::from_secs_f64(
                    c.host_ns.saturating_sub(first) as f64 * 1e-9 / speed.max(1e-6),
                );
                if let Some(wait) = due.checked_sub(started.elapsed()) {
                    std::thread::sleep(wait);
                }
            }
            s.duration_s = s.duration_s.max(at_s);
            match c.kind {
                ChunkKind::Data => {
                    s.data_bytes += c.payload.len() as u64;
                    feed.data(&c.payload);
                }
                ChunkKind::Mark => {
                    let probe_s = feed.probe_time_s();
                    s.marks.push(MarkAt {
                        at_s,
                        probe_s,
                        text: String::from_utf8_lossy(&c.payload).into_owned(),
                    });
                }
                ChunkKind::Link => {
                    let event: serde_json::Value =
                        serde_json::from_slice(&c.payload).unwrap_or(serde_json::Value::Null);
                    match LinkNote::parse(&c.payload).map(|n| n.continuity()) {
                        Some(Continuity::Reconnected) => feed.reconnect(),
                        Some(Continuity::Joined) => feed.joined(),
                        Some(Continuity::Unbroken) | None => {}
                    }
                    s.links.push(LinkAt { at_s, event });
                }
            }
            progress(c.offset + c.payload.len() as u64);
        }
        s.damage = self.reader.take_damage();
        Ok(s)
    }
}
