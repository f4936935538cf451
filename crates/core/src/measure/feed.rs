//! Raw bytes → frames → validated events → engine: the one path for live, simulated and
//! replayed data, with an optional [`Observer`] that sees what the engine sees.

use firmware_protocol::{Counters, StreamDecoder};

use super::engine::{Engine, EngineConfig};
use super::ingest::{Event, Ingest};
use super::observe::{NoObserver, Observer};

/// Raw bytes → frames → messages → validated events → engine (and observer).
pub struct Feed<O = NoObserver> {
    decoder: StreamDecoder,
    ingest: Ingest,
    /// The engine.
    pub engine: Engine,
    observer: O,
}

impl Feed {
    /// A feed into a new engine.
    pub fn new(cfg: EngineConfig) -> Feed {
        Feed::with_observer(cfg, NoObserver)
    }
}

impl<O: Observer> Feed<O> {
    /// A feed into a new engine, watched by `observer`.
    pub fn with_observer(cfg: EngineConfig, observer: O) -> Feed<O> {
        let mut engine = Engine::new(cfg);
        if observer.wants_tie_records() {
            engine.keep_records();
        }
        Feed {
            decoder: StreamDecoder::new(),
            ingest: Ingest::new(),
            engine,
            observer,
        }
    }

    /// Bytes as received.
    pub fn push(&mut self, bytes: &[u8]) {
        let Feed {
            decoder,
            ingest,
            engine,
            observer,
        } = self;
        decoder.push(bytes, |f| {
            ingest.frame(&f, |ev| deliver(engine, observer, ev));
        });
        engine.on_decoder_counters(&decoder.counters);
    }

    /// The link came back (continuity broken). Sequence tracking goes on, so the frames a
    /// still-running probe sent meanwhile are counted lost when its numbering resumes.
    pub fn note_reconnect(&mut self) {
        let (engine, observer) = (&mut self.engine, &mut self.observer);
        self.ingest.reconnect(|ev| deliver(engine, observer, ev));
    }

    /// Forget the statistics so far (the engine's and the observer's); the timeline goes on.
    pub fn reset(&mut self) {
        self.engine.reset();
        self.observer.reset();
    }

    /// The stream was joined mid-way (a recording started during a session): sequence
    /// tracking restarts, nothing is counted.
    pub fn restart_sequence(&mut self) {
        self.decoder.reset_sequence();
    }

    /// Decoder counters.
    pub fn counters(&self) -> Counters {
        self.decoder.counters
    }

    /// The observer.
    pub fn observer(&self) -> &O {
        &self.observer
    }

    /// The observer, the feed done with.
    pub fn into_observer(self) -> O {
        self.observer
    }
}

/// One event to the engine, then to the observer with the TIE records it closed.
#[inline]
fn deliver<O: Observer>(engine: &mut Engine, observer: &mut O, ev: &Event<'_>) {
    engine.on_event(ev);
    observer.event(ev);
    if observer.wants_tie_records() {
        engine.take_records(|channel, rises| observer.tie_record(channel, rises));
    }
}

#[cfg(test)]
mod tests {
    use super::super::clock::detrended;
    use super::super::ingest::hello_frame;
    use super::super::snapshot::Window;
    use super::*;
    use firmware_protocol::{Channel, EdgeWriter, MAX_BODY, MAX_WIRE, encode_frame, types};

    /// Keeps the TIE records it is handed and counts the breaks it sees.
    #[derive(Default)]
    struct Records {
        records: Vec<Vec<u64>>,
        breaks: usize,
    }

    impl Observer for Records {
        fn event(&mut self, ev: &Event<'_>) {
            self.breaks += usize::from(matches!(ev, Event::Break { .. }));
        }
        fn wants_tie_records(&self) -> bool {
            true
        }
        fn tie_record(&mut self, _channel: u8, rises: &[u64]) {
            self.records.push(rises.to_vec());
        }
    }

    /// A 125 MHz probe with one clock: `batches` EDGES frames of a 31-tick clock with some
    /// jitter and a glitch now and then, the sixth batch starting before the fifth ended (time
    /// running backwards) and the last but one ending near 2^64; then the probe says HELLO again
    /// (its timeline continues past that) and sends one more batch, which cannot be placed.
    fn stream(batches: usize) -> Vec<u8> {
        let mut out = Vec::new();
        let mut wire = [0u8; MAX_WIRE];
        let mut hello = Vec::new();
        hello_frame(&mut hello, &[Channel::edge(0, 1, "CLK")]);
        out.extend_from_slice(&hello);
        let (mut t, mut x) = (1000u64, 0x2545_F491_4F6C_DD1Du64);
        for b in 0..batches {
            if b == 5 {
                t -= 5000;
            }
            if b == batches - 2 {
                t = u64::MAX - 14_000;
            }
            if b == batches - 1 {
                out.extend_from_slice(&hello);
                t = 1000;
            }
            let mut body = [0u8; MAX_BODY];
            let mut w = EdgeWriter::new(&mut body, 0, true, 0, t);
            for k in 1..900 {
                x ^= x << 13;
                x ^= x >> 7;
                x ^= x << 17;
                t += if k % 301 == 0 { 2 } else { 14 + x % 3 };
                if !w.push(t) {
                    break;
                }
            }
            let len = w.finish();
            let m = encode_frame(types::EDGES, b as u16 + 1, &body[..len], &mut wire).unwrap();
            out.extend_from_slice(&wire[..m]);
            t += 20;
        }
        out
    }

    /// What an observer is handed is what the figures were taken from: the TIE records' peak to
    /// peak is the TIE figure, each record is whole and increasing, and the time reversal and
    /// the overflow reach it as breaks.
    #[test]
    fn the_observer_sees_what_the_figures_saw() {
        let mut f = Feed::with_observer(EngineConfig::default(), Records::default());
        for chunk in stream(40).chunks(333) {
            f.push(chunk);
        }
        let c = f.engine.snapshot(Window::Session).clocks[0].clone();
        assert!(c.glitches > 0, "the stream has glitches");
        let obs = f.into_observer();
        assert_eq!(obs.breaks, 2, "one reversal, one overflow");
        assert!(obs.records.len() > 10);
        let mut worst: f64 = 0.0;
        for r in &obs.records {
            assert_eq!(r.len(), 1024);
            assert!(r.windows(2).all(|w| w[0] < w[1]));
            let d = detrended(r);
            let lo = d.iter().copied().fold(f64::INFINITY, f64::min);
            let hi = d.iter().copied().fold(f64::NEG_INFINITY, f64::max);
            worst = worst.max(hi - lo);
        }
        let figure = c.tie_pkpk_ns.expect("TIE records were closed");
        assert!((worst * 8.0 - figure).abs() < 1e-6, "{worst} vs {figure}");
    }
}
