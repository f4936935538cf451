//! The live view is a pure function of its state: snapshots of the main states.
//! Create or update the snapshots with `INSTA_UPDATE=always cargo test --test tui_render`.

use ratatui::Terminal;
use ratatui::backend::TestBackend;
use slackmeter::budget::{Design, Library};
use slackmeter::margin::{MarginConfig, evaluate};
use slackmeter::measure::{EngineConfig, Feed, Window};
use slackmeter::sim::{BenchModel, SimProbe};
use slackmeter::tui::keys::Action;
use slackmeter::tui::state::{App, Source};
use slackmeter::tui::view::render;

fn app(source: Source, color: bool) -> App {
    let lib = Library::builtin();
    let d = Design::demo(&lib);
    let mut m = BenchModel::scenario("sagging").unwrap();
    m.freq_hz = 500e3; // cheaper to simulate; the rails sag as in the demo
    let mut p = SimProbe::new(m, vec![]);
    p.start();
    p.run_until(1.2e9);
    p.flush_all();
    let mut f = Feed::new(EngineConfig::default());
    f.push(&std::mem::take(p.output()));
    let snap = f.engine.snapshot(Window::Recent);
    let margin = evaluate(&snap, &d, &lib, &MarginConfig::default()).ok();
    let mut a = App::new(source, Some(d.name.clone()), color);
    a.event(0.12, "sag on VCC_FAR: −410 mV for 29 ms");
    a.event(0.2, "mark: added 100 uF on board 19");
    a.show(snap, margin);
    a
}

fn draw(a: &App, w: u16, h: u16) -> String {
    let mut t = Terminal::new(TestBackend::new(w, h)).unwrap();
    t.draw(|f| render(f, a)).unwrap();
    let buf = t.backend().buffer().clone();
    let mut out = String::new();
    for y in 0..h {
        for x in 0..w {
            out.push_str(buf[(x, y)].symbol());
        }
        out.push('\n');
    }
    out
}

fn streaming() -> Source {
    Source::Streaming {
        probe: "slackmeter-sim 0.1.0".into(),
        reconnects: 0,
    }
}

#[test]
fn streaming_with_a_design() {
    let s = draw(&app(streaming(), true), 120, 32);
    assert!(s.contains("500.0 kHz"), "{s}");
    assert!(s.contains("slack against Larkspur-8"));
    assert!(s.contains("verdict"));
    insta::assert_snapshot!("streaming_with_design", s);
}

#[test]
fn lost_link() {
    let s = draw(
        &app(
            Source::Lost {
                reason: "device lost (broken pipe)".into(),
                retry_in_s: 0.5,
            },
            true,
        ),
        120,
        32,
    );
    assert!(s.contains("LINK LOST"));
    insta::assert_snapshot!("lost_link", s);
}

#[test]
fn replay_paused() {
    let s = draw(
        &app(
            Source::Replay {
                file: "recordings/larkspur-sagging.smrec".into(),
                at_s: 12.5,
                paused: true,
                speed: 1.0,
                done: false,
            },
            true,
        ),
        120,
        32,
    );
    assert!(s.contains("PAUSED"));
    assert!(s.contains("p pause"), "replay keys on screen");
    insta::assert_snapshot!("replay_paused", s);
}

#[test]
fn tiny_terminal_says_what_it_needs() {
    let s = draw(&app(streaming(), true), 60, 16);
    assert!(s.contains("at least 80×24") && s.contains("60×16"));
    insta::assert_snapshot!("tiny_terminal", s);
}

#[test]
fn help_overlay() {
    let mut a = app(streaming(), true);
    a.apply(Action::Help);
    let s = draw(&a, 120, 32);
    assert!(s.contains("keys (? closes)") && s.contains("record to a file"));
    assert!(s.contains("TIE (time interval error)") && s.contains("d        next picture"));
    insta::assert_snapshot!("help_overlay", s);
}

#[test]
fn no_color_keeps_every_meaning_in_words() {
    let a = app(streaming(), false);
    let mut t = Terminal::new(TestBackend::new(120, 32)).unwrap();
    t.draw(|f| render(f, &a)).unwrap();
    let buf = t.backend().buffer().clone();
    // no cell carries a colour
    for y in 0..32 {
        for x in 0..120 {
            let c = &buf[(x, y)];
            assert_eq!(c.fg, ratatui::style::Color::Reset, "colour at {x},{y}");
            assert_eq!(c.bg, ratatui::style::Color::Reset);
        }
    }
    let s = draw(&a, 120, 32);
    assert!(
        s.contains("BELOW LIMIT"),
        "the sagging rail says so in words"
    );
    insta::assert_snapshot!("no_color", s);
}

/// What must be on screen at every size: the status, the clock's key figures, every phase's
/// slack and the verdict; no value may be cut inside a number (a cut shows as "…" after a digit).
fn assert_priorities(s: &str, w: u16, h: u16) {
    for what in [
        "STREAMING",
        "recent 10 s",
        "FROZEN",
        "REC ",
        "frequency",
        "worst high",
        "duty",
        "verdict:",
        "VCC_FAR",
        "HEARTBEAT",
    ] {
        assert!(s.contains(what), "{what} missing at {w}×{h}:\n{s}");
    }
    for phase in ["low ", "high ", "period "] {
        assert!(
            s.lines().any(|l| l.starts_with(&format!("│{phase}"))),
            "phase {phase}missing at {w}×{h}:\n{s}"
        );
    }
    let chars: Vec<char> = s.chars().collect();
    for i in 1..chars.len() {
        assert!(
            !(chars[i] == '…' && chars[i - 1].is_ascii_digit()),
            "a number cut at {w}×{h}:\n{s}"
        );
    }
    assert!(!s.contains("FAULT ?") && !s.contains("RESET ?"), "{s}");
}

fn busy_app() -> App {
    let mut a = app(streaming(), true);
    a.apply(Action::Freeze);
    a.note_recording(
        Some(("slackmeter-2026-12-03_16-20-05.smrec".into(), 4_200_000)),
        1.0,
    );
    a.note_recording(
        Some(("slackmeter-2026-12-03_16-20-05.smrec".into(), 5_200_000)),
        2.0,
    );
    a
}

#[test]
fn every_priority_item_at_80x24_100x30_160x50() {
    let a = busy_app();
    for (w, h) in [(80, 24), (100, 30), (160, 50)] {
        let s = draw(&a, w, h);
        assert_priorities(&s, w, h);
        assert!(
            s.contains("1.00 MB/s"),
            "the recording's rate at {w}×{h}:\n{s}"
        );
        insta::assert_snapshot!(format!("priorities_{w}x{h}"), s);
    }
}

#[test]
fn pictures_cycle_with_d_and_say_what_they_show() {
    let mut a = app(streaming(), true);
    for word in [
        "frequency, last",
        "slack in % of need",
        "high time histogram",
        "low time histogram",
        "period time histogram",
        "each rail's lowest",
    ] {
        let s = draw(&a, 160, 50);
        assert!(s.contains(word) && s.contains("(d"), "{word}:\n{s}");
        a.apply(Action::Picture);
    }
    let s = draw(&a, 160, 50);
    assert!(s.contains("frequency, last"), "back to the first:\n{s}");
    // the histograms draw the budget's requirement beside the cycles
    a.picture = slackmeter::tui::state::Picture::High;
    let s = draw(&a, 160, 50);
    assert!(s.contains("needs 245.0 ns"), "{s}");
}

#[test]
fn a_lost_link_marks_the_figures_stale() {
    let a = app(
        Source::Lost {
            reason: "device lost".into(),
            retry_in_s: 0.5,
        },
        false,
    );
    let s = draw(&a, 80, 24);
    assert!(s.contains("STALE"), "{s}");
    assert!(s.contains("clock — STALE"), "{s}");
}

#[test]
fn without_a_design_the_clock_takes_the_slack_area() {
    let mut a = app(streaming(), true);
    a.design = None;
    a.margin = None;
    let s = draw(&a, 80, 24);
    assert!(!s.contains("slack against"), "{s}");
    assert!(!s.contains("no design loaded"), "{s}");
    assert!(
        s.contains("edges"),
        "the clock's lower rows come back:\n{s}"
    );
}

#[test]
fn replay_offers_no_mark_or_record_keys() {
    let a = app(
        Source::Replay {
            file: "recordings/larkspur-sagging.smrec".into(),
            at_s: 1.0,
            paused: false,
            speed: 1.0,
            done: false,
        },
        true,
    );
    let s = draw(&a, 160, 50);
    let footer = s.lines().last().unwrap();
    assert!(
        footer.contains("p pause") && footer.contains("n next mark"),
        "{footer}"
    );
    assert!(
        !footer.contains("m mark") && !footer.contains("R record"),
        "{footer}"
    );
}

#[test]
fn long_events_wrap_and_the_list_scrolls() {
    let mut a = app(streaming(), true);
    a.event(
        0.5,
        "mark: a very long note about the decoupling capacitors on the far board section and the new ground strap",
    );
    let s = draw(&a, 80, 24);
    assert!(
        s.contains("ground strap"),
        "the end of a long line wraps into view:\n{s}"
    );
    a.apply(Action::Up);
    let s = draw(&a, 80, 24);
    assert!(s.contains("newer below (End)"), "{s}");
    a.apply(Action::End);
    let s = draw(&a, 80, 24);
    assert!(s.contains("events: all "), "{s}");
    a.apply(Action::Filter);
    let s = draw(&a, 80, 24);
    assert!(
        s.contains("events: marks") && !s.contains("sag on VCC_FAR"),
        "{s}"
    );
}
