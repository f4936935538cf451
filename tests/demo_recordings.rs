//! `slackmeter report` on the demo recordings shows what recordings/README.md says it shows.

use std::process::Command;

/// Path of a demo recording.
fn demo(name: &str) -> String {
    format!("{}/recordings/{name}", env!("CARGO_MANIFEST_DIR"))
}

/// Run slackmeter with these arguments.
fn run(args: &[&str]) -> std::process::Output {
    Command::new(env!("CARGO_BIN_EXE_slackmeter"))
        .args(args)
        // sentences are checked whole here; wrapping at 100 columns is tested in cli_behaviour.rs
        .env("COLUMNS", "1000")
        .output()
        .unwrap()
}

fn report(name: &str) -> serde_json::Value {
    run_json(&["report", &demo(name), "--json"])
}

fn rail<'a>(d: &'a serde_json::Value, name: &str) -> &'a serde_json::Value {
    d["rails"]
        .as_array()
        .unwrap()
        .iter()
        .find(|r| r["name"] == name)
        .unwrap()
}

fn line<'a>(d: &'a serde_json::Value, role: &str) -> &'a serde_json::Value {
    d["lines"]
        .as_array()
        .unwrap()
        .iter()
        .find(|r| r["role"] == role)
        .unwrap()
}

#[test]
fn steady_run() {
    let d = report("larkspur-steady.smrec");
    let c = &d["clock"];
    let f = c["frequency_hz"].as_f64().unwrap();
    assert!((f - 2.0e6).abs() / 2.0e6 < 20e-6, "{f}");
    assert!((c["duty"].as_f64().unwrap() - 0.5).abs() < 0.002);
    assert_eq!(c["high_min_ns"], 248.0);
    assert_eq!(c["low_min_ns"], 248.0);
    assert_eq!(c["glitches"], 0);
    assert_eq!(c["resolution_ns"], 8.0);
    assert!(c["edges"].as_u64().unwrap() > 700_000);
    // bursts of 4000 edges every 100 ms of a 2 MHz clock: 1999 of 200 000 cycles stamped
    // (the recording's command in recordings/README.md)
    assert_eq!(c["observation"], "bursts");
    let cov = c["coverage"].as_f64().unwrap();
    assert!((cov - 1999.0 / 200_000.0).abs() < 2e-4, "{cov}");
    let text = String::from_utf8(run(&["report", &demo("larkspur-steady.smrec")]).stdout).unwrap();
    assert!(
        text.contains("worst of the observed cycles (1.00 % of all)"),
        "{text}"
    );
    assert!(
        text.contains("sampled: nothing lost, but not every cycle stamped"),
        "{text}"
    );
    for key in [
        "frequency_uncertainty_hz",
        "period_jitter_rms_ns",
        "cycle_to_cycle_max_ns",
    ] {
        assert!(c[key].is_number(), "{key}");
    }
    let far = rail(&d, "VCC_FAR");
    assert!((far["mean_mv"].as_f64().unwrap() - 4880.0).abs() < 5.0);
    assert_eq!(far["sag_events"], 0);
    assert_eq!(far["below_limit_s"], 0.0);
    assert!(far["min_mv"].is_number() && far["max_mv"].is_number());
    assert!((line(&d, "heartbeat")["rate_hz"].as_f64().unwrap() - 2.0).abs() < 0.05);
    assert_eq!(d["lost_frames"], 0);
    assert_eq!(d["crc_errors"], 0);
    assert_eq!(d["recording"]["design"]["file"], "designs/larkspur-8.toml");
    assert_eq!(
        d["movement"]["moving"], false,
        "a steady clock (5 ppm of drift)"
    );
}

#[test]
fn sagging_run() {
    let d = report("larkspur-sagging.smrec");
    let c = &d["clock"];
    assert!(c["glitches"].as_u64().unwrap() >= 15, "{}", c["glitches"]);
    let far = rail(&d, "VCC_FAR");
    let sags = far["sag_events"].as_u64().unwrap();
    assert!((50..=110).contains(&sags), "{sags} sags in 20 s at 4/s");
    assert!(far["min_mv"].as_f64().unwrap() < 4520.0);
    assert!(far["below_limit_s"].as_f64().unwrap() > 0.0);
    assert!(rail(&d, "VCC_MID")["sag_events"].as_u64().unwrap() > 20);
    assert_eq!(rail(&d, "VCC_NEAR")["sag_events"], 0);
    assert_eq!(d["worst_rail"][0], "VCC_FAR");
}

#[test]
fn sweep_to_failure() {
    let d = report("larkspur-sweep.smrec");
    let c = &d["clock"];
    assert!(c["frequency_hz"].as_f64().unwrap() > 1.5e6);
    assert!(
        c["period_min_ns"].as_f64().unwrap() < 250.0,
        "swept past 4 MHz"
    );
    let fault = line(&d, "fault");
    assert_eq!(fault["level"], true);
    let hb = line(&d, "heartbeat");
    assert!(
        hb["since_change_s"].as_f64().unwrap() > 1.0,
        "the heartbeat stopped"
    );
    // a moving clock: the whole-window figures are its spread; against the moving mean its
    // jitter is the virtual probe's 1.5 ns (within 15 %)
    let mv = &d["movement"];
    assert_eq!(mv["moving"], true);
    assert!(mv["low_hz"].as_f64().unwrap() < 1.01e6 && mv["high_hz"].as_f64().unwrap() > 5.9e6);
    let j = mv["period_jitter_detrended_ns"].as_f64().unwrap();
    assert!((j - 1.5).abs() <= 0.15 * 1.5, "{j}");
    assert!(
        c["period_jitter_rms_ns"].as_f64().unwrap() > 100.0,
        "the sweep's spread"
    );
    let text = String::from_utf8_lossy(&run(&["report", &demo("larkspur-sweep.smrec")]).stdout)
        .into_owned();
    for part in [
        "[whole-window spread of a moving clock]",
        "moving clock  1.000 MHz … 5.985 MHz",
        "detrended jitter 1.49",
    ] {
        assert!(text.contains(part), "{part}: {text}");
    }
}

#[test]
fn plots_are_written_as_svg() {
    let dir = std::env::temp_dir().join(format!("slackmeter-plots-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&dir);
    let path = demo("larkspur-sagging.smrec");
    let out = Command::new(env!("CARGO_BIN_EXE_slackmeter"))
        .args(["report", &path, "--plots"])
        .arg(&dir)
        .output()
        .unwrap();
    assert_eq!(
        out.status.code(),
        Some(3),
        "the sagging run failed (glitches): {}",
        String::from_utf8_lossy(&out.stderr)
    );
    for (file, title) in [
        ("period_histogram.svg", "Clock period histogram"),
        ("high_time_histogram.svg", "High time histogram"),
        ("low_time_histogram.svg", "Low time histogram"),
        ("tie.svg", "Time interval error"),
        ("rail_VCC_FAR.svg", "Rail VCC_FAR over time"),
        ("frequency_over_time.svg", "Clock frequency over time"),
        (
            "slack_over_time.svg",
            "Slack against the worst-case budget over time",
        ),
        ("rail_minima_over_time.svg", "Rail minima over time"),
        ("fmax_vs_supply.svg", "f_max against supply"),
    ] {
        let svg = std::fs::read_to_string(dir.join(file)).unwrap_or_else(|e| panic!("{file}: {e}"));
        assert!(
            svg.starts_with("<svg") && svg.trim_end().ends_with("</svg>"),
            "{file}"
        );
        assert!(svg.contains(title), "{file} has its title");
    }
    let far = std::fs::read_to_string(dir.join("rail_VCC_FAR.svg")).unwrap();
    assert!(
        far.contains("limit 4.50 V"),
        "the limit is labelled in words, not only by colour"
    );
    // what each plot over time marks, in words beside the data
    let read = |f: &str| std::fs::read_to_string(dir.join(f)).unwrap();
    for (file, words) in [
        (
            "frequency_over_time.svg",
            &["first failure (glitches)", "operating point judged"][..],
        ),
        (
            "slack_over_time.svg",
            &[
                "zero: the budget itself",
                "guard band 20 %",
                "high (least per interval)",
            ][..],
        ),
        (
            "rail_minima_over_time.svg",
            &["VCC_FAR minimum", "rated minimum 4.50 V"][..],
        ),
        (
            "fmax_vs_supply.svg",
            &[
                "outside the rated 4.50–5.50 V",
                "less the 20 % guard band",
                "measured operating point ± uncertainty",
            ][..],
        ),
    ] {
        let svg = read(file);
        for w in words {
            assert!(svg.contains(w), "{file}: {w}");
        }
    }
    let _ = std::fs::remove_dir_all(&dir);
}

/// The sweep's plots mark the failure onset where the fault line rose, and the f_max plot's
/// y axis fits its curves and points instead of starting at zero.
#[test]
fn sweep_plots_mark_the_failure_onset() {
    let dir = std::env::temp_dir().join(format!("slackmeter-sweep-plots-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&dir);
    let out = run(&[
        "report",
        &demo("larkspur-sweep.smrec"),
        "--plots",
        dir.to_str().unwrap(),
    ]);
    assert_eq!(out.status.code(), Some(3));
    let f = std::fs::read_to_string(dir.join("frequency_over_time.svg")).unwrap();
    assert!(
        f.contains("failure onset (fault line) 6.030 s, 2.0024 MHz"),
        "the onset marked"
    );
    assert!(f.contains("highest clean interval, 1.8668 MHz"));
    let s = std::fs::read_to_string(dir.join("slack_over_time.svg")).unwrap();
    assert!(s.contains("failure onset 6.030 s"));
    let fmax = std::fs::read_to_string(dir.join("fmax_vs_supply.svg")).unwrap();
    let labels: Vec<&str> = fmax
        .split("</text>")
        .filter_map(|t| t.rsplit('>').next().map(str::trim))
        .collect();
    // the y axis fits the data: it reaches the 2.0 MHz points and does not start at zero
    let mhz: Vec<f64> = labels.iter().filter_map(|l| l.parse().ok()).collect();
    assert!(mhz.contains(&2.0), "{labels:?}");
    assert!(
        mhz.iter().all(|&v| v > 0.0) && !labels.contains(&"0.0"),
        "{labels:?}"
    );
    let _ = std::fs::remove_dir_all(&dir);
}

#[test]
fn report_judges_against_the_embedded_design() {
    let path = demo("larkspur-steady.smrec");
    let out = run(&["report", &path, "--json"]);
    assert_eq!(
        out.status.code(),
        Some(0),
        "within resolution, without --strict: exit 0"
    );
    let d: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let m = &d["margin"];
    for key in [
        "low_slack_ns",
        "high_slack_ns",
        "period_slack_ns",
        "verdict",
        "vcc_used_v",
        "operating_hz",
        "problems",
        "intervals",
    ] {
        assert!(!m[key].is_null(), "margin.{key}");
    }
    // 248 ns measured high time against the budget's 245 ns at the rails (the guaranteed 4.5 V
    // column): +3.0 ns with an 8 ns tick is not known to be positive (the ±tick rule)
    let h = m["high_slack_ns"].as_f64().unwrap();
    assert!(h > 0.0 && h < 8.0, "{h}");
    assert_eq!(m["verdict"], "within-resolution");
    assert_eq!(m["worst_case"]["phases"][1]["sign"], "within-resolution");
    assert_eq!(m["worst_case"]["phases"][0]["sign"], "clears");
    assert_eq!(m["guard_band_met"], false);
    assert!(m["fail_onset_hz"].is_null());
    // the one problem: the probe timed bursts, about 1 % of the cycles (4000 edges per 100 ms
    // of a 2 MHz clock: 2000 of 200 000 cycles)
    let problems = m["problems"].as_array().unwrap();
    assert_eq!(problems.len(), 1, "{problems:?}");
    assert_eq!(problems[0]["kind"], "sampled-coverage");
    assert!(
        problems[0]["detail"]
            .as_str()
            .unwrap()
            .contains("1.0 % of the clock's"),
        "{}",
        problems[0]["detail"]
    );
    assert_eq!(m["moving"], false);
    assert_eq!(m["judged"]["basis"], "session");
    assert!((m["operating_hz"].as_f64().unwrap() - 2.0e6).abs() < 50.0);
    // the same with --strict: the unknown sign breaks the margin
    assert_eq!(run(&["report", &path, "--strict"]).status.code(), Some(3));
    let text = String::from_utf8_lossy(&run(&["report", &path]).stdout).into_owned();
    assert!(
        text.contains("VERDICT (within-resolution): Within resolution")
            && text.contains("20 % guard band"),
        "{text}"
    );
}

#[test]
fn sagging_run_failed_on_its_glitches_and_names_the_undervoltage() {
    let path = demo("larkspur-sagging.smrec");
    let out = run(&["report", &path, "--json"]);
    assert_eq!(out.status.code(), Some(3), "failed: exit 3");
    let d: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let m = &d["margin"];
    assert_eq!(m["verdict"], "failed");
    // VCC_FAR's sag below the 4.5 V column puts the far section's parts on their 2.0 V
    // data-sheet column: the slack alone is beyond the typical budget as well
    assert_eq!(m["slack_verdict"], "beyond-typical");
    let problems = m["problems"].as_array().unwrap();
    let kind = |k: &str| problems.iter().find(|p| p["kind"] == k);
    let g = kind("glitches").expect("the glitches are a problem");
    assert_eq!(g["count"], d["clock"]["glitches"]);
    assert!(g["first_s"].is_number());
    let far = kind("rail-below-minimum").expect("VCC_FAR below 4.5 V is a problem");
    assert_eq!(far["rail"], "VCC_FAR");
    let below = rail(&d, "VCC_FAR")["below_limit_s"].as_f64().unwrap();
    assert_eq!(far["time_s"].as_f64().unwrap(), below);
    assert!(below > 0.3, "{below}");
    assert_eq!(
        problems
            .iter()
            .filter(|p| p["kind"] == "rail-below-minimum")
            .count(),
        1,
        "only VCC_FAR goes below its minimum"
    );
    let words = m["verdict_text"].as_str().unwrap();
    for part in [
        "FAILED",
        "glitches",
        "VCC_FAR",
        "below its rated minimum",
        "guard band",
    ] {
        assert!(words.contains(part), "{part}: {words}");
    }
}

#[test]
fn sweep_report_finds_the_failure_and_exits_with_the_margin_code() {
    let path = demo("larkspur-sweep.smrec");
    let out = run(&["report", &path, "--json"]);
    assert_eq!(out.status.code(), Some(3), "the machine failed");
    let d: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let m = &d["margin"];
    assert_eq!(m["verdict"], "failed");
    let kinds: Vec<&str> = m["problems"]
        .as_array()
        .unwrap()
        .iter()
        .filter_map(|p| p["kind"].as_str())
        .collect();
    assert_eq!(
        kinds,
        ["fault-line", "heartbeat-stopped", "sampled-coverage"],
        "the fault line, the heartbeat that stopped with it, the bursts"
    );
    let onset = m["fail_onset_hz"].as_f64().unwrap();
    // the sim faults past the typical budget at 47 % duty: just under 2.07 MHz at these rails
    assert!((1.95e6..2.10e6).contains(&onset), "{onset}");
    // judged at the last clean interval before the failure, not at the session's average
    assert_eq!(m["moving"], true);
    assert_eq!(m["judged"]["basis"], "last-clean-before-failure");
    let op = m["operating_hz"].as_f64().unwrap();
    assert!(op < onset && op > onset * 0.97, "{op} vs {onset}");
    let headroom = m["headroom"].as_f64().unwrap();
    assert!((headroom - (onset / op - 1.0)).abs() < 1e-12);
    assert!(headroom > 0.0 && headroom < 0.03, "{headroom}");
    // the highest clean interval lies at or below the worst-case f_max at this duty
    let clean = m["highest_clean_hz"].as_f64().unwrap();
    let fmax = m["worst_case"]["fmax_at_duty_hz"].as_f64().unwrap();
    let u = m["highest_clean_uncertainty_hz"].as_f64().unwrap();
    assert!(
        clean < fmax + u && clean > fmax - 2.0 * u,
        "{clean} vs {fmax} ± {u}"
    );
    assert!(d["series"]["points"].as_array().unwrap().len() >= 290);
    let text = run(&["report", &path]);
    let t = String::from_utf8_lossy(&text.stdout);
    assert!(
        t.contains("VERDICT (failed): FAILED")
            && t.contains("Measured failure onset")
            && t.contains("last clean interval before the failure")
            && t.contains("Over time"),
        "{t}"
    );
    // judged against no design: no margin, exit 0
    let none = run(&["report", &path, "--no-design"]);
    assert_eq!(none.status.code(), Some(0));
}

#[test]
fn budget_takes_supply_and_clock_from_a_recording() {
    let path = demo("larkspur-sagging.smrec");
    let out = run(&["budget", "--json", "--recording", &path]);
    assert_eq!(
        out.status.code(),
        Some(3),
        "the same verdict as report: failed; {}",
        String::from_utf8_lossy(&out.stderr)
    );
    let d: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let far = d["section_vcc_v"]["far"].as_f64().unwrap();
    assert!(far < 4.55, "the far section at its sagging rail: {far}");
    assert!((d["margin"]["operating_hz"].as_f64().unwrap() - 2.0e6).abs() < 100.0);
}

/// `budget --recording FILE` and `report FILE` say the same: the embedded design, the same
/// supply and numbers, the same verdict and words.
#[test]
fn budget_of_a_recording_agrees_with_its_report() {
    for name in ["larkspur-steady.smrec", "larkspur-sweep.smrec"] {
        let path = demo(name);
        let b = run(&["budget", "--json", "--recording", &path]);
        let r = run(&["report", "--json", &path]);
        assert_eq!(b.status.code(), r.status.code(), "{name}");
        let b: serde_json::Value = serde_json::from_slice(&b.stdout).unwrap();
        let r: serde_json::Value = serde_json::from_slice(&r.stdout).unwrap();
        assert_eq!(b["margin"], r["margin"], "{name}");
        assert_eq!(b["vcc_v"], r["margin"]["vcc_used_v"]);
        assert_eq!(b["section_vcc_v"], r["margin"]["section_vcc_v"]);
        assert_eq!(
            b["high_required_ns"],
            r["margin"]["worst_case"]["phases"][1]["required_ns"]
        );
        let bt =
            String::from_utf8_lossy(&run(&["budget", "--recording", &path]).stdout).into_owned();
        let rt = String::from_utf8_lossy(&run(&["report", &path]).stdout).into_owned();
        assert!(bt.contains("(embedded in"), "the embedded design: {bt}");
        let margin = |t: &str| t[t.find("Margin against").unwrap()..].to_string();
        assert_eq!(margin(&bt), margin(&rt), "{name}: the same words");
    }
    // --strict alike: within resolution breaks the margin for both
    let steady = demo("larkspur-steady.smrec");
    for args in [
        vec!["budget", "--recording", steady.as_str(), "--strict"],
        vec!["report", steady.as_str(), "--strict"],
    ] {
        assert_eq!(run(&args).status.code(), Some(3), "{args:?}");
    }
    // one word for one thing in every report
    for args in [
        vec!["report", "recordings/larkspur-steady.smrec"],
        vec!["budget", "--recording", "recordings/larkspur-steady.smrec"],
    ] {
        let root = env!("CARGO_MANIFEST_DIR");
        let args: Vec<String> = args
            .iter()
            .map(|a| {
                if a.ends_with(".smrec") {
                    format!("{root}/{a}")
                } else {
                    a.to_string()
                }
            })
            .collect();
        let refs: Vec<&str> = args.iter().map(String::as_str).collect();
        let t = String::from_utf8_lossy(&run(&refs).stdout).into_owned();
        assert!(!t.contains("WORST") && !t.contains("min high"), "{t}");
    }
}

/// `--markdown` is Markdown: a Markdown parser (pulldown-cmark, with its GFM tables) finds
/// headings and tables in it, with the margin's phases as table rows.
#[test]
fn markdown_report_parses_into_tables() {
    use pulldown_cmark::{Event, Options, Parser, Tag, TagEnd};
    let out = run(&["report", &demo("larkspur-sweep.smrec"), "--markdown"]);
    let md = String::from_utf8_lossy(&out.stdout).into_owned();
    assert!(!md.contains("```"), "not a fenced text dump");
    let (mut tables, mut headings, mut rows) = (0, Vec::new(), Vec::new());
    let (mut in_heading, mut in_cell, mut row) = (false, false, Vec::<String>::new());
    let mut text = String::new();
    for ev in Parser::new_ext(&md, Options::ENABLE_TABLES) {
        match ev {
            Event::Start(Tag::Table(_)) => tables += 1,
            Event::Start(Tag::Heading { .. }) => {
                in_heading = true;
                text.clear();
            }
            Event::End(TagEnd::Heading(_)) => {
                in_heading = false;
                headings.push(text.clone());
            }
            Event::Start(Tag::TableCell) => {
                in_cell = true;
                text.clear();
            }
            Event::End(TagEnd::TableCell) => {
                in_cell = false;
                row.push(text.clone());
            }
            Event::End(TagEnd::TableRow) | Event::End(TagEnd::TableHead) => {
                rows.push(std::mem::take(&mut row));
            }
            Event::Text(t) | Event::Code(t) if in_heading || in_cell => text.push_str(&t),
            _ => {}
        }
    }
    for h in [
        "Clock CLK",
        "Rails",
        "Lines",
        "Trust",
        "Over time",
        "Margin against",
    ] {
        assert!(
            headings.iter().any(|x| x.starts_with(h)),
            "{h}: {headings:?}"
        );
    }
    assert!(tables >= 7, "{tables} tables");
    assert!(
        rows.iter()
            .any(|r| r.first().is_some_and(|c| c == "high") && r.iter().any(|c| c == "SHORT")),
        "the worst-case high phase as a table row: {rows:?}"
    );
    assert!(
        rows.iter()
            .any(|r| r.first().is_some_and(|c| c == "worst high"))
    );
    // the moving clock's rows, and its whole-window figures marked as a spread
    let row = |name: &str| {
        rows.iter()
            .find(|r| r.first().is_some_and(|c| c == name))
            .unwrap_or_else(|| panic!("a {name} row: {rows:?}"))
    };
    assert_eq!(row("moving clock")[1], "1.000 MHz … 5.985 MHz");
    assert!(row("detrended jitter")[1].starts_with("1.49"));
    assert!(row("frequency")[2].ends_with("whole-window spread of a moving clock"));
}

/// `--from/--to` take times with units (or plain seconds), refuse a reversed window or one
/// outside the recording, and say which window was analysed.
#[test]
fn report_window_is_checked_and_printed() {
    let path = demo("larkspur-steady.smrec");
    let out = run(&["report", &path, "--from", "5s", "--to", "10000ms"]);
    let t = String::from_utf8_lossy(&out.stdout).into_owned();
    assert!(
        t.contains(
            "window analysed: 5.000 s to 10.000 s of the recording, which runs on past 10.000 s"
        ),
        "{t}"
    );
    let d = run_json(&["report", &path, "--json", "--from", "5", "--to", "10"]);
    assert_eq!(d["window"]["from_s"], 5.0);
    assert_eq!(d["window"]["to_s"], 10.0);
    assert!(d["window"]["recording_s"].is_null(), "not read past --to");
    let t = String::from_utf8_lossy(&run(&["report", &path, "--from", "15s"]).stdout).into_owned();
    assert!(
        t.contains("window analysed: 15.000 s to 20.000 s of the recording's 20.000 s"),
        "{t}"
    );
    let edges = d["clock"]["edges"].as_u64().unwrap();
    let all = report("larkspur-steady.smrec")["clock"]["edges"]
        .as_u64()
        .unwrap();
    assert!(edges < all / 3 && edges > all / 6, "{edges} of {all}");
    for (args, want) in [
        (vec!["--from", "10s", "--to", "5s"], "is not before --to"),
        (vec!["--from", "10s", "--to", "10s"], "is not before --to"),
        (vec!["--from", "25s"], "25.000 s is past the"),
        (vec!["--to", "25s"], "25.000 s is past the"),
        (vec!["--from", "-1s"], "must not be negative"),
        (vec!["--from", "5 fortnights"], "--from"),
    ] {
        let mut a = vec!["report", path.as_str()];
        a.extend(args.iter());
        let out = run(&a);
        let err = String::from_utf8_lossy(&out.stderr).into_owned();
        assert_eq!(out.status.code(), Some(2), "{args:?}: {err}");
        // the message wraps where the path makes it long: compare its words
        let words = err.replace('│', " ");
        let words: Vec<&str> = words.split_whitespace().collect();
        assert!(words.join(" ").contains(want), "{args:?}: {err}");
    }
}

fn run_json(args: &[&str]) -> serde_json::Value {
    let out = run(args);
    // 0: fine; 3: the clock misses the budget or its margin (still a full answer)
    assert!(
        matches!(out.status.code(), Some(0 | 3)),
        "{args:?}: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    serde_json::from_slice(&out.stdout).unwrap()
}

#[test]
fn failures_sets_the_onset_beside_the_budget_at_that_supply() {
    let path = demo("larkspur-sweep.smrec");
    let rows = run_json(&["failures", &path, "--json"]);
    let row = &rows.as_array().unwrap()[0];
    // the same onset as the report of the same file finds
    let rep = report("larkspur-sweep.smrec");
    let onset = row["fail_onset_hz"].as_f64().unwrap();
    assert!((onset - rep["margin"]["fail_onset_hz"].as_f64().unwrap()).abs() < 1e-6);
    assert!(row["fail_onset_uncertainty_hz"].as_f64().unwrap() > 0.0);
    // f_max beside it is the budget's at the failing supply and duty
    let vcc = format!("{}V", row["vcc_v"].as_f64().unwrap());
    let duty = format!("{}", row["duty"].as_f64().unwrap());
    for (corner, key) in [("typ", "fmax_typical_hz"), ("max", "fmax_worst_case_hz")] {
        let b = run_json(&[
            "budget", "--vcc", &vcc, "--duty", &duty, "--corner", corner, "--json",
        ]);
        let want = b["at_duty"]["fmax_hz"].as_f64().unwrap();
        let got = row[key].as_f64().unwrap();
        assert!(
            (got - want).abs() < 1e-6 * want,
            "{corner}: {got} vs {want}"
        );
    }
    // the fault model fires at the typical timing: the onset sits near, not above, f_max typ
    let typ = row["fmax_typical_hz"].as_f64().unwrap();
    assert!(onset < typ * 1.01 && onset > typ * 0.9, "{onset} vs {typ}");
}

#[test]
fn failures_refuses_a_recording_without_a_failure() {
    let path = demo("larkspur-steady.smrec");
    let out = run(&["failures", &path]);
    assert!(!out.status.success());
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(err.contains("larkspur-steady"), "{err}");
}

#[test]
fn failures_names_a_cut_file_and_keeps_the_whole_ones() {
    let sweep = demo("larkspur-sweep.smrec");
    let whole = std::fs::read(&sweep).unwrap();
    let cut = std::env::temp_dir().join(format!("slackmeter-cut-{}.smrec", std::process::id()));
    std::fs::write(&cut, &whole[..whole.len() / 5]).unwrap();
    let out = run(&["failures", "--json", cut.to_str().unwrap(), &sweep]);
    let _ = std::fs::remove_file(&cut);
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(out.status.success(), "{err}");
    assert!(err.contains("cut off") && err.contains("left out"), "{err}");
    let rows: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(rows.as_array().unwrap().len(), 1);
}

/// The rows of recordings/README.md name the verdict each report gives, and its figures.
#[test]
fn readme_rows_say_what_the_reports_say() {
    let readme = std::fs::read_to_string(demo("README.md")).unwrap();
    for (name, figures) in [
        (
            "larkspur-steady.smrec",
            &["+3.0 ns", "+53.0 ns", "+224.0 ns", "1.0 % of the clock's"][..],
        ),
        ("larkspur-sagging.smrec", &["17 glitches"][..]),
        (
            "larkspur-sweep.smrec",
            &[
                "1.000 MHz … 5.985 MHz",
                "1.983 MHz",
                "2.0024 MHz ± 0.0035 MHz",
                "+1.0 % headroom",
                "1.867 MHz",
            ][..],
        ),
    ] {
        let row = readme
            .lines()
            .find(|l| l.starts_with(&format!("| `{name}` |")))
            .unwrap_or_else(|| panic!("a row for {name}"));
        let said = row
            .split("Margin")
            .nth(1)
            .and_then(|m| m.split('`').nth(1))
            .unwrap_or_else(|| panic!("{name}: the row names a verdict"));
        let d = report(name);
        assert_eq!(d["margin"]["verdict"], said, "{name}");
        let text = String::from_utf8_lossy(&run(&["report", &demo(name)]).stdout).into_owned();
        for f in figures {
            assert!(row.contains(f), "{name}: the row says {f}");
            assert!(text.contains(f), "{name}: the report says {f}: {text}");
        }
    }
}
