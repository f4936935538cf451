//! The margin as text or Markdown (pure): where the clock was judged, the slack tables against
//! the worst-case and the typical budget with each sign the resolution allows, the failure,
//! the highest clean frequency, the problems and the verdict paragraph.

use std::fmt::Write;

use slackmeter_core::margin::{Against, Basis, Margin, Sign};
use slackmeter_core::units::{hz, ns};

use super::table;

fn title(a: &Against) -> String {
    let corner = match a.corner {
        slackmeter_core::budget::Corner::Max => "worst case (guaranteed data-sheet limits)",
        _ => "typical (not guaranteed)",
    };
    format!(
        "{corner}, f_max at the measured duty {}",
        hz(a.fmax_at_duty_hz)
    )
}

fn rows(a: &Against) -> Vec<Vec<String>> {
    a.phases
        .iter()
        .map(|p| {
            vec![
                p.phase.to_string(),
                ns(p.required_ns).to_string(),
                super::table::pm(p.measured_ns * 1e-9, p.uncertainty_ns * 1e-9, "s"),
                format!("{:+.1} ns", p.slack_ns),
                p.slack_pct.map_or("—".into(), |x| format!("{x:+.0} %")),
                match p.sign {
                    Sign::Clears => "clears".into(),
                    Sign::WithinResolution => "sign not known".into(),
                    Sign::Short => "SHORT".into(),
                },
            ]
        })
        .collect()
}

fn head(m: &Margin) -> [&'static str; 6] {
    [
        "phase",
        "needs",
        if m.mean_phases {
            "measured MEAN"
        } else {
            "measured worst"
        },
        "slack",
        "slack %",
        "at this resolution",
    ]
}

/// Where the margin was judged, in words.
pub fn judged_words(m: &Margin) -> String {
    let at = format!("{:.3}–{:.3} s", m.judged.from_s, m.judged.to_s);
    match m.judged.basis {
        Basis::Session if m.moving => {
            format!("the whole window {at} (a moving clock without intervals of its own)")
        }
        Basis::Session => format!("the whole window {at} (a steady clock)"),
        Basis::LastCleanBeforeFailure => {
            format!("the last clean interval before the failure, {at} (a moving clock)")
        }
        Basis::LeastSlack => format!("the interval with the least slack, {at} (a moving clock)"),
    }
}

/// Facts beside the tables, one per line (failure, highest clean, problems, notes).
fn facts(m: &Margin) -> Vec<String> {
    let mut v = Vec::new();
    if let Some(f) = &m.failure {
        let o = &f.onset;
        v.push(format!(
            "measured failure onset ({}) at {:.3} s: {}, duty {:.1} %, worst high {}, worst low {}{}; headroom from the operating point {}",
            o.cause,
            o.at_s,
            super::table::pm(o.frequency_hz, o.frequency_uncertainty_hz, "Hz"),
            o.duty * 100.0,
            ns(o.high_min_ns),
            ns(o.low_min_ns),
            o.rail.as_ref().map_or(String::new(), |(n, mv)| format!(
                ", {n} {:.3} V",
                mv / 1000.0
            )),
            f.headroom
                .map_or("unknown".into(), |h| format!("{:+.1} %", h * 100.0))
        ));
    }
    if let Some(f) = m.highest_clean_hz.filter(|_| m.moving) {
        v.push(format!(
            "highest clean frequency (no problem, every slack positive): {}{}",
            m.highest_clean_uncertainty_hz
                .map_or(hz(f).to_string(), |u| super::table::pm(f, u, "Hz")),
            m.highest_clean_at_s
                .map_or(String::new(), |t| format!(" at {t:.3} s"))
        ));
    }
    for p in &m.problems {
        v.push(format!(
            "problem ({}{}): {}",
            p.kind.name(),
            if p.kind.is_failure() {
                ", a failure"
            } else {
                ""
            },
            p.detail
        ));
    }
    for n in &m.notes {
        v.push(format!("note: {n}"));
    }
    v
}

fn clock_line(m: &Margin) -> String {
    format!(
        "clock {} at {:.2} % duty; budget derated at {:.3} V ({}), {} °C; guard band {:.0} %",
        m.operating_uncertainty_hz
            .map_or(hz(m.operating_hz).to_string(), |u| super::table::pm(
                m.operating_hz,
                u,
                "Hz"
            )),
        m.duty * 100.0,
        m.vcc_used_v,
        m.vcc_source,
        m.temp_c,
        m.guard_band * 100.0
    )
}

/// The margin section of a text report.
pub fn render(m: &Margin, design: &str) -> String {
    let mut out = String::new();
    let _ = writeln!(out, "\nMargin against {design}");
    let _ = writeln!(out, "  judged on {}", judged_words(m));
    let _ = writeln!(out, "  {}", clock_line(m));
    for (s, v) in &m.section_vcc_v {
        let _ = writeln!(out, "    section {s}: {v:.3} V");
    }
    for a in [&m.worst_case, &m.typical] {
        let _ = writeln!(out, "  {}", title(a));
        table::text(&mut out, 4, &head(m), &rows(a));
    }
    for f in facts(m) {
        let _ = writeln!(out, "  {f}");
    }
    let _ = writeln!(
        out,
        "\n  VERDICT ({}): {}",
        m.verdict.name(),
        m.verdict_text
    );
    out
}

/// The margin section of a Markdown report.
pub fn render_markdown(m: &Margin, design: &str) -> String {
    let mut out = String::new();
    let _ = writeln!(out, "\n## Margin against {design}\n");
    let _ = writeln!(
        out,
        "**Verdict: `{}`.** {}\n",
        m.verdict.name(),
        m.verdict_text
    );
    let _ = writeln!(out, "- judged on {}", judged_words(m));
    let _ = writeln!(out, "- {}", clock_line(m));
    for (s, v) in &m.section_vcc_v {
        let _ = writeln!(out, "- section {s}: {v:.3} V");
    }
    for a in [&m.worst_case, &m.typical] {
        let _ = writeln!(out, "\n### {}", title(a));
        table::markdown(&mut out, &head(m), &rows(a));
    }
    let f = facts(m);
    if !f.is_empty() {
        let _ = writeln!(out, "### Failure, problems and notes\n");
        for x in f {
            let _ = writeln!(out, "- {x}");
        }
    }
    out
}
