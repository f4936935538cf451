//! The margin table and verdict as text (pure).

use std::fmt::Write;

use slackmeter_core::margin::{Against, Margin};
use slackmeter_core::units::{hz, ns};

fn table(out: &mut String, title: &str, a: &Against, measured: &str) {
    let _ = writeln!(
        out,
        "  {title} (f_max at the measured duty {})",
        hz(a.fmax_at_duty_hz)
    );
    let _ = writeln!(
        out,
        "    {:<7} {:>11} {:>16} {:>13} {:>8}",
        "phase", "needs", measured, "slack", "slack %"
    );
    for p in &a.phases {
        let _ = writeln!(
            out,
            "    {:<7} {:>11} {:>16} {:>13} {:>8}{}",
            p.phase,
            ns(p.required_ns).to_string(),
            format!("{} ±{}", ns(p.measured_ns), ns(p.uncertainty_ns)),
            format!("{:+.1} ns", p.slack_ns),
            p.slack_pct.map_or("—".into(), |x| format!("{x:+.0} %")),
            if p.slack_ns < 0.0 {
                "  SHORT"
            } else if p.slack_ns < p.uncertainty_ns {
                "  within resolution"
            } else {
                ""
            }
        );
    }
}

/// The margin section of a report.
pub fn render(m: &Margin, design: &str) -> String {
    let mut out = String::new();
    let _ = writeln!(out, "\nMargin against {design}");
    let _ = writeln!(
        out,
        "  clock {} at {:.2} % duty; budget derated at {:.3} V ({}), {} °C",
        hz(m.clock_hz),
        m.duty * 100.0,
        m.vcc_used_v,
        m.vcc_source,
        m.temp_c
    );
    for (s, v) in &m.section_vcc_v {
        let _ = writeln!(out, "    section {s}: {v:.3} V");
    }
    let measured = if m.mean_phases {
        "measured MEAN"
    } else {
        "measured worst"
    };
    table(
        &mut out,
        "worst case (guaranteed data-sheet limits)",
        &m.worst_case,
        measured,
    );
    table(&mut out, "typical (not guaranteed)", &m.typical, measured);
    if let Some(f) = &m.failure {
        let o = &f.onset;
        let _ = writeln!(
            out,
            "  measured failure onset at {:.3} s: {} ± {}, duty {:.1} %, worst high {}, worst low {}{}",
            o.at_s,
            hz(o.frequency_hz),
            hz(o.frequency_uncertainty_hz),
            o.duty * 100.0,
            ns(o.high_min_ns),
            ns(o.low_min_ns),
            o.rail.as_ref().map_or(String::new(), |(n, mv)| format!(
                ", {n} {:.3} V",
                mv / 1000.0
            ))
        );
    }
    for n in &m.notes {
        let _ = writeln!(out, "  note: {n}");
    }
    let _ = writeln!(out, "\n  VERDICT: {}", m.verdict_text);
    out
}
