//! The live view's frame: the status line (parts by priority, short forms when narrow), the key
//! bar, the help overlay and the text prompt.

use ratatui::Frame;
use ratatui::layout::Rect;
use ratatui::style::{Modifier, Style};
use ratatui::text::{Line, Span};
use ratatui::widgets::{Block, Borders, Clear, Paragraph, Wrap};

use super::keys::{KEYS, Offered};
use super::state::{App, Ask, Source};
use super::style::{bold, warn};
use super::text::{fit, width_of};
use crate::measure::Window;

/// The status line's parts: (priority, long form, short form).
fn status_parts(app: &App) -> Vec<(u8, String, String)> {
    let mut parts = Vec::new();
    let src = match &app.source {
        Source::Connecting { what } => (format!("CONNECTING to {what}"), "CONNECTING".into()),
        Source::Streaming { probe, .. } => (format!("STREAMING from {probe}"), "STREAMING".into()),
        Source::Lost { reason, retry_in_s } => (
            format!("LINK LOST ({reason}), retry in {retry_in_s:.1} s"),
            "LINK LOST".into(),
        ),
        Source::Replay {
            file,
            at_s,
            paused,
            speed,
            done,
        } => {
            let state = if *done {
                "finished".to_string()
            } else if *paused {
                "PAUSED".to_string()
            } else {
                format!("×{speed}")
            };
            let base = std::path::Path::new(file)
                .file_name()
                .map_or(file.clone(), |n| n.to_string_lossy().into_owned());
            (
                format!("REPLAY {file} at {at_s:.1} s {state}"),
                format!("REPLAY {base} {at_s:.0} s {state}"),
            )
        }
    };
    parts.push((0, src.0, src.1));
    if let Source::Streaming { reconnects, .. } = app.source
        && reconnects > 0
    {
        parts.push((2, format!("{reconnects} reconnections"), String::new()));
    }
    if app.stale() {
        parts.push((0, "figures STALE".into(), "STALE".into()));
    }
    match (&app.recording, &app.rec_failed) {
        (Some(r), _) => {
            let rate = r
                .rate_bytes_per_s
                .map_or(String::new(), |b| format!(" {:.2} MB/s", b / 1e6));
            let size = format!("{:.1} MB", r.bytes as f64 / 1e6);
            let base = std::path::Path::new(&r.path)
                .file_name()
                .map_or(r.path.clone(), |n| n.to_string_lossy().into_owned());
            parts.push((
                0,
                format!("REC {base} {size}{rate}"),
                format!("REC {size}{rate}"),
            ));
        }
        (None, Some(_)) => parts.push((0, "REC FAILED (see events)".into(), "REC FAILED".into())),
        (None, None) => {
            if !matches!(app.source, Source::Replay { .. }) {
                parts.push((3, "not recording".into(), String::new()));
            }
        }
    }
    if let Some(s) = &app.snapshot {
        let t = &s.trust;
        match s.completeness() {
            "lost" => parts.push((
                1,
                format!(
                    "LOST {} frames, {} crc, {} drops",
                    t.lost_frames,
                    t.crc_errors,
                    t.probe_edges_dropped + t.probe_samples_dropped
                ),
                "DATA LOST".into(),
            )),
            word => parts.push((3, word.to_string(), String::new())),
        }
    }
    let win = match app.window {
        Window::Recent => ("recent 10 s", "recent 10 s"),
        Window::Session => ("whole session", "session"),
    };
    parts.push((0, win.0.into(), win.1.into()));
    if app.frozen {
        parts.push((0, "FROZEN".into(), "FROZEN".into()));
    }
    if app.lag_s > super::state::LAG_SHOWN_S {
        parts.push((
            1,
            format!("BEHIND {:.1} s", app.lag_s),
            format!("BEHIND {:.0} s", app.lag_s),
        ));
    }
    parts
}

/// The status line that fits `width`: every part, then without the lowest priorities, then
/// the short forms.
pub fn status_text(app: &App, width: usize) -> String {
    let parts = status_parts(app);
    let join = |max_prio: u8, short_from: u8| {
        parts
            .iter()
            .filter(|p| p.0 <= max_prio)
            .map(|p| if p.0 >= short_from { &p.2 } else { &p.1 })
            .filter(|s| !s.is_empty())
            .cloned()
            .collect::<Vec<_>>()
            .join(" | ")
    };
    let tries = [
        join(9, 9),
        join(2, 9),
        join(1, 9),
        join(1, 1),
        join(0, 9),
        join(0, 0),
    ];
    fit(&tries, width)
}

/// Draw the status line.
pub fn status(f: &mut Frame, app: &App, r: Rect) {
    let style = if app.stale() { warn(app) } else { bold() };
    f.render_widget(
        Paragraph::new(Line::from(Span::styled(
            status_text(app, r.width as usize),
            style,
        ))),
        r,
    );
}

/// Draw the key bar: the keys this view offers, as many as fit (`?` always).
pub fn keybar(f: &mut Frame, app: &App, r: Rect) {
    let replay = matches!(app.source, Source::Replay { .. });
    // in a replay its own keys come right after quit, so they fit first
    let mut offered: Vec<_> = KEYS.iter().filter(|k| k.3.in_view(replay)).collect();
    offered.sort_by_key(|k| match (k.0, k.3) {
        ("q", _) => 0,
        (_, Offered::Replay) => 1,
        _ => 2,
    });
    let keys: Vec<String> = offered
        .iter()
        .map(|(k, short, _, _)| format!("{k} {short}"))
        .collect();
    // as many as fit, help always
    let w = r.width as usize;
    let mut text = String::new();
    for k in &keys {
        let next = if text.is_empty() {
            k.clone()
        } else {
            format!("{text}  {k}")
        };
        if width_of(&next) + "  ? help".len() > w && !k.starts_with('?') {
            continue;
        }
        text = next;
    }
    f.render_widget(
        Paragraph::new(text).style(Style::default().add_modifier(Modifier::DIM)),
        r,
    );
}

/// What the help overlay explains beside the keys.
pub const HELP_NOTES: &[&str] = &[
    "STALE: the link is down; the figures are the last ones that came.",
    "TIE (time interval error): each edge against an ideal clock; shown only when the clock holds its frequency and its jitter is above the probe's resolution.",
    "Lines: their level, and \"no change seen\" or when they last changed; the heartbeat is beating or \"stopped N s ago\".",
    "Event times are probe time; \"host:\" events carry the host's clock.",
];

/// Draw the help overlay: the keys and what the words on screen mean.
pub fn help(f: &mut Frame, app: &App, area: Rect) {
    let replay = matches!(app.source, Source::Replay { .. });
    let mut lines: Vec<Line> = KEYS
        .iter()
        .filter(|k| k.3.in_view(replay))
        .map(|(k, _, d, _)| Line::from(format!(" {k:<8} {d}")))
        .collect();
    lines.push(Line::from(""));
    lines.extend(HELP_NOTES.iter().map(|n| Line::from(format!(" {n}"))));
    let h = (lines.len() as u16 + 2).min(area.height);
    let w = 92.min(area.width);
    let r = Rect {
        x: (area.width - w) / 2,
        y: (area.height.saturating_sub(h)) / 2,
        width: w,
        height: h,
    };
    f.render_widget(Clear, r);
    f.render_widget(
        Paragraph::new(lines).wrap(Wrap { trim: false }).block(
            Block::default()
                .borders(Borders::ALL)
                .title(" keys (? closes) "),
        ),
        r,
    );
}

/// Draw the text prompt.
pub fn prompt(f: &mut Frame, ask: Ask, text: &str, area: Rect) {
    let w = 72.min(area.width - 4);
    let r = Rect {
        x: (area.width - w) / 2,
        y: area.height / 2 - 1,
        width: w,
        height: 3,
    };
    let title = match ask {
        Ask::Mark => " mark text (Enter stores, Esc cancels) ",
        Ask::RecordFile => " record to file (Enter starts, Esc cancels) ",
    };
    // the end of a long text stays in sight
    let room = w.saturating_sub(3) as usize;
    let n = width_of(text);
    let shown: String = text.chars().skip(n.saturating_sub(room)).collect();
    f.render_widget(Clear, r);
    f.render_widget(
        Paragraph::new(format!("{shown}_"))
            .block(Block::default().borders(Borders::ALL).title(title)),
        r,
    );
}
