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
    assert!(s.contains("keys (? closes)") && s.contains("start / stop recording"));
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
