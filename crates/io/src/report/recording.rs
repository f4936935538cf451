//! The analysis of a recording as text, Markdown or a JSON document (pure).

use std::fmt::Write;

use serde::Serialize;

use crate::record::{Header, ReplaySummary};
use slackmeter_core::measure::{ClockSnapshot, Movement, Snapshot};
use slackmeter_core::units::{hz, ns, percent_pm};

/// The JSON document of `slackmeter report --json`.
#[derive(Serialize)]
pub struct ReportDoc<'a> {
    /// File analysed.
    pub file: &'a str,
    /// Recording header.
    pub recording: &'a Header,
    /// Host time covered, s.
    pub duration_s: f64,
    /// The first clock (the one a budget is held against).
    pub clock: Option<&'a ClockSnapshot>,
    /// Every clock.
    pub clocks: &'a [ClockSnapshot],
    /// Rails.
    pub rails: &'a [slackmeter_core::measure::RailSnapshot],
    /// Lines.
    pub lines: &'a [slackmeter_core::measure::LineSnapshot],
    /// Lowest rail.
    pub worst_rail: &'a Option<(String, f64)>,
    /// Frames lost (sequence gaps).
    pub lost_frames: u64,
    /// CRC errors.
    pub crc_errors: u64,
    /// All trust counters.
    pub trust: &'a slackmeter_core::measure::Trust,
    /// Marks.
    pub marks: &'a [crate::record::replay::MarkAt],
    /// Link events.
    pub links: &'a [crate::record::replay::LinkAt],
    /// Damage found in the file.
    pub damage: &'a [crate::record::format::Damage],
    /// Glitches (most recent).
    pub glitch_events: &'a [slackmeter_core::measure::Glitch],
    /// Sags (most recent).
    pub sag_events: &'a [(String, slackmeter_core::measure::Sag)],
    /// The session interval by interval.
    pub series: &'a slackmeter_core::measure::Series,
    /// How the first clock moved, and its jitter and TIE against the moving mean.
    pub movement: Option<Movement>,
}

/// Build the JSON document.
pub fn doc<'a>(
    file: &'a str,
    header: &'a Header,
    snap: &'a Snapshot,
    sum: &'a ReplaySummary,
) -> ReportDoc<'a> {
    ReportDoc {
        file,
        recording: header,
        duration_s: sum.duration_s,
        clock: snap.clock(),
        clocks: &snap.clocks,
        rails: &snap.rails,
        lines: &snap.lines,
        worst_rail: &snap.worst_rail,
        lost_frames: snap.trust.lost_frames,
        crc_errors: snap.trust.crc_errors,
        trust: &snap.trust,
        marks: &sum.marks,
        links: &sum.links,
        damage: &sum.damage,
        glitch_events: &snap.glitch_events,
        sag_events: &snap.sag_events,
        series: &snap.series,
        movement: snap.movement(),
    }
}

/// Marks a whole-window figure of a moving clock.
pub const SPREAD: &str = "whole-window spread of a moving clock";

/// The figures of a moving clock as (figure, value, note) rows: that it moved and over which
/// range, and its jitter and TIE against the moving mean (none for a steady clock).
pub fn moving_rows(m: &Movement) -> Vec<[String; 3]> {
    if !m.moving {
        return Vec::new();
    }
    let range = match (m.low_hz, m.high_hz) {
        (Some(lo), Some(hi)) => format!("{} … {}", hz(lo), hz(hi)),
        _ => "—".into(),
    };
    let jitter = match (
        m.period_jitter_detrended_ns,
        m.period_jitter_detrended_uncertainty_ns,
    ) {
        _ if m.period_jitter_detrended_below_resolution => "below resolution".to_string(),
        (Some(j), Some(u)) => format!("{} RMS", super::table::pm(j * 1e-9, u * 1e-9, "s")),
        _ => "—".into(),
    };
    vec![
        [
            "moving clock".into(),
            range,
            format!(
                "between {} intervals (χ²/ν {:.3e} against one steady clock): the whole-window frequency, period jitter, N-cycle error and TIE are a spread, not figures of one clock",
                m.intervals,
                m.chi2_per_dof.unwrap_or(f64::NAN)
            ),
        ],
        [
            "detrended jitter".into(),
            jitter,
            "period jitter against the moving mean, from cycle-to-cycle: √((c2c² - q²/2) / 2)"
                .into(),
        ],
        [
            "detrended TIE".into(),
            format!("{} pk-pk", opt_ns(m.tie_detrended_pkpk_ns)),
            format!(
                "within {}-cycle records, each against its own fitted clock",
                m.tie_record_cycles
            ),
        ],
    ]
}

fn opt_ns(v: Option<f64>) -> String {
    v.map_or("—".into(), |x| ns(x).to_string())
}

fn pm(v: Option<f64>, u: Option<f64>, f: impl Fn(f64) -> String) -> String {
    match (v, u) {
        (Some(v), Some(u)) => format!("{} ± {}", f(v), f(u)),
        (Some(v), None) => f(v),
        _ => "—".into(),
    }
}

/// Text of one clock's figures; with a `movement` that moved, the whole-window figures are
/// marked as a spread and the figures against the moving mean follow.
pub fn clock_lines(out: &mut String, c: &ClockSnapshot, movement: Option<&Movement>) {
    let moving = movement.is_some_and(|m| m.moving);
    let spread = if moving {
        format!(" [{SPREAD}]")
    } else {
        String::new()
    };
    let _ = writeln!(
        out,
        "Clock {} (channel {}, {}, tick {})",
        c.label,
        c.channel,
        c.method,
        ns(c.resolution_ns)
    );
    let counted = if c.count_windows > 0 && c.cycles == 0 {
        format!(
            "{} cycles counted in {} windows",
            c.counted_cycles, c.count_windows
        )
    } else {
        format!("{} cycles, {} edges", c.cycles, c.edges)
    };
    let _ = writeln!(
        out,
        "  frequency     {}   ({counted}){spread}",
        match (c.frequency_hz, c.frequency_uncertainty_hz) {
            (Some(f), Some(u)) => super::table::pm(f, u, "Hz"),
            (f, _) => pm(f, None, |x| hz(x).to_string()),
        }
    );
    if let Some(a) = c.frequency_accuracy_hz {
        let _ = writeln!(out, "                (timebase accuracy ± {})", hz(a));
    }
    let _ = writeln!(
        out,
        "  duty          {}",
        match (c.duty, c.duty_uncertainty) {
            (Some(d), Some(u)) => percent_pm(d, u, 9).0,
            (Some(d), None) => format!("{:.3} %", d * 100.0),
            _ => "—".into(),
        }
    );
    if let Some(note) = &c.duty_note {
        let _ = writeln!(out, "                ({note})");
    }
    if let Some((p, lo, hi)) = c.duty_sampled {
        let _ = writeln!(
            out,
            "  sampled duty  {:.2} % (Wilson 95 %: {:.2} … {:.2} %)",
            p * 100.0,
            lo * 100.0,
            hi * 100.0
        );
    }
    let _ = writeln!(
        out,
        "  period        mean {}, min {}{}, max {}",
        opt_ns(c.period_mean_ns),
        opt_ns(c.period_min_ns),
        c.observed_share()
            .map(|s| format!(" (of the observed cycles: {s})"))
            .unwrap_or_default(),
        opt_ns(c.period_max_ns)
    );
    let _ = writeln!(
        out,
        "  high time     mean {}, worst high {} (± {}, cycle {}, at {}){}",
        opt_ns(c.high_mean_ns),
        opt_ns(c.high_min_ns),
        ns(c.resolution_ns),
        c.high_min_cycle.map_or("—".into(), |v| v.to_string()),
        c.high_min_at_s.map_or("—".into(), |t| format!("{t:.6} s")),
        c.observed_share()
            .map(|s| format!(", worst of the observed cycles ({s})"))
            .unwrap_or_default()
    );
    let _ = writeln!(
        out,
        "  low time      mean {}, worst low {} (± {}, cycle {}, at {}){}",
        opt_ns(c.low_mean_ns),
        opt_ns(c.low_min_ns),
        ns(c.resolution_ns),
        c.low_min_cycle.map_or("—".into(), |v| v.to_string()),
        c.low_min_at_s.map_or("—".into(), |t| format!("{t:.6} s")),
        c.observed_share()
            .map(|s| format!(", worst of the observed cycles ({s})"))
            .unwrap_or_default()
    );
    let jitter = c.jitter_text(false);
    let _ = writeln!(out, "  period jitter {jitter}{spread}");
    let _ = writeln!(
        out,
        "  cycle-to-cycle {} RMS (de-biased: {}), max |·| {} (quantisation alone {} RMS)",
        opt_ns(c.cycle_to_cycle_rms_ns),
        c.cycle_to_cycle_text(),
        opt_ns(c.cycle_to_cycle_max_ns),
        ns(c.cycle_to_cycle_floor_ns)
    );
    let _ = writeln!(
        out,
        "  TIE           {} RMS against a least-squares clock per contiguous stretch{spread}, pk-pk {} within {}-cycle records",
        opt_ns(c.tie_rms_ns),
        opt_ns(c.tie_pkpk_ns),
        c.tie_record_cycles
    );
    for n in &c.n_cycle {
        let _ = writeln!(
            out,
            "  {}-cycle error {} RMS (de-biased: {}), max |·| {}{spread}",
            n.n,
            ns(n.rms_ns),
            n.debiased_text(),
            ns(n.max_abs_ns)
        );
    }
    for [f, v, note] in movement.map(moving_rows).unwrap_or_default() {
        let _ = writeln!(out, "  {f:<13} {v} ({note})");
    }
    if !c.allan.is_empty() {
        let pts: Vec<String> = c
            .allan
            .iter()
            .take(6)
            .map(|a| format!("τ {:.2e} s: {:.2e}", a.tau_s, a.adev))
            .collect();
        let _ = writeln!(out, "  Allan dev.    {}", pts.join("; "));
    }
    if let Some(p) = &c.period_percentiles {
        let _ = writeln!(
            out,
            "  period %iles  0.1 % {}, 1 % {}, 50 % {}, 99 % {}, 99.9 % {}",
            ns(p.p0_1),
            ns(p.p1),
            ns(p.p50),
            ns(p.p99),
            ns(p.p99_9)
        );
    }
    let _ = writeln!(out, "  glitches      {}   stalls {}", c.glitches, c.stalls);
    if let Some(v) = &c.violations {
        let _ = writeln!(out, "  short phases  {}", violations_text(v));
    }
    for u in &c.unavailable {
        let _ = writeln!(out, "  {}: unavailable — {}", u.figure, u.reason);
    }
}

/// The probe's threshold counts in words: "3 high times below 120.0 ns, 0 low times below
/// 120.0 ns over 300 windows, the first a high phase of 16.00 ns at 0.030277 s".
pub fn violations_text(v: &slackmeter_core::measure::clock::ThresholdViolations) -> String {
    let part = |n: u64, what: &str, t: Option<f64>| match t {
        Some(t) => format!(
            "{n} {what} time{} below {}",
            if n == 1 { "" } else { "s" },
            ns(t)
        ),
        None => format!("{what} times not counted"),
    };
    let first = v.first.first().map_or(String::new(), |e| {
        format!(
            ", the first a {} phase of {} at {:.6} s",
            e.phase,
            ns(e.length_ns),
            e.at_s
        )
    });
    format!(
        "{}, {} over {} windows (counted by the probe){first}",
        part(v.high_short, "high", v.high_threshold_ns),
        part(v.low_short, "low", v.low_threshold_ns),
        v.windows
    )
}

/// What the figures stand on: *complete* (every cycle stamped, nothing lost), *sampled* (the
/// probe stamped a share of the cycles: bursts or count windows) or *lost* (data went missing).
/// A recorded link event in words ("link lost: device gone"); an event this build does not
/// know is shown as it was written.
pub fn link_words(event: &serde_json::Value) -> String {
    use crate::record::LinkNote;
    let Ok(note) = serde_json::from_value::<LinkNote>(event.clone()) else {
        return event.to_string();
    };
    let firmware = |f: &Option<String>| f.as_ref().map_or(String::new(), |f| format!(" ({f})"));
    match &note {
        LinkNote::Connected {
            reconnects: 0,
            firmware: f,
        } => format!("probe connected{}", firmware(f)),
        LinkNote::Connected {
            reconnects: n,
            firmware: f,
        } => format!("link back{}: reconnect {n}", firmware(f)),
        LinkNote::Lost { reason } => format!("link lost: {reason}"),
        LinkNote::Refused { what, reason } => format!("the probe refused {what}: {reason}"),
        LinkNote::Joined => "recording joined a stream already running".into(),
        LinkNote::RecorderOverflow { dropped_bytes } => {
            format!("the recorder fell behind: {dropped_bytes} bytes of probe data dropped")
        }
    }
}

/// The trust line's verdict: "nothing lost" only when nothing was lost and the link never
/// went away (an outage is named: its time is not measured).
pub fn trust_summary(snap: &Snapshot) -> String {
    let sampled: Vec<String> = snap
        .clocks
        .iter()
        .filter(|c| !c.every_cycle_observed())
        .map(|c| match c.coverage {
            Some(v) if c.observation == "window-extremes" => format!(
                "{} timed on every cycle by the probe, but its windows of extremes cover {:.2} % of the time",
                c.label,
                v * 100.0
            ),
            Some(v) if c.observation == "bursts" => {
                format!(
                    "{} stamped in bursts, {:.2} % of its cycles",
                    c.label,
                    v * 100.0
                )
            }
            _ => format!("{} observed in count windows, no single cycle", c.label),
        })
        .collect();
    let mut out = match snap.completeness() {
        "complete" if snap.clocks.iter().any(|c| c.observation == "window-extremes") => {
            " — complete: every cycle observed (timed by the probe, its extremes sent per window), nothing lost".to_string()
        }
        "complete" => " — complete: every cycle stamped, nothing lost".to_string(),
        "lost" => " — lost: data went missing, figures cover incomplete data".to_string(),
        _ => " — sampled: nothing lost, but not every cycle stamped".to_string(),
    };
    let outages = snap.trust.reconnects;
    if outages > 0 && snap.completeness() != "lost" {
        out = format!(
            " — {}: nothing damaged arrived, but the time the link was down is not measured{}",
            if outages == 1 {
                "the link was down once".to_string()
            } else {
                format!("the link was down {outages} times")
            },
            if snap.completeness() == "sampled" {
                "; not every cycle stamped"
            } else {
                ""
            }
        );
    }
    if !sampled.is_empty() {
        out.push_str(&format!(" ({})", sampled.join("; ")));
    }
    out
}

/// The full analysis as text, with the window analysed in words (`window`).
pub fn render(
    file: &str,
    header: &Header,
    snap: &Snapshot,
    sum: &ReplaySummary,
    window: &str,
) -> String {
    let mut out = String::new();
    let _ = writeln!(out, "Recording {file}");
    let _ = writeln!(
        out,
        "source {}, {:.1} s, written by {} on {}",
        header.source, sum.duration_s, header.tool, header.host
    );
    let _ = writeln!(out, "window analysed: {window}");
    for n in &header.notes {
        let _ = writeln!(out, "note: {n}");
    }
    if let Some(p) = &snap.probe {
        let _ = writeln!(out, "probe {}, tick {}", p.firmware, ns(p.tick_ns));
    }
    let movement = snap.movement();
    for (i, c) in snap.clocks.iter().enumerate() {
        let _ = writeln!(out);
        // the series follows the first clock
        clock_lines(&mut out, c, movement.as_ref().filter(|_| i == 0));
    }
    if !snap.rails.is_empty() {
        let _ = writeln!(out, "\nRails");
        for r in &snap.rails {
            let v = |x: Option<f64>| x.map_or("—".into(), |m| format!("{:.3} V", m / 1000.0));
            let _ = writeln!(
                out,
                "  {:<10} min {} (at {}), mean {}, max {}; ripple {}, noise {} RMS; below {:.2} V for {:.3} s; {} sags (deepest {:.0} mV)",
                r.name,
                v(r.min_mv),
                r.min_at_s.map_or("—".into(), |t| format!("{t:.3} s")),
                v(r.mean_mv),
                v(r.max_mv),
                match (r.ripple_pkpk_mv, r.ripple_hz) {
                    (Some(m), Some(f)) => format!("{m:.1} mV pk-pk at {f:.0} Hz"),
                    (Some(m), None) => format!("{m:.1} mV pk-pk"),
                    _ => "—".into(),
                },
                r.noise_rms_mv.map_or("—".into(), |m| format!("{m:.1} mV")),
                r.limit_mv / 1000.0,
                r.below_limit_s,
                r.sag_events,
                r.deepest_sag_mv
            );
        }
        if let Some((n, mv)) = &snap.worst_rail {
            let _ = writeln!(out, "  lowest rail: {n} at {:.3} V", mv / 1000.0);
        }
    }
    if !snap.lines.is_empty() {
        let _ = writeln!(out, "\nLines");
        for l in &snap.lines {
            let _ = writeln!(
                out,
                "  {:<10} ({}) {} edges, {}, level now {}",
                l.name,
                l.role,
                l.edges,
                l.rate_hz
                    .map_or("no rate".into(), |r| format!("{r:.3} rises/s")),
                l.level
                    .map_or("unknown", |b| if b { "high" } else { "low" })
            );
        }
    }
    let t = &snap.trust;
    let _ = writeln!(
        out,
        "\nTrust: {} frames, {} lost (sequence gaps), {} CRC errors, {} other rejects, probe drops {} edges / {} samples, {} reconnect{}{}",
        t.frames,
        t.lost_frames,
        t.crc_errors,
        t.other_rejects,
        t.probe_edges_dropped,
        t.probe_samples_dropped,
        t.reconnects,
        if t.reconnects == 1 { "" } else { "s" },
        trust_summary(snap)
    );
    if !sum.marks.is_empty() {
        let _ = writeln!(out, "\nMarks");
        for m in &sum.marks {
            let _ = writeln!(out, "  {:>9.3} s  {}", m.at_s, m.text);
        }
    }
    if !sum.links.is_empty() {
        let _ = writeln!(out, "\nLink events");
        for l in &sum.links {
            let _ = writeln!(out, "  {:>9.3} s  {}", l.at_s, link_words(&l.event));
        }
    }
    if !sum.damage.is_empty() {
        let _ = writeln!(out, "\nFile damage");
        for d in &sum.damage {
            let _ = writeln!(
                out,
                "  byte offset {}: {} ({} bytes skipped)",
                d.offset, d.what, d.skipped
            );
        }
    }
    out
}

#[cfg(test)]
mod words_tests {
    use super::*;
    use slackmeter_core::measure::{EngineConfig, Feed, Window};

    // common practice, no source: events and verdicts in words
    #[test]
    fn link_events_read_as_words() {
        let lost = serde_json::json!({"event": "lost", "reason": "device gone"});
        assert_eq!(link_words(&lost), "link lost: device gone");
        let back = serde_json::json!({"event": "connected", "reconnects": 1});
        assert_eq!(link_words(&back), "link back: reconnect 1");
        let joined = serde_json::json!({"event": "joined"});
        assert!(!link_words(&joined).contains('{'));
        let unknown = serde_json::json!({"event": "unheard-of"});
        assert!(link_words(&unknown).contains("unheard-of"));
    }

    #[test]
    fn an_outage_is_named_not_called_nothing_lost() {
        let mut feed = Feed::new(EngineConfig::default());
        let clean = trust_summary(&feed.engine.snapshot(Window::Session));
        assert!(clean.contains("nothing lost"), "{clean}");
        feed.note_reconnect();
        let after = trust_summary(&feed.engine.snapshot(Window::Session));
        assert!(!after.contains("nothing lost"), "{after}");
        assert!(after.contains("the link was down once"), "{after}");
    }
}
