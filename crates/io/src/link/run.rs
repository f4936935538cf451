//! The link thread: connect, stream until the device goes, wait, reconnect.

use std::sync::Arc;
use std::sync::atomic::{AtomicBool, Ordering};
use std::time::{Duration, Instant};

use firmware_protocol::Message;
use tokio::sync::mpsc;

use super::connection::Connection;
use super::port::open_port;
use super::types::{LinkConfig, LinkError, LinkEvent};

pub(super) fn run(cfg: LinkConfig, tx: mpsc::Sender<LinkEvent>, stop: Arc<AtomicBool>) {
    let mut attempt = 0;
    let mut reconnects = 0;
    let mut was_connected = false;
    while !stop.load(Ordering::Relaxed) {
        attempt += 1;
        if tx.blocking_send(LinkEvent::Connecting { attempt }).is_err() {
            return;
        }
        let failure = match open_port(&cfg) {
            // a device that was never there is a mistyped path, not a probe being plugged in
            Err(e) => {
                let retryable =
                    !matches!(e, LinkError::NotFound { .. } | LinkError::NotSerial { .. });
                (e, retryable)
            }
            Ok(port) => {
                let mut s = Connection::new(port, tx.clone());
                match s.handshake(&cfg) {
                    Err(f) => f,
                    Ok(probe) => {
                        if was_connected {
                            reconnects += 1;
                        }
                        was_connected = true;
                        attempt = 0;
                        if tx
                            .blocking_send(LinkEvent::Connected { probe, reconnects })
                            .is_err()
                        {
                            return;
                        }
                        let reason = s.stream(&cfg, &stop);
                        if stop.load(Ordering::Relaxed) {
                            let _ = s.send(&Message::Stop);
                            return;
                        }
                        if tx
                            .blocking_send(LinkEvent::Lost {
                                reason: reason.clone(),
                            })
                            .is_err()
                        {
                            return;
                        }
                        (
                            LinkError::Open {
                                path: cfg.path.display().to_string(),
                                reason,
                            },
                            true,
                        )
                    }
                }
            }
        };
        let (err, retryable) = failure;
        // never give up on a link that worked, or on a device that may appear; stop on real errors
        let keep_trying = cfg.reconnect
            && (retryable || was_connected)
            && !matches!(
                err,
                LinkError::Permission { .. }
                    | LinkError::Version { .. }
                    | LinkError::NotSerial { .. }
            );
        if !keep_trying {
            let _ = tx.blocking_send(LinkEvent::Failed(err));
            return;
        }
        let _ = tx.blocking_send(LinkEvent::Retrying {
            retry_in: cfg.retry_every,
            reason: err.to_string(),
        });
        let until = Instant::now() + cfg.retry_every;
        while Instant::now() < until {
            if stop.load(Ordering::Relaxed) {
                return;
            }
            std::thread::sleep(Duration::from_millis(20));
        }
    }
}
