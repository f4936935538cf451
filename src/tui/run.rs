//! The terminal loop: one task selecting over session events, terminal input and a redraw tick;
//! each turns into a pure update of the state. Figures are taken four times a second; the
//! screen is drawn at most ~30 times a second and only when something changed.

use std::path::{Path, PathBuf};
use std::time::{Duration, Instant};

use crossterm::event::{Event as TermEvent, EventStream, KeyEventKind};
use futures_util::StreamExt;

use super::keys::action;
use super::state::{App, Effect, Source};
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

/// Start recording into `path`, saying so in the event list.
fn start_recording(s: &mut Session, app: &mut App, path: &Path) {
    let at = now_s(s);
    match s.start_recording(path) {
        Ok(()) => app.event(at, format!("recording to {}", path.display())),
        Err(e) => app.event(at, format!("cannot record: {e}")),
    }
}

fn now_s(s: &Session) -> f64 {
    s.engine().map_or(0.0, |e| e.snapshot_time_s())
}

/// R: stop the recording under way, or start one (the --record file if it is still free,
/// else a new file named by the time).
fn toggle_recording(s: &mut Session, app: &mut App, record_path: &mut Option<PathBuf>) {
    let at = now_s(s);
    match s.stop_recording() {
        Some(Ok((path, c))) => app.event(
            at,
            format!(
                "recording stopped: {}, {:.1} MB",
                path.display(),
                c.file_bytes as f64 / 1e6
            ),
        ),
        Some(Err(e)) => app.event(at, format!("recording failed: {e}")),
        None => {
            let p = record_path
                .clone()
                .filter(|p| !p.exists())
                .unwrap_or_else(|| {
                    PathBuf::from(format!("slackmeter-{}.smrec", s.now_ns() / 1_000_000_000))
                });
            start_recording(s, app, &p);
            *record_path = Some(p);
        }
    }
}

/// What a key's effect does to the session.
fn perform(effect: Effect, s: &mut Session, app: &mut App, record_path: &mut Option<PathBuf>) {
    match effect {
        Effect::Reset => s.reset_engine(),
        Effect::Mark(text) => s.mark(&text),
        Effect::ToggleRecord => toggle_recording(s, app, record_path),
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
            if let Some(c) = s.replay_control() {
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
    } = opts;
    let color = std::env::var_os("NO_COLOR").is_none_or(|v| v.is_empty());
    let mut app = App::new(
        Source::of(s.origin()),
        design.as_ref().map(|d| d.name.clone()),
        color,
    );
    let mut record_path = record;
    if let Some(p) = record_path.clone() {
        start_recording(&mut s, &mut app, &p);
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
                    let effect = app.apply(action(k, app.typing.is_some(), replay));
                    perform(effect, &mut s, &mut app, &mut record_path);
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
                    app.recording = s.recording().map(|(p, c)| (p.display().to_string(), c.file_bytes));
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
    if let Some(Err(e)) = s.stop_recording() {
        eprintln!("{e}");
    }
    if let Some(e) = &app.rec_failed {
        eprintln!("the recording failed: {e}");
    }
    result
}
