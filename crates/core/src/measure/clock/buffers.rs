//! Working buffers of a clock channel, kept with it so that neither path allocates per edge or
//! per step: the bulk step's arrays ([`Scratch`]) and the run's latest rises ([`RiseHistory`]).

use super::config::REFRESH;

/// Most periods one bulk step takes (one refresh segment), plus the opening values.
pub(super) const CAP: usize = REFRESH as usize + 2;

/// Working arrays of one bulk step, kept with the channel so that a step allocates nothing.
#[derive(Clone)]
pub(super) struct Scratch {
    /// The last committed rise, then the step's committed rises.
    pub(super) rises: [u64; CAP],
    /// The last committed fall, then the step's committed falls.
    pub(super) falls: [u64; CAP],
    pub(super) period: [i64; CAP],
    pub(super) high: [i64; CAP],
    pub(super) low: [i64; CAP],
    pub(super) tmp: [i64; CAP],
    /// A TIE record less the chord through its ends (both paths).
    pub(super) tie: Vec<i64>,
}

impl Scratch {
    /// Empty arrays.
    pub(super) fn new() -> Box<Scratch> {
        Box::new(Scratch {
            rises: [0; CAP],
            falls: [0; CAP],
            period: [0; CAP],
            high: [0; CAP],
            low: [0; CAP],
            tmp: [0; CAP],
            tie: Vec::new(),
        })
    }
}

/// The latest rises of the current run, oldest first, contiguous (so that "N rises back" is a
/// slice offset); only the newest `keep + 1` are ever read, older ones are dropped in bulk.
#[derive(Clone)]
pub(super) struct RiseHistory {
    buf: Vec<u64>,
    keep: usize,
}

impl RiseHistory {
    /// A history for looking up to `keep` rises back.
    pub(super) fn new(keep: usize) -> RiseHistory {
        RiseHistory {
            buf: Vec::with_capacity(keep + 2 * CAP),
            keep,
        }
    }
    pub(super) fn clear(&mut self) {
        self.buf.clear();
    }
    pub(super) fn is_empty(&self) -> bool {
        self.buf.is_empty()
    }
    /// Append rises (at most `CAP` at a time), first dropping all but the newest `keep + 1`
    /// when the buffer would outgrow its capacity.
    pub(super) fn extend(&mut self, r: &[u64]) {
        if self.buf.len() + r.len() > self.keep + 2 * CAP {
            let drop = self.buf.len() - (self.keep + 1).min(self.buf.len());
            self.buf.drain(..drop);
        }
        self.buf.extend_from_slice(r);
    }
    /// Every rise held, oldest first.
    pub(super) fn as_slice(&self) -> &[u64] {
        &self.buf
    }
}

impl std::fmt::Debug for RiseHistory {
    /// What can still be read: how many rises (up to `keep + 1`) and the newest ones.
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        let from = self.buf.len() - (self.keep + 1).min(self.buf.len());
        f.debug_list().entries(&self.buf[from..]).finish()
    }
}

impl std::fmt::Debug for Scratch {
    /// Working arrays carry no state between steps: nothing to show (and two channels with
    /// equal state compare equal by their Debug text).
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str("Scratch")
    }
}
