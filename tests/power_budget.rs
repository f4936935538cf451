//! The power budget against hand arithmetic and the copper table, its fixed points, and its
//! located errors for bad supply wiring.

use slackmeter::budget::{Design, Library};
use slackmeter::diag::Source;
use slackmeter::power::{self, PowerPoint, SupplyData, Wiring};

const TWO_SECTIONS: &str = r#"
[design]
name = "two sections"

[clock]
freq = "1 MHz"

[[section]]
name = "a"

[[section]]
name = "b"

[[part]]
ref = "U1"
type = "62256-70"
section = "a"

[[part]]
ref = "U2"
type = "AT28C256-20"
section = "b"

[[part]]
ref = "U3"
type = "74HC574"
section = "b"

[[launch]]
edge = "rise"
part = "U3"
arc = "CLK->Q"
to = "q"

[[capture]]
signal = "q"
edge = "rise"
part = "U3"
check = "D->CLK"

[supply]
voltage = "5.00 V"
limit = "250 mA"
contact = "25 mΩ"
wire_temp = "20 °C"

[[feed]]
section = "a"
from = "supply"
gauge = "22 AWG"
length = "1 m"

[[feed]]
section = "b"
from = "a"
gauge = "24 AWG"
length = "500 mm"
contacts = 4

[[load]]
section = "a"
name = "clock oscillator"
current = "60 mA"

[[load]]
section = "b"
name = "display"
current = "30 mA"
"#;

fn load(text: &str) -> (Design, Library) {
    let lib = Library::builtin();
    let d = Design::parse(Source::new("two.toml", text.to_string()), &lib).expect("design parses");
    (d, lib)
}

fn at(freq_hz: f64) -> PowerPoint {
    PowerPoint {
        freq_hz,
        data_activity: 0.25,
        temp_c: 25.0,
    }
}

#[test]
fn two_sections_by_hand() {
    let (d, lib) = load(TWO_SECTIONS);
    let w = Wiring::of(&d).unwrap().expect("has a supply");
    let pb = power::solve(&d, &lib, &SupplyData::builtin(), &w, &at(0.0));
    // At 0 Hz only static currents flow (hand arithmetic):
    //   a: SRAM 40 mA (ISSI IS62C256, typical active) + load 60 mA          = 100 mA
    //   b: EEPROM 50 mA (Microchip AT28C256 0006M §8) + 74HC574 ICC 8 µA
    //      (25 °C column) + display 30 mA                                    = 80.008 mA
    // Copper at 20 °C, NBS Handbook 100: 22 AWG 16.14 Ω/1000 ft = 0.052953 Ω/m,
    //   24 AWG 25.67 Ω/1000 ft = 0.084219 Ω/m; supply and return: 2 conductors.
    //   feed a: 2 × 1 m × 0.052953                      = 0.105906 Ω
    //   feed b: 2 × 0.5 m × 0.084219 + 4 × 0.025 Ω      = 0.184219 Ω
    //   drop b = 80.008 mA × 0.184219 Ω                  = 14.739 mV
    //   drop a = (100 + 80.008) mA × 0.105906 Ω          = 19.064 mV
    //   rail a = 5.000 − 0.019064                        = 4.980936 V
    //   rail b = 4.980936 − 0.014739                     = 4.966197 V
    let (a, b) = (&pb.sections[0], &pb.sections[1]);
    assert!((a.current_ma - 100.0).abs() < 1e-9, "{}", a.current_ma);
    assert!((b.current_ma - 80.008).abs() < 1e-9, "{}", b.current_ma);
    assert!((pb.total_ma - 180.008).abs() < 1e-9);
    let close = |x: f64, want: f64, tol: f64| assert!((x - want).abs() < tol, "{x} vs {want}");
    // the table's four digits leave ±0.05 % in each resistance
    close(a.feed_ohm, 0.105906, 1e-4);
    close(b.feed_ohm, 0.184219, 1e-4);
    close(b.drop_mv, 14.739, 0.01);
    close(a.drop_mv, 19.064, 0.01);
    close(a.rail_v, 4.980936, 2e-5);
    close(b.rail_v, 4.966197, 2e-5);
    close(pb.supply_headroom_ma.unwrap(), 250.0 - 180.008, 1e-9);
    // constant currents: one pass gives the rails, a second confirms them
    assert!(pb.iterations <= 2, "{}", pb.iterations);
    assert_eq!(a.fed_from.as_deref(), Some("supply"));
    assert_eq!(b.fed_from.as_deref(), Some("a"));
}

#[test]
fn dynamic_current_of_the_hc_register_by_hand() {
    let (d, lib) = load(TWO_SECTIONS);
    let w = Wiring::of(&d).unwrap().unwrap();
    let data = SupplyData::builtin();
    let p0 = power::solve(&d, &lib, &data, &w, &at(0.0));
    let p1 = power::solve(&d, &lib, &data, &w, &at(1e6));
    // 74HC574 at 1 MHz, clocked (its flip-flops switch at f): I = (Cpd·N·fi + CL·n·fo)·VCC
    //   = (35 pF × 8 × 1 MHz + 15 pF × 8 × 0.25 MHz) × V_b = (280 + 30) µA/V·… = 310e-6 × V_b mA·1e3
    let vb = p1.sections[1].rail_v;
    let want_ma = (35.0 * 8.0 * 1e6 + 15.0 * 8.0 * 0.25e6) * 1e-12 * vb * 1e3;
    assert!(
        (p1.sections[1].dynamic_ma - want_ma).abs() < 1e-9,
        "{} vs {want_ma}",
        p1.sections[1].dynamic_ma
    );
    assert!(p1.sections[1].rail_v < p0.sections[1].rail_v);
}

#[test]
fn leds_make_a_fixed_point_that_converges_and_is_stable() {
    let text = format!(
        "{TWO_SECTIONS}\n[[led]]\nsection = \"b\"\ncount = 40\nvf = \"2.0 V\"\nresistor = \"330 ohm\"\nlit = 1.0\n"
    );
    let (d, lib) = load(&text);
    let w = Wiring::of(&d).unwrap().unwrap();
    let pb = power::solve(&d, &lib, &SupplyData::builtin(), &w, &at(2e6));
    assert!(pb.warnings.iter().all(|x| !x.contains("did not settle")));
    assert!(pb.iterations > 2 && pb.iterations < 20, "{}", pb.iterations);
    // the rails reproduce themselves: the LED current (V_b − Vf)/R × 40 at the rail found
    let b = &pb.sections[1];
    assert!((b.led_ma - 40.0 * (b.rail_v - 2.0) / 330.0 * 1e3).abs() < 1e-6);
    let a = &pb.sections[0];
    let rail_b = a.rail_v - b.feed_ma * b.feed_ohm * 1e-3;
    assert!((rail_b - b.rail_v).abs() < 1e-8);
    // stable: solving again gives the same rails to the last bit
    let again = power::solve(&d, &lib, &SupplyData::builtin(), &w, &at(2e6));
    assert_eq!(again, pb);
}

#[test]
fn clock_fixed_point_converges() {
    let (d, lib) = load(TWO_SECTIONS);
    let w = Wiring::of(&d).unwrap().unwrap();
    let data = SupplyData::builtin();
    // a clock that falls with the far rail (a stand-in for the budget's f_max at the rail):
    // f = 10 MHz × (V_b − 4.0) / 1.0
    let (f, pb, n) = power::clock_fixed_point(
        1e6,
        |f| power::solve(&d, &lib, &data, &w, &at(f)),
        |pb| Some(10e6 * (pb.sections[1].rail_v - 4.0)),
    );
    let f = f.unwrap();
    assert!(n < 10, "{n}");
    assert!((f - 10e6 * (pb.sections[1].rail_v - 4.0)).abs() < 1e-6 * f);
}

fn wiring_error(text: &str) -> (String, usize, usize) {
    let (d, _) = load(text);
    let e = Wiring::of(&d).unwrap_err();
    (e.message.clone(), e.line, e.column)
}

fn line_of(text: &str, needle: &str) -> usize {
    text.lines().position(|l| l.contains(needle)).unwrap() + 1
}

#[test]
fn negative_length_is_located() {
    let text = TWO_SECTIONS.replace("length = \"1 m\"", "length = \"-1 m\"");
    let (msg, line, col) = wiring_error(&text);
    assert!(msg.contains("negative"), "{msg}");
    assert_eq!((line, col), (line_of(&text, "\"-1 m\""), 10));
}

#[test]
fn unknown_gauge_is_located() {
    let text = TWO_SECTIONS.replace("\"24 AWG\"", "\"24 SWG\"");
    let (msg, line, col) = wiring_error(&text);
    assert!(msg.contains("unknown wire gauge"), "{msg}");
    assert_eq!((line, col), (line_of(&text, "24 SWG"), 9));
}

#[test]
fn led_without_resistor_is_located() {
    let text = format!("{TWO_SECTIONS}\n[[led]]\nsection = \"a\"\ncount = 8\n");
    let (msg, line, _) = wiring_error(&text);
    assert!(msg.contains("no series resistor"), "{msg}");
    assert!(line >= line_of(&text, "[[led]]"), "{line}");
}

#[test]
fn feed_of_an_unknown_section_is_located() {
    let text = TWO_SECTIONS.replace("from = \"a\"", "from = \"c\"");
    let (msg, line, col) = wiring_error(&text);
    assert!(msg.contains("no section \"c\""), "{msg}");
    assert_eq!((line, col), (line_of(&text, "from = \"c\""), 8));
}

#[test]
fn demo_design_rails_tell_the_recordings_story() {
    // the steady demo recording's rail means: 5.02 / 4.96 / 4.88 V (recordings/README.md)
    let lib = Library::builtin();
    let d = Design::demo(&lib);
    let w = Wiring::of(&d).unwrap().expect("the demo has supply wiring");
    let pb = power::solve(&d, &lib, &SupplyData::builtin(), &w, &at(2e6));
    let rails: Vec<f64> = pb.sections.iter().map(|s| s.rail_v).collect();
    for (got, want) in rails.iter().zip([5.02, 4.96, 4.88]) {
        assert!((got - want).abs() < 0.01, "{rails:?}");
    }
}

fn slackmeter(args: &[&str]) -> (i32, String, String) {
    let out = std::process::Command::new(env!("CARGO_BIN_EXE_slackmeter"))
        .args(args)
        .output()
        .expect("runs");
    (
        out.status.code().unwrap_or(-1),
        String::from_utf8_lossy(&out.stdout).into_owned(),
        String::from_utf8_lossy(&out.stderr).into_owned(),
    )
}

#[test]
fn power_command_json_has_the_documented_keys() {
    let (code, out, err) = slackmeter(&["power", "--json"]);
    assert_eq!(code, 0, "{err}");
    let v: serde_json::Value = serde_json::from_str(&out).unwrap();
    for k in ["total_ma", "supply_headroom_ma", "iterations"] {
        assert!(v[k].is_number(), "{k}");
    }
    let s = &v["sections"][2];
    assert_eq!(s["name"], "far");
    for k in [
        "current_ma",
        "static_ma",
        "dynamic_ma",
        "led_ma",
        "drop_mv",
        "rail_v",
    ] {
        assert!(s[k].is_number(), "{k}");
    }
    // twice the clock: more dynamic current, a lower far rail
    let (_, out4, _) = slackmeter(&["power", "--json", "--freq", "4MHz"]);
    let v4: serde_json::Value = serde_json::from_str(&out4).unwrap();
    assert!(v4["sections"][2]["dynamic_ma"].as_f64() > s["dynamic_ma"].as_f64());
    assert!(v4["sections"][2]["rail_v"].as_f64() < s["rail_v"].as_f64());
}

#[test]
fn power_command_reports_a_bad_feed_with_its_location() {
    let dir = std::env::temp_dir().join(format!("slackmeter-power-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let path = dir.join("bad-gauge.toml");
    let text = TWO_SECTIONS.replace("\"24 AWG\"", "\"24 SWG\"");
    std::fs::write(&path, &text).unwrap();
    let (code, _, err) = slackmeter(&["power", path.to_str().unwrap()]);
    assert_eq!(code, 2, "{err}");
    let line = line_of(&text, "24 SWG");
    assert!(err.contains(&format!("bad-gauge.toml:{line}:9")), "{err}");
    assert!(err.contains("unknown wire gauge"), "{err}");
    let _ = std::fs::remove_dir_all(&dir);
}

#[test]
fn power_command_refuses_an_activity_above_one() {
    let (code, _, err) = slackmeter(&["power", "--activity", "1.5"]);
    assert_eq!(code, 2, "{err}");
}

#[test]
fn budget_at_predicted_rails_solves_the_clock_fixed_point() {
    let (code, out, err) = slackmeter(&["budget", "--rails", "predicted", "--json"]);
    assert_eq!(code, 0, "{err}");
    let v: serde_json::Value = serde_json::from_str(&out).unwrap();
    assert_eq!(v["clock_given"], false);
    assert!(v["clock_iterations"].as_u64().unwrap() >= 1);
    let f = v["freq_hz"].as_f64().unwrap();
    let fmax = v["budget"]["fmax_50_hz"].as_f64().unwrap();
    assert!((fmax / f - 1.0).abs() < 2e-6, "{f} {fmax}");
    // each section derated at its predicted rail
    let far = v["budget"]["section_vcc_v"]["far"].as_f64().unwrap();
    assert_eq!(far, v["power"]["sections"][2]["rail_v"].as_f64().unwrap());
    let (code, out, _) = slackmeter(&["budget", "--rails", "predicted", "--freq", "2MHz"]);
    assert_eq!(code, 0);
    assert!(out.starts_with("Predicted rails at 2.000 MHz"), "{out}");
    let (code, out, _) = slackmeter(&[
        "budget",
        "--rails",
        "predicted",
        "--sweep-freq",
        "1MHz..8MHz",
        "--points",
        "3",
    ]);
    assert_eq!(code, 0);
    assert_eq!(out.lines().count(), 5, "{out}");
}

#[test]
fn design_file_doc_supply_example_is_valid_wiring() {
    let doc = std::fs::read_to_string(concat!(env!("CARGO_MANIFEST_DIR"), "/docs/DESIGN-FILE.md"))
        .unwrap();
    let blocks: Vec<&str> = doc
        .split("```toml")
        .skip(1)
        .filter_map(|s| s.split("```").next())
        .collect();
    // the long tables' example and the supply example (the compact forms' example between them)
    let supply = blocks
        .iter()
        .find(|b| b.contains("[supply]"))
        .expect("the supply example");
    let text = format!("{}\n{}", blocks[0], supply);
    let (d, lib) = load(&text);
    let w = Wiring::of(&d).unwrap().expect("a [supply] table");
    assert_eq!(w.feeds.len(), 1);
    let pb = power::solve(&d, &lib, &SupplyData::builtin(), &w, &at(8e6));
    assert!(
        pb.sections
            .iter()
            .any(|s| s.name == "far" && s.led_ma > 0.0)
    );
}

#[test]
fn demo_prediction_as_the_readme_gives_it() {
    // README, "Power budget": 5.018 / 4.961 / 4.884 V at 2 MHz (a regression figure)
    let (code, out, _) = slackmeter(&["power", "--json"]);
    assert_eq!(code, 0);
    let v: serde_json::Value = serde_json::from_str(&out).unwrap();
    let rails: Vec<String> = (0..3)
        .map(|i| format!("{:.3}", v["sections"][i]["rail_v"].as_f64().unwrap()))
        .collect();
    assert_eq!(rails, ["5.018", "4.961", "4.884"]);
}

#[test]
fn a_section_fed_twice_or_in_a_loop_is_located() {
    let twice = format!(
        "{TWO_SECTIONS}\n[[feed]]\nsection = \"b\"\ngauge = \"22 AWG\"\nlength = \"1 m\"\n"
    );
    let (msg, line, _) = wiring_error(&twice);
    assert!(msg.contains("fed twice"), "{msg}");
    assert!(line > line_of(TWO_SECTIONS, "name = \"display\""), "{line}");
    let looped = TWO_SECTIONS.replace("from = \"supply\"", "from = \"b\"");
    let (msg, _, _) = wiring_error(&looped);
    assert!(msg.contains("loop"), "{msg}");
}

#[test]
fn hct_inputs_driven_by_ls_draw_their_extra_current() {
    let text = r#"
[design]
name = "mixed"
[[section]]
name = "a"
[[part]]
ref = "U1"
type = "74HC574"
section = "a"
[[part]]
ref = "U2"
type = "74HCT04"
section = "a"
[[part]]
ref = "U3"
type = "74LS04"
section = "a"
[[launch]]
edge = "rise"
part = "U1"
arc = "CLK->Q"
to = "q"
[[arc]]
from = "q"
to = "y"
part = "U2"
arc = "A->Y"
[[capture]]
signal = "y"
edge = "rise"
part = "U1"
check = "D->CLK"
[supply]
voltage = "5 V"
[[feed]]
section = "a"
gauge = "22 AWG"
length = "0 m"
"#;
    let (d, lib) = load(text);
    let data = SupplyData::builtin();
    let mut w = Wiring::of(&d).unwrap().unwrap();
    let with_ls = power::solve(&d, &lib, &data, &w, &at(0.0));
    w.hct_inputs_at_ttl = Some(false);
    let cmos_levels = power::solve(&d, &lib, &data, &w, &at(0.0));
    // NXP 74HC04-Q100: ΔICC max 432 µA per input at VCC − 2.1 V, six inputs = 2.592 mA
    let extra = with_ls.sections[0].static_ma - cmos_levels.sections[0].static_ma;
    assert!((extra - 2.592).abs() < 1e-9, "{extra}");
    // IN74LS04: the mean of 2.4 and 6.6 mA is in both
    assert!(cmos_levels.sections[0].static_ma > 4.5);
}

#[test]
fn report_sets_measured_rails_beside_the_prediction() {
    let root = env!("CARGO_MANIFEST_DIR");
    let design = format!("{root}/designs/larkspur-8.toml");
    let steady = format!("{root}/recordings/larkspur-steady.smrec");
    let (code, out, err) = slackmeter(&["report", &steady, "--design", &design]);
    assert_eq!(code, 0, "within resolution exits 0 without --strict: {err}");
    let part = out
        .split("Rails against the power budget")
        .nth(1)
        .expect(&out);
    assert!(part.contains("VCC_FAR"), "{part}");
    assert!(!part.contains("more than the predicted"), "{part}");
    // the sagging recording: the far rail's mean is lower than predicted, its current higher
    let sagging = format!("{root}/recordings/larkspur-sagging.smrec");
    let (_, out, _) = slackmeter(&["report", &sagging, "--design", &design, "--json"]);
    let v: serde_json::Value = serde_json::from_str(&out).unwrap();
    let far = &v["rails_against_power_budget"][2];
    assert_eq!(far["section"], "far");
    assert_eq!(far["draws_more"], true);
    assert!(far["difference_mv"].as_f64().unwrap() < -20.0);
}
