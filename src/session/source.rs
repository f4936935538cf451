//! The three sources behind a session: a real port (the link's reader thread), the virtual probe
//! in process, and a recording replayed at real time × speed. Each sends [`Event`]s; the session
//! reads them through one receiver.

use std::path::PathBuf;
use std::sync::Arc;
use std::sync::atomic::{AtomicBool, AtomicU64, Ordering};
use std::thread::JoinHandle;
use std::time::{Duration, Instant};

use tokio::sync::mpsc::{self, error::TryRecvError};

use super::event::Event;
use crate::link::{Link, LinkEvent, host_ns_now};
use crate::record::format::ChunkKind;
use crate::record::{LinkNote, Recording, RecordingError};
use crate::sim::{BenchModel, SimProbe};

/// Events queued between a source thread and the session (back-pressure beyond).
pub(super) const QUEUE: usize = 1024;

/// How the virtual probe is paced.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Pace {
    /// Simulated time follows the wall clock.
    RealTime,
    /// As fast as the consumer takes it; host times follow simulated time.
    Fast,
}

/// The virtual probe run in process.
#[derive(Clone, Debug)]
pub struct SimSpec {
    /// The bench it simulates.
    pub model: BenchModel,
    /// LOG lines it sends after HELLO.
    pub notes: Vec<String>,
    /// Pacing.
    pub pace: Pace,
    /// Simulated time after which it ends (with [`Event::End`]); None: until stopped.
    pub duration_ns: Option<f64>,
}

/// Replay controls shared with the replay thread.
#[derive(Debug)]
pub struct ReplayControl {
    paused: AtomicBool,
    speed_bits: AtomicU64,
    skip_to_mark: AtomicBool,
}

impl ReplayControl {
    fn new(speed: f64) -> ReplayControl {
        ReplayControl {
            paused: AtomicBool::new(false),
            speed_bits: AtomicU64::new(speed.to_bits()),
            skip_to_mark: AtomicBool::new(false),
        }
    }

    /// Pause or resume; returns whether it is now paused.
    pub fn toggle_pause(&self) -> bool {
        !self.paused.fetch_xor(true, Ordering::Relaxed)
    }

    /// Multiply the speed by `factor` (kept within 1/64 … 1024); returns the new speed.
    pub fn scale_speed(&self, factor: f64) -> f64 {
        let s = f64::from_bits(self.speed_bits.load(Ordering::Relaxed));
        let n = (s * factor).clamp(1.0 / 64.0, 1024.0);
        self.speed_bits.store(n.to_bits(), Ordering::Relaxed);
        n
    }

    /// Run without pacing up to the next mark.
    pub fn skip_to_next_mark(&self) {
        self.skip_to_mark.store(true, Ordering::Relaxed);
    }

    fn speed(&self) -> f64 {
        f64::from_bits(self.speed_bits.load(Ordering::Relaxed)).max(1e-3)
    }
}

/// A running source: the link, or a thread of ours.
pub(super) enum Feeder {
    Link(Link),
    Thread {
        rx: mpsc::Receiver<Event>,
        stop: Arc<AtomicBool>,
        thread: Option<JoinHandle<()>>,
    },
}

impl Feeder {
    /// The next event (None when the source has ended and everything was taken).
    pub(super) async fn recv(&mut self) -> Option<Event> {
        match self {
            Feeder::Link(l) => l.events.recv().await.map(Event::from),
            Feeder::Thread { rx, .. } => rx.recv().await,
        }
    }

    pub(super) fn try_recv(&mut self) -> Result<Event, TryRecvError> {
        match self {
            Feeder::Link(l) => l.events.try_recv().map(Event::from),
            Feeder::Thread { rx, .. } => rx.try_recv(),
        }
    }

    fn thread(body: impl FnOnce(mpsc::Sender<Event>, Arc<AtomicBool>) + Send + 'static) -> Feeder {
        let (tx, rx) = mpsc::channel(QUEUE);
        let stop = Arc::new(AtomicBool::new(false));
        let s2 = stop.clone();
        let thread = std::thread::spawn(move || body(tx, s2));
        Feeder::Thread {
            rx,
            stop,
            thread: Some(thread),
        }
    }

    /// The virtual probe on a thread; `t0_ns` is the host time simulated time 0 maps to (fast).
    pub(super) fn sim(spec: SimSpec, t0_ns: u64) -> Feeder {
        Feeder::thread(move |tx, stop| run_sim(spec, t0_ns, &tx, &stop))
    }

    /// A recording replayed on a thread, with its controls.
    pub(super) fn replay(
        path: &std::path::Path,
        speed: f64,
    ) -> Result<(Feeder, Arc<ReplayControl>), RecordingError> {
        let rec = Recording::open(path)?;
        let ctl = Arc::new(ReplayControl::new(speed));
        let c2 = ctl.clone();
        let feeder = Feeder::thread(move |tx, stop| run_replay(rec, &c2, &tx, &stop));
        Ok((feeder, ctl))
    }
}

impl Drop for Feeder {
    fn drop(&mut self) {
        if let Feeder::Thread { rx, stop, thread } = self {
            stop.store(true, Ordering::Relaxed);
            rx.close();
            while rx.try_recv().is_ok() {}
            if let Some(t) = thread.take() {
                let _ = t.join();
            }
        }
        // a Link stops its reader thread when dropped
    }
}

impl From<LinkEvent> for Event {
    fn from(e: LinkEvent) -> Event {
        match e {
            LinkEvent::Connecting { attempt } => Event::Connecting { attempt },
            LinkEvent::Connected { probe, reconnects } => Event::Connected { probe, reconnects },
            LinkEvent::Data { host_ns, bytes } => Event::Data { host_ns, bytes },
            LinkEvent::Refused { what, reason } => Event::Refused { what, reason },
            LinkEvent::Lost { reason } => Event::Lost { reason },
            LinkEvent::Retrying { retry_in, reason } => Event::Retrying { retry_in, reason },
            LinkEvent::Failed(e) => Event::Failed(e.into()),
        }
    }
}

fn run_sim(spec: SimSpec, t0_ns: u64, tx: &mpsc::Sender<Event>, stop: &AtomicBool) {
    let mut p = SimProbe::new(spec.model, spec.notes);
    p.start();
    let started = Instant::now();
    let end_ns = spec.duration_ns.unwrap_or(f64::INFINITY);
    while !stop.load(Ordering::Relaxed) {
        let target = match spec.pace {
            Pace::Fast => p.now_ns() + 10e6,
            Pace::RealTime => started.elapsed().as_nanos() as f64,
        };
        p.run_until(target.min(end_ns));
        let done = p.now_ns() >= end_ns;
        if done {
            p.flush_all();
        }
        let bytes = std::mem::take(p.output());
        if !bytes.is_empty() {
            let host_ns = match spec.pace {
                Pace::Fast => t0_ns + p.now_ns() as u64,
                Pace::RealTime => host_ns_now(),
            };
            if tx.blocking_send(Event::Data { host_ns, bytes }).is_err() {
                return;
            }
        }
        if done {
            let _ = tx.blocking_send(Event::End);
            return;
        }
        if spec.pace == Pace::RealTime {
            std::thread::sleep(Duration::from_millis(5));
        }
    }
}

fn run_replay(
    mut rec: Recording,
    ctl: &ReplayControl,
    tx: &mpsc::Sender<Event>,
    stop: &AtomicBool,
) {
    let t0 = rec.parsed.header.start_unix_ns;
    let mut clock = Instant::now();
    let mut media_ns = 0u64;
    let reader = rec.chunk_reader();
    while let Ok(Some(c)) = reader.next_chunk() {
        if stop.load(Ordering::Relaxed) {
            return;
        }
        while ctl.paused.load(Ordering::Relaxed) && !stop.load(Ordering::Relaxed) {
            std::thread::sleep(Duration::from_millis(20));
            clock = Instant::now();
        }
        let at = c.host_ns.saturating_sub(t0);
        if !ctl.skip_to_mark.load(Ordering::Relaxed) {
            // pace: media time advances at speed × wall time
            let ahead = at.saturating_sub(media_ns) as f64 / ctl.speed();
            if ahead > 0.0 {
                std::thread::sleep(
                    Duration::from_nanos(ahead.min(1e9) as u64).saturating_sub(clock.elapsed()),
                );
            }
            clock = Instant::now();
        }
        media_ns = at;
        let at_s = at as f64 * 1e-9;
        let ev = match c.kind {
            ChunkKind::Data => Some(Event::Data {
                host_ns: c.host_ns,
                bytes: c.payload,
            }),
            ChunkKind::Mark => {
                ctl.skip_to_mark.store(false, Ordering::Relaxed);
                Some(Event::Mark {
                    at_s,
                    text: String::from_utf8_lossy(&c.payload).into_owned(),
                })
            }
            ChunkKind::Link => {
                LinkNote::parse(&c.payload).map(|note| Event::Recorded { at_s, note })
            }
        };
        if ev.is_some_and(|e| tx.blocking_send(e).is_err())
            || tx.blocking_send(Event::Position { at_s }).is_err()
        {
            return;
        }
    }
    let _ = tx.blocking_send(Event::End);
}

/// Where a session's data comes from.
#[derive(Debug)]
pub enum SourceSpec {
    /// A probe on a serial port.
    Port(crate::link::LinkConfig),
    /// The virtual probe, in process (boxed: its bench model is large).
    Sim(Box<SimSpec>),
    /// A recording, paced at real time × speed.
    Replay {
        /// The file.
        path: PathBuf,
        /// Speed factor.
        speed: f64,
    },
}
