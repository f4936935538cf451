//! Drawing the live view from its state (pure). Layout of our own, by priority: a status line,
//! the clock's key figures beside the rails and lines, the slack of each clock phase with the
//! verdict, then the events beside a picture (`d` cycles them), the keys at the bottom. At the
//! smallest size only the lower-priority rows give way; a larger terminal gives the room to the
//! picture, the events and the verdict's full text. Meaning is always in words; colour only
//! repeats it (and NO_COLOR turns it off). A value that does not fit is given in a shorter form,
//! never cut inside a number.

use ratatui::Frame;
use ratatui::layout::{Constraint, Direction, Layout, Rect};
use ratatui::style::{Color, Modifier, Style};
use ratatui::symbols::Marker;
use ratatui::text::{Line, Span};
use ratatui::widgets::{Axis, Block, Borders, Chart, Clear, Dataset, GraphType, Paragraph, Wrap};

use super::keys::KEYS;
use super::state::{App, Ask, Picture, Source};
use crate::measure::{LineSnapshot, Window};
use crate::probe::LineRole;
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

fn bold() -> Style {
    Style::default().add_modifier(Modifier::BOLD)
}

fn opt_ns(v: Option<f64>) -> String {
    v.map_or("—".into(), |x| ns(x).to_string())
}

fn width_of(s: &str) -> usize {
    s.chars().count()
}

/// The first of `variants` (longest first) that fits `width`; else the last one shortened at a
/// space, with "…" (a number is never cut in two).
pub fn fit(variants: &[String], width: usize) -> String {
    if let Some(v) = variants.iter().find(|v| width_of(v) <= width) {
        return v.clone();
    }
    let last = variants.last().map_or("", |s| s.as_str());
    let mut out = String::new();
    for word in last.split(' ') {
        let next = if out.is_empty() {
            word.to_string()
        } else {
            format!("{out} {word}")
        };
        if width_of(&next) + 1 > width {
            break;
        }
        out = next;
    }
    out.push('…');
    out
}

/// Words of `text` in lines of at most `width` characters (a longer word is split).
pub fn wrap(text: &str, width: usize) -> Vec<String> {
    let width = width.max(1);
    let mut lines = Vec::new();
    let mut cur = String::new();
    for word in text.split_whitespace() {
        let mut word = word.to_string();
        while width_of(&word) > width {
            if !cur.is_empty() {
                lines.push(std::mem::take(&mut cur));
            }
            let head: String = word.chars().take(width).collect();
            word = word.chars().skip(width).collect();
            lines.push(head);
        }
        if cur.is_empty() {
            cur = word;
        } else if width_of(&cur) + 1 + width_of(&word) <= width {
            cur.push(' ');
            cur.push_str(&word);
        } else {
            lines.push(std::mem::replace(&mut cur, word));
        }
    }
    if !cur.is_empty() || lines.is_empty() {
        lines.push(cur);
    }
    lines
}

/// One row of a panel: its priority (0 is kept longest) and what it shows.
struct Row {
    prio: u8,
    line: Line<'static>,
}

fn row(prio: u8, text: String, style: Style) -> Row {
    Row {
        prio,
        line: Line::from(Span::styled(text, style)),
    }
}

/// The rows that fit `n` lines: the lowest priorities give way first; order is kept.
fn by_priority(rows: Vec<Row>, n: usize) -> Vec<Line<'static>> {
    let mut keep: Vec<(usize, u8)> = rows.iter().enumerate().map(|(i, r)| (i, r.prio)).collect();
    keep.sort_by_key(|&(i, p)| (p, i));
    keep.truncate(n);
    let mut idx: Vec<usize> = keep.into_iter().map(|(i, _)| i).collect();
    idx.sort_unstable();
    let mut rows: Vec<Option<Row>> = rows.into_iter().map(Some).collect();
    idx.into_iter()
        .filter_map(|i| rows[i].take().map(|r| r.line))
        .collect()
}

fn panel(app: &App, title: &str) -> Block<'static> {
    let t = if app.stale() {
        format!(" {title} — STALE (link down) ")
    } else {
        format!(" {title} ")
    };
    Block::default().borders(Borders::ALL).title(t)
}

fn figures_style(app: &App) -> Style {
    if app.stale() {
        Style::default().add_modifier(Modifier::DIM)
    } else {
        Style::default()
    }
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
            Constraint::Min(1),
            Constraint::Length(1),
        ])
        .split(area);
    status(f, app, rows[0]);
    keybar(f, app, rows[2]);
    body(f, app, rows[1]);
    if app.help {
        help(f, app, area);
    }
    if let Some(p) = &app.prompt {
        prompt(f, p.ask, &p.text, area);
    }
}

fn body(f: &mut Frame, app: &App, r: Rect) {
    let h = r.height;
    let extra = h.saturating_sub(22);
    let with_design = app.design.is_some();
    // the slack panel: phases and the verdict's first line always; its full text with room
    let slack_h = if with_design {
        let m = app.margin.as_ref();
        let phases = m.map_or(3, |m| m.worst_case.phases.len()) as u16;
        let mean = u16::from(m.is_some_and(|m| m.mean_phases));
        let base = 2 + 1 + phases + mean + 1;
        let full = m.map_or(0, |m| {
            wrap(&m.verdict_text, r.width.saturating_sub(2) as usize).len() as u16
        });
        base + full.min(extra / 3)
    } else {
        0
    };
    let top_h = if with_design { 8 } else { 8 + 7 } + (extra / 4).min(4);
    let parts = Layout::default()
        .direction(Direction::Vertical)
        .constraints([
            Constraint::Length(top_h),
            Constraint::Length(slack_h),
            Constraint::Min(0),
        ])
        .split(r);
    let top = Layout::default()
        .direction(Direction::Horizontal)
        .constraints([Constraint::Percentage(55), Constraint::Percentage(45)])
        .split(parts[0]);
    clock(f, app, top[0]);
    rails(f, app, top[1]);
    if with_design {
        slack(f, app, parts[1]);
    }
    let bottom = Layout::default()
        .direction(Direction::Horizontal)
        .constraints([Constraint::Percentage(45), Constraint::Percentage(55)])
        .split(parts[2]);
    events(f, app, bottom[0]);
    picture(f, app, bottom[1]);
}

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

fn status(f: &mut Frame, app: &App, r: Rect) {
    let style = if app.stale() { warn(app) } else { bold() };
    f.render_widget(
        Paragraph::new(Line::from(Span::styled(
            status_text(app, r.width as usize),
            style,
        ))),
        r,
    );
}

/// Whether the clock's TIE means something: a clock that holds its frequency (a moving clock's
/// TIE is its drift) with period jitter above the probe's resolution.
fn tie_meaningful(app: &App, c: &crate::measure::ClockSnapshot) -> bool {
    let moving = app.margin.as_ref().is_some_and(|m| m.moving);
    c.tie_rms_ns.is_some() && !moving && !c.period_jitter_below_resolution
}

fn clock(f: &mut Frame, app: &App, r: Rect) {
    let block = panel(app, "clock");
    let w = r.width.saturating_sub(2) as usize;
    let Some(c) = app.snapshot.as_ref().and_then(|s| s.clock()) else {
        f.render_widget(Paragraph::new("waiting for clock edges…").block(block), r);
        return;
    };
    let fs = figures_style(app);
    let pm = |v: Option<f64>, u: Option<f64>, fmt: &dyn Fn(f64) -> String| match (v, u) {
        (Some(v), Some(u)) => (format!("{} ± {}", fmt(v), fmt(u)), fmt(v)),
        (Some(v), None) => (fmt(v), fmt(v)),
        _ => ("—".into(), "—".into()),
    };
    let (freq, freq_short) = pm(c.frequency_hz, c.frequency_uncertainty_hz, &|x| {
        hz(x).to_string()
    });
    let (duty, duty_short) = pm(
        c.duty.map(|d| d * 100.0),
        c.duty_uncertainty.map(|d| d * 100.0),
        &|x| format!("{x:.2} %"),
    );
    let tick = ns(c.resolution_ns).to_string();
    let hi = opt_ns(c.high_min_ns);
    let lo = opt_ns(c.low_min_ns);
    let mut rows = vec![
        row(
            0,
            fit(
                &[format!("frequency  {freq}"), format!("freq {freq_short}")],
                w,
            ),
            fs.patch(bold()),
        ),
        row(
            0,
            fit(
                &[
                    format!("period     {}   duty {duty}", opt_ns(c.period_mean_ns)),
                    format!("period {}  duty {duty}", opt_ns(c.period_mean_ns)),
                    format!("period {}  duty {duty_short}", opt_ns(c.period_mean_ns)),
                ],
                w,
            ),
            fs,
        ),
        row(
            0,
            fit(
                &[
                    format!("worst high {hi}   low {lo}   ± {tick}"),
                    format!("worst high {hi}  low {lo}"),
                    format!("worst hi {hi} lo {lo}"),
                ],
                w,
            ),
            fs.patch(bold()),
        ),
    ];
    if let Some(share) = c.observed_share() {
        rows.push(row(
            3,
            fit(&[format!("  of the observed cycles ({share})")], w),
            fs,
        ));
    }
    let glitch_style = if c.glitches > 0 { warn(app) } else { fs };
    rows.push(row(
        1,
        fit(
            &[
                format!(
                    "glitches   {}   stalls {}   tick {tick}",
                    c.glitches, c.stalls
                ),
                format!("glitches {}  stalls {}", c.glitches, c.stalls),
            ],
            w,
        ),
        glitch_style,
    ));
    let jitter_words = if c.period_jitter_below_resolution {
        format!(
            "below resolution (< {})",
            ns(c.period_jitter_debiased_ns.unwrap_or(0.0)
                + c.period_jitter_uncertainty_ns.unwrap_or(0.0))
        )
    } else {
        c.period_jitter_debiased_ns
            .map_or("—".into(), |d| format!("{} RMS", ns(d)))
    };
    rows.push(row(
        2,
        fit(
            &[
                format!("jitter     {}", c.jitter_text(true)),
                format!("jitter     {jitter_words}"),
                format!("jitter {jitter_words}"),
            ],
            w,
        ),
        fs,
    ));
    let tie = if tie_meaningful(app, c) {
        format!("   TIE {} RMS", opt_ns(c.tie_rms_ns))
    } else {
        String::new()
    };
    rows.push(row(
        3,
        fit(
            &[
                format!("c-to-c     max {}{tie}", opt_ns(c.cycle_to_cycle_max_ns)),
                format!("c-to-c max {}", opt_ns(c.cycle_to_cycle_max_ns)),
            ],
            w,
        ),
        fs,
    ));
    for (name, p) in [
        ("period", &c.period_percentiles),
        ("high", &c.high_percentiles),
        ("low", &c.low_percentiles),
    ] {
        if let Some(p) = p {
            rows.push(row(
                4,
                fit(
                    &[
                        format!(
                            "{name:<6} 0.1% {}  1% {}  50% {}  99% {}  99.9% {}",
                            ns(p.p0_1),
                            ns(p.p1),
                            ns(p.p50),
                            ns(p.p99),
                            ns(p.p99_9)
                        ),
                        format!(
                            "{name:<6} 1% {}  50% {}  99% {}",
                            ns(p.p1),
                            ns(p.p50),
                            ns(p.p99)
                        ),
                        format!("{name:<6} 50% {}", ns(p.p50)),
                    ],
                    w,
                ),
                fs,
            ));
        }
    }
    rows.push(row(4, fit(&[format!("edges      {}", c.edges)], w), fs));
    let lines = by_priority(rows, r.height.saturating_sub(2) as usize);
    f.render_widget(Paragraph::new(lines).block(block), r);
}

/// A line's state in words: its level and when it last changed; a heartbeat as beating or
/// stopped (never as a low rate).
pub fn line_words(l: &LineSnapshot) -> String {
    let level = l.level.map_or("", |b| if b { "high" } else { "low" });
    if l.role == LineRole::Heartbeat {
        // silent for longer than three of its half-periods: stopped
        return match (l.rate_hz, l.since_change_s) {
            (Some(r), Some(s)) if r > 0.0 && s > 3.0 / (2.0 * r) => {
                format!("stopped {s:.0} s ago")
            }
            (Some(r), _) if r > 0.0 => format!("beating ({r:.1} beats/s)"),
            (_, Some(s)) => format!("stopped {s:.0} s ago"),
            _ => "no beat seen".into(),
        };
    }
    match (l.level, l.since_change_s) {
        (Some(_), Some(s)) if s.is_finite() => format!("{level}, changed {s:.1} s ago"),
        (None, Some(s)) if s.is_finite() => format!("changed {s:.1} s ago"),
        (None, _) => "no change seen".into(),
        _ => format!("{level}, no change seen"),
    }
}

fn rails(f: &mut Frame, app: &App, r: Rect) {
    let block = panel(app, "rails and lines");
    let w = r.width.saturating_sub(2) as usize;
    let Some(s) = &app.snapshot else {
        f.render_widget(Paragraph::new("").block(block), r);
        return;
    };
    let fs = figures_style(app);
    let mut rows = Vec::new();
    for rail in &s.rails {
        let v = |x: Option<f64>| x.map_or("—".into(), |m| format!("{:.3}", m / 1000.0));
        let below = rail.min_mv.is_some_and(|m| m < rail.limit_mv);
        let state = if below { "BELOW LIMIT" } else { "ok" };
        let short = if below { "LOW" } else { "ok" };
        let text = fit(
            &[
                format!(
                    "{:<8} {} V  min {} V  {state}",
                    rail.name,
                    v(rail.now_mv),
                    v(rail.min_mv)
                ),
                format!(
                    "{:<8} {} V min {} {short}",
                    rail.name,
                    v(rail.now_mv),
                    v(rail.min_mv)
                ),
                format!("{} min {} V {short}", rail.name, v(rail.min_mv)),
            ],
            w,
        );
        let style = if below {
            warn(app)
        } else {
            fs.patch(st(app, Color::Green))
        };
        rows.push(row(0, text, style));
        rows.push(row(
            3,
            fit(
                &[
                    format!(
                        "  limit {:.2} V, {} sags, ripple {}",
                        rail.limit_mv / 1000.0,
                        rail.sag_events,
                        rail.ripple_pkpk_mv
                            .map_or("—".into(), |m| format!("{m:.0} mV"))
                    ),
                    format!(
                        "  limit {:.2} V, {} sags",
                        rail.limit_mv / 1000.0,
                        rail.sag_events
                    ),
                ],
                w,
            ),
            fs,
        ));
    }
    for l in &s.lines {
        let words = line_words(l);
        rows.push(row(
            1,
            fit(
                &[
                    format!("{:<9} {words}", l.name),
                    format!("{} {words}", l.name),
                ],
                w,
            ),
            fs,
        ));
    }
    let lines = by_priority(rows, r.height.saturating_sub(2) as usize);
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

/// The verdict in one line: its state, what the slack alone says when it failed, the guard band.
fn verdict_line(m: &crate::margin::Margin) -> Vec<String> {
    use crate::margin::Verdict;
    let guard = format!(
        "{:.0} % guard band {}",
        m.guard_band * 100.0,
        if m.guard_band_met { "met" } else { "not met" }
    );
    let what = if m.verdict == Verdict::Failed {
        let why = m
            .problems
            .iter()
            .find(|p| p.kind.is_failure())
            .map(|p| format!(" ({} {})", p.count, p.kind.name()))
            .unwrap_or_default();
        (
            format!("FAILED{why}; slack alone: {}", m.slack_verdict.words()),
            format!("FAILED{why}"),
        )
    } else {
        (m.verdict.words().to_string(), m.verdict.words().to_string())
    };
    vec![
        format!("verdict: {}; {guard}", what.0),
        format!("verdict: {}", what.0),
        format!("verdict: {}; {guard}", what.1),
        format!("verdict: {}", what.1),
    ]
}

fn slack(f: &mut Frame, app: &App, r: Rect) {
    let block = panel(
        app,
        &format!(
            "slack against {}",
            app.design.as_deref().unwrap_or("no design")
        ),
    );
    let w = r.width.saturating_sub(2) as usize;
    let Some(m) = &app.margin else {
        f.render_widget(Paragraph::new("waiting for cycles…").block(block), r);
        return;
    };
    let fs = figures_style(app);
    let measured = if m.mean_phases {
        "measured MEAN"
    } else {
        "measured worst"
    };
    let mut rows = vec![row(
        0,
        fit(
            &[
                format!(
                    "{:<7} {:>10} {:>15} {:>11} {:>7}  at {:.3} V",
                    "phase", "needs", measured, "slack", "%", m.vcc_used_v
                ),
                format!(
                    "{:<7} {:>10} {:>15} {:>11} {:>7}",
                    "phase", "needs", measured, "slack", "%"
                ),
            ],
            w,
        ),
        fs,
    )];
    for p in &m.worst_case.phases {
        // the words the report uses: a sign within ± its bound is not known
        let (sign, style) = match p.sign {
            crate::margin::Sign::Short => (" SHORT", warn(app)),
            crate::margin::Sign::WithinResolution => (" sign not known", warn(app)),
            crate::margin::Sign::Clears => ("", fs),
        };
        rows.push(Row {
            prio: 0,
            line: Line::from(vec![
                Span::styled(
                    format!(
                        "{:<7} {:>10} {:>15} {:>11} {:>7}",
                        p.phase,
                        ns(p.required_ns).to_string(),
                        ns(p.measured_ns).to_string(),
                        format!("{:+.1} ns", p.slack_ns),
                        p.slack_pct.map_or("—".into(), |x| format!("{x:+.0}%"))
                    ),
                    fs,
                ),
                Span::styled(sign, style),
            ]),
        });
    }
    if m.mean_phases {
        rows.push(row(
            0,
            fit(
                &[
                    "counting probe: mean phases stand in, the worst cycle is not observable"
                        .into(),
                    "counting probe: mean phases, worst cycle not observable".into(),
                ],
                w,
            ),
            warn(app),
        ));
    }
    rows.push(row(0, fit(&verdict_line(m), w), fs.patch(bold())));
    for l in wrap(&m.verdict_text, w) {
        rows.push(row(5, l, fs));
    }
    let lines = by_priority(rows, r.height.saturating_sub(2) as usize);
    f.render_widget(Paragraph::new(lines).block(block), r);
}

fn events(f: &mut Frame, app: &App, r: Rect) {
    let listed: Vec<_> = app.listed_events().collect();
    let filter = app.event_filter.map_or("all", |k| k.name());
    let title = match app.event_scroll {
        Some(i) => format!(
            "events: {filter}, {} newer below (End)",
            listed.len() - i - 1
        ),
        None => format!("events: {filter}"),
    };
    let block = Block::default()
        .borders(Borders::ALL)
        .title(format!(" {title} "));
    let w = r.width.saturating_sub(2) as usize;
    let n = r.height.saturating_sub(2) as usize;
    if listed.is_empty() {
        let msg = if app.event_filter.is_some() {
            "none of this kind (f: next kind)"
        } else {
            "none yet"
        };
        f.render_widget(Paragraph::new(msg).block(block), r);
        return;
    }
    let last = app
        .event_scroll
        .unwrap_or(listed.len() - 1)
        .min(listed.len() - 1);
    // newest on screen last; each event wraps under its text, its time on the first row
    let mut rows: Vec<Line> = Vec::new();
    for e in listed[..=last].iter().rev() {
        let at = format!("{:>8.3} s ", e.at_s);
        let indent = width_of(&at);
        let body = wrap(&e.text, w.saturating_sub(indent).max(8));
        let mut these: Vec<Line> = body
            .into_iter()
            .enumerate()
            .map(|(i, t)| {
                let lead = if i == 0 {
                    at.clone()
                } else {
                    " ".repeat(indent)
                };
                Line::from(format!("{lead}{t}"))
            })
            .collect();
        these.reverse();
        rows.extend(these);
        if rows.len() >= n {
            break;
        }
    }
    rows.truncate(n);
    rows.reverse();
    f.render_widget(Paragraph::new(rows).block(block), r);
}

/// (lowest, highest) of `values`, widened so a flat line has room.
fn bounds(values: impl Iterator<Item = f64>) -> Option<[f64; 2]> {
    let (lo, hi) = values
        .filter(|v| v.is_finite())
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), v| {
            (lo.min(v), hi.max(v))
        });
    if !lo.is_finite() {
        return None;
    }
    let pad = ((hi - lo) * 0.1).max(hi.abs() * 1e-6).max(1e-9);
    Some([lo - pad, hi + pad])
}

fn time_axis(t: [f64; 2]) -> Axis<'static> {
    Axis::default()
        .bounds(t)
        .labels([format!("{:.1} s", t[0]), format!("{:.1} s", t[1])])
}

fn picture(f: &mut Frame, app: &App, r: Rect) {
    let Some(s) = &app.snapshot else {
        let block = panel(app, app.picture.name());
        f.render_widget(Paragraph::new("waiting for figures…").block(block), r);
        return;
    };
    let mid = |p: &crate::measure::SeriesPoint| (p.from_s + p.to_s) / 2.0;
    let t = s
        .series
        .points
        .iter()
        .fold(None, |acc: Option<[f64; 2]>, p| {
            Some(acc.map_or([p.from_s, p.to_s], |[a, b]| {
                [a.min(p.from_s), b.max(p.to_s)]
            }))
        })
        .filter(|[a, b]| b > a)
        .unwrap_or([0.0, 1.0]);
    let span = t[1] - t[0];
    let what = match app.picture {
        Picture::Frequency => "frequency".to_string(),
        Picture::Slack => format!(
            "slack in % of need: low, high, period; zero and the {:.0} % guard band",
            app.margin.as_ref().map_or(0.0, |m| m.guard_band * 100.0)
        ),
        Picture::Rails => "each rail's lowest against its limit".to_string(),
    };
    let w = r.width.saturating_sub(4) as usize;
    let title = fit(
        &[
            format!("{what}, last {span:.1} s (d: next picture)"),
            format!("{what}, last {span:.1} s (d)"),
            format!("{}, last {span:.1} s (d)", app.picture.name()),
            format!("{} (d)", app.picture.name()),
        ],
        w,
    );
    let block = panel(app, &title);
    let msg = |text: &str| Paragraph::new(text.to_string()).block(panel(app, &title));
    let color = |c: Color| st(app, c);
    match app.picture {
        Picture::Frequency => {
            let pts: Vec<(f64, f64)> = s
                .series
                .clock_points()
                .filter_map(|p| p.frequency_hz.map(|v| (mid(p), v)))
                .collect();
            let Some(y) = bounds(pts.iter().map(|p| p.1)) else {
                f.render_widget(msg("no clock intervals yet"), r);
                return;
            };
            let data = [Dataset::default()
                .name("frequency")
                .marker(Marker::Braille)
                .graph_type(GraphType::Line)
                .style(color(Color::Cyan))
                .data(&pts)];
            // a steady clock moves in its last digits: the axis is labelled from the middle
            let centre = (y[0] + y[1]) / 2.0;
            let half = (y[1] - y[0]) / 2.0;
            let chart = Chart::new(data.to_vec())
                .block(block)
                .x_axis(time_axis(t))
                .y_axis(Axis::default().bounds(y).labels([
                    format!("−{}", hz(half)),
                    hz(centre).to_string(),
                    format!("+{}", hz(half)),
                ]))
                .hidden_legend_constraints((Constraint::Ratio(0, 1), Constraint::Ratio(0, 1)));
            f.render_widget(chart, r);
        }
        Picture::Slack => {
            let Some(m) = &app.margin else {
                let text = if app.design.is_some() {
                    "waiting for cycles…"
                } else {
                    "slack needs a design (--design)"
                };
                f.render_widget(msg(text), r);
                return;
            };
            let need = |name: &str| {
                m.worst_case
                    .phases
                    .iter()
                    .find(|p| p.phase == name)
                    .map(|p| p.required_ns)
                    .filter(|r| *r > 0.0)
            };
            let series = |name: &str, get: fn(&crate::measure::SeriesPoint) -> Option<f64>| {
                let Some(req) = need(name) else {
                    return Vec::new();
                };
                s.series
                    .clock_points()
                    .filter_map(|p| get(p).map(|v| (mid(p), (v - req) / req * 100.0)))
                    .collect::<Vec<_>>()
            };
            let low = series("low", |p| p.low_min_ns);
            let high = series("high", |p| p.high_min_ns);
            let period = series("period", |p| p.period_min_ns);
            let guard = m.guard_band * 100.0;
            let zero = vec![(t[0], 0.0), (t[1], 0.0)];
            let band = vec![(t[0], guard), (t[1], guard)];
            let Some(y) = bounds(
                low.iter()
                    .chain(&high)
                    .chain(&period)
                    .map(|p| p.1)
                    .chain([0.0, guard]),
            ) else {
                f.render_widget(msg("no clock intervals yet"), r);
                return;
            };
            let data = vec![
                Dataset::default()
                    .name("zero")
                    .graph_type(GraphType::Line)
                    .marker(Marker::Dot)
                    .style(color(Color::Red))
                    .data(&zero),
                Dataset::default()
                    .name(format!("guard {guard:.0} %"))
                    .graph_type(GraphType::Line)
                    .marker(Marker::Dot)
                    .style(color(Color::Yellow))
                    .data(&band),
                Dataset::default()
                    .name("low")
                    .graph_type(GraphType::Line)
                    .marker(Marker::Braille)
                    .style(color(Color::Cyan))
                    .data(&low),
                Dataset::default()
                    .name("high")
                    .graph_type(GraphType::Line)
                    .marker(Marker::Braille)
                    .style(color(Color::Magenta))
                    .data(&high),
                Dataset::default()
                    .name("period")
                    .graph_type(GraphType::Line)
                    .marker(Marker::Braille)
                    .style(color(Color::Green))
                    .data(&period),
            ];
            let chart = Chart::new(data)
                .block(block)
                .x_axis(time_axis(t))
                .y_axis(
                    Axis::default()
                        .bounds(y)
                        .labels([format!("{:+.0}%", y[0]), format!("{:+.0}%", y[1])]),
                )
                .hidden_legend_constraints((Constraint::Ratio(1, 1), Constraint::Ratio(1, 1)));
            f.render_widget(chart, r);
        }
        Picture::Rails => {
            let mut sets: Vec<(String, Vec<(f64, f64)>)> = Vec::new();
            for (i, name) in s.series.rails.iter().enumerate() {
                let pts: Vec<(f64, f64)> = s
                    .series
                    .points
                    .iter()
                    .filter_map(|p| {
                        p.rail_min_mv
                            .get(i)
                            .copied()
                            .flatten()
                            .map(|v| (mid(p), v / 1000.0))
                    })
                    .collect();
                sets.push((name.clone(), pts));
            }
            let limits: Vec<(f64, Vec<(f64, f64)>)> = s
                .series
                .rail_limits_mv
                .iter()
                .map(|l| (l / 1000.0, vec![(t[0], l / 1000.0), (t[1], l / 1000.0)]))
                .collect();
            let Some(y) = bounds(
                sets.iter()
                    .flat_map(|s| s.1.iter().map(|p| p.1))
                    .chain(limits.iter().map(|l| l.0)),
            ) else {
                f.render_widget(msg("no rail samples yet"), r);
                return;
            };
            const COLOURS: [Color; 4] = [Color::Cyan, Color::Green, Color::Magenta, Color::Blue];
            let mut data: Vec<Dataset> = Vec::new();
            let mut shown_limits: Vec<f64> = Vec::new();
            for (l, pts) in &limits {
                if shown_limits.iter().any(|x| (x - l).abs() < 1e-6) {
                    continue;
                }
                shown_limits.push(*l);
                data.push(
                    Dataset::default()
                        .name(format!("limit {l:.2} V"))
                        .graph_type(GraphType::Line)
                        .marker(Marker::Dot)
                        .style(color(Color::Red))
                        .data(pts),
                );
            }
            for (i, (name, pts)) in sets.iter().enumerate() {
                data.push(
                    Dataset::default()
                        .name(format!("{name} min"))
                        .graph_type(GraphType::Line)
                        .marker(Marker::Braille)
                        .style(color(COLOURS[i % COLOURS.len()]))
                        .data(pts),
                );
            }
            let chart = Chart::new(data)
                .block(block)
                .x_axis(time_axis(t))
                .y_axis(
                    Axis::default()
                        .bounds(y)
                        .labels([format!("{:.2} V", y[0]), format!("{:.2} V", y[1])]),
                )
                .hidden_legend_constraints((Constraint::Ratio(1, 1), Constraint::Ratio(1, 1)));
            f.render_widget(chart, r);
        }
    }
}

fn keybar(f: &mut Frame, app: &App, r: Rect) {
    let replay = matches!(app.source, Source::Replay { .. });
    let keys: Vec<String> = KEYS
        .iter()
        .filter(|k| k.3.in_view(replay))
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
    "TIE (time interval error): each edge against an ideal clock; shown only when the clock",
    "  holds its frequency and its jitter is above the probe's resolution.",
    "Lines: their level, and \"no change seen\" or when they last changed;",
    "  the heartbeat is beating or \"stopped N s ago\".",
    "Event times are probe time; \"host:\" events carry the host's clock.",
];

fn help(f: &mut Frame, app: &App, area: Rect) {
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

fn prompt(f: &mut Frame, ask: Ask, text: &str, area: Rect) {
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

#[cfg(test)]
mod tests {
    use super::*;

    fn line(
        role: LineRole,
        level: Option<bool>,
        rate: Option<f64>,
        since: Option<f64>,
    ) -> LineSnapshot {
        LineSnapshot {
            channel: 4,
            name: "L".into(),
            role,
            level,
            edges: u64::from(since.is_some()),
            rises: 0,
            rate_hz: rate,
            pulse_mean_ms: None,
            pulse_min_ms: None,
            since_change_s: since,
            events: vec![],
        }
    }

    #[test]
    fn lines_in_words() {
        assert_eq!(
            line_words(&line(LineRole::Fault, Some(false), None, None)),
            "low, no change seen"
        );
        assert_eq!(
            line_words(&line(LineRole::Reset, None, None, None)),
            "no change seen"
        );
        assert_eq!(
            line_words(&line(LineRole::Reset, Some(true), None, Some(2.5))),
            "high, changed 2.5 s ago"
        );
        assert_eq!(
            line_words(&line(LineRole::Heartbeat, Some(true), Some(2.0), Some(0.1))),
            "beating (2.0 beats/s)"
        );
        // silent for more than three half-periods: stopped
        assert_eq!(
            line_words(&line(LineRole::Heartbeat, Some(true), Some(2.0), Some(4.0))),
            "stopped 4 s ago"
        );
    }

    #[test]
    fn fit_never_cuts_a_number() {
        let v = vec![
            "frequency 500.0 kHz ± 19.67 mHz".to_string(),
            "freq 500.0 kHz".into(),
        ];
        assert_eq!(fit(&v, 40), v[0]);
        assert_eq!(fit(&v, 20), "freq 500.0 kHz");
        assert_eq!(fit(&v, 12), "freq 500.0…");
        assert_eq!(wrap("one two three", 7), vec!["one two", "three"]);
    }
}
