//! Plain-text rendering of a budget and of a supply sweep (pure: state in, text out).

use std::fmt::Write;

use slackmeter_core::budget::solver::{Budget, HoldStatus, Path, SweepPoint};
use slackmeter_core::units::{hz, ns};

fn corner_words(b: &Budget) -> &'static str {
    match b.corner {
        slackmeter_core::budget::Corner::Max => "max corner (guaranteed data-sheet limits)",
        slackmeter_core::budget::Corner::Typ => "typ corner (typical values, not guaranteed)",
        slackmeter_core::budget::Corner::Min => "min corner",
    }
}

fn signed_ns(v: f64) -> String {
    if v >= 0.0 {
        format!("+{}", ns(v))
    } else {
        format!("−{}", ns(-v))
    }
}

fn pct(v: Option<f64>) -> String {
    v.map_or_else(|| "—".to_string(), |p| format!("{p:+.1} %"))
}

fn path_block(out: &mut String, title: &str, p: &Path) {
    let _ = writeln!(
        out,
        "  {title}: needs {}  ({} ← {})",
        ns(p.required_ns),
        p.capture,
        p.launch
    );
    let _ = writeln!(out, "    {:>11}  {:>10}  through", "at", "delay");
    for s in &p.steps {
        let err = s
            .model_err_pct
            .map_or(String::new(), |e| format!("  (model ±{e:.1} %)"));
        let signal = if s.signal.is_empty() {
            String::new()
        } else {
            format!("  → {}", s.signal)
        };
        let _ = writeln!(
            out,
            "    {:>11}  {:>10}  {}{signal}{err}",
            ns(s.at_ns).to_string(),
            signed_ns(s.delay_ns),
            s.through
        );
    }
}

/// The budget as a readable report.
pub fn render(b: &Budget, design_file: &str) -> String {
    let mut out = String::new();
    let _ = writeln!(
        out,
        "{} — timing budget at {:.3} V, {} °C, {}",
        b.design,
        b.vcc_v,
        b.temp_c,
        corner_words(b)
    );
    let _ = writeln!(out, "design: {design_file}");
    for (s, v) in &b.section_vcc_v {
        let _ = writeln!(out, "section {s} evaluated at {v:.3} V");
    }
    if !b.in_spec {
        let _ = writeln!(
            out,
            "\n!! OUT OF SPECIFICATION: some parts run outside their data sheet's range (see warnings)"
        );
    }
    let _ = writeln!(out, "\nWhat each clock phase must last");
    let _ = writeln!(
        out,
        "  {:<8} {:>11}  slowest path (capture ← launch)",
        "phase", "needs"
    );
    for (name, req, p) in [
        ("low", b.low_required_ns, &b.critical_paths.low),
        ("high", b.high_required_ns, &b.critical_paths.high),
        ("period", b.period_required_ns, &b.critical_paths.period),
    ] {
        let who = p
            .as_ref()
            .map_or("no path constrains this phase".to_string(), |p| {
                format!("{} ← {}", p.capture, p.launch)
            });
        let _ = writeln!(out, "  {name:<8} {:>11}  {who}", ns(req).to_string());
    }

    let _ = writeln!(out, "\nClock plan");
    let _ = writeln!(
        out,
        "  best duty d* = H/(L+H) = {:.1} %: shortest period {}, f_max {}",
        b.best_duty * 100.0,
        ns(b.min_period_best_duty_ns),
        hz(b.fmax_best_duty_hz)
    );
    let _ = writeln!(
        out,
        "  at 50 % duty:                 shortest period {}, f_max {}",
        ns(b.min_period_50_ns),
        hz(b.fmax_50_hz)
    );
    if let Some(d) = &b.at_duty {
        let _ = writeln!(
            out,
            "  at {:.1} % duty:               shortest period {}, f_max {}",
            d.duty * 100.0,
            ns(d.min_period_ns),
            hz(d.fmax_hz)
        );
    }

    if let Some(c) = &b.clock {
        let _ = writeln!(
            out,
            "\nAgainst a clock of {} at {:.1} % duty",
            hz(c.clock_hz),
            c.clock_duty * 100.0
        );
        let _ = writeln!(
            out,
            "  {:<8} {:>11} {:>11} {:>12} {:>9}",
            "phase", "lasts", "needs", "slack", "slack %"
        );
        for (name, have, need, slack, p) in [
            (
                "low",
                c.clock_low_ns,
                b.low_required_ns,
                c.low_slack_ns,
                c.low_slack_pct,
            ),
            (
                "high",
                c.clock_high_ns,
                b.high_required_ns,
                c.high_slack_ns,
                c.high_slack_pct,
            ),
            (
                "period",
                c.clock_period_ns,
                b.period_required_ns,
                c.period_slack_ns,
                c.period_slack_pct,
            ),
        ] {
            let flag = if slack < 0.0 { "  SHORT" } else { "" };
            let _ = writeln!(
                out,
                "  {name:<8} {:>11} {:>11} {:>12} {:>9}{flag}",
                ns(have).to_string(),
                ns(need).to_string(),
                signed_ns(slack),
                pct(p)
            );
        }
        let _ = writeln!(
            out,
            "  {}",
            if c.meets {
                "every phase fits this budget"
            } else {
                "this clock does NOT fit the budget: a phase above is too short"
            }
        );
    }

    let _ = writeln!(out, "\nSlowest paths");
    for (title, p) in [
        ("low phase", &b.critical_paths.low),
        ("high phase", &b.critical_paths.high),
        ("full period", &b.critical_paths.period),
    ] {
        if let Some(p) = p {
            path_block(&mut out, title, p);
        }
    }

    let count = |s: HoldStatus| b.holds.iter().filter(|h| h.status == s).count();
    let _ = writeln!(
        out,
        "\nHold checks: {} pass, {} fail, {} unknown (minimum delays missing from the data sheets count as 0 ns)",
        count(HoldStatus::Pass),
        count(HoldStatus::Fail),
        count(HoldStatus::UnknownMin)
    );
    for h in b.holds.iter().filter(|h| h.status == HoldStatus::Fail) {
        let _ = writeln!(
            out,
            "  FAIL {}: slack {} ({} phase paths)",
            h.capture,
            signed_ns(h.slack_ns),
            h.phase.name()
        );
    }

    let _ = writeln!(out, "\nDerating models");
    for m in &b.models {
        let fit = match (m.fit_rms_pct, m.fit_max_pct) {
            (Some(r), Some(x)) => format!(" (fit error RMS {r:.1} %, worst {x:.1} %)"),
            _ => String::new(),
        };
        let _ = writeln!(out, "  {:<7} {}{fit}", m.family, m.model);
    }
    if !b.warnings.is_empty() {
        let _ = writeln!(out, "\nWarnings");
        for w in &b.warnings {
            let _ = writeln!(out, "  - {w}");
        }
    }
    out
}

/// f_max against supply voltage as a table.
pub fn render_sweep(design: &str, points: &[SweepPoint]) -> String {
    let mut out = String::new();
    let _ = writeln!(out, "{design} — f_max against supply voltage");
    let _ = writeln!(
        out,
        "  {:>8} {:>11} {:>11} {:>11} {:>7} {:>12} {:>12}",
        "VCC", "L", "H", "P", "d*", "f_max @ d*", "f_max @ 50%"
    );
    for p in points {
        let _ = writeln!(
            out,
            "  {:>6.3} V {:>11} {:>11} {:>11} {:>5.1} % {:>12} {:>12}{}",
            p.vcc_v,
            ns(p.low_required_ns).to_string(),
            ns(p.high_required_ns).to_string(),
            ns(p.period_required_ns).to_string(),
            p.best_duty * 100.0,
            hz(p.fmax_best_duty_hz).to_string(),
            hz(p.fmax_50_hz).to_string(),
            if p.in_spec { "" } else { "  OUT OF SPEC" }
        );
    }
    out
}
