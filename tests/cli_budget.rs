//! The `budget` and `parts` commands run as a user runs them: real process, real files, exit codes.

use std::process::Command;

fn slackmeter(args: &[&str]) -> (i32, String, String) {
    let out = Command::new(env!("CARGO_BIN_EXE_slackmeter"))
        .args(args)
        .env("NO_COLOR", "1")
        // rows are checked whole here; wrapping at 100 columns is tested in cli_behaviour.rs
        .env("COLUMNS", "1000")
        .output()
        .expect("binary runs");
    (
        out.status.code().unwrap_or(-1),
        String::from_utf8_lossy(&out.stdout).into_owned(),
        String::from_utf8_lossy(&out.stderr).into_owned(),
    )
}

#[test]
fn demo_budget_prints_table_and_fits_its_planned_clock() {
    let (code, out, err) = slackmeter(&["budget"]);
    assert_eq!(code, 0, "{err}");
    assert!(out.contains("Larkspur-8"));
    for phase in ["low", "high", "period"] {
        assert!(out.contains(phase));
    }
    assert!(out.contains("f_max"));
    assert!(out.contains("every phase fits this budget"), "{out}");
}

#[test]
fn json_document_has_the_stable_keys() {
    let (code, out, err) = slackmeter(&["budget", "--json", "--freq", "1.8MHz", "--duty", "45%"]);
    assert_eq!(code, 0, "{err}");
    let v: serde_json::Value = serde_json::from_str(&out).expect("valid JSON");
    for key in [
        "low_required_ns",
        "high_required_ns",
        "period_required_ns",
        "best_duty",
        "fmax_best_duty_hz",
        "fmax_50_hz",
        "vcc_v",
        "temp_c",
        "corner",
        "critical_paths",
        "low_slack_ns",
        "high_slack_ns",
        "period_slack_ns",
    ] {
        assert!(v.get(key).is_some(), "missing {key}");
    }
    // the JSON numbers obey the published clock-plan formulas among themselves
    let l = v["low_required_ns"].as_f64().unwrap();
    let h = v["high_required_ns"].as_f64().unwrap();
    let d = v["best_duty"].as_f64().unwrap();
    assert!((d - h / (l + h)).abs() < 1e-12);
    let t = 1e9 / 1.8e6;
    assert!((v["high_slack_ns"].as_f64().unwrap() - (0.45 * t - h)).abs() < 1e-6);
    assert_eq!(v["corner"], "max");
    assert!(
        v["critical_paths"]["high"]["steps"]
            .as_array()
            .unwrap()
            .len()
            >= 3
    );
}

#[test]
fn a_clock_that_does_not_fit_exits_with_the_margin_code() {
    let (code, out, _) = slackmeter(&["budget", "--freq", "3 MHz"]);
    assert_eq!(code, 3);
    assert!(out.contains("does NOT fit"));
}

#[test]
fn operating_point_flags_change_the_result() {
    let (_, hot, _) = slackmeter(&["budget", "--json", "--temp", "85 °C", "--vcc", "4.5V"]);
    let (_, cool, _) = slackmeter(&["budget", "--json", "--temp", "25C", "--vcc", "5.5 V"]);
    let hot: serde_json::Value = serde_json::from_str(&hot).unwrap();
    let cool: serde_json::Value = serde_json::from_str(&cool).unwrap();
    assert!(hot["fmax_50_hz"].as_f64() < cool["fmax_50_hz"].as_f64());
    assert_eq!(hot["temp_c"], 85.0);
    let (code, typ, _) = slackmeter(&["budget", "--json", "--corner", "typ"]);
    assert_eq!(code, 0);
    let typ: serde_json::Value = serde_json::from_str(&typ).unwrap();
    assert_eq!(typ["corner"], "typ");
}

#[test]
fn supply_sweep_lists_fmax_and_marks_out_of_spec() {
    let (code, out, err) = slackmeter(&["budget", "--sweep-vcc", "4.0V..5.5V", "--points", "7"]);
    assert_eq!(code, 0, "{err}");
    assert_eq!(
        out.lines()
            .filter(|l| l.trim_start().starts_with(|c: char| c.is_ascii_digit()))
            .count(),
        7
    );
    assert!(
        out.lines()
            .any(|l| l.contains("4.000 V") && l.contains("OUT OF SPEC"))
    );
    assert!(
        out.lines()
            .any(|l| l.contains("5.000 V") && !l.contains("OUT OF SPEC"))
    );
    let (_, json, _) = slackmeter(&[
        "budget",
        "--sweep-vcc",
        "4.5V..5.5V",
        "--points",
        "3",
        "--json",
    ]);
    let v: serde_json::Value = serde_json::from_str(&json).unwrap();
    let pts = v["sweep"].as_array().unwrap();
    assert_eq!(pts.len(), 3);
    // 4.5–5.5 V lie on and above the 4.5 V column: the same guarantee; the estimate rises
    assert_eq!(pts[0]["fmax_50_hz"], pts[2]["fmax_50_hz"]);
    assert!(pts[0]["estimate_fmax_50_hz"].as_f64() < pts[2]["estimate_fmax_50_hz"].as_f64());
}

#[test]
fn supply_sweep_names_the_parts_marks_the_clock_and_keeps_sections() {
    let (code, out, err) = slackmeter(&["budget", "--sweep-vcc", "4.0V..5.5V", "--points", "4"]);
    assert_eq!(code, 0, "{err}");
    // the design's 2 MHz clock fails where the 2.0 V columns apply; the EEPROM is named
    let row = out.lines().find(|l| l.contains("4.000 V")).unwrap();
    assert!(
        row.contains("CLOCK FAILS") && row.contains("AT28C256-20"),
        "{row}"
    );
    let row = out.lines().find(|l| l.contains("5.000 V")).unwrap();
    assert!(!row.contains("CLOCK FAILS"), "{row}");
    // each warning once for the whole sweep
    let warnings: Vec<&str> = out.lines().filter(|l| l.starts_with("  - ")).collect();
    let mut unique = warnings.clone();
    unique.sort_unstable();
    unique.dedup();
    assert_eq!(warnings.len(), unique.len(), "{out}");
    // a section given its own supply keeps it through the sweep
    let (_, json, _) = slackmeter(&[
        "budget",
        "--sweep-vcc",
        "4.5V..5.5V",
        "--points",
        "2",
        "--section-vcc",
        "far=4.4V",
        "--json",
    ]);
    let v: serde_json::Value = serde_json::from_str(&json).unwrap();
    for p in v["sweep"].as_array().unwrap() {
        assert!(
            p["low_required_ns"].as_f64().unwrap() > 400.0,
            "far at 4.4 V: {p}"
        );
    }
}

#[test]
fn negative_temperatures_and_implausible_clocks() {
    // at −40 °C the −40…85 °C columns are guaranteed (and the 25 °C-only rows are flagged)
    let (code, out, err) = slackmeter(&["budget", "--temp", "-40", "--json"]);
    assert!(code == 0 || code == 3, "{err}");
    let v: serde_json::Value = serde_json::from_str(&out).unwrap();
    assert_eq!(v["temp_c"], -40.0);
    // `report --temp -40` takes the negative value too
    let rec = concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/recordings/larkspur-steady.smrec"
    );
    let (code, out, err) = slackmeter(&["report", rec, "--temp", "-40", "--json"]);
    assert!(code == 0 || code == 3, "{err}");
    assert!(out.contains("\"margin\""), "{out}");
    let (_, out, _) = slackmeter(&["budget", "--freq", "1.8mHz"]);
    assert!(out.contains("did you mean 1.800 MHz"), "{out}");
}

#[test]
fn parts_name_prints_every_column_with_its_source() {
    let (code, out, err) = slackmeter(&["parts", "74HC574/ti-cd"]);
    assert_eq!(code, 0, "{err}");
    // TI CD74HC574 SCHS183E: CLK→Q 165/33/28 ns at 25 °C; clock pulse width 80/16/14 ns
    assert!(out.contains("SCHS183E"), "{out}");
    assert!(out.contains("2 V: 165, 4.5 V: 33, 6 V: 28 ns"), "{out}");
    assert!(
        out.contains("CLK (pulse-width)") && out.contains("4.5 V: 16"),
        "{out}"
    );
    let (code, out, _) = slackmeter(&["parts", "74HC161", "--json"]);
    assert_eq!(code, 0);
    let v: serde_json::Value = serde_json::from_str(&out).unwrap();
    assert_eq!(v["variants"].as_array().unwrap().len(), 3);
    // a generic of a commercial and an industrial grade claims neither grade (regression)
    let (code, out, _) = slackmeter(&["parts", "AT27C256R-45"]);
    assert_eq!(code, 0);
    let first = out.lines().next().unwrap_or("");
    assert!(first.contains("45 ns grade"), "{first}");
    assert!(
        !first.contains("commercial") && !first.contains("industrial"),
        "{first}"
    );
    let (code, _, err) = slackmeter(&["parts", "74HC9999"]);
    assert_eq!(code, 2);
    assert!(err.contains("no part"), "{err}");
}

#[test]
fn a_clock_breaking_a_pulse_width_or_a_part_fmax_exits_3_and_says_which() {
    let dir = std::env::temp_dir().join(format!("slackmeter-limits-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let f = dir.join("limits.toml");
    // a register feeding a register through 5 ns of wire, and a counter on the same clock
    std::fs::write(
        &f,
        r#"
[design]
name = "limits"
[[part]]
ref = "U1"
type = "74HC574/ti-cd"
[[part]]
ref = "U2"
type = "74HC574/ti-cd"
[[part]]
ref = "U3"
type = "74HC161/onsemi"
[[launch]]
edge = "rise"
part = "U1"
arc = "CLK->Q"
to = "q"
[[launch]]
edge = "rise"
part = "U3"
arc = "CLK->Q"
to = "cq"
[[arc]]
from = "q"
to = "d"
delay = { max = "5 ns" }
[[capture]]
signal = "d"
edge = "rise"
part = "U2"
check = "D->CLK"
[[capture]]
signal = "cq"
edge = "rise"
setup = "0 ns"
"#,
    )
    .unwrap();
    let path = f.to_str().unwrap();
    // 10 MHz at 10 % duty: the path fits a 100 ns period, but the high phase is 10 ns, short of
    // the 574's 16 ns clock pulse width (TI SCHS183E, 4.5 V)
    let (code, out, _) = slackmeter(&[
        "budget", path, "--vcc", "4.5V", "--freq", "10MHz", "--duty", "10%",
    ]);
    assert_eq!(code, 3, "{out}");
    assert!(
        out.contains("short of high: ") && out.contains("minimum pulse width"),
        "{out}"
    );
    // a counter alone at 32 MHz: a 31 ns period its 22 ns clock-to-output would allow, past
    // its 30 MHz f_max (onsemi MC74HC161A/D, 4.5 V)
    let counter = dir.join("counter.toml");
    std::fs::write(
        &counter,
        "[design]\nname = \"counter\"\n[[part]]\nref = \"U3\"\ntype = \"74HC161/onsemi\"\n\
[[launch]]\nedge = \"rise\"\npart = \"U3\"\narc = \"CLK->Q\"\nto = \"cq\"\n\
[[capture]]\nsignal = \"cq\"\nedge = \"rise\"\nsetup = \"0 ns\"\n",
    )
    .unwrap();
    let (code, out, _) = slackmeter(&[
        "budget",
        counter.to_str().unwrap(),
        "--vcc",
        "4.5V",
        "--freq",
        "32MHz",
    ]);
    assert_eq!(code, 3, "{out}");
    assert!(
        out.contains("short of period: ") && out.contains("part f_max"),
        "{out}"
    );
    let _ = std::fs::remove_dir_all(&dir);
}

#[test]
fn bad_input_exits_2_with_a_located_diagnostic() {
    let dir = std::env::temp_dir().join(format!("slackmeter-cli-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let f = dir.join("typo.toml");
    std::fs::write(&f, "[design]\nname = \"x\"\n[operating]\nvcc = \"5 v\"\n").unwrap();
    let (code, _, err) = slackmeter(&["budget", f.to_str().unwrap()]);
    assert_eq!(code, 2);
    assert!(err.contains("typo.toml:4:7"), "{err}");
    assert!(err.contains("case-sensitive"), "{err}");
    let (code, _, err) = slackmeter(&["budget", "/nonexistent/design.toml"]);
    assert_eq!(code, 2);
    assert!(err.contains("cannot read design file"), "{err}");
    let (code, _, err) = slackmeter(&["budget", "--freq", "1.8 mhz"]);
    assert_eq!(code, 2);
    assert!(err.contains("case-sensitive"), "{err}");
    let (code, _, err) = slackmeter(&["budget", "--section-vcc", "attic=4.6V"]);
    assert_eq!(code, 2);
    assert!(err.contains("attic"), "{err}");
}

#[test]
fn parts_lists_the_library_with_status() {
    let (code, out, _) = slackmeter(&["parts", "--family", "74HCT"]);
    assert_eq!(code, 0);
    assert!(out.contains("74HCT245"));
    assert!(!out.contains("74LS161"));
    let (code, out, _) = slackmeter(&["parts", "--json"]);
    assert_eq!(code, 0);
    let v: serde_json::Value = serde_json::from_str(&out).unwrap();
    assert!(v.as_array().unwrap().len() >= 25);
}

#[test]
fn every_subcommand_has_help() {
    for sub in [
        vec!["--help"],
        vec!["budget", "--help"],
        vec!["parts", "--help"],
    ] {
        let (code, out, _) = slackmeter(&sub);
        assert_eq!(code, 0);
        assert!(out.contains("Usage"), "{sub:?}");
    }
}

#[test]
fn a_user_parts_folder_replaces_a_builtin_part() {
    let dir = std::env::temp_dir().join(format!("slackmeter-parts-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    // a slow EEPROM grade entered by the user replaces the built-in AT28C256-20
    std::fs::write(
        dir.join("mine.toml"),
        "[[part]]\ntype = \"AT28C256-20\"\nfamily = \"EEPROM\"\nfunction = \"my batch\"\n\
source = \"bench\"\nstatus = \"from-memory\"\nload_pf = 100\nvcc_v = [5.0]\n\
[[part.arc]]\nname = \"ADDR->D\"\nkind = \"delay\"\nmax_ns = { 25 = [300] }\n\
[[part.arc]]\nname = \"OE->D\"\nkind = \"delay\"\nmax_ns = { 25 = [80] }\n",
    )
    .unwrap();
    let (_, base, _) = slackmeter(&["budget", "--json"]);
    let (code, mine, err) = slackmeter(&["budget", "--json", "--parts", dir.to_str().unwrap()]);
    assert_eq!(code, 3, "slower EEPROM no longer fits 2 MHz: {err}");
    let base: serde_json::Value = serde_json::from_str(&base).unwrap();
    let mine: serde_json::Value = serde_json::from_str(&mine).unwrap();
    let h0 = base["high_required_ns"].as_f64().unwrap();
    let h1 = mine["high_required_ns"].as_f64().unwrap();
    assert!(
        (h1 - h0 - 100.0).abs() < 1e-6,
        "300 ns instead of 200 ns: {h0} → {h1}"
    );
    let (code, _, err) = slackmeter(&["budget", "--parts", "/nonexistent/parts"]);
    assert_eq!(code, 2);
    assert!(err.contains("cannot read part library"), "{err}");
}
