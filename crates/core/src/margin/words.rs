//! The verdict in words: one paragraph that says where the clock stands, on which stretch,
//! with every phase's slack and its bound, the guard band, every problem, the highest clean
//! frequency and the headroom to a failure.

use crate::measure::ClockSnapshot;
use crate::units::{hz, ns, pm, si};

use super::judge::{Against, Sign, Verdict};
use super::types::{Basis, Margin};

/// A slack as the margin table prints it.
fn signed_ns(v: f64) -> String {
    format!("{v:+.1} ns")
}

fn pct(v: Option<f64>) -> String {
    v.map_or("—".into(), |x| format!("{x:+.0} %"))
}

/// "low +64.80 ns (+35 %), high +5.800 ns (+2 %, sign not known), …".
fn phases(a: &Against) -> String {
    a.phases
        .iter()
        .map(|p| {
            let note = match p.sign {
                Sign::WithinResolution => ", sign not known",
                _ => "",
            };
            format!(
                "{} {} ({}{note})",
                p.phase,
                signed_ns(p.slack_ns),
                pct(p.slack_pct)
            )
        })
        .collect::<Vec<_>>()
        .join(", ")
}

fn names<'a>(it: impl Iterator<Item = &'a str>) -> String {
    let v: Vec<&str> = it.collect();
    match v.len() {
        0 => String::new(),
        1 => format!("the {} phase", v[0]),
        _ => format!(
            "the {} and {} phases",
            v[..v.len() - 1].join(", "),
            v[v.len() - 1]
        ),
    }
}

fn slack_sentence(m: &Margin) -> String {
    let w = &m.worst_case;
    let bound = w.phases.first().map_or(0.0, |p| p.uncertainty_ns);
    let head = format!(
        "Against the worst-case budget at {:.3} V ({}): {}, each ± {}",
        m.vcc_used_v,
        m.vcc_source,
        phases(w),
        ns(bound)
    );
    let typ = || format!("against the typical budget: {}", phases(&m.typical));
    let n_short = w.phases.iter().filter(|p| p.sign == Sign::Short).count();
    let short = names(
        w.phases
            .iter()
            .filter(|p| p.sign == Sign::Short)
            .map(|p| p.phase),
    );
    let is = if n_short > 1 { "are" } else { "is" };
    match m.slack_verdict {
        Verdict::InsideWorstCase => format!("{head}: every phase clears it beyond that bound."),
        Verdict::WithinResolution => format!(
            "{head}: no phase is short beyond that bound, but the sign of {}'s slack is not known at this resolution.",
            names(w.unresolved().map(|p| p.phase))
        ),
        Verdict::BeyondWorstCaseInsideTypical => format!(
            "{head}: {short} {is} short beyond doubt; {}, every phase clearing it.",
            typ()
        ),
        _ => format!(
            "{head}: {short} {is} short beyond doubt; {}, not shown inside it either.",
            typ()
        ),
    }
}

fn guard_sentence(m: &Margin) -> String {
    let gb = m.guard_band * 100.0;
    if m.guard_band_met {
        format!("The margin meets the {gb:.0} % guard band beyond the bound.")
    } else {
        let least = m
            .worst_case
            .phases
            .iter()
            .filter_map(|p| p.slack_pct.map(|x| (p.phase, x)))
            .min_by(|a, b| a.1.total_cmp(&b.1));
        match least {
            Some((phase, x)) => format!(
                "The margin is less than the {gb:.0} % guard band (least: {phase} {}).",
                pct(Some(x))
            ),
            None => format!("The margin is less than the {gb:.0} % guard band."),
        }
    }
}

/// A frequency with its uncertainty in one unit, or alone.
fn with_u(f_hz: f64, u_hz: Option<f64>) -> String {
    u_hz.map_or_else(|| hz(f_hz).to_string(), |u| pm(f_hz, u, "Hz"))
}

fn where_sentence(m: &Margin, c: &ClockSnapshot) -> String {
    let range = {
        let f = m.intervals.iter().map(|i| i.frequency_hz);
        let lo = f.clone().fold(f64::INFINITY, f64::min);
        let hi = f.fold(f64::NEG_INFINITY, f64::max);
        if lo.is_finite() {
            // enough digits that two different frequencies read differently
            let digits = (4..=12)
                .find(|&d| si(lo, "Hz", d).to_string() != si(hi, "Hz", d).to_string())
                .unwrap_or(12);
            format!(
                " ({} to {} between intervals)",
                si(lo, "Hz", digits),
                si(hi, "Hz", digits)
            )
        } else {
            String::new()
        }
    };
    let at = |what: &str| {
        format!(
            "The clock moved{range}, so whole-window frequency, jitter and TIE describe a spread, not one clock; judged at {what}, {:.3}–{:.3} s: {} at {:.1} % duty.",
            m.judged.from_s,
            m.judged.to_s,
            with_u(m.operating_hz, m.operating_uncertainty_hz),
            m.duty * 100.0
        )
    };
    match m.judged.basis {
        Basis::LastCleanBeforeFailure => at("the last clean interval before the failure"),
        Basis::LeastSlack => at("the interval with the least slack"),
        Basis::Session if m.moving => format!(
            "The clock moved{range}, but no interval gives figures of its own: judged over the whole window, whose worst cycles may come from different frequencies."
        ),
        Basis::Session => format!(
            "Judged over the whole window: a steady clock at {}, {:.1} % duty{}.",
            with_u(m.operating_hz, m.operating_uncertainty_hz),
            m.duty * 100.0,
            if c.count_windows > 0 && c.cycles == 0 {
                " (counted)"
            } else {
                ""
            }
        ),
    }
}

/// The paragraph.
pub(super) fn paragraph(m: &Margin, c: &ClockSnapshot) -> String {
    let mut out: Vec<String> = Vec::new();
    let failures: Vec<&str> = m
        .problems
        .iter()
        .filter(|p| p.kind.is_failure())
        .map(|p| p.detail.as_str())
        .collect();
    out.push(match m.verdict {
        Verdict::Failed => format!("FAILED: {}.", failures.join("; ")),
        Verdict::InsideWorstCase => "Inside the worst-case budget.".into(),
        Verdict::WithinResolution => {
            "Within resolution: no phase is shown short of the worst-case budget, but not every one is shown inside it.".into()
        }
        Verdict::BeyondWorstCaseInsideTypical => {
            "Beyond the worst-case budget, inside the typical one.".into()
        }
        Verdict::BeyondTypical => "No margin left: beyond the worst-case budget and not shown inside the typical one.".into(),
    });
    out.push(where_sentence(m, c));
    if m.verdict == Verdict::Failed {
        out.push(format!("The slack alone says {}.", m.slack_verdict.words()));
    }
    out.push(slack_sentence(m));
    out.push(guard_sentence(m));
    let others: Vec<&str> = m
        .problems
        .iter()
        .filter(|p| !p.kind.is_failure())
        .map(|p| p.detail.as_str())
        .collect();
    if !others.is_empty() {
        out.push(format!("Also: {}.", others.join("; ")));
    } else if failures.is_empty() {
        out.push(
            "No glitch, stall, fault, stopped heartbeat or rail below its minimum was seen.".into(),
        );
    }
    if m.moving || m.judged.basis != Basis::Session {
        out.push(match (m.highest_clean_hz, m.highest_clean_uncertainty_hz) {
            (Some(f), u) => format!(
                "The highest frequency that ran clean (no problem, every slack positive) was {}{}.",
                with_u(f, u),
                m.highest_clean_at_s
                    .map_or(String::new(), |t| format!(" at {t:.3} s"))
            ),
            (None, _) => "No interval ran clean with every slack positive.".into(),
        });
    }
    if let Some(f) = &m.failure {
        let o = &f.onset;
        out.push(format!(
            "Measured failure onset ({}) {}{}: from the operating point {} that is {} headroom.",
            o.cause,
            pm(o.frequency_hz, o.frequency_uncertainty_hz, "Hz"),
            o.rail.as_ref().map_or(String::new(), |(n, mv)| format!(
                " at {n} {:.3} V",
                mv / 1000.0
            )),
            hz(m.operating_hz),
            f.headroom
                .map_or("unknown".into(), |h| format!("{:+.1} %", h * 100.0))
        ));
    }
    out.join(" ")
}
