//! Drawing the live view from its state (pure). Layout of our own, by priority: a status line,
//! the clock's key figures beside the rails and lines, the slack of each clock phase with the
//! verdict, then the events beside a picture (`d` cycles them), the keys at the bottom. At the
//! smallest size only the lower-priority rows give way; a larger terminal gives the room to the
//! picture, the events and the verdict's full text. Meaning is always in words; colour only
//! repeats it (and NO_COLOR turns it off). A value that does not fit is given in a shorter form,
//! never cut inside a number.

use ratatui::Frame;
use ratatui::layout::{Constraint, Direction, Layout, Rect};
use ratatui::style::Color;
use ratatui::text::{Line, Span};
use ratatui::widgets::{Block, Borders, Paragraph, Wrap};

use super::bars::{help, keybar, prompt, status};
use super::picture::picture;
use super::state::App;
use super::style::{bold, figures_style, panel, st, warn};
use super::text::{Row, by_priority, row, width_of};
pub use super::text::{fit, wrap};
use crate::measure::LineSnapshot;
use crate::probe::LineRole;
use crate::units::{self, hz, ns, percent_pm};

/// Smallest terminal the full view needs.
pub const MIN_SIZE: (u16, u16) = (80, 24);

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
    // the uncertainty in its value's unit, as every report gives it
    let (freq, freq_short) = match (c.frequency_hz, c.frequency_uncertainty_hz) {
        (Some(f), Some(u)) => (units::pm(f, u, "Hz"), hz(f).to_string()),
        (Some(f), None) => (hz(f).to_string(), hz(f).to_string()),
        _ => ("—".into(), "—".into()),
    };
    let (duty, duty_short) = match (c.duty, c.duty_uncertainty) {
        (Some(d), Some(u)) => percent_pm(d, u, 3),
        (Some(d), None) => (format!("{:.2} %", d * 100.0), format!("{:.2} %", d * 100.0)),
        _ => ("—".into(), "—".into()),
    };
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
    let count = if c.observation == "window-extremes" {
        format!("cycles     {} (timed by the probe)", c.cycles)
    } else {
        format!("edges      {}", c.edges)
    };
    rows.push(row(4, fit(&[count], w), fs));
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
}
