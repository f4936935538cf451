//! The one place link events and probe bytes are written into recordings. A recording started in
//! the middle of a session begins with the probe's last self-description (its HELLO frame) and a
//! "joined" link event, then takes the stream from the next frame boundary, so a replay knows
//! the channels and the tick and counts no lost frames or reconnects for the join.

use std::path::Path;

use crate::record::{Header, LinkNote, RecCounts, Recorder, RecordingError};

/// A recorder and where it stands in the stream.
pub(super) struct Active {
    rec: Recorder,
    /// Bytes are dropped up to the next frame delimiter (a join in the middle of a frame).
    skip_to_boundary: bool,
}

impl Active {
    /// Create the file; `hello` is the last HELLO frame's wire bytes when the stream is already
    /// running, `at_boundary` whether the last byte received ended a frame.
    pub(super) fn start(
        path: &Path,
        header: &Header,
        hello: Option<&[u8]>,
        at_boundary: bool,
    ) -> Result<Active, RecordingError> {
        let rec = Recorder::create(path, header)?;
        if let Some(h) = hello {
            rec.data(header.start_unix_ns, h.to_vec());
            rec.link(header.start_unix_ns, &LinkNote::Joined);
        }
        Ok(Active {
            rec,
            skip_to_boundary: hello.is_some() && !at_boundary,
        })
    }

    /// Probe bytes as received.
    pub(super) fn data(&mut self, host_ns: u64, bytes: &[u8]) {
        let from = if self.skip_to_boundary {
            match bytes.iter().position(|&b| b == 0) {
                Some(i) => {
                    self.skip_to_boundary = false;
                    i + 1
                }
                None => return,
            }
        } else {
            0
        };
        if from < bytes.len() {
            self.rec.data(host_ns, bytes[from..].to_vec());
        }
    }

    /// A link event.
    pub(super) fn note(&self, host_ns: u64, note: &LinkNote) {
        self.rec.link(host_ns, note);
    }

    /// A user mark.
    pub(super) fn mark(&self, host_ns: u64, text: &str) {
        self.rec.mark(host_ns, text);
    }

    /// The file and its counters.
    pub(super) fn status(&self) -> (&Path, RecCounts) {
        (&self.rec.path, self.rec.counts())
    }

    /// The writer's failure, once it has stopped on one.
    pub(super) fn failure(&self) -> Option<RecordingError> {
        self.rec.failure()
    }

    /// Write everything queued and close the file.
    pub(super) fn finish(self) -> Result<RecCounts, RecordingError> {
        self.rec.finish()
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::record::Recording;
    use crate::record::format::ChunkKind;

    #[test]
    fn a_join_starts_with_the_hello_and_the_next_frame() {
        let dir = std::env::temp_dir().join(format!("slackmeter-join-{}", std::process::id()));
        std::fs::create_dir_all(&dir).unwrap();
        let path = dir.join("j.smrec");
        let _ = std::fs::remove_file(&path);
        let h = Header {
            start_unix_ns: 5,
            ..Header::default()
        };
        let mut a = Active::start(&path, &h, Some(&[9, 9, 0]), false).unwrap();
        a.data(6, &[1, 2]); // the rest of a frame begun before: dropped
        a.data(7, &[3, 0, 4, 5, 0]); // its end, then a whole frame
        a.finish().unwrap();
        let mut r = Recording::open(&path).unwrap();
        let mut chunks = Vec::new();
        while let Some(c) = r.chunk_reader().next_chunk().unwrap() {
            chunks.push((c.kind, c.payload));
        }
        assert_eq!(
            chunks,
            vec![
                (ChunkKind::Data, vec![9, 9, 0]),
                (ChunkKind::Link, br#"{"event":"joined"}"#.to_vec()),
                (ChunkKind::Data, vec![4, 5, 0]),
            ]
        );
        let _ = std::fs::remove_dir_all(&dir);
    }
}
