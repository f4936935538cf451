//! The serial link to a probe: open a port, handshake, configure, stream, survive unplugging.
//!
//! The only module that touches the `serialport` crate. A reader thread owns the blocking port
//! and sends [`LinkEvent`]s into a bounded tokio channel; every byte read after the port opens
//! is forwarded as received (with the host time), so a recorder can keep it and a replay can run
//! the very same bytes through the same decoder.

mod connection;
mod port;
mod run;
mod types;

use std::sync::Arc;
use std::sync::atomic::{AtomicBool, Ordering};

pub use slackmeter_core::probe::ProbeDesc;
use tokio::sync::mpsc;

pub use connection::result_text;
pub use port::{check_present, list_ports};
pub use types::{LinkConfig, LinkError, LinkEvent, Setting, SettingChannel, host_ns_now};

/// A running link: events arrive on `events`; dropping or [`Link::stop`] ends it.
pub struct Link {
    /// Events from the reader thread.
    pub events: mpsc::Receiver<LinkEvent>,
    stop: Arc<AtomicBool>,
    thread: Option<std::thread::JoinHandle<()>>,
}

impl Link {
    /// Start the reader thread. `capacity` bounds the event queue (back-pressure on the thread).
    pub fn start(cfg: LinkConfig, capacity: usize) -> Link {
        let (tx, rx) = mpsc::channel(capacity.max(4));
        let stop = Arc::new(AtomicBool::new(false));
        let s2 = stop.clone();
        let thread = std::thread::Builder::new()
            .name("probe-link".into())
            .spawn(move || run::run(cfg, tx, s2))
            .expect("spawn link thread");
        Link {
            events: rx,
            stop,
            thread: Some(thread),
        }
    }

    /// Ask the thread to stop and wait for it.
    pub fn stop(mut self) {
        self.shutdown();
    }

    fn shutdown(&mut self) {
        self.stop.store(true, Ordering::Relaxed);
        self.events.close();
        if let Some(t) = self.thread.take() {
            let _ = t.join();
        }
    }
}

impl Drop for Link {
    fn drop(&mut self) {
        self.shutdown();
    }
}
