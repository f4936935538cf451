//! Blocks and windows: a channel's statistics are closed into one block per `block_s` of probe
//! time; the recent window merges the last closed blocks, the session merges all of them. Sums
//! are exact integers, so the merge order never changes a figure.

use std::collections::VecDeque;

use super::snapshot::Window;

/// The closed blocks of one channel: those of the recent window, and the session total.
pub(super) struct Blocks<A> {
    closed: VecDeque<A>,
    session: Option<A>,
}

impl<A: Clone> Blocks<A> {
    pub(super) fn new() -> Self {
        Blocks {
            closed: VecDeque::new(),
            session: None,
        }
    }

    /// Close the current block (nothing when it is empty), keeping the newest `keep` blocks
    /// for the recent window.
    pub(super) fn roll(&mut self, acc: Option<A>, keep: usize, merge: impl Fn(&mut A, &A)) {
        if let Some(a) = acc {
            match &mut self.session {
                Some(s) => merge(s, &a),
                None => self.session = Some(a.clone()),
            }
            self.closed.push_back(a);
            while self.closed.len() > keep {
                self.closed.pop_front();
            }
        }
    }

    /// A window's statistics: the session total, or the closed blocks of the recent window,
    /// plus the current block.
    pub(super) fn merged(
        &self,
        current: Option<&A>,
        window: Window,
        merge: impl Fn(&mut A, &A),
    ) -> Option<A> {
        let mut out: Option<A> = match window {
            Window::Session => self.session.clone(),
            Window::Recent => self.closed.iter().fold(None, |acc, a| {
                Some(match acc {
                    Some(mut x) => {
                        merge(&mut x, a);
                        x
                    }
                    None => a.clone(),
                })
            }),
        };
        if let Some(c) = current {
            match &mut out {
                Some(x) => merge(x, c),
                None => out = Some(c.clone()),
            }
        }
        out
    }
}
