//! Drawing the live view from its state (pure). Layout of our own: a status line, the clock
//! and the rails side by side, the slack of each clock phase and the events below, the keys at
//! the bottom. Meaning is always in words; colour only repeats it (and NO_COLOR turns it off).

use ratatui::Frame;
use ratatui::layout::{Constraint, Direction, Layout, Rect};
use ratatui::style::{Color, Modifier, Style};
use ratatui::text::{Line, Span};
use ratatui::widgets::{Block, Borders, Clear, Paragraph, Wrap};

use super::keys::KEYS;
use super::state::{App, Detail, Source};
use crate::measure::Window;
use crate::units::{hz, ns};

/// Smallest terminal the full view needs.
pub const MIN_SIZE: (u16, u16) = (80, 24);

fn st(app: &App, color: Color) -> Style {
    if app.color {
        Style::default().fg(color)
    } else {
        Style::default()
    }
}

fn warn(app: &App) -> Style {
    if app.color {
        Style::default().fg(Color::Red).add_modifier(Modifier::BOLD)
    } else {
        Style::default().add_modifier(Modifier::BOLD | Modifier::REVERSED)
    }
}

fn opt_ns(v: Option<f64>) -> String {
    v.map_or("—".into(), |x| ns(x).to_string())
}

/// Draw the whole view.
pub fn render(f: &mut Frame, app: &App) {
    let area = f.area();
    if area.width < MIN_SIZE.0 || area.height < MIN_SIZE.1 {
        let msg = format!(
            "slackmeter needs a terminal of at least {}×{}; this one is {}×{}. Enlarge it (q quits).",
            MIN_SIZE.0, MIN_SIZE.1, area.width, area.height
        );
        f.render_widget(Paragraph::new(msg).wrap(Wrap { trim: true }), area);
        return;
    }
    let rows = Layout::default()
        .direction(Direction::Vertical)
        .constraints([
            Constraint::Length(1),
            Constraint::Length(14),
            Constraint::Min(8),
            Constraint::Length(1),
        ])
        .split(area);
    status(f, app, rows[0]);
    let top = Layout::default()
        .direction(Direction::Horizontal)
        .constraints([Constraint::Percentage(55), Constraint::Percentage(45)])
        .split(rows[1]);
    clock(f, app, top[0]);
    rails(f, app, top[1]);
    let bottom = Layout::default()
        .direction(Direction::Horizontal)
        .constraints([Constraint::Percentage(60), Constraint::Percentage(40)])
        .split(rows[2]);
    slack(f, app, bottom[0]);
    events(f, app, bottom[1]);
    keybar(f, app, rows[3]);
    if app.help {
        help(f, app, area);
    }
    if let Some(t) = &app.typing {
        let w = 60.min(area.width - 4);
        let r = Rect {
            x: (area.width - w) / 2,
            y: area.height / 2 - 1,
            width: w,
            height: 3,
        };
        f.render_widget(Clear, r);
        f.render_widget(
            Paragraph::new(format!("{t}_")).block(
                Block::default()
                    .borders(Borders::ALL)
                    .title(" mark text (Enter stores, Esc cancels) "),
            ),
            r,
        );
    }
}

fn status(f: &mut Frame, app: &App, r: Rect) {
    let src = match &app.source {
        Source::Connecting { what } => format!("CONNECTING to {what}"),
        Source::Streaming { probe, reconnects } => {
            format!("STREAMING from {probe} (reconnects {reconnects})")
        }
        Source::Lost { reason, retry_in_s } => {
            format!("LINK LOST ({reason}) — retrying in {retry_in_s:.1} s")
        }
        Source::Replay {
            file,
            at_s,
            paused,
            speed,
            done,
        } => format!(
            "REPLAY {file} at {at_s:.1} s, {}{}",
            if *done {
                "finished".to_string()
            } else if *paused {
                "PAUSED".to_string()
            } else {
                format!("×{speed}")
            },
            ""
        ),
    };
    let rec = match (&app.recording, &app.rec_failed) {
        (Some((p, b)), _) => format!("REC {p} {:.1} MB", *b as f64 / 1e6),
        (None, Some(_)) => "REC FAILED (see events)".to_string(),
        (None, None) => "not recording".to_string(),
    };
    let trust = app.snapshot.as_ref().map_or(String::new(), |s| {
        let t = &s.trust;
        // complete, sampled, or what was lost
        match s.completeness() {
            "lost" => format!(
                " | LOST: {} frames, {} crc, {} drops",
                t.lost_frames,
                t.crc_errors,
                t.probe_edges_dropped + t.probe_samples_dropped
            ),
            word => format!(" | {word}"),
        }
    });
    let win = match app.window {
        Window::Recent => "recent 10 s",
        Window::Session => "whole session",
    };
    let frozen = if app.frozen { " | FROZEN" } else { "" };
    let behind = if app.lag_s > super::state::LAG_SHOWN_S {
        format!(" | BEHIND {:.1} s", app.lag_s)
    } else {
        String::new()
    };
    let style = match app.source {
        Source::Lost { .. } => warn(app),
        _ => Style::default().add_modifier(Modifier::BOLD),
    };
    f.render_widget(
        Paragraph::new(Line::from(vec![
            Span::styled(src, style),
            Span::raw(format!(" | {rec}{trust} | {win}{frozen}{behind}")),
        ])),
        r,
    );
}

fn clock(f: &mut Frame, app: &App, r: Rect) {
    let block = Block::default().borders(Borders::ALL).title(" clock ");
    let Some(c) = app.snapshot.as_ref().and_then(|s| s.clock()) else {
        f.render_widget(Paragraph::new("waiting for clock edges…").block(block), r);
        return;
    };
    let pm = |v: Option<f64>, u: Option<f64>, fmt: &dyn Fn(f64) -> String| match (v, u) {
        (Some(v), Some(u)) => format!("{} ± {}", fmt(v), fmt(u)),
        (Some(v), None) => fmt(v),
        _ => "—".into(),
    };
    let jitter = c.jitter_text(true);
    let (name, p) = match app.detail {
        Detail::Period => ("period", &c.period_percentiles),
        Detail::High => ("high time", &c.high_percentiles),
        Detail::Low => ("low time", &c.low_percentiles),
    };
    let dist = p.as_ref().map_or("—".into(), |p| {
        format!(
            "0.1% {}  1% {}  50% {}  99% {}  99.9% {}",
            ns(p.p0_1),
            ns(p.p1),
            ns(p.p50),
            ns(p.p99),
            ns(p.p99_9)
        )
    });
    let lines = vec![
        Line::from(vec![
            Span::raw("frequency  "),
            Span::styled(
                pm(c.frequency_hz, c.frequency_uncertainty_hz, &|x| {
                    hz(x).to_string()
                }),
                Style::default().add_modifier(Modifier::BOLD),
            ),
        ]),
        Line::from(format!(
            "period     mean {}   duty {}",
            opt_ns(c.period_mean_ns),
            pm(
                c.duty.map(|d| d * 100.0),
                c.duty_uncertainty.map(|d| d * 100.0),
                &|x| format!("{x:.2} %")
            )
        )),
        Line::from(vec![
            Span::raw("worst high "),
            Span::styled(
                format!("{} ±{}", opt_ns(c.high_min_ns), ns(c.resolution_ns)),
                Style::default().add_modifier(Modifier::BOLD),
            ),
            Span::raw("   worst low "),
            Span::styled(
                format!("{} ±{}", opt_ns(c.low_min_ns), ns(c.resolution_ns)),
                Style::default().add_modifier(Modifier::BOLD),
            ),
            Span::raw(
                c.observed_share()
                    .map(|s| format!("   of the observed cycles ({s})"))
                    .unwrap_or_default(),
            ),
        ]),
        Line::from(format!("jitter     {jitter}")),
        Line::from(format!(
            "c-to-c     max {}   TIE {} RMS",
            opt_ns(c.cycle_to_cycle_max_ns),
            opt_ns(c.tie_rms_ns)
        )),
        Line::from(vec![
            Span::styled(
                format!("glitches   {}", c.glitches),
                if c.glitches > 0 {
                    warn(app)
                } else {
                    Style::default()
                },
            ),
            Span::raw(format!(
                "   stalls {}   edges {}   tick {}",
                c.stalls,
                c.edges,
                ns(c.resolution_ns)
            )),
        ]),
        Line::from(format!("{name} (d): {dist}")),
    ];
    f.render_widget(Paragraph::new(lines).block(block), r);
}

fn rails(f: &mut Frame, app: &App, r: Rect) {
    let block = Block::default().borders(Borders::ALL).title(" rails ");
    let Some(s) = &app.snapshot else {
        f.render_widget(Paragraph::new("").block(block), r);
        return;
    };
    let mut lines = Vec::new();
    for rail in &s.rails {
        let v = |x: Option<f64>| x.map_or("—".into(), |m| format!("{:.3} V", m / 1000.0));
        let below = rail.min_mv.is_some_and(|m| m < rail.limit_mv);
        lines.push(Line::from(vec![
            Span::styled(
                format!("{:<9}", rail.name),
                Style::default().add_modifier(Modifier::BOLD),
            ),
            Span::raw(format!(" now {}  min {}", v(rail.now_mv), v(rail.min_mv))),
        ]));
        if let Some(h) = app.rail_history.get(&rail.name)
            && !h.is_empty()
        {
            let lo = h
                .iter()
                .copied()
                .fold(f64::INFINITY, f64::min)
                .min(rail.limit_mv);
            let hi = h.iter().copied().fold(f64::NEG_INFINITY, f64::max);
            let w = (r.width as usize).saturating_sub(14).min(h.len());
            let spark = sparkline(h.iter().skip(h.len() - w).copied(), lo, hi);
            lines.push(Line::from(format!(
                "  {spark} {:.2}…{:.2} V",
                lo / 1000.0,
                hi / 1000.0
            )));
        }
        lines.push(Line::from(vec![
            Span::raw("  "),
            if below {
                Span::styled("BELOW LIMIT", warn(app))
            } else {
                Span::styled("ok", st(app, Color::Green))
            },
            Span::raw(format!(
                " (limit {:.2} V), {} sags, ripple {}",
                rail.limit_mv / 1000.0,
                rail.sag_events,
                rail.ripple_pkpk_mv
                    .map_or("—".into(), |m| format!("{m:.0} mV"))
            )),
        ]));
    }
    for l in &s.lines {
        lines.push(Line::from(format!(
            "{:<9} {} {}",
            l.name,
            l.level.map_or("?", |b| if b { "high" } else { "low" }),
            l.rate_hz.map_or(String::new(), |r| format!("{r:.2}/s"))
        )));
    }
    f.render_widget(Paragraph::new(lines).block(block), r);
}

/// A text sparkline of values between `lo` and `hi` (one block character per value).
pub fn sparkline(values: impl Iterator<Item = f64>, lo: f64, hi: f64) -> String {
    const BARS: [char; 8] = ['▁', '▂', '▃', '▄', '▅', '▆', '▇', '█'];
    let span = (hi - lo).max(1e-9);
    values
        .map(|v| BARS[(((v - lo) / span) * 7.0).round().clamp(0.0, 7.0) as usize])
        .collect()
}

fn slack(f: &mut Frame, app: &App, r: Rect) {
    let title = format!(
        " slack against {} ",
        app.design.as_deref().unwrap_or("no design")
    );
    let block = Block::default().borders(Borders::ALL).title(title);
    let Some(m) = &app.margin else {
        let msg = if app.design.is_some() {
            "waiting for cycles…"
        } else {
            "no design loaded (--design)"
        };
        f.render_widget(Paragraph::new(msg).block(block), r);
        return;
    };
    let measured = if m.mean_phases {
        "measured MEAN"
    } else {
        "measured worst"
    };
    let mut lines = vec![Line::from(format!(
        "{:<7} {:>10} {:>15} {:>11} {:>7}  at {:.3} V",
        "phase", "needs", measured, "slack", "%", m.vcc_used_v
    ))];
    for p in &m.worst_case.phases {
        // the words the report uses: a sign within ± its bound is not known
        let sign = match p.sign {
            crate::margin::Sign::Short => Span::styled(" SHORT", warn(app)),
            crate::margin::Sign::WithinResolution => Span::styled(" sign not known", warn(app)),
            crate::margin::Sign::Clears => Span::raw(""),
        };
        lines.push(Line::from(vec![
            Span::raw(format!(
                "{:<7} {:>10} {:>15} {:>11} {:>7} ",
                p.phase,
                ns(p.required_ns).to_string(),
                ns(p.measured_ns).to_string(),
                format!("{:+.1} ns", p.slack_ns),
                p.slack_pct.map_or("—".into(), |x| format!("{x:+.0}%"))
            )),
            sign,
        ]));
    }
    if m.mean_phases {
        lines.push(Line::from(Span::styled(
            "counting probe: mean phases stand in, the worst cycle is not observable",
            warn(app),
        )));
    }
    lines.push(Line::from(Span::styled(
        format!("verdict: {}", m.verdict_text),
        Style::default().add_modifier(Modifier::BOLD),
    )));
    f.render_widget(
        Paragraph::new(lines).wrap(Wrap { trim: true }).block(block),
        r,
    );
}

fn events(f: &mut Frame, app: &App, r: Rect) {
    let block = Block::default().borders(Borders::ALL).title(" events ");
    let n = r.height.saturating_sub(2) as usize;
    let lines: Vec<Line> = app
        .events
        .iter()
        .rev()
        .take(n)
        .rev()
        .map(|e| Line::from(format!("{:>8.3} s {}", e.at_s, e.text)))
        .collect();
    f.render_widget(Paragraph::new(lines).block(block), r);
}

fn keybar(f: &mut Frame, app: &App, r: Rect) {
    let replay = matches!(app.source, Source::Replay { .. });
    let keys: Vec<String> = KEYS
        .iter()
        .filter(|k| !k.3 || replay)
        .map(|(k, short, _, _)| format!("{k} {short}"))
        .collect();
    f.render_widget(
        Paragraph::new(keys.join("  ")).style(Style::default().add_modifier(Modifier::DIM)),
        r,
    );
}

fn help(f: &mut Frame, app: &App, area: Rect) {
    let replay = matches!(app.source, Source::Replay { .. });
    let lines: Vec<Line> = KEYS
        .iter()
        .filter(|k| !k.3 || replay)
        .map(|(k, _, d, _)| Line::from(format!("  {k:<6} {d}")))
        .collect();
    let h = lines.len() as u16 + 2;
    let w = 54.min(area.width);
    let r = Rect {
        x: (area.width - w) / 2,
        y: (area.height.saturating_sub(h)) / 2,
        width: w,
        height: h,
    };
    f.render_widget(Clear, r);
    f.render_widget(
        Paragraph::new(lines).block(
            Block::default()
                .borders(Borders::ALL)
                .title(" keys (? closes) "),
        ),
        r,
    );
}
