//! The live view's state and its pure updates (keys, session events, snapshots).

use std::collections::BTreeMap;

use crate::margin::Margin;
use crate::measure::{Snapshot, Window};
use crate::probe::LineRole;
use crate::session::{Event, Origin};
use crate::units;

pub use super::items::{Ask, EventKind, EventLine, Picture, Prompt, RecStatus};
use super::keys::Action;

/// The source of data and its state.
#[derive(Clone, Debug, PartialEq)]
pub enum Source {
    /// Opening the port and waiting for the probe.
    Connecting {
        /// What is being opened.
        what: String,
    },
    /// Data flowing.
    Streaming {
        /// The probe's firmware.
        probe: String,
        /// Times the link came back.
        reconnects: u32,
    },
    /// The link is gone; retrying.
    Lost {
        /// Why.
        reason: String,
        /// Seconds until the next attempt.
        retry_in_s: f64,
    },
    /// A recording being replayed.
    Replay {
        /// File.
        file: String,
        /// Seconds into the recording.
        at_s: f64,
        /// Paused.
        paused: bool,
        /// Speed factor.
        speed: f64,
        /// Finished.
        done: bool,
    },
}

impl Source {
    /// The state a view of `origin` starts in.
    pub fn of(origin: &Origin) -> Source {
        match origin {
            Origin::Port(what) => Source::Connecting { what: what.clone() },
            Origin::Sim => Source::Connecting {
                what: "virtual probe".into(),
            },
            Origin::Replay { file, speed } => Source::Replay {
                file: file.clone(),
                at_s: 0.0,
                paused: false,
                speed: *speed,
                done: false,
            },
        }
    }
}

/// Everything the view draws.
#[derive(Clone, Debug)]
pub struct App {
    /// Data source.
    pub source: Source,
    /// The recording under way.
    pub recording: Option<RecStatus>,
    /// Recordings made in this view (file, bytes), for the message at quit.
    pub recorded: Vec<(String, u64)>,
    /// Why the recorder stopped, when it failed (shown as REC FAILED; printed at exit).
    pub rec_failed: Option<String>,
    /// (host s, probe s) when figures first came in, to tell how far the figures lag.
    lag_origin: Option<(f64, f64)>,
    /// How far the figures trail the host's clock, s (a stream faster than this machine's
    /// analysis, or a link that delivers late); shown when over [`LAG_SHOWN_S`].
    pub lag_s: f64,
    /// Figures on screen.
    pub snapshot: Option<Snapshot>,
    /// Margin on screen (with a design).
    pub margin: Option<Margin>,
    /// Name of the design judged against.
    pub design: Option<String>,
    /// Which window the figures cover.
    pub window: Window,
    /// The picture shown.
    pub picture: Picture,
    /// Figures frozen.
    pub frozen: bool,
    /// Help overlay shown.
    pub help: bool,
    /// A text being typed (a mark, a file name).
    pub prompt: Option<Prompt>,
    /// Events in time order, newest last (capped).
    pub events: Vec<EventLine>,
    /// Which kind of event is listed (None: all).
    pub event_filter: Option<EventKind>,
    /// Scrolled back: the index (among the listed events) of the last one on screen; None
    /// follows the newest.
    pub event_scroll: Option<usize>,
    /// Marks of the replayed recording, s since its start (for `n`).
    pub replay_marks: Vec<f64>,
    /// Whether colour may be used (NO_COLOR unset).
    pub color: bool,
    /// Asked to quit.
    pub quit: bool,
    /// Something changed since the last draw.
    pub dirty: bool,
    /// Recent history of each rail (lowest value per update, mV), oldest first.
    pub rail_history: BTreeMap<String, std::collections::VecDeque<f64>>,
    /// What the last snapshot held, so each glitch, sag, line change and failure is listed once.
    seen: Seen,
}

/// The newest of each kind of event in the last snapshot taken.
#[derive(Clone, Debug, PartialEq)]
struct Seen {
    glitches: u64,
    glitch_at_s: f64,
    sag_at_s: f64,
    line_at_s: BTreeMap<u8, f64>,
    onsets: usize,
}

impl Default for Seen {
    fn default() -> Self {
        Seen {
            glitches: 0,
            glitch_at_s: f64::NEG_INFINITY,
            sag_at_s: f64::NEG_INFINITY,
            line_at_s: BTreeMap::new(),
            onsets: 0,
        }
    }
}

impl Seen {
    fn of(s: &Snapshot) -> Seen {
        Seen {
            glitches: s.clock().map_or(0, |c| c.glitches),
            glitch_at_s: s.glitch_events.last().map_or(f64::NEG_INFINITY, |g| g.at_s),
            sag_at_s: s
                .sag_events
                .last()
                .map_or(f64::NEG_INFINITY, |x| x.1.start_s),
            line_at_s: s
                .lines
                .iter()
                .filter_map(|l| l.events.last().map(|e| (l.channel, e.at_s)))
                .collect(),
            onsets: s.fault_onsets.len(),
        }
    }
}

/// Updates kept in a rail's history (four a second: 15 s).
pub const HISTORY: usize = 60;

/// Lag of the figures behind real time that the status line shows (s).
pub const LAG_SHOWN_S: f64 = 1.0;

/// What the loop must do after an action.
#[derive(Clone, Debug, PartialEq)]
pub enum Effect {
    /// Nothing beyond redrawing.
    None,
    /// Reset the engine.
    Reset,
    /// Store a mark with this text.
    Mark(String),
    /// Replay control.
    ReplayPause,
    /// Replay speed ×2.
    Faster,
    /// Replay speed ÷2.
    Slower,
    /// Replay: to the next mark.
    NextMark,
    /// Ask for the file to record into (the loop fills in the default name).
    AskRecordFile,
    /// Stop the recording under way.
    StopRecord,
    /// Start recording into this file.
    StartRecord(String),
}

const MAX_EVENTS: usize = 200;

impl App {
    /// A view of `source`.
    pub fn new(source: Source, design: Option<String>, color: bool) -> App {
        App {
            source,
            recording: None,
            recorded: Vec::new(),
            rec_failed: None,
            lag_origin: None,
            lag_s: 0.0,
            snapshot: None,
            margin: None,
            design,
            window: Window::Recent,
            picture: Picture::Frequency,
            frozen: false,
            help: false,
            prompt: None,
            events: Vec::new(),
            event_filter: None,
            event_scroll: None,
            replay_marks: Vec::new(),
            color,
            quit: false,
            dirty: true,
            rail_history: BTreeMap::new(),
            seen: Seen::default(),
        }
    }

    /// A session event; `now_s` is the engine's time, for the event list.
    /// One session event. `now_s` is the probe's timeline (the engine's time), `host_s` the
    /// host's clock since the session began: link and recorder events happen on the host's
    /// side and are stamped with its clock (marked "host"), so an outage shows its real length.
    pub fn on_session(&mut self, ev: &Event, now_s: f64, host_s: f64) {
        let replay = matches!(self.source, Source::Replay { .. });
        match ev {
            Event::Connected { probe, reconnects } => {
                if *reconnects > 0 {
                    self.event_of(
                        EventKind::Host,
                        host_s,
                        format!("host: link back (reconnect {reconnects})"),
                    );
                }
                if !replay {
                    self.source = Source::Streaming {
                        probe: probe.firmware.clone(),
                        reconnects: *reconnects,
                    };
                }
            }
            Event::Lost { reason } => {
                self.event_of(
                    EventKind::Host,
                    host_s,
                    format!("host: link lost: {reason}"),
                );
                self.source = Source::Lost {
                    reason: reason.clone(),
                    retry_in_s: 0.5,
                };
            }
            Event::Retrying { retry_in, reason } => match &mut self.source {
                Source::Lost { retry_in_s, .. } => *retry_in_s = retry_in.as_secs_f64(),
                Source::Connecting { .. } => self.event_of(
                    EventKind::Host,
                    host_s,
                    format!("host: no probe yet: {reason}"),
                ),
                _ => {}
            },
            Event::Refused { what, reason } => self.event_of(
                EventKind::Host,
                now_s,
                format!("probe refused {what}: {reason}"),
            ),
            Event::Mark { at_s, text } => {
                self.event_of(EventKind::Mark, *at_s, format!("mark: {text}"))
            }
            Event::Position { at_s: at } => {
                if let Source::Replay { at_s, .. } = &mut self.source {
                    *at_s = *at;
                }
                return;
            }
            Event::End => {
                if let Source::Replay { done, .. } = &mut self.source {
                    *done = true;
                }
            }
            Event::RecordingFailed(e) => {
                self.rec_failed = Some(e.to_string());
                self.recording = None;
                self.event_of(
                    EventKind::Host,
                    host_s,
                    format!("host: recording failed: {e}"),
                );
            }
            Event::Data { .. } | Event::Connecting { .. } | Event::Recorded { .. } => return,
            Event::Failed(_) => {}
        }
        self.dirty = true;
    }

    /// How far the figures trail real time: the host's clock against the probe's timeline,
    /// both from when figures first came in (a replay paces itself and is not judged).
    pub fn note_lag(&mut self, host_s: f64, probe_s: f64) {
        if matches!(self.source, Source::Replay { .. }) || probe_s <= 0.0 {
            return;
        }
        let (h0, p0) = *self.lag_origin.get_or_insert((host_s, probe_s));
        self.lag_s = ((host_s - h0) - (probe_s - p0)).max(0.0);
    }

    /// New figures: list what is new in them (glitches, sags, line changes, failures), then show
    /// them (unless frozen).
    pub fn update(&mut self, snap: Snapshot, margin: Option<Margin>) {
        self.note_new_events(&snap);
        self.show(snap, margin);
    }

    fn note_new_events(&mut self, s: &Snapshot) {
        let seen = std::mem::replace(&mut self.seen, Seen::of(s));
        // glitches come in bursts: one line per update
        let now = self.seen.glitches;
        if now > seen.glitches {
            let n = now - seen.glitches;
            let new = s.glitch_events.iter().filter(|g| g.at_s > seen.glitch_at_s);
            let (shortest, at) = new.fold((f64::INFINITY, s.probe_time_s), |(w, _), g| {
                (w.min(g.width_ns), g.at_s)
            });
            let shortest = if shortest.is_finite() {
                units::ns(shortest).to_string()
            } else {
                "—".into()
            };
            let es = if n == 1 { "" } else { "es" };
            self.event_of(
                EventKind::Clock,
                at,
                format!("{n} glitch{es} (shortest {shortest})"),
            );
        }
        for (rail, sag) in s.sag_events.iter().filter(|x| x.1.start_s > seen.sag_at_s) {
            let text = format!(
                "sag on {rail}: −{:.0} mV for {:.0} ms",
                sag.depth_mv, sag.duration_ms
            );
            self.event_of(EventKind::Rail, sag.start_s, text);
        }
        for l in s.lines.iter().filter(|l| l.role != LineRole::Heartbeat) {
            let before = seen
                .line_at_s
                .get(&l.channel)
                .copied()
                .unwrap_or(f64::NEG_INFINITY);
            for e in l.events.iter().filter(|e| e.at_s > before) {
                let level = if e.high { "high" } else { "low" };
                self.event_of(EventKind::Line, e.at_s, format!("{} went {level}", l.name));
            }
        }
        if seen.onsets < s.fault_onsets.len()
            && let Some(o) = s.fault_onsets.last()
        {
            let text = format!("FAILURE ({}) at {}", o.cause, units::hz(o.frequency_hz));
            self.event_of(EventKind::Failure, o.at_s, text);
        }
    }

    /// Add an event line (its kind told by its first words).
    pub fn event(&mut self, at_s: f64, text: impl Into<String>) {
        let text = text.into();
        self.event_of(EventKind::of_text(&text), at_s, text);
    }

    /// Add an event line of `kind` in time order (an event stamped earlier than the newest
    /// goes before it; one of the same time after it).
    pub fn event_of(&mut self, kind: EventKind, at_s: f64, text: impl Into<String>) {
        if self.events.len() >= MAX_EVENTS {
            self.events.remove(0);
            if let Some(i) = &mut self.event_scroll {
                *i = i.saturating_sub(1);
            }
        }
        let at_s = if at_s.is_finite() { at_s } else { 0.0 };
        let i = self.events.partition_point(|e| e.at_s <= at_s);
        self.events.insert(
            i,
            EventLine {
                at_s,
                kind,
                text: text.into(),
            },
        );
        self.dirty = true;
    }

    /// The events the filter lets through, oldest first.
    pub fn listed_events(&self) -> impl Iterator<Item = &EventLine> {
        self.events
            .iter()
            .filter(|e| self.event_filter.is_none_or(|k| e.kind == k))
    }

    /// The figures on screen are from before the link went down.
    pub fn stale(&self) -> bool {
        matches!(self.source, Source::Lost { .. })
    }

    /// Open a prompt asking for `ask`, filled with `text`.
    pub fn ask(&mut self, ask: Ask, text: impl Into<String>) {
        self.prompt = Some(Prompt {
            ask,
            text: text.into(),
        });
        self.dirty = true;
    }

    /// The recorder's file and size now (`host_s`: the host's clock), for the status line's
    /// size and rate (the rate over the last second or more).
    pub fn note_recording(&mut self, now: Option<(String, u64)>, host_s: f64) {
        match (now, &mut self.recording) {
            (None, r) => *r = None,
            (Some((path, bytes)), Some(r)) if r.path == path => {
                let (t0, b0) = r.since;
                if host_s - t0 >= 1.0 {
                    r.rate_bytes_per_s = Some(bytes.saturating_sub(b0) as f64 / (host_s - t0));
                    r.since = (host_s, bytes);
                }
                r.bytes = bytes;
            }
            (Some((path, bytes)), r) => {
                *r = Some(RecStatus {
                    path,
                    bytes,
                    rate_bytes_per_s: None,
                    since: (host_s, bytes),
                })
            }
        }
    }

    /// `n` in a replay at `at_s`: the next mark's time, or an event saying there is none.
    pub fn next_mark(&mut self, at_s: f64) -> Option<f64> {
        let next = self.replay_marks.iter().copied().find(|&m| m > at_s + 1e-6);
        if next.is_none() {
            let text = if self.replay_marks.is_empty() {
                "no marks in this recording"
            } else {
                "no marks after this point"
            };
            self.event_of(EventKind::Mark, at_s, format!("replay: {text}"));
        }
        next
    }

    /// New figures (ignored while frozen).
    pub fn show(&mut self, snap: Snapshot, margin: Option<Margin>) {
        for r in &snap.rails {
            if let Some(v) = r.now_mv {
                let h = self.rail_history.entry(r.name.clone()).or_default();
                if h.len() >= HISTORY {
                    h.pop_front();
                }
                h.push_back(v);
            }
        }
        if !self.frozen {
            self.snapshot = Some(snap);
            self.margin = margin;
            self.dirty = true;
        }
    }

    /// Apply a key action; returns what the loop must do.
    pub fn apply(&mut self, a: Action) -> Effect {
        self.dirty = true;
        match a {
            Action::Quit => {
                self.quit = true;
                Effect::None
            }
            Action::Freeze => {
                self.frozen = !self.frozen;
                Effect::None
            }
            Action::Reset => {
                self.events.clear();
                self.event_scroll = None;
                Effect::Reset
            }
            Action::MarkStart => {
                self.ask(Ask::Mark, "");
                Effect::None
            }
            Action::MarkChar(c) => {
                if let Some(p) = &mut self.prompt
                    && p.text.chars().count() < 240
                {
                    p.text.push(c);
                }
                Effect::None
            }
            Action::MarkBack => {
                if let Some(p) = &mut self.prompt {
                    p.text.pop();
                }
                Effect::None
            }
            Action::MarkDone => match self.prompt.take() {
                Some(Prompt {
                    ask: Ask::Mark,
                    text,
                }) => {
                    let text = if text.trim().is_empty() {
                        "mark".to_string()
                    } else {
                        text
                    };
                    let at = self.snapshot.as_ref().map_or(0.0, |s| s.probe_time_s);
                    self.event_of(EventKind::Mark, at, format!("mark: {text}"));
                    Effect::Mark(text)
                }
                Some(Prompt {
                    ask: Ask::RecordFile,
                    text,
                }) if !text.trim().is_empty() => Effect::StartRecord(text.trim().to_string()),
                _ => Effect::None,
            },
            Action::MarkCancel => {
                self.prompt = None;
                Effect::None
            }
            Action::Record if self.recording.is_some() => Effect::StopRecord,
            Action::Record => Effect::AskRecordFile,
            Action::Filter => {
                self.event_filter = EventKind::next_filter(self.event_filter);
                self.event_scroll = None;
                Effect::None
            }
            Action::Up => {
                let n = self.listed_events().count();
                let last = self.event_scroll.unwrap_or(n.saturating_sub(1));
                self.event_scroll = Some(last.saturating_sub(1).min(n.saturating_sub(1)));
                Effect::None
            }
            Action::Down => {
                let n = self.listed_events().count();
                self.event_scroll = self.event_scroll.map(|i| i + 1).filter(|&i| i + 1 < n);
                Effect::None
            }
            Action::End => {
                self.event_scroll = None;
                Effect::None
            }
            Action::Window => {
                self.window = if self.window == Window::Recent {
                    Window::Session
                } else {
                    Window::Recent
                };
                Effect::None
            }
            Action::Picture => {
                self.picture = self.picture.next();
                Effect::None
            }
            Action::Help => {
                self.help = !self.help;
                Effect::None
            }
            Action::ReplayPause => Effect::ReplayPause,
            Action::Faster => Effect::Faster,
            Action::Slower => Effect::Slower,
            Action::NextMark => Effect::NextMark,
            Action::None => {
                self.dirty = false;
                Effect::None
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_mark_is_typed_and_stored() {
        let mut a = App::new(Source::Connecting { what: "x".into() }, None, true);
        assert_eq!(a.apply(Action::MarkStart), Effect::None);
        for c in "added cap".chars() {
            a.apply(Action::MarkChar(c));
        }
        a.apply(Action::MarkBack);
        assert_eq!(a.apply(Action::MarkDone), Effect::Mark("added ca".into()));
        assert!(a.prompt.is_none());
        assert!(a.events.last().unwrap().text.contains("added ca"));
    }

    #[test]
    fn freeze_window_detail_help_quit() {
        let mut a = App::new(Source::Connecting { what: "x".into() }, None, true);
        a.apply(Action::Freeze);
        assert!(a.frozen);
        a.apply(Action::Window);
        assert_eq!(a.window, Window::Session);
        a.apply(Action::Picture);
        assert_eq!(a.picture, Picture::Slack);
        a.apply(Action::Help);
        assert!(a.help);
        assert_eq!(a.apply(Action::Reset), Effect::Reset);
        assert_eq!(a.apply(Action::Record), Effect::AskRecordFile);
        a.apply(Action::Quit);
        assert!(a.quit);
    }

    /// Snapshots of the sagging demo bench with glitches and resets, 0.7 s apart.
    fn snapshots() -> Vec<Snapshot> {
        use crate::measure::{EngineConfig, Feed};
        use crate::sim::{BenchModel, SimProbe};
        let mut m = BenchModel::scenario("sagging").unwrap();
        m.freq_hz = 200e3;
        m.glitch_rate_hz = 20.0;
        m.reset_interval_s = Some(0.3);
        let mut p = SimProbe::new(m, vec![]);
        p.start();
        let mut f = Feed::new(EngineConfig::default());
        (1..=2)
            .map(|i| {
                p.run_until(f64::from(i) * 0.7e9);
                f.push(&std::mem::take(p.output()));
                f.engine.snapshot(Window::Session)
            })
            .collect()
    }

    fn count(a: &App, what: &str) -> usize {
        a.events.iter().filter(|e| e.text.contains(what)).count()
    }

    #[test]
    fn each_glitch_sag_and_line_change_is_listed_once() {
        let s = snapshots();
        let mut a = App::new(Source::Connecting { what: "x".into() }, None, true);
        a.update(s[0].clone(), None);
        let first = a.events.len();
        assert!(count(&a, "glitch") == 1, "{:?}", a.events);
        assert!(count(&a, "RESET went high") >= 1, "{:?}", a.events);
        a.update(s[0].clone(), None);
        assert_eq!(a.events.len(), first, "the same figures list nothing new");
        // frozen: the figures on screen stay, what is new is still listed, once
        a.apply(Action::Freeze);
        a.update(s[1].clone(), None);
        let second = a.events.len();
        assert!(second > first);
        a.update(s[1].clone(), None);
        assert_eq!(a.events.len(), second, "frozen figures list nothing twice");
        assert_eq!(a.snapshot.as_ref(), Some(&s[0]));
        assert_eq!(count(&a, "glitch"), 2);
        let mut sags: Vec<f64> = s
            .iter()
            .flat_map(|x| &x.sag_events)
            .map(|x| x.1.start_s)
            .collect();
        sags.sort_by(f64::total_cmp);
        sags.dedup();
        assert!(!sags.is_empty());
        assert_eq!(count(&a, "sag on"), sags.len());
        let resets = s[1]
            .lines
            .iter()
            .find(|l| l.name == "RESET")
            .map_or(0, |l| l.events.len());
        assert_eq!(count(&a, "RESET"), resets, "{:?}", a.events);
        assert_eq!(count(&a, "HEARTBEAT"), 0, "the heartbeat is not an event");
    }

    #[test]
    fn session_events_move_the_source() {
        use crate::probe::ProbeDesc;
        use std::time::Duration;
        let mut a = App::new(Source::Connecting { what: "x".into() }, None, true);
        let probe = ProbeDesc {
            firmware: "fw".into(),
            protocol_version: 1,
            probe_class: "stamping",
            tick_num_hz: 1,
            tick_den: 1,
            tick_ns: 1.0,
            timebase_ppm: 0,
            max_edge_rate_khz: 0,
            channels: vec![],
        };
        a.on_session(
            &Event::Retrying {
                retry_in: Duration::from_millis(500),
                reason: "not yet".into(),
            },
            0.0,
            0.0,
        );
        assert!(a.events[0].text.contains("no probe yet"));
        a.on_session(
            &Event::Connected {
                probe: probe.clone(),
                reconnects: 0,
            },
            1.0,
            1.0,
        );
        assert!(matches!(a.source, Source::Streaming { .. }));
        a.on_session(
            &Event::Lost {
                reason: "unplugged".into(),
            },
            2.0,
            2.0,
        );
        assert!(matches!(a.source, Source::Lost { .. }));
        // the probe's timeline went on 0.5 s while the host waited 4.5 s: the link's events
        // carry the host's clock
        a.on_session(
            &Event::Connected {
                probe,
                reconnects: 1,
            },
            2.5,
            6.5,
        );
        let back = a.events.last().unwrap();
        assert_eq!(back.at_s, 6.5);
        assert!(back.text.starts_with("host: "), "{}", back.text);
        a.on_session(
            &Event::RecordingFailed(crate::record::RecordingError::Exists {
                path: "x.smrec".into(),
            }),
            2.6,
            6.6,
        );
        assert!(a.rec_failed.is_some());
        // figures that trail the host's clock are flagged: 10 s of host time, 7 s of probe time
        a.note_lag(10.0, 1.0);
        a.note_lag(20.0, 8.0);
        assert!((a.lag_s - 3.0).abs() < 1e-9, "{}", a.lag_s);
        a.note_lag(21.0, 9.0);
        assert!((a.lag_s - 3.0).abs() < 1e-9, "keeping pace holds the lag");
        assert_eq!(
            a.source,
            Source::Streaming {
                probe: "fw".into(),
                reconnects: 1
            }
        );
        assert!(a.events.last().unwrap().text.contains("recording failed"));
        assert!(
            a.events
                .iter()
                .any(|e| e.text.contains("link back (reconnect 1)"))
        );
    }

    #[test]
    fn events_stay_in_time_order_and_filter_by_kind() {
        let mut a = App::new(Source::Connecting { what: "x".into() }, None, true);
        a.event(2.0, "mark: second");
        a.event(1.0, "sag on VCC: −100 mV for 3 ms");
        a.event_of(EventKind::Host, 1.5, "host: link lost: unplugged");
        let at: Vec<f64> = a.events.iter().map(|e| e.at_s).collect();
        assert_eq!(at, vec![1.0, 1.5, 2.0]);
        a.apply(Action::Filter);
        assert_eq!(a.event_filter, Some(EventKind::Mark));
        let listed: Vec<_> = a.listed_events().map(|e| e.text.as_str()).collect();
        assert_eq!(listed, vec!["mark: second"]);
        a.event_filter = None;
        a.apply(Action::Up);
        assert_eq!(a.event_scroll, Some(1));
        a.apply(Action::Down);
        assert_eq!(a.event_scroll, None, "down to the newest follows again");
        a.apply(Action::Up);
        a.apply(Action::End);
        assert_eq!(a.event_scroll, None);
    }

    #[test]
    fn next_mark_says_when_there_is_none() {
        let mut a = App::new(Source::Connecting { what: "x".into() }, None, true);
        assert_eq!(a.next_mark(0.0), None);
        assert!(
            a.events
                .last()
                .unwrap()
                .text
                .contains("no marks in this recording")
        );
        a.replay_marks = vec![1.0, 3.0];
        assert_eq!(a.next_mark(1.0), Some(3.0));
        assert_eq!(a.next_mark(3.5), None);
        assert!(
            a.events
                .last()
                .unwrap()
                .text
                .contains("no marks after this point")
        );
    }

    #[test]
    fn r_asks_for_a_file_then_starts_and_stops() {
        let mut a = App::new(Source::Connecting { what: "x".into() }, None, true);
        assert_eq!(a.apply(Action::Record), Effect::AskRecordFile);
        a.ask(Ask::RecordFile, "bench.smrec");
        assert_eq!(
            a.apply(Action::MarkDone),
            Effect::StartRecord("bench.smrec".into())
        );
        a.note_recording(Some(("bench.smrec".into(), 1_000)), 10.0);
        a.note_recording(Some(("bench.smrec".into(), 2_001_000)), 12.0);
        let r = a.recording.clone().unwrap();
        assert_eq!(r.bytes, 2_001_000);
        // 2 MB in 2 s (arithmetic)
        assert_eq!(r.rate_bytes_per_s, Some(1e6));
        assert_eq!(a.apply(Action::Record), Effect::StopRecord);
    }
}
