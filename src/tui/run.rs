//! The terminal loop: one task selecting over data (link, virtual probe or replay), terminal
//! input and a redraw tick. The engine is fed as data arrives; figures are taken four times a
//! second; the screen is drawn at most ~30 times a second and only when something changed.

use std::path::PathBuf;
use std::sync::Arc;
use std::sync::atomic::{AtomicBool, AtomicU64, Ordering};
use std::time::{Duration, Instant};

use crossterm::event::{Event, EventStream, KeyEventKind};
use futures_util::StreamExt;
use tokio::sync::mpsc;

use super::keys::action;
use super::state::{App, Effect, Source};
use crate::budget::{Design, Library};
use crate::link::{Link, LinkConfig, LinkEvent, host_ns_now};
use crate::margin::{MarginConfig, evaluate};
use crate::measure::{EngineConfig, Feed, Snapshot};
use crate::record::format::ChunkKind;
use crate::record::{EmbeddedDesign, Header, Recorder, Recording};
use crate::sim::{BenchModel, SimProbe};

/// What arrives from a source.
pub enum Input {
    /// From the link (or the in-process virtual probe, which speaks through the same events).
    Link(LinkEvent),
    /// Replay: a mark in the recording.
    Mark(f64, String),
    /// Replay: position, s.
    Position(f64),
    /// Replay: the end.
    Done,
}

/// Where the data comes from.
pub enum SourceSpec {
    /// A serial port.
    Port(LinkConfig),
    /// The virtual probe, in process, paced at real time.
    Sim(BenchModel, Vec<String>),
    /// A recording.
    Replay(PathBuf, f64),
}

struct ReplayCtl {
    paused: AtomicBool,
    speed_bits: AtomicU64,
    skip_to_mark: AtomicBool,
}

fn spawn_sim(
    model: BenchModel,
    notes: Vec<String>,
    tx: mpsc::Sender<Input>,
    stop: Arc<AtomicBool>,
) {
    std::thread::spawn(move || {
        let mut p = SimProbe::new(model, notes);
        let fw = crate::sim::probe::FIRMWARE_ID.to_string();
        let _ = tx.blocking_send(Input::Link(LinkEvent::Connected {
            probe: crate::probe::ProbeDesc {
                firmware: fw,
                protocol_version: 1,
                tick_num_hz: 1,
                tick_den: 1,
                tick_ns: 1.0,
                timebase_ppm: 0,
                max_edge_rate_khz: 0,
                channels: vec![],
            },
            reconnects: 0,
        }));
        p.start();
        let t0 = Instant::now();
        while !stop.load(Ordering::Relaxed) {
            p.run_until(t0.elapsed().as_nanos() as f64);
            let b = std::mem::take(p.output());
            if !b.is_empty()
                && tx
                    .blocking_send(Input::Link(LinkEvent::Data {
                        host_ns: host_ns_now(),
                        bytes: b,
                    }))
                    .is_err()
            {
                return;
            }
            std::thread::sleep(Duration::from_millis(10));
        }
    });
}

fn spawn_replay(
    path: PathBuf,
    ctl: Arc<ReplayCtl>,
    tx: mpsc::Sender<Input>,
    stop: Arc<AtomicBool>,
) -> Result<(), crate::record::RecordingError> {
    let mut rec = Recording::open(&path)?;
    std::thread::spawn(move || {
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
            let skipping = ctl.skip_to_mark.load(Ordering::Relaxed);
            if !skipping {
                // pace: media time advances at speed × wall time
                let speed = f64::from_bits(ctl.speed_bits.load(Ordering::Relaxed)).max(1e-3);
                let ahead = at.saturating_sub(media_ns) as f64 / speed;
                if ahead > 0.0 {
                    std::thread::sleep(
                        Duration::from_nanos(ahead.min(1e9) as u64).saturating_sub(clock.elapsed()),
                    );
                }
                clock = Instant::now();
            }
            media_ns = at;
            let at_s = at as f64 * 1e-9;
            let msg = match c.kind {
                ChunkKind::Data => Input::Link(LinkEvent::Data {
                    host_ns: c.host_ns,
                    bytes: c.payload,
                }),
                ChunkKind::Mark => {
                    ctl.skip_to_mark.store(false, Ordering::Relaxed);
                    Input::Mark(at_s, String::from_utf8_lossy(&c.payload).into_owned())
                }
                ChunkKind::Link => Input::Position(at_s),
            };
            if tx.blocking_send(msg).is_err() || tx.blocking_send(Input::Position(at_s)).is_err() {
                return;
            }
        }
        let _ = tx.blocking_send(Input::Done);
    });
    Ok(())
}

/// Options of the live view.
pub struct Options {
    /// Where data comes from.
    pub source: SourceSpec,
    /// Design to judge against.
    pub design: Option<Design>,
    /// Record from the start into this file.
    pub record: Option<PathBuf>,
}

fn new_events(app: &mut App, prev: Option<&Snapshot>, s: &Snapshot) {
    let last = |f: &dyn Fn(&Snapshot) -> f64| prev.map_or(f64::NEG_INFINITY, f);
    // glitches come in bursts: one line per update
    let (before, now) = (
        prev.and_then(|p| p.clock()).map_or(0, |c| c.glitches),
        s.clock().map_or(0, |c| c.glitches),
    );
    if now > before {
        let lg = last(&|p| p.glitch_events.last().map_or(f64::NEG_INFINITY, |g| g.at_s));
        let new: Vec<_> = s.glitch_events.iter().filter(|g| g.at_s > lg).collect();
        let shortest = new.iter().map(|g| g.width_ns).fold(f64::INFINITY, f64::min);
        let at = new.last().map_or(s.probe_time_s, |g| g.at_s);
        app.event(
            at,
            format!(
                "{} glitch{} (shortest {})",
                now - before,
                if now - before == 1 { "" } else { "es" },
                if shortest.is_finite() {
                    crate::units::ns(shortest).to_string()
                } else {
                    "—".into()
                }
            ),
        );
    }
    let ls = last(&|p| {
        p.sag_events
            .last()
            .map_or(f64::NEG_INFINITY, |x| x.1.start_s)
    });
    for (rail, sag) in s.sag_events.iter().filter(|x| x.1.start_s > ls) {
        app.event(
            sag.start_s,
            format!(
                "sag on {rail}: −{:.0} mV for {:.0} ms",
                sag.depth_mv, sag.duration_ms
            ),
        );
    }
    for l in s
        .lines
        .iter()
        .filter(|l| l.role != crate::probe::LineRole::Heartbeat)
    {
        let before = prev
            .and_then(|p| p.lines.iter().find(|x| x.channel == l.channel))
            .and_then(|x| x.events.last())
            .map_or(f64::NEG_INFINITY, |e| e.at_s);
        for e in l.events.iter().filter(|e| e.at_s > before) {
            app.event(
                e.at_s,
                format!("{} {}", l.name, if e.high { "high" } else { "low" }),
            );
        }
    }
    if prev.is_none_or(|p| p.fault_onsets.len() < s.fault_onsets.len())
        && let Some(o) = s.fault_onsets.last()
    {
        app.event(
            o.at_s,
            format!(
                "FAILURE ({}) at {}",
                o.cause,
                crate::units::hz(o.frequency_hz)
            ),
        );
    }
}

/// Run the live view until quit.
pub fn run(opts: Options) -> miette::Result<()> {
    let rt = tokio::runtime::Builder::new_current_thread()
        .enable_all()
        .build()
        .map_err(|e| miette::miette!("{e}"))?;
    rt.block_on(run_async(opts))
}

async fn run_async(opts: Options) -> miette::Result<()> {
    let lib = Library::builtin();
    let stop = Arc::new(AtomicBool::new(false));
    let (tx, mut rx) = mpsc::channel::<Input>(1024);
    let ctl = Arc::new(ReplayCtl {
        paused: AtomicBool::new(false),
        speed_bits: AtomicU64::new(1f64.to_bits()),
        skip_to_mark: AtomicBool::new(false),
    });
    let (source, mut _link, source_name) = match opts.source {
        SourceSpec::Port(cfg) => {
            let what = cfg.path.display().to_string();
            let mut link = Link::start(cfg, 1024);
            let tx2 = tx.clone();
            let mut events = std::mem::replace(&mut link.events, mpsc::channel(1).1);
            tokio::spawn(async move {
                while let Some(e) = events.recv().await {
                    if tx2.send(Input::Link(e)).await.is_err() {
                        break;
                    }
                }
            });
            (Source::Connecting { what: what.clone() }, Some(link), what)
        }
        SourceSpec::Sim(model, notes) => {
            spawn_sim(model, notes, tx.clone(), stop.clone());
            (
                Source::Connecting {
                    what: "virtual probe".into(),
                },
                None,
                "virtual probe".to_string(),
            )
        }
        SourceSpec::Replay(path, speed) => {
            ctl.speed_bits.store(speed.to_bits(), Ordering::Relaxed);
            spawn_replay(path.clone(), ctl.clone(), tx.clone(), stop.clone())
                .map_err(miette::Report::new)?;
            let file = path.display().to_string();
            (
                Source::Replay {
                    file: file.clone(),
                    at_s: 0.0,
                    paused: false,
                    speed,
                    done: false,
                },
                None,
                file,
            )
        }
    };
    let color = std::env::var_os("NO_COLOR").is_none_or(|v| v.is_empty());
    let mut app = App::new(source, opts.design.as_ref().map(|d| d.name.clone()), color);
    let mut feed = Feed::new(EngineConfig::default());
    let header = Header {
        tool: concat!("slackmeter ", env!("CARGO_PKG_VERSION")).into(),
        host: std::fs::read_to_string("/etc/hostname")
            .map(|s| s.trim().to_string())
            .unwrap_or_default(),
        start_unix_ns: 0,
        source: source_name,
        notes: vec![],
        design: opts.design.as_ref().map(|d| EmbeddedDesign {
            file: d.source.name.clone(),
            text: d.source.text.to_string(),
        }),
        sim: None,
    };
    let mut recorder: Option<Recorder> = None;
    let mut record_path = opts.record.clone();
    let start_recording = |path: &PathBuf, app: &mut App| -> Option<Recorder> {
        let mut h = header.clone();
        h.start_unix_ns = host_ns_now();
        match Recorder::create(path, &h) {
            Ok(r) => {
                app.event(0.0, format!("recording to {}", path.display()));
                Some(r)
            }
            Err(e) => {
                app.event(0.0, format!("cannot record: {e}"));
                None
            }
        }
    };
    if let Some(p) = &record_path {
        recorder = start_recording(p, &mut app);
    }

    let mut term = ratatui::init();
    let mut keys = EventStream::new();
    let mut tick = tokio::time::interval(Duration::from_millis(33));
    let mut last_snap = Instant::now() - Duration::from_secs(1);
    let mut sigterm =
        tokio::signal::unix::signal(tokio::signal::unix::SignalKind::terminate()).ok();
    let result: miette::Result<()> = loop {
        tokio::select! {
            Some(input) = rx.recv() => match input {
                Input::Link(LinkEvent::Data { host_ns, bytes }) => {
                    feed.push(&bytes);
                    if let Some(r) = &recorder {
                        r.data(host_ns, bytes);
                    }
                }
                Input::Link(LinkEvent::Connected { probe, reconnects }) => {
                    if reconnects > 0 {
                        feed.note_reconnect();
                        app.event(feed.engine.snapshot_time_s(), format!("link back (reconnect {reconnects})"));
                    }
                    if let Some(r) = &recorder {
                        r.link(host_ns_now(), format!("{{\"event\":\"connected\",\"reconnects\":{reconnects}}}"));
                    }
                    if !matches!(app.source, Source::Replay { .. }) {
                        app.source = Source::Streaming { probe: probe.firmware, reconnects };
                    }
                    app.dirty = true;
                }
                Input::Link(LinkEvent::Lost { reason }) => {
                    app.event(feed.engine.snapshot_time_s(), format!("link lost: {reason}"));
                    if let Some(r) = &recorder {
                        r.link(host_ns_now(), format!("{{\"event\":\"lost\",\"reason\":{reason:?}}}"));
                    }
                    app.source = Source::Lost { reason, retry_in_s: 0.5 };
                }
                Input::Link(LinkEvent::Retrying { retry_in, reason }) => {
                    if let Source::Lost { retry_in_s, .. } = &mut app.source {
                        *retry_in_s = retry_in.as_secs_f64();
                    } else if matches!(app.source, Source::Connecting { .. }) {
                        app.event(0.0, format!("no probe yet: {reason}"));
                    }
                    app.dirty = true;
                }
                Input::Link(LinkEvent::Refused { what, reason }) => {
                    app.event(feed.engine.snapshot_time_s(), format!("probe refused {what}: {reason}"));
                    app.dirty = true;
                }
                Input::Link(LinkEvent::Failed(e)) => break Err(miette::Report::new(e)),
                Input::Link(_) => {}
                Input::Mark(at, text) => app.event(at, format!("mark: {text}")),
                Input::Position(at) => {
                    if let Source::Replay { at_s, .. } = &mut app.source {
                        *at_s = at;
                    }
                }
                Input::Done => {
                    if let Source::Replay { done, .. } = &mut app.source {
                        *done = true;
                    }
                    app.dirty = true;
                }
            },
            Some(Ok(ev)) = keys.next() => match ev {
                Event::Key(k) if k.kind == KeyEventKind::Press => {
                    let replay = matches!(app.source, Source::Replay { .. });
                    match app.apply(action(k, app.typing.is_some(), replay)) {
                        Effect::Reset => feed.engine.reset(),
                        Effect::Mark(text) => {
                            if let Some(r) = &recorder {
                                r.mark(host_ns_now(), &text);
                            }
                        }
                        Effect::ToggleRecord => match recorder.take() {
                            Some(r) => {
                                let path = r.path.display().to_string();
                                match r.finish() {
                                    Ok(c) => app.event(feed.engine.snapshot_time_s(), format!("recording stopped: {path}, {:.1} MB", c.file_bytes as f64 / 1e6)),
                                    Err(e) => app.event(0.0, format!("recording failed: {e}")),
                                }
                            }
                            None => {
                                let p = record_path.clone().filter(|p| !p.exists()).unwrap_or_else(|| PathBuf::from(format!("slackmeter-{}.smrec", host_ns_now() / 1_000_000_000)));
                                recorder = start_recording(&p, &mut app);
                                record_path = Some(p);
                            }
                        },
                        Effect::ReplayPause => {
                            let p = !ctl.paused.load(Ordering::Relaxed);
                            ctl.paused.store(p, Ordering::Relaxed);
                            if let Source::Replay { paused, .. } = &mut app.source {
                                *paused = p;
                            }
                        }
                        e @ (Effect::Faster | Effect::Slower) => {
                            let s = f64::from_bits(ctl.speed_bits.load(Ordering::Relaxed));
                            let n = if e == Effect::Faster { s * 2.0 } else { s / 2.0 }.clamp(1.0 / 64.0, 1024.0);
                            ctl.speed_bits.store(n.to_bits(), Ordering::Relaxed);
                            if let Source::Replay { speed, .. } = &mut app.source {
                                *speed = n;
                            }
                        }
                        Effect::NextMark => ctl.skip_to_mark.store(true, Ordering::Relaxed),
                        Effect::None => {}
                    }
                    app.dirty = true;
                }
                Event::Resize(_, _) => app.dirty = true,
                _ => {}
            },
            _ = async { match &mut sigterm { Some(s) => { s.recv().await; } None => std::future::pending::<()>().await } } => break Ok(()),
            _ = tick.tick() => {
                if last_snap.elapsed() >= Duration::from_millis(250) {
                    last_snap = Instant::now();
                    let snap = feed.engine.snapshot(app.window);
                    let margin = opts.design.as_ref().and_then(|d| evaluate(&snap, d, &lib, &MarginConfig::default()).ok());
                    let prev = app.snapshot.take();
                    new_events(&mut app, prev.as_ref(), &snap);
                    app.snapshot = prev;
                    app.show(snap, margin);
                    if let Some(r) = &recorder {
                        app.recording = Some((r.path.display().to_string(), r.counts().file_bytes));
                    } else {
                        app.recording = None;
                    }
                }
                if app.dirty {
                    if let Err(e) = term.draw(|f| super::view::render(f, &app)) {
                        break Err(miette::miette!("cannot draw: {e}"));
                    }
                    app.dirty = false;
                }
            }
        }
        if app.quit {
            break Ok(());
        }
    };
    ratatui::restore();
    stop.store(true, Ordering::Relaxed);
    if let Some(r) = recorder {
        let _ = r.finish();
    }
    result
}
