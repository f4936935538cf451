//! The terminal loop: one task selecting over session events, terminal input and a redraw tick;
//! each turns into a pure update of the state. Figures are taken four times a second; the
//! screen is drawn at most ~30 times a second and only when something changed.

use std::path::{Path, PathBuf};
use std::time::{Duration, Instant};

use crossterm::event::{Event as TermEvent, EventStream, KeyEventKind};
use futures_util::StreamExt;

use super::keys::action;
use super::state::{App, Ask, Effect, EventKind, Source};
use crate::budget::{Design, Library};
use crate::margin::{MarginConfig, evaluate};
use crate::session::{Event, Session, SessionError};

/// What the live view runs on.
pub struct Options {
    /// The session (already started).
    pub session: Session,
    /// Design to judge against.
    pub design: Option<Design>,
    /// The part library the design was loaded with.
    pub library: Library,
    /// Record from the start into this file.
    pub record: Option<PathBuf>,
    /// The folder `R` offers to record into.
    pub record_dir: PathBuf,
    /// Marks of the replayed recording, s since its start (`n` finds them).
    pub replay_marks: Vec<f64>,
}

/// Why the live view ended early.
#[derive(Debug, thiserror::Error, miette::Diagnostic)]
pub enum ViewError {
    /// The session's source gave up.
    #[error(transparent)]
    #[diagnostic(transparent)]
    Session(#[from] SessionError),
    /// The terminal could not be used.
    #[error("cannot use the terminal: {0}")]
    #[diagnostic(help(
        "the live view needs an interactive terminal; `record` and `report` work without one"
    ))]
    Terminal(std::io::Error),
}

/// Run the live view until quit.
pub fn run(opts: Options) -> Result<(), ViewError> {
    let rt = tokio::runtime::Builder::new_current_thread()
        .enable_all()
        .build()
        .map_err(ViewError::Terminal)?;
    rt.block_on(run_async(opts))
}

/// Start recording into `path`, saying so in the event list (host time: the recorder is the
/// host's).
fn start_recording(s: &mut Session, app: &mut App, path: &Path) {
    let at = s.elapsed_s();
    if path.exists() {
        app.event_of(
            EventKind::Host,
            at,
            format!(
                "host: not recording: {} exists (R: give another name)",
                path.display()
            ),
        );
        return;
    }
    match s.start_recording(path) {
        Ok(()) => app.event_of(
            EventKind::Host,
            at,
            format!("host: recording to {}", path.display()),
        ),
        Err(e) => app.event_of(EventKind::Host, at, format!("host: cannot record: {e}")),
    }
}

/// Stop the recording under way, noting where it went.
fn stop_recording(s: &mut Session, app: &mut App) {
    let at = s.elapsed_s();
    match s.stop_recording() {
        Some(Ok((path, c))) => {
            app.event_of(
                EventKind::Host,
                at,
                format!(
                    "host: recording stopped: {}, {:.1} MB",
                    path.display(),
                    c.file_bytes as f64 / 1e6
                ),
            );
            app.recorded
                .push((path.display().to_string(), c.file_bytes));
        }
        Some(Err(e)) => app.event_of(EventKind::Host, at, format!("host: recording failed: {e}")),
        None => {}
    }
    app.recording = None;
}

fn now_s(s: &Session) -> f64 {
    s.engine().map_or(0.0, |e| e.snapshot_time_s())
}

/// The local date and time as `2026-12-03_16-20-05` (for a recording's default name).
pub fn local_stamp() -> String {
    // SAFETY: `time` with a null pointer only returns the time; `localtime_r` writes into the
    // `tm` we own and returns null on failure, which is checked.
    unsafe {
        let now = libc::time(std::ptr::null_mut());
        let mut tm: libc::tm = std::mem::zeroed();
        if libc::localtime_r(&now, &mut tm).is_null() {
            return format!("{now}");
        }
        format!(
            "{:04}-{:02}-{:02}_{:02}-{:02}-{:02}",
            tm.tm_year + 1900,
            tm.tm_mon + 1,
            tm.tm_mday,
            tm.tm_hour,
            tm.tm_min,
            tm.tm_sec
        )
    }
}

/// The file `R` offers: the local date and time in `dir`.
pub fn default_record_path(dir: &Path) -> PathBuf {
    let stamp = local_stamp();
    let mut p = dir.join(format!("slackmeter-{stamp}.smrec"));
    let mut n = 2;
    while p.exists() {
        p = dir.join(format!("slackmeter-{stamp}-{n}.smrec"));
        n += 1;
    }
    p
}

/// What a key's effect does to the session.
fn perform(effect: Effect, s: &mut Session, app: &mut App, record_dir: &Path) {
    match effect {
        Effect::Reset => s.reset_engine(),
        Effect::Mark(text) => s.mark(&text),
        Effect::AskRecordFile => {
            let p = default_record_path(record_dir);
            app.ask(Ask::RecordFile, p.display().to_string());
        }
        Effect::StopRecord => stop_recording(s, app),
        Effect::StartRecord(path) => start_recording(s, app, Path::new(&path)),
        Effect::ReplayPause => {
            if let (Some(c), Source::Replay { paused, .. }) = (s.replay_control(), &mut app.source)
            {
                *paused = c.toggle_pause();
            }
        }
        e @ (Effect::Faster | Effect::Slower) => {
            let factor = if e == Effect::Faster { 2.0 } else { 0.5 };
            if let (Some(c), Source::Replay { speed, .. }) = (s.replay_control(), &mut app.source) {
                *speed = c.scale_speed(factor);
            }
        }
        Effect::NextMark => {
            let at = match app.source {
                Source::Replay { at_s, .. } => at_s,
                _ => return,
            };
            if app.next_mark(at).is_some()
                && let Some(c) = s.replay_control()
            {
                c.skip_to_next_mark();
            }
        }
        Effect::None => {}
    }
}

async fn run_async(opts: Options) -> Result<(), ViewError> {
    let Options {
        session: mut s,
        design,
        library,
        record,
        record_dir,
        replay_marks,
    } = opts;
    let color = std::env::var_os("NO_COLOR").is_none_or(|v| v.is_empty());
    let mut app = App::new(
        Source::of(s.origin()),
        design.as_ref().map(|d| d.name.clone()),
        color,
    );
    app.replay_marks = replay_marks;
    if let Some(p) = &record {
        start_recording(&mut s, &mut app, p);
    }
    let mut term = match ratatui::try_init() {
        Ok(t) => t,
        Err(e) => {
            ratatui::restore();
            return Err(ViewError::Terminal(e));
        }
    };
    let mut keys = EventStream::new();
    let mut tick = tokio::time::interval(Duration::from_millis(33));
    let mut last_snap = Instant::now() - Duration::from_secs(1);
    let mut sigterm =
        tokio::signal::unix::signal(tokio::signal::unix::SignalKind::terminate()).ok();
    let result = loop {
        tokio::select! {
            Some(ev) = s.next() => match ev {
                Event::Failed(e) => break Err(ViewError::Session(e)),
                ev => app.on_session(&ev, now_s(&s), s.elapsed_s()),
            },
            Some(Ok(ev)) = keys.next() => match ev {
                TermEvent::Key(k) if k.kind == KeyEventKind::Press => {
                    let replay = matches!(app.source, Source::Replay { .. });
                    let effect = app.apply(action(k, app.prompt.is_some(), replay));
                    perform(effect, &mut s, &mut app, &record_dir);
                    app.dirty = true;
                }
                TermEvent::Resize(_, _) => app.dirty = true,
                _ => {}
            },
            _ = async { match &mut sigterm { Some(s) => { s.recv().await; } None => std::future::pending::<()>().await } } => break Ok(()),
            _ = tick.tick() => {
                if last_snap.elapsed() >= Duration::from_millis(250)
                    && let Some(engine) = s.engine()
                {
                    last_snap = Instant::now();
                    app.note_lag(s.elapsed_s(), engine.snapshot_time_s());
                    let snap = engine.snapshot(app.window);
                    let margin = design
                        .as_ref()
                        .and_then(|d| evaluate(&snap, d, &library, &MarginConfig::default()).ok());
                    app.update(snap, margin);
                    let rec = s.recording().map(|(p, c)| (p.display().to_string(), c.file_bytes));
                    app.note_recording(rec, s.elapsed_s());
                }
                if app.dirty {
                    if let Err(e) = term.draw(|f| super::view::render(f, &app)) {
                        break Err(ViewError::Terminal(e));
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
    match s.stop_recording() {
        Some(Err(e)) => eprintln!("{e}"),
        Some(Ok((path, c))) => app
            .recorded
            .push((path.display().to_string(), c.file_bytes)),
        None => {}
    }
    if let Some(e) = &app.rec_failed {
        eprintln!("the recording failed: {e}");
    }
    for (path, bytes) in &app.recorded {
        eprintln!("recorded {path} ({:.1} MB)", *bytes as f64 / 1e6);
    }
    result
}
