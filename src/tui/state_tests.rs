//! Tests of the live view's pure updates.
use super::*;

#[test]
fn a_mark_is_typed_and_stored() {
    let mut a = App::new(Source::Connecting { what: "x".into() }, None, true);
    assert_eq!(a.apply(Action::MarkStart), Effect::None);
    for c in "added cap".chars() {
        a.apply(Action::MarkChar(c));
    }
    a.apply(Action::MarkBack);
    assert_eq!(a.apply(Action::MarkDone), Effect::Mark("added ca".into()));
    assert!(a.prompt.is_none());
    assert!(a.events.last().unwrap().text.contains("added ca"));
}

#[test]
fn freeze_window_detail_help_quit() {
    let mut a = App::new(Source::Connecting { what: "x".into() }, None, true);
    a.apply(Action::Freeze);
    assert!(a.frozen);
    a.apply(Action::Window);
    assert_eq!(a.window, Window::Session);
    a.apply(Action::Picture);
    assert_eq!(a.picture, Picture::Slack);
    a.apply(Action::Help);
    assert!(a.help);
    assert_eq!(a.apply(Action::Reset), Effect::Reset);
    assert_eq!(a.apply(Action::Record), Effect::AskRecordFile);
    a.apply(Action::Quit);
    assert!(a.quit);
}

/// Snapshots of the sagging demo bench with glitches and resets, 0.7 s apart.
fn snapshots() -> Vec<Snapshot> {
    use crate::measure::{EngineConfig, Feed};
    use crate::sim::{BenchModel, SimProbe};
    let mut m = BenchModel::scenario("sagging").unwrap();
    m.freq_hz = 200e3;
    m.glitch_rate_hz = 20.0;
    m.reset_interval_s = Some(0.3);
    let mut p = SimProbe::new(m, vec![]);
    p.start();
    let mut f = Feed::new(EngineConfig::default());
    (1..=2)
        .map(|i| {
            p.run_until(f64::from(i) * 0.7e9);
            f.push(&std::mem::take(p.output()));
            f.engine.snapshot(Window::Session)
        })
        .collect()
}

fn count(a: &App, what: &str) -> usize {
    a.events.iter().filter(|e| e.text.contains(what)).count()
}

#[test]
fn each_glitch_sag_and_line_change_is_listed_once() {
    let s = snapshots();
    let mut a = App::new(Source::Connecting { what: "x".into() }, None, true);
    a.update(s[0].clone(), None);
    let first = a.events.len();
    assert!(count(&a, "glitch") == 1, "{:?}", a.events);
    assert!(count(&a, "RESET went high") >= 1, "{:?}", a.events);
    a.update(s[0].clone(), None);
    assert_eq!(a.events.len(), first, "the same figures list nothing new");
    // frozen: the figures on screen stay, what is new is still listed, once
    a.apply(Action::Freeze);
    a.update(s[1].clone(), None);
    let second = a.events.len();
    assert!(second > first);
    a.update(s[1].clone(), None);
    assert_eq!(a.events.len(), second, "frozen figures list nothing twice");
    assert_eq!(a.snapshot.as_ref(), Some(&s[0]));
    assert_eq!(count(&a, "glitch"), 2);
    let mut sags: Vec<f64> = s
        .iter()
        .flat_map(|x| &x.sag_events)
        .map(|x| x.1.start_s)
        .collect();
    sags.sort_by(f64::total_cmp);
    sags.dedup();
    assert!(!sags.is_empty());
    assert_eq!(count(&a, "sag on"), sags.len());
    let resets = s[1]
        .lines
        .iter()
        .find(|l| l.name == "RESET")
        .map_or(0, |l| l.events.len());
    assert_eq!(count(&a, "RESET"), resets, "{:?}", a.events);
    assert_eq!(count(&a, "HEARTBEAT"), 0, "the heartbeat is not an event");
}

#[test]
fn session_events_move_the_source() {
    use crate::probe::ProbeDesc;
    use std::time::Duration;
    let mut a = App::new(Source::Connecting { what: "x".into() }, None, true);
    let probe = ProbeDesc {
        firmware: "fw".into(),
        protocol_version: 1,
        tick_num_hz: 1,
        tick_den: 1,
        tick_ns: 1.0,
        timebase_ppm: 0,
        max_edge_rate_khz: 0,
        channels: vec![],
    };
    a.on_session(
        &Event::Retrying {
            retry_in: Duration::from_millis(500),
            reason: "not yet".into(),
        },
        0.0,
        0.0,
    );
    assert!(a.events[0].text.contains("no probe yet"));
    a.on_session(
        &Event::Connected {
            probe: probe.clone(),
            reconnects: 0,
        },
        1.0,
        1.0,
    );
    assert!(matches!(a.source, Source::Streaming { .. }));
    a.on_session(
        &Event::Lost {
            reason: "unplugged".into(),
        },
        2.0,
        2.0,
    );
    assert!(matches!(a.source, Source::Lost { .. }));
    // the probe's timeline went on 0.5 s while the host waited 4.5 s: the link's events
    // carry the host's clock
    a.on_session(
        &Event::Connected {
            probe,
            reconnects: 1,
        },
        2.5,
        6.5,
    );
    let back = a.events.last().unwrap();
    assert_eq!(back.at_s, 6.5);
    assert!(back.text.starts_with("host: "), "{}", back.text);
    a.on_session(
        &Event::RecordingFailed(crate::record::RecordingError::Exists {
            path: "x.smrec".into(),
        }),
        2.6,
        6.6,
    );
    assert!(a.rec_failed.is_some());
    // figures that trail the host's clock are flagged: 10 s of host time, 7 s of probe time
    a.note_lag(10.0, 1.0);
    a.note_lag(20.0, 8.0);
    assert!((a.lag_s - 3.0).abs() < 1e-9, "{}", a.lag_s);
    a.note_lag(21.0, 9.0);
    assert!((a.lag_s - 3.0).abs() < 1e-9, "keeping pace holds the lag");
    assert_eq!(
        a.source,
        Source::Streaming {
            probe: "fw".into(),
            reconnects: 1
        }
    );
    assert!(a.events.last().unwrap().text.contains("recording failed"));
    assert!(
        a.events
            .iter()
            .any(|e| e.text.contains("link back (reconnect 1)"))
    );
}

#[test]
fn events_stay_in_time_order_and_filter_by_kind() {
    let mut a = App::new(Source::Connecting { what: "x".into() }, None, true);
    a.event(2.0, "mark: second");
    a.event(1.0, "sag on VCC: −100 mV for 3 ms");
    a.event_of(EventKind::Host, 1.5, "host: link lost: unplugged");
    let at: Vec<f64> = a.events.iter().map(|e| e.at_s).collect();
    assert_eq!(at, vec![1.0, 1.5, 2.0]);
    a.apply(Action::Filter);
    assert_eq!(a.event_filter, Some(EventKind::Mark));
    let listed: Vec<_> = a.listed_events().map(|e| e.text.as_str()).collect();
    assert_eq!(listed, vec!["mark: second"]);
    a.event_filter = None;
    a.apply(Action::Up);
    assert_eq!(a.event_scroll, Some(1));
    a.apply(Action::Down);
    assert_eq!(a.event_scroll, None, "down to the newest follows again");
    a.apply(Action::Up);
    a.apply(Action::End);
    assert_eq!(a.event_scroll, None);
}

#[test]
fn next_mark_says_when_there_is_none() {
    let mut a = App::new(Source::Connecting { what: "x".into() }, None, true);
    assert_eq!(a.next_mark(0.0), None);
    assert!(
        a.events
            .last()
            .unwrap()
            .text
            .contains("no marks in this recording")
    );
    a.replay_marks = vec![1.0, 3.0];
    assert_eq!(a.next_mark(1.0), Some(3.0));
    assert_eq!(a.next_mark(3.5), None);
    assert!(
        a.events
            .last()
            .unwrap()
            .text
            .contains("no marks after this point")
    );
}

#[test]
fn r_asks_for_a_file_then_starts_and_stops() {
    let mut a = App::new(Source::Connecting { what: "x".into() }, None, true);
    assert_eq!(a.apply(Action::Record), Effect::AskRecordFile);
    a.ask(Ask::RecordFile, "bench.smrec");
    assert_eq!(
        a.apply(Action::MarkDone),
        Effect::StartRecord("bench.smrec".into())
    );
    a.note_recording(Some(("bench.smrec".into(), 1_000)), 10.0);
    a.note_recording(Some(("bench.smrec".into(), 2_001_000)), 12.0);
    let r = a.recording.clone().unwrap();
    assert_eq!(r.bytes, 2_001_000);
    // 2 MB in 2 s (arithmetic)
    assert_eq!(r.rate_bytes_per_s, Some(1e6));
    assert_eq!(a.apply(Action::Record), Effect::StopRecord);
}
