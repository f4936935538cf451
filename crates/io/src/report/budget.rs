//! Plain-text rendering of a budget, of a supply sweep and of one part's data-sheet rows
//! (pure: state in, text out).

use std::fmt::Write;

use slackmeter_core::budget::Corner;
use slackmeter_core::budget::library::ErrStats;
use slackmeter_core::budget::library::sheet::PartSheet;
use slackmeter_core::budget::solver::{
    Budget, HoldStatus, LimitKind, Path, PhaseLimit, SweepPoint,
};
use slackmeter_core::units::{hz, ns};

/// What the numbers of a budget are, in words.
fn corner_words(b: &Budget) -> &'static str {
    match b.corner {
        Corner::Max => "max corner: GUARANTEED values",
        Corner::Typ => "typ corner: typical values (not guaranteed)",
        Corner::Min => "min corner",
    }
}

/// How the values of a table were found, in one paragraph.
fn what_the_table_shows(b: &Budget) -> &'static str {
    match b.corner {
        Corner::Typ => {
            "Values are the data sheets' typical ones, placed between supply and temperature columns by the same rule as the guaranteed ones (a typical given at one supply follows its part's guaranteed row). The model's estimate stands beside them."
        }
        _ => {
            "Values are guaranteed: each is a data-sheet limit that applies, the lower neighbouring supply column between two columns and the column covering the temperature. The estimate beside them is the fitted voltage model between the columns: likelier, not guaranteed."
        }
    }
}

fn signed_ns(v: f64) -> String {
    if v >= 0.0 {
        format!("+{}", ns(v))
    } else {
        format!("-{}", ns(-v))
    }
}

fn pct(v: Option<f64>) -> String {
    v.map_or_else(|| "—".to_string(), |p| format!("{p:+.1} %"))
}

/// An error range in words: "-76 … +113 %".
fn range(low: f64, high: f64) -> String {
    format!("{low:+.0} … {high:+.0} %")
}

fn limit_words(l: &PhaseLimit) -> String {
    match l.binds {
        LimitKind::None => "no path constrains this phase".to_string(),
        LimitKind::Path => "a path (below)".to_string(),
        LimitKind::PulseWidth => format!("pulse width: {}", l.part),
        LimitKind::PartFmax => format!("part f_max: {}", l.part),
    }
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
        let est = s
            .estimate_ns
            .map_or(String::new(), |e| format!("  [estimate {}]", ns(e)));
        let signal = if s.signal.is_empty() {
            String::new()
        } else {
            format!("  → {}", s.signal)
        };
        let _ = writeln!(
            out,
            "    {:>11}  {:>10}  {}{signal}{est}",
            ns(s.at_ns).to_string(),
            signed_ns(s.delay_ns),
            s.through
        );
    }
}

fn stats_words(s: &ErrStats) -> String {
    if s.n == 0 {
        return "not measured (no held-out column)".to_string();
    }
    format!(
        "RMS {:.0} %, {} over {} held-out columns",
        s.rms_pct,
        range(s.low_pct, s.high_pct),
        s.n
    )
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
    let _ = writeln!(out, "{}", what_the_table_shows(b));
    if !b.guaranteed {
        let _ = writeln!(
            out,
            "\n!! NOT GUARANTEED: no data-sheet column covers the conditions of {} (see warnings); their values are extrapolated",
            if b.not_guaranteed_parts.is_empty() {
                "some parts".to_string()
            } else {
                b.not_guaranteed_parts.join(", ")
            }
        );
    }
    if !b.out_of_spec_parts.is_empty() {
        let _ = writeln!(
            out,
            "\n!! OUT OF SPECIFICATION: {}: outside their data sheets' supply or temperature ranges (see warnings)",
            b.out_of_spec_parts.join(", ")
        );
    }
    let e = &b.estimate;
    let _ = writeln!(out, "\nWhat each clock phase must last");
    let _ = writeln!(
        out,
        "  {:<8} {:>11} {:>11}  set by",
        "phase",
        if b.corner == Corner::Typ {
            "typical"
        } else {
            "guaranteed"
        },
        "estimate"
    );
    for (name, req, est, lim, p) in [
        (
            "low",
            b.low_required_ns,
            e.low_required_ns,
            &b.limits.low,
            &b.critical_paths.low,
        ),
        (
            "high",
            b.high_required_ns,
            e.high_required_ns,
            &b.limits.high,
            &b.critical_paths.high,
        ),
        (
            "period",
            b.period_required_ns,
            e.period_required_ns,
            &b.limits.period,
            &b.critical_paths.period,
        ),
    ] {
        let who = match (lim.binds, p) {
            (LimitKind::Path, Some(p)) => format!("path {} ← {}", p.capture, p.launch),
            _ => limit_words(lim),
        };
        let _ = writeln!(
            out,
            "  {name:<8} {:>11} {:>11}  {who}",
            ns(req).to_string(),
            ns(est).to_string()
        );
    }
    if let (Some(lo), Some(hi)) = (e.error_low_pct, e.error_high_pct) {
        let _ = writeln!(
            out,
            "  (the estimate's error, from leaving data-sheet columns out: {} for the values off the columns)",
            range(lo, hi)
        );
    }

    let _ = writeln!(
        out,
        "\nClock plan ({}; estimate in brackets)",
        if b.corner == Corner::Typ {
            "typical"
        } else {
            "guaranteed"
        }
    );
    let _ = writeln!(
        out,
        "  best duty d* = H/(L+H) = {:.1} %: shortest period {}, f_max {}  [{}]",
        b.best_duty * 100.0,
        ns(b.min_period_best_duty_ns),
        hz(b.fmax_best_duty_hz),
        hz(e.fmax_best_duty_hz)
    );
    let _ = writeln!(
        out,
        "  at 50 % duty:                 shortest period {}, f_max {}  [{}]",
        ns(b.min_period_50_ns),
        hz(b.fmax_50_hz),
        hz(e.fmax_50_hz)
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
    for (name, l) in [
        ("low phase", &b.limits.low),
        ("high phase", &b.limits.high),
        ("period", &b.limits.period),
    ] {
        if l.part_ns > 0.0 {
            let _ = writeln!(
                out,
                "  {name}: the clocked parts need ≥ {} ({}){}",
                ns(l.part_ns),
                l.part,
                if l.part_ns > l.path_ns {
                    ": this limit binds"
                } else {
                    ""
                }
            );
        }
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
        if c.meets {
            let _ = writeln!(out, "  every phase fits this budget");
        } else {
            let _ = writeln!(
                out,
                "  this clock does NOT fit the budget: a phase above is too short"
            );
            for s in &c.short_of {
                let _ = writeln!(out, "    short of {s}");
            }
        }
    }

    let _ = writeln!(
        out,
        "\nSlowest paths ({} delays; estimates in brackets)",
        if b.corner == Corner::Typ {
            "typical"
        } else {
            "guaranteed"
        }
    );
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
        "\nHold checks: {} pass, {} fail, {} unknown, {} conditional (minimum delays missing from the data sheets count as 0 ns)",
        count(HoldStatus::Pass),
        count(HoldStatus::Fail),
        count(HoldStatus::UnknownMin),
        count(HoldStatus::PassesIf)
    );
    for h in &b.holds {
        match h.status {
            HoldStatus::Fail => {
                let _ = writeln!(
                    out,
                    "  FAIL {}: slack {} ({} phase paths)",
                    h.capture,
                    signed_ns(h.slack_ns),
                    h.phase.name()
                );
            }
            HoldStatus::PassesIf => {
                let _ = writeln!(
                    out,
                    "  {} ({} phase paths): passes if the {} phase ≥ {}",
                    h.capture,
                    h.phase.name(),
                    h.credit_phase.map_or("opposite", |p| p.name()),
                    ns(h.passes_if_phase_ns.unwrap_or(0.0))
                );
            }
            _ => {}
        }
    }

    let _ = writeln!(out, "\nDerating models");
    for m in &b.models {
        let fit = match (m.fit_rms_pct, m.fit_max_pct) {
            (Some(r), Some(x)) => format!(" (fit error RMS {r:.1} %, worst {x:.1} %)"),
            _ => String::new(),
        };
        let _ = writeln!(out, "  {:<7} {}{fit}", m.family, m.model);
        if let Some(s) = &m.estimate_between {
            let _ = writeln!(
                out,
                "          estimate between columns: {}",
                stats_words(s)
            );
        }
        if let Some(s) = &m.estimate_above {
            let _ = writeln!(
                out,
                "          estimate above the highest column: {}",
                stats_words(s)
            );
        }
        if let Some(s) = &m.estimate_below {
            let _ = writeln!(
                out,
                "          estimate below the lowest column (never guaranteed): {}",
                stats_words(s)
            );
        }
    }
    if !b.warnings.is_empty() {
        let _ = writeln!(out, "\nWarnings");
        for w in &b.warnings {
            let _ = writeln!(out, "  - {w}");
        }
    }
    out
}

fn bind_letter(k: LimitKind) -> &'static str {
    match k {
        LimitKind::PulseWidth => "w",
        LimitKind::PartFmax => "f",
        _ => "",
    }
}

/// f_max against supply voltage as a table: guaranteed and estimated f_max, which rows are out
/// of specification and because of which parts, where the clock asked for fails, and every
/// warning of the sweep once.
pub fn render_sweep(design: &str, points: &[SweepPoint]) -> String {
    let mut out = String::new();
    let _ = writeln!(
        out,
        "{design} — f_max against supply voltage (guaranteed; the estimate beside it)"
    );
    let _ = writeln!(
        out,
        "  {:>8} {:>11} {:>11} {:>11} {:>7} {:>12} {:>12} {:>12}",
        "VCC", "L", "H", "P", "d*", "f_max @ d*", "f_max @ 50%", "estimate 50%"
    );
    let mut warnings: Vec<String> = Vec::new();
    let mut marks = false;
    for p in points {
        let mut flags = String::new();
        if p.clock_meets == Some(false) {
            flags += "  CLOCK FAILS";
        }
        if !p.out_of_spec_parts.is_empty() {
            flags += &format!("  OUT OF SPEC ({})", p.out_of_spec_parts.join(", "));
        }
        if !p.not_guaranteed_parts.is_empty() {
            flags += &format!("  NOT GUARANTEED ({})", p.not_guaranteed_parts.join(", "));
        }
        let b: String = p.binds.iter().map(|k| bind_letter(*k)).collect();
        marks |= !b.is_empty();
        let _ = writeln!(
            out,
            "  {:>6.3} V {:>11} {:>11} {:>11} {:>5.1} % {:>12} {:>12} {:>12}{}{flags}",
            p.vcc_v,
            ns(p.low_required_ns).to_string(),
            ns(p.high_required_ns).to_string(),
            ns(p.period_required_ns).to_string(),
            p.best_duty * 100.0,
            hz(p.fmax_best_duty_hz).to_string(),
            hz(p.fmax_50_hz).to_string(),
            hz(p.estimate_fmax_50_hz).to_string(),
            if b.is_empty() {
                String::new()
            } else {
                format!("  [{b}]")
            }
        );
        for w in &p.warnings {
            let w = without_supply(w);
            if !warnings.contains(&w) {
                warnings.push(w);
            }
        }
    }
    if marks {
        let _ = writeln!(
            out,
            "  [w]: a clocked part's pulse width sets a phase; [f]: a part's f_max sets the period"
        );
    }
    if !warnings.is_empty() {
        let _ = writeln!(out, "\nWarnings (each once, for the whole sweep)");
        for w in warnings {
            let _ = writeln!(out, "  - {w}");
        }
    }
    out
}

/// A warning without the supply it was raised at (" at 4.250 V"), so a sweep says it once; the
/// rows say where.
fn without_supply(w: &str) -> String {
    let mut out = String::with_capacity(w.len());
    let mut rest = w;
    while let Some(i) = rest.find(" at ") {
        let after = &rest[i + 4..];
        let num: usize = after
            .char_indices()
            .take_while(|(_, c)| c.is_ascii_digit() || *c == '.')
            .map(|(j, c)| j + c.len_utf8())
            .last()
            .unwrap_or(0);
        if num > 0 && after[num..].starts_with(" V") {
            out += &rest[..i];
            rest = &after[num + 2..];
        } else {
            out += &rest[..i + 4];
            rest = after;
        }
    }
    out + rest
}

/// One part's arcs with every data-sheet column, its source and status.
pub fn render_part(sheet: &PartSheet) -> String {
    let mut out = String::new();
    let clocked = if sheet.clocked {
        format!(", clocked on its {} edge", sheet.clock_edge)
    } else {
        String::new()
    };
    let _ = writeln!(
        out,
        "{} — {} ({}), rated {}…{} °C{clocked}",
        sheet.type_name, sheet.function, sheet.family, sheet.temp_min_c, sheet.temp_max_c
    );
    let _ = writeln!(out, "source: {} ({})", sheet.source, sheet.status);
    if !sheet.variants.is_empty() {
        let _ = writeln!(
            out,
            "generic: the worst of {} (see each for its columns)",
            sheet.variants.join(", ")
        );
    }
    for a in &sheet.arcs {
        let _ = writeln!(
            out,
            "\n  {} ({}) — {} ({})",
            a.name, a.kind, a.source, a.status
        );
        if a.rows.is_empty() {
            continue;
        }
        for row in &a.rows {
            let cells: Vec<String> = row
                .vcc_v
                .iter()
                .zip(&row.values)
                .map(|(v, x)| format!("{v} V: {x}"))
                .collect();
            let _ = writeln!(
                out,
                "    {:<26} {} {}  ({} pF)",
                format!("{} {}", row.what, row.temp),
                cells.join(", "),
                row.unit,
                row.load_pf
            );
        }
    }
    if let Some(pins) = &sheet.pins {
        let _ = writeln!(
            out,
            "\n  pins ({}) — {} ({})",
            pins.package, pins.source, pins.status
        );
        for p in &pins.pins {
            let row = format!(
                "    {:>2}  {:<5} {:<14} {}",
                p.number,
                p.name,
                p.role,
                p.arcs.join(", ")
            );
            let _ = writeln!(out, "{}", row.trim_end());
        }
    }
    for v in &sheet.variant_sheets {
        let _ = writeln!(out);
        out += &render_part(v);
    }
    out
}
