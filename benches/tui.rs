//! Live view speed: one full frame at 160×50 with each picture. Run: `cargo bench --bench tui`.

use ratatui::Terminal;
use ratatui::backend::TestBackend;
use slackmeter::budget::{Design, Library};
use slackmeter::margin::{MarginConfig, evaluate};
use slackmeter::measure::{EngineConfig, Feed, Window};
use slackmeter::sim::{BenchModel, SimProbe};
use slackmeter::tui::state::{App, Source};

fn main() {
    divan::main();
}

#[divan::bench(args = ["frequency", "slack", "high", "period", "rails"])]
fn full_frame_160x50(bencher: divan::Bencher, picture: &str) {
    let lib = Library::builtin();
    let d = Design::demo(&lib);
    let mut p = SimProbe::new(BenchModel::scenario("sagging").unwrap(), vec![]);
    p.start();
    p.run_until(500e6);
    p.flush_all();
    let mut f = Feed::new(EngineConfig::default());
    f.push(&std::mem::take(p.output()));
    let snap = f.engine.snapshot(Window::Recent);
    let margin = evaluate(&snap, &d, &lib, &MarginConfig::default()).ok();
    let mut app = App::new(
        Source::Streaming {
            probe: "sim".into(),
            reconnects: 0,
        },
        Some(d.name.clone()),
        true,
    );
    for i in 0..100 {
        app.event(i as f64, format!("event {i}"));
    }
    app.show(snap, margin);
    while app.picture.name() != picture {
        app.apply(slackmeter::tui::keys::Action::Picture);
    }
    let mut t = Terminal::new(TestBackend::new(160, 50)).unwrap();
    bencher.bench_local(|| {
        t.draw(|fr| slackmeter::tui::view::render(fr, &app))
            .map(|_| ())
    });
}

#[divan::bench]
fn snapshot_and_margin_of_the_recent_window(bencher: divan::Bencher) {
    let lib = Library::builtin();
    let d = Design::demo(&lib);
    let mut p = SimProbe::new(BenchModel::scenario("sagging").unwrap(), vec![]);
    p.start();
    p.run_until(3e9);
    p.flush_all();
    let mut f = Feed::new(EngineConfig::default());
    f.push(&std::mem::take(p.output()));
    bencher.bench_local(|| {
        let snap = f.engine.snapshot(Window::Recent);
        evaluate(&snap, &d, &lib, &MarginConfig::default())
            .ok()
            .map(|m| m.low_slack_ns)
    });
}
