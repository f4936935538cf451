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
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    for (file, title) in [
        ("period_histogram.svg", "Clock period histogram"),
        ("high_time_histogram.svg", "High time histogram"),
        ("low_time_histogram.svg", "Low time histogram"),
        ("tie.svg", "Time interval error"),
        ("rail_VCC_FAR.svg", "Rail VCC_FAR over time"),
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
}

#[test]
fn report_judges_against_the_embedded_design() {
    let path = demo("larkspur-steady.smrec");
    let out = run(&["report", &path, "--json"]);
    assert_eq!(
        out.status.code(),
        Some(0),
        "inside the worst-case budget: exit 0"
    );
    let d: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let m = &d["margin"];
    for key in [
        "low_slack_ns",
        "high_slack_ns",
        "period_slack_ns",
        "verdict",
        "vcc_used_v",
    ] {
        assert!(!m[key].is_null(), "margin.{key}");
    }
    assert_eq!(m["verdict"], "inside-worst-case");
    // 248 ns measured high time against the budget's high-phase requirement at the rails
    let h = m["high_slack_ns"].as_f64().unwrap();
    assert!(h > 0.0 && h < 8.0, "{h}");
    assert_eq!(m["guard_band_met"], false);
    assert!(m["fail_onset_hz"].is_null());
}

#[test]
fn sweep_report_finds_the_failure_and_exits_with_the_margin_code() {
    let path = demo("larkspur-sweep.smrec");
    let out = run(&["report", &path, "--json"]);
    assert_eq!(out.status.code(), Some(3), "the sweep ran past the budget");
    let d: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let m = &d["margin"];
    let onset = m["fail_onset_hz"].as_f64().unwrap();
    // the sim faults past the typical budget at 47 % duty: just under 2.07 MHz at these rails
    assert!((1.95e6..2.10e6).contains(&onset), "{onset}");
    assert!(m["headroom"].is_number());
    let text = run(&["report", &path]);
    let t = String::from_utf8_lossy(&text.stdout);
    assert!(
        t.contains("VERDICT:") && t.contains("Measured failure onset"),
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
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let d: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let far = d["section_vcc_v"]["far"].as_f64().unwrap();
    assert!(far < 4.55, "the far section at its sagging rail: {far}");
    assert!((d["clock_hz"].as_f64().unwrap() - 2.0e6).abs() < 100.0);
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
