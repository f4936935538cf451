//! Edge streams shared by the measurement benchmarks: the virtual probe's steady demo clock.

use slackmeter::sim::{BenchModel, SimProbe};

/// Probe frames of `seconds` of the steady demo clock (no rails) with this jitter, and how many
/// edges they carry.
pub fn frames(seconds: f64, jitter_rms_ns: f64) -> (Vec<u8>, u64) {
    let mut m = BenchModel::scenario("steady").expect("the steady scenario exists");
    m.jitter_rms_ns = jitter_rms_ns;
    m.rails.clear();
    let mut p = SimProbe::new(m, Vec::new());
    p.start();
    p.run_until(seconds * 1e9);
    p.flush_all();
    let edges = p.edges_sent;
    (std::mem::take(p.output()), edges)
}

/// Decoded edge ticks of the stream (what the engine's clock sees).
pub fn ticks(bytes: &[u8]) -> Vec<u64> {
    let mut out = Vec::new();
    let mut d = firmware_protocol::StreamDecoder::new();
    d.push(bytes, |f| {
        if let Ok(firmware_protocol::Message::Edges(e)) = firmware_protocol::Message::decode(&f) {
            out.extend(e.ticks());
        }
    });
    out
}
