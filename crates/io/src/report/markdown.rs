//! The analysis of a recording as Markdown (pure): headings per section and pipe tables of the
//! figures, so that a Markdown viewer shows real tables. The series and the margin add their
//! own sections (`series::render_markdown`, `margin::render_markdown`).

use std::fmt::Write;

use crate::record::{Header, ReplaySummary};
use slackmeter_core::measure::{ClockSnapshot, Movement, Snapshot};
use slackmeter_core::units::{hz, ns, percent_pm};

use super::table;

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

fn row(a: &str, b: String, c: String) -> Vec<String> {
    vec![a.to_string(), b, c]
}

/// One clock's figures as (figure, value, note) rows; a moving clock's whole-window figures
/// are marked as a spread, and its figures against the moving mean follow them.
fn clock_rows(c: &ClockSnapshot, movement: Option<&Movement>) -> Vec<Vec<String>> {
    let mut r = clock_rows_of(c);
    if let Some(m) = movement.filter(|m| m.moving) {
        for row in &mut r {
            let whole = ["frequency", "period jitter", "TIE"].contains(&row[0].as_str())
                || row[0].ends_with("-cycle error");
            if whole {
                let note = &mut row[2];
                *note = if note.is_empty() {
                    super::recording::SPREAD.to_string()
                } else {
                    format!("{note}; {}", super::recording::SPREAD)
                };
            }
        }
        let at = r
            .iter()
            .position(|x| x[0] == "cycle-to-cycle")
            .map_or(r.len(), |i| i + 1);
        for (k, [f, v, n]) in super::recording::moving_rows(m).into_iter().enumerate() {
            r.insert(at + k, vec![f, v, n]);
        }
    }
    r
}

fn clock_rows_of(c: &ClockSnapshot) -> Vec<Vec<String>> {
    let q = ns(c.resolution_ns).to_string();
    let counted = if c.count_windows > 0 && c.cycles == 0 {
        format!(
            "{} cycles counted in {} windows",
            c.counted_cycles, c.count_windows
        )
    } else {
        format!("{} cycles, {} edges", c.cycles, c.edges)
    };
    let mut r = vec![
        row(
            "frequency",
            match (c.frequency_hz, c.frequency_uncertainty_hz) {
                (Some(f), Some(u)) => table::pm(f, u, "Hz"),
                (f, _) => pm(f, None, |x| hz(x).to_string()),
            },
            counted,
        ),
        row(
            "duty",
            match (c.duty, c.duty_uncertainty) {
                (Some(d), Some(u)) => percent_pm(d, u, 9).0,
                (d, _) => pm(d.map(|d| d * 100.0), None, |x| format!("{x:.3} %")),
            },
            c.duty_sampled.map_or(String::new(), |(p, lo, hi)| {
                format!(
                    "sampled {:.2} % (Wilson 95 %: {:.2} … {:.2} %)",
                    p * 100.0,
                    lo * 100.0,
                    hi * 100.0
                )
            }),
        ),
        row(
            "period",
            format!(
                "mean {}, min {}, max {}",
                opt_ns(c.period_mean_ns),
                opt_ns(c.period_min_ns),
                opt_ns(c.period_max_ns)
            ),
            String::new(),
        ),
        row(
            "worst high",
            format!("{} ± {}", opt_ns(c.high_min_ns), q),
            format!(
                "mean {}; cycle {}, at {}",
                opt_ns(c.high_mean_ns),
                c.high_min_cycle.map_or("—".into(), |v| v.to_string()),
                c.high_min_at_s.map_or("—".into(), |t| format!("{t:.6} s"))
            ),
        ),
        row(
            "worst low",
            format!("{} ± {}", opt_ns(c.low_min_ns), q),
            format!(
                "mean {}; cycle {}, at {}",
                opt_ns(c.low_mean_ns),
                c.low_min_cycle.map_or("—".into(), |v| v.to_string()),
                c.low_min_at_s.map_or("—".into(), |t| format!("{t:.6} s"))
            ),
        ),
    ];
    r.push(if c.period_jitter_below_resolution {
        row(
            "period jitter",
            format!("below resolution (< {})", ns(c.period_jitter_floor_ns)),
            format!("de-biased estimate {}", opt_ns(c.period_jitter_debiased_ns)),
        )
    } else {
        row(
            "period jitter",
            match (c.period_jitter_rms_ns, c.period_jitter_uncertainty_ns) {
                (Some(j), Some(u)) => format!("{} RMS", table::pm(j * 1e-9, u * 1e-9, "s")),
                (j, _) => format!("{} RMS", opt_ns(j)),
            },
            format!(
                "pk-pk {} over N = {}",
                opt_ns(c.period_jitter_pkpk_ns),
                c.period_jitter_n
            ),
        )
    });
    r.push(row(
        "cycle-to-cycle",
        format!("{} RMS", opt_ns(c.cycle_to_cycle_rms_ns)),
        format!(
            "de-biased: {}; max |·| {} (floor {})",
            c.cycle_to_cycle_text(),
            opt_ns(c.cycle_to_cycle_max_ns),
            ns(c.cycle_to_cycle_floor_ns)
        ),
    ));
    r.push(row(
        "TIE",
        format!("{} RMS", opt_ns(c.tie_rms_ns)),
        format!(
            "against a least-squares clock; pk-pk {} within {}-cycle records",
            opt_ns(c.tie_pkpk_ns),
            c.tie_record_cycles
        ),
    ));
    for n in &c.n_cycle {
        r.push(row(
            &format!("{}-cycle error", n.n),
            format!("{} RMS", ns(n.rms_ns)),
            format!(
                "de-biased: {}; max |·| {}",
                n.debiased_text(),
                ns(n.max_abs_ns)
            ),
        ));
    }
    if !c.allan.is_empty() {
        let pts: Vec<String> = c
            .allan
            .iter()
            .take(6)
            .map(|a| format!("τ {:.2e} s: {:.2e}", a.tau_s, a.adev))
            .collect();
        r.push(row("Allan deviation", pts.join("; "), String::new()));
    }
    if let Some(p) = &c.period_percentiles {
        r.push(row(
            "period percentiles",
            format!(
                "0.1 % {}, 1 % {}, 50 % {}, 99 % {}, 99.9 % {}",
                ns(p.p0_1),
                ns(p.p1),
                ns(p.p50),
                ns(p.p99),
                ns(p.p99_9)
            ),
            String::new(),
        ));
    }
    r.push(row("glitches", c.glitches.to_string(), String::new()));
    if let Some(v) = &c.violations {
        r.push(row(
            "short phases",
            (v.high_short + v.low_short).to_string(),
            super::recording::violations_text(v),
        ));
    }
    r.push(row("stalls", c.stalls.to_string(), String::new()));
    for u in &c.unavailable {
        r.push(row(&u.figure, "unavailable".into(), u.reason.clone()));
    }
    r
}

/// The full analysis as Markdown, with the window analysed in words (`window`).
pub fn render(
    file: &str,
    header: &Header,
    snap: &Snapshot,
    sum: &ReplaySummary,
    window: &str,
) -> String {
    let mut out = String::new();
    let _ = writeln!(out, "# Recording `{}`\n", file.replace('`', "'"));
    let _ = writeln!(
        out,
        "- source {}, {:.1} s, written by {} on {}",
        header.source, sum.duration_s, header.tool, header.host
    );
    let _ = writeln!(out, "- window analysed: {window}");
    for n in &header.notes {
        let _ = writeln!(out, "- note: {n}");
    }
    if let Some(p) = &snap.probe {
        let _ = writeln!(out, "- probe {}, tick {}", p.firmware, ns(p.tick_ns));
    }
    let movement = snap.movement();
    for (i, c) in snap.clocks.iter().enumerate() {
        let _ = writeln!(
            out,
            "\n## Clock {} (channel {}, {}, tick {})",
            c.label,
            c.channel,
            c.method,
            ns(c.resolution_ns)
        );
        table::markdown(
            &mut out,
            &["figure", "value", "detail"],
            // the series follows the first clock
            &clock_rows(c, movement.as_ref().filter(|_| i == 0)),
        );
    }
    if !snap.rails.is_empty() {
        let _ = writeln!(out, "\n## Rails");
        let v = |x: Option<f64>| x.map_or("—".into(), |m| format!("{:.3} V", m / 1000.0));
        let rows: Vec<Vec<String>> = snap
            .rails
            .iter()
            .map(|r| {
                vec![
                    r.name.clone(),
                    v(r.min_mv),
                    r.min_at_s.map_or("—".into(), |t| format!("{t:.3} s")),
                    v(r.mean_mv),
                    v(r.max_mv),
                    r.ripple_pkpk_mv
                        .map_or("—".into(), |m| format!("{m:.1} mV")),
                    r.noise_rms_mv.map_or("—".into(), |m| format!("{m:.1} mV")),
                    format!("{:.2} V", r.limit_mv / 1000.0),
                    format!("{:.3} s", r.below_limit_s),
                    format!("{} (deepest {:.0} mV)", r.sag_events, r.deepest_sag_mv),
                ]
            })
            .collect();
        table::markdown(
            &mut out,
            &[
                "rail",
                "min",
                "min at",
                "mean",
                "max",
                "ripple pk-pk",
                "noise RMS",
                "limit",
                "below limit",
                "sags",
            ],
            &rows,
        );
        if let Some((n, mv)) = &snap.worst_rail {
            let _ = writeln!(out, "Lowest rail: {n} at {:.3} V.", mv / 1000.0);
        }
    }
    if !snap.lines.is_empty() {
        let _ = writeln!(out, "\n## Lines");
        let rows: Vec<Vec<String>> = snap
            .lines
            .iter()
            .map(|l| {
                vec![
                    l.name.clone(),
                    l.role.to_string(),
                    l.edges.to_string(),
                    l.rate_hz
                        .map_or("no rate".into(), |r| format!("{r:.3} rises/s")),
                    l.level
                        .map_or("unknown", |b| if b { "high" } else { "low" })
                        .to_string(),
                ]
            })
            .collect();
        table::markdown(
            &mut out,
            &["line", "role", "edges", "rate", "level now"],
            &rows,
        );
    }
    let t = &snap.trust;
    let _ = writeln!(out, "\n## Trust");
    table::markdown(
        &mut out,
        &["counter", "value"],
        &[
            vec!["frames".into(), t.frames.to_string()],
            vec!["lost (sequence gaps)".into(), t.lost_frames.to_string()],
            vec!["CRC errors".into(), t.crc_errors.to_string()],
            vec!["other rejects".into(), t.other_rejects.to_string()],
            vec![
                "probe drops, edges".into(),
                t.probe_edges_dropped.to_string(),
            ],
            vec![
                "probe drops, samples".into(),
                t.probe_samples_dropped.to_string(),
            ],
            vec!["reconnects".into(), t.reconnects.to_string()],
        ],
    );
    let _ = writeln!(
        out,
        "{}",
        if t.clean() {
            "Nothing lost."
        } else {
            "The figures cover incomplete data."
        }
    );
    if !sum.marks.is_empty() {
        let _ = writeln!(out, "\n## Marks");
        let rows: Vec<Vec<String>> = sum
            .marks
            .iter()
            .map(|m| vec![format!("{:.3} s", m.at_s), m.text.clone()])
            .collect();
        table::markdown(&mut out, &["at", "mark"], &rows);
    }
    if !sum.links.is_empty() {
        let _ = writeln!(out, "\n## Link events");
        let rows: Vec<Vec<String>> = sum
            .links
            .iter()
            .map(|l| {
                vec![
                    format!("{:.3} s", l.at_s),
                    super::recording::link_words(&l.event),
                ]
            })
            .collect();
        table::markdown(&mut out, &["at", "event"], &rows);
    }
    if !sum.damage.is_empty() {
        let _ = writeln!(out, "\n## File damage");
        let rows: Vec<Vec<String>> = sum
            .damage
            .iter()
            .map(|d| {
                vec![
                    d.offset.to_string(),
                    d.what.to_string(),
                    d.skipped.to_string(),
                ]
            })
            .collect();
        table::markdown(&mut out, &["byte offset", "what", "bytes skipped"], &rows);
    }
    out
}
