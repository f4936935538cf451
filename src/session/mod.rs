//! A bench session: one source (a probe on a port, the virtual probe in process, or a replayed
//! recording) turned into one stream of [`Event`]s, with the measurement engine fed, the probe's
//! last self-description kept, and recordings written as the data passes. `listen`, `record` and
//! the live view all run on it.

mod event;
mod recording;
mod source;

use std::collections::VecDeque;
use std::path::{Path, PathBuf};
use std::sync::Arc;
use std::time::{Duration, Instant};

use firmware_protocol::{Counters, MAX_WIRE, Message, StreamDecoder, encode_frame, types};
use tokio::sync::mpsc::error::TryRecvError;

use crate::link::{Link, check_present, host_ns_now};
use crate::measure::{Engine, EngineConfig, Feed};
use crate::probe::ProbeDesc;
use crate::record::{Continuity, EmbeddedDesign, Header, LinkNote, RecCounts, RecordingError};
pub use event::{Event, SessionError};
use recording::Active;
use source::Feeder;
pub use source::{Pace, ReplayControl, SimSpec, SourceSpec};

/// What waiting for an event gave.
#[derive(Debug)]
pub enum Next {
    /// An event.
    Event(Event),
    /// Nothing within the wait.
    Idle,
    /// The source has ended and every event was taken.
    Ended,
}

/// Counts of what arrived, by message.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct Tally {
    /// Bytes received.
    pub bytes: u64,
    /// Clock edges.
    pub edges: u64,
    /// Line events.
    pub line_events: u64,
    /// Analog samples.
    pub samples: u64,
}

/// Where a session's data comes from, for display.
#[derive(Clone, Debug, PartialEq)]
pub enum Origin {
    /// A port (its path).
    Port(String),
    /// The virtual probe.
    Sim,
    /// A recording.
    Replay {
        /// The file.
        file: String,
        /// Initial speed.
        speed: f64,
    },
}

/// A running session.
pub struct Session {
    feeder: Feeder,
    origin: Origin,
    replay: Option<Arc<ReplayControl>>,
    decoder: StreamDecoder,
    tally: Tally,
    /// Wire bytes of the probe's last HELLO frame.
    hello: Option<Vec<u8>>,
    probe: Option<ProbeDesc>,
    at_boundary: bool,
    feed: Option<Feed>,
    header: Header,
    recording: Option<Active>,
    pending: VecDeque<Event>,
    started: Instant,
    t0_ns: u64,
    last_host_ns: u64,
    fast: bool,
}

/// The header every recording of a session starts with (its start time is set when it starts).
pub fn header(
    source: impl Into<String>,
    notes: Vec<String>,
    design: Option<EmbeddedDesign>,
    sim: Option<serde_json::Value>,
) -> Header {
    Header {
        tool: concat!("slackmeter ", env!("CARGO_PKG_VERSION")).into(),
        host: std::fs::read_to_string("/etc/hostname")
            .map(|s| s.trim().to_string())
            .unwrap_or_else(|_| "unknown".into()),
        start_unix_ns: 0,
        source: source.into(),
        notes,
        design,
        sim,
    }
}

impl Session {
    /// Start `source`; recordings get `header`; `engine` runs the measurement engine on the data.
    /// A port path with no device is refused at once.
    pub fn start(
        source: SourceSpec,
        header: Header,
        engine: Option<EngineConfig>,
    ) -> Result<Session, SessionError> {
        let t0_ns = host_ns_now();
        let mut fast = false;
        let mut replay = None;
        let (feeder, origin) = match source {
            SourceSpec::Port(cfg) => {
                check_present(&cfg.path)?;
                let what = cfg.path.display().to_string();
                (
                    Feeder::Link(Link::start(cfg, source::QUEUE)),
                    Origin::Port(what),
                )
            }
            SourceSpec::Sim(spec) => {
                fast = spec.pace == Pace::Fast;
                (Feeder::sim(*spec, t0_ns), Origin::Sim)
            }
            SourceSpec::Replay { path, speed } => {
                let (f, ctl) = Feeder::replay(&path, speed)?;
                replay = Some(ctl);
                let file = path.display().to_string();
                (f, Origin::Replay { file, speed })
            }
        };
        Ok(Session {
            feeder,
            origin,
            replay,
            decoder: StreamDecoder::new(),
            tally: Tally::default(),
            hello: None,
            probe: None,
            at_boundary: true,
            feed: engine.map(Feed::new),
            header,
            recording: None,
            pending: VecDeque::new(),
            started: Instant::now(),
            t0_ns,
            last_host_ns: t0_ns,
            fast,
        })
    }

    /// The next event (None once the source has ended and every event was taken).
    /// Cancel-safe: it waits only on the source's queue.
    pub async fn next(&mut self) -> Option<Event> {
        loop {
            if let Some(e) = self.take_pending() {
                return Some(e);
            }
            let e = self.feeder.recv().await?;
            self.handle(e);
            // a stream faster than the engine keeps the channel full: give a caller's other
            // branches (redraw, keys) their turn between events instead of never returning
            tokio::task::yield_now().await;
        }
    }

    /// The next event, waiting at most `wait` (for loops without a runtime).
    pub fn next_within(&mut self, wait: Duration) -> Next {
        let until = Instant::now() + wait;
        loop {
            if let Some(e) = self.take_pending() {
                return Next::Event(e);
            }
            match self.feeder.try_recv() {
                Ok(e) => self.handle(e),
                Err(TryRecvError::Disconnected) => return Next::Ended,
                Err(TryRecvError::Empty) => {
                    if Instant::now() >= until {
                        return Next::Idle;
                    }
                    std::thread::sleep(Duration::from_millis(2));
                }
            }
        }
    }

    fn take_pending(&mut self) -> Option<Event> {
        if let Some(e) = self.recording.as_ref().and_then(Active::failure) {
            self.recording = None;
            self.pending.push_back(Event::RecordingFailed(e));
        }
        self.pending.pop_front()
    }

    fn handle(&mut self, ev: Event) {
        let mut described = None;
        match &ev {
            Event::Data { host_ns, bytes } => described = self.on_data(*host_ns, bytes),
            Event::Connected { probe, reconnects } => {
                if *reconnects > 0 {
                    self.restart(Continuity::Reconnected);
                }
                self.probe = Some(probe.clone());
                self.note(LinkNote::Connected {
                    reconnects: *reconnects,
                    firmware: Some(probe.firmware.clone()),
                });
            }
            Event::Lost { reason } => self.note(LinkNote::Lost {
                reason: reason.clone(),
            }),
            Event::Refused { what, reason } => self.note(LinkNote::Refused {
                what: what.clone(),
                reason: reason.clone(),
            }),
            Event::Recorded { note, .. } => self.restart(note.continuity()),
            _ => {}
        }
        self.pending.push_back(ev);
        // the virtual probe has no link: its first self-description is its connection
        if let Some(probe) = described
            && self.origin == Origin::Sim
            && self.probe.is_none()
        {
            self.probe = Some(probe.clone());
            self.pending.push_back(Event::Connected {
                probe,
                reconnects: 0,
            });
        }
    }

    /// Decode for the tally and the HELLO, feed the engine, record; a new HELLO's description.
    fn on_data(&mut self, host_ns: u64, bytes: &[u8]) -> Option<ProbeDesc> {
        self.last_host_ns = host_ns;
        let mut hello = None;
        let t = &mut self.tally;
        t.bytes += bytes.len() as u64;
        self.decoder
            .push(bytes, |f| match (f.header.msg_type, Message::decode(&f)) {
                (types::HELLO, Ok(Message::Hello(h))) => {
                    let mut wire = vec![0u8; MAX_WIRE];
                    if let Ok(n) = encode_frame(f.header.msg_type, f.header.seq, f.body, &mut wire)
                    {
                        wire.truncate(n);
                        hello = Some((wire, ProbeDesc::from_hello(&h)));
                    }
                }
                (_, Ok(Message::Edges(e))) => t.edges += u64::from(e.count),
                (_, Ok(Message::Lines(e))) => t.line_events += u64::from(e.count),
                (_, Ok(Message::Analog(a))) => t.samples += a.count() as u64,
                _ => {}
            });
        if let Some(feed) = &mut self.feed {
            feed.push(bytes);
        }
        if let Some(r) = &mut self.recording {
            r.data(host_ns, bytes);
        }
        if let Some(&last) = bytes.last() {
            self.at_boundary = last == 0;
        }
        hello.map(|(wire, desc)| {
            self.hello = Some(wire);
            desc
        })
    }

    fn restart(&mut self, c: Continuity) {
        match c {
            Continuity::Unbroken => return,
            Continuity::Reconnected => {
                if let Some(f) = &mut self.feed {
                    f.note_reconnect();
                }
            }
            Continuity::Joined => {
                if let Some(f) = &mut self.feed {
                    f.restart_sequence();
                }
            }
        }
        self.decoder.reset_sequence();
    }

    /// Only a real link's events are recorded (the virtual probe has no link).
    fn note(&self, note: LinkNote) {
        if let (Some(r), Origin::Port(_)) = (&self.recording, &self.origin) {
            r.note(host_ns_now(), &note);
        }
    }

    /// Start recording into `path` (never overwritten). In the middle of a session the file
    /// begins with the probe's last self-description and a "joined" event.
    pub fn start_recording(&mut self, path: &Path) -> Result<(), RecordingError> {
        if let Some(old) = self.recording.take() {
            let _ = old.finish();
        }
        let mut h = self.header.clone();
        h.start_unix_ns = self.now_ns();
        let active = Active::start(path, &h, self.hello.as_deref(), self.at_boundary)?;
        self.recording = Some(active);
        Ok(())
    }

    /// Stop recording: the file and its final counters (None when not recording).
    pub fn stop_recording(&mut self) -> Option<Result<(PathBuf, RecCounts), RecordingError>> {
        let r = self.recording.take()?;
        let path = r.status().0.to_path_buf();
        Some(r.finish().map(|c| (path, c)))
    }

    /// The recording under way: its file and counters.
    pub fn recording(&self) -> Option<(&Path, RecCounts)> {
        self.recording.as_ref().map(Active::status)
    }

    /// A user mark, into the recording under way.
    pub fn mark(&self, text: &str) {
        if let Some(r) = &self.recording {
            r.mark(self.now_ns(), text);
        }
    }

    /// The measurement engine (when the session runs one).
    pub fn engine(&self) -> Option<&Engine> {
        self.feed.as_ref().map(|f| &f.engine)
    }

    /// Forget the engine's statistics so far.
    pub fn reset_engine(&mut self) {
        if let Some(f) = &mut self.feed {
            f.engine.reset();
        }
    }

    /// The frame decoder's counters (frames, lost frames, CRC errors …).
    pub fn counters(&self) -> Counters {
        self.decoder.counters
    }

    /// What arrived so far.
    pub fn tally(&self) -> Tally {
        self.tally
    }

    /// The probe's last self-description.
    pub fn probe(&self) -> Option<&ProbeDesc> {
        self.probe.as_ref()
    }

    /// Where the data comes from.
    pub fn origin(&self) -> &Origin {
        &self.origin
    }

    /// The replay's controls (replays only).
    pub fn replay_control(&self) -> Option<&ReplayControl> {
        self.replay.as_deref()
    }

    /// The session's host time, ns since the Unix epoch (simulated for a fast virtual probe).
    pub fn now_ns(&self) -> u64 {
        if self.fast {
            self.last_host_ns
        } else {
            host_ns_now()
        }
    }

    /// Seconds since the start (simulated for a fast virtual probe).
    pub fn elapsed_s(&self) -> f64 {
        if self.fast {
            self.last_host_ns.saturating_sub(self.t0_ns) as f64 * 1e-9
        } else {
            self.started.elapsed().as_secs_f64()
        }
    }
}
