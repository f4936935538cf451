//! The recording file (`.smrec`, specified in docs/RECORDING.md): a checksummed header, then
//! append-only checksummed chunks of raw probe bytes (as received, with host time), marks and
//! link events. A reader recovers every intact chunk of a file cut off or damaged anywhere.

use std::io::{self, Read, Write};

use serde::{Deserialize, Serialize};

use super::span_crc::SpanCrc;

/// First bytes of every recording.
pub const MAGIC: [u8; 8] = *b"SMREC\r\n\x1a";
/// Format version this build writes; it reads this and every earlier one.
pub const FORMAT_VERSION: u16 = 1;
/// Sync marker opening every chunk.
pub const SYNC: [u8; 4] = *b"SMCK";
/// Largest header or chunk payload accepted (memory stays bounded whatever a file says).
pub const MAX_PAYLOAD: u32 = 16 << 20;
/// Chunk header: sync 4, kind 1, flags 1, length 4, host time 8.
pub const CHUNK_HEAD: usize = 18;

/// What a chunk holds.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[repr(u8)]
pub enum ChunkKind {
    /// Bytes as read from the probe.
    Data = 1,
    /// A user mark (UTF-8 text).
    Mark = 2,
    /// A link event (JSON: lost, connected, recorder overflow).
    Link = 3,
}

/// The header's content (JSON in the file).
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
pub struct Header {
    /// Writing tool and version.
    pub tool: String,
    /// Host name.
    pub host: String,
    /// Start time, ns since the Unix epoch.
    pub start_unix_ns: u64,
    /// Where the data came from (port path or "virtual probe").
    pub source: String,
    /// Free-text notes.
    #[serde(default)]
    pub notes: Vec<String>,
    /// The design file used, if any: name shown and full text.
    #[serde(default)]
    pub design: Option<EmbeddedDesign>,
    /// The virtual probe's parameters (JSON), when the source is the virtual probe.
    #[serde(default)]
    pub sim: Option<serde_json::Value>,
}

/// A design file carried inside a recording.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct EmbeddedDesign {
    /// File name as given.
    pub file: String,
    /// Its text.
    pub text: String,
}

/// One chunk read back.
#[derive(Clone, Debug, PartialEq)]
pub struct Chunk {
    /// Kind.
    pub kind: ChunkKind,
    /// Host time, ns since the Unix epoch.
    pub host_ns: u64,
    /// Payload.
    pub payload: Vec<u8>,
    /// Byte offset of the chunk in the file.
    pub offset: u64,
}

/// A problem found while reading (the reader goes on where it can).
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Damage {
    /// Byte offset.
    pub offset: u64,
    /// What was wrong.
    pub what: String,
    /// Bytes skipped because of it.
    pub skipped: u64,
}

/// Why a file cannot be read at all.
#[derive(Debug, thiserror::Error, miette::Diagnostic)]
pub enum RecordingError {
    /// I/O.
    #[error("cannot read {path}: {err}")]
    #[diagnostic(code(slackmeter::recording::io))]
    Io {
        /// File.
        path: String,
        /// OS error.
        err: io::Error,
    },
    /// The output file exists: recordings are never overwritten.
    #[error("{path} already exists: a recording is never overwritten")]
    #[diagnostic(
        code(slackmeter::recording::exists),
        help("choose another file name with -o, or move the old file away first")
    )]
    Exists {
        /// File.
        path: String,
    },
    /// The output file cannot be created or written.
    #[error("cannot write {path}: {err}")]
    #[diagnostic(code(slackmeter::recording::write))]
    Write {
        /// File.
        path: String,
        /// OS error.
        err: io::Error,
    },
    /// Not a recording.
    #[error("{path} is not a slackmeter recording (it starts with {start})")]
    #[diagnostic(
        code(slackmeter::recording::magic),
        help("recordings are written by `slackmeter record` and start with \"SMREC\"")
    )]
    Magic {
        /// File.
        path: String,
        /// First bytes (hex).
        start: String,
    },
    /// Written by a newer tool.
    #[error(
        "{path} is format version {found}; this slackmeter reads versions up to {FORMAT_VERSION}"
    )]
    #[diagnostic(
        code(slackmeter::recording::version),
        help("update slackmeter to read it")
    )]
    Version {
        /// File.
        path: String,
        /// Version in the file.
        found: u16,
    },
    /// The header itself is damaged.
    #[error("{path}: header damaged at byte offset {offset}: {what}")]
    #[diagnostic(
        code(slackmeter::recording::header),
        help("the data chunks may still be readable with `slackmeter report --salvage`")
    )]
    Header {
        /// File.
        path: String,
        /// Offset.
        offset: u64,
        /// What.
        what: String,
    },
}

fn crc(bytes: &[u8]) -> u32 {
    firmware_protocol::crc32(bytes)
}

/// Encode the file start: magic, version, header length, header JSON, header CRC.
pub fn encode_header(h: &Header) -> Vec<u8> {
    let json = serde_json::to_vec(h).expect("header serialises");
    let mut out = Vec::with_capacity(json.len() + 18);
    out.extend_from_slice(&MAGIC);
    out.extend_from_slice(&FORMAT_VERSION.to_le_bytes());
    out.extend_from_slice(&(json.len() as u32).to_le_bytes());
    out.extend_from_slice(&json);
    out.extend_from_slice(&crc(&json).to_le_bytes());
    out
}

/// Encode one chunk.
pub fn encode_chunk(kind: ChunkKind, host_ns: u64, payload: &[u8], out: &mut Vec<u8>) {
    let start = out.len();
    out.extend_from_slice(&SYNC);
    out.push(kind as u8);
    out.push(0);
    out.extend_from_slice(&(payload.len() as u32).to_le_bytes());
    out.extend_from_slice(&host_ns.to_le_bytes());
    out.extend_from_slice(payload);
    let c = crc(&out[start + 4..]);
    out.extend_from_slice(&c.to_le_bytes());
}

/// A parsed file: header, chunks, and what was damaged or missing.
#[derive(Debug, Default)]
pub struct Parsed {
    /// Format version found.
    pub version: u16,
    /// Header.
    pub header: Header,
    /// Offset of the first chunk.
    pub data_offset: u64,
    /// Damage found (checksum errors, cut-off end).
    pub damage: Vec<Damage>,
}

fn hex(b: &[u8]) -> String {
    b.iter()
        .map(|x| format!("{x:02x}"))
        .collect::<Vec<_>>()
        .join(" ")
}

/// Read and check the file start.
pub fn parse_header(path: &str, bytes: &[u8]) -> Result<Parsed, RecordingError> {
    if bytes.len() < 14 || bytes[..8] != MAGIC {
        return Err(RecordingError::Magic {
            path: path.into(),
            start: hex(&bytes[..bytes.len().min(8)]),
        });
    }
    let version = u16::from_le_bytes([bytes[8], bytes[9]]);
    if version > FORMAT_VERSION || version == 0 {
        return Err(RecordingError::Version {
            path: path.into(),
            found: version,
        });
    }
    let len = u32::from_le_bytes([bytes[10], bytes[11], bytes[12], bytes[13]]);
    if len > MAX_PAYLOAD {
        return Err(RecordingError::Header {
            path: path.into(),
            offset: 10,
            what: format!("header length {len} exceeds the {MAX_PAYLOAD}-byte cap"),
        });
    }
    let end = 14 + len as usize;
    if bytes.len() < end + 4 {
        return Err(RecordingError::Header {
            path: path.into(),
            offset: 14,
            what: "file ends inside the header".into(),
        });
    }
    let json = &bytes[14..end];
    let want = u32::from_le_bytes([bytes[end], bytes[end + 1], bytes[end + 2], bytes[end + 3]]);
    if crc(json) != want {
        return Err(RecordingError::Header {
            path: path.into(),
            offset: 14,
            what: "header checksum mismatch".into(),
        });
    }
    let header: Header = serde_json::from_slice(json).map_err(|e| RecordingError::Header {
        path: path.into(),
        offset: 14,
        what: format!("header is not valid: {e}"),
    })?;
    Ok(Parsed {
        version,
        header,
        data_offset: (end + 4) as u64,
        damage: Vec::new(),
    })
}

/// Damaged places listed one by one; further ones are counted (see [`ChunkReader::take_damage`]).
pub const MAX_DAMAGE_LISTED: usize = 100;

/// Chunk reader over any `Read` (a file, a byte slice): yields the good chunks in order,
/// records damage, and resynchronises at the next sync marker whose chunk checks out after a
/// bad chunk, a chunk whose length runs past the end of the file, or damaged bytes. Contiguous
/// damage is one entry; time is linear in the file's length and memory bounded by the caps,
/// whatever the file holds (fake sync markers included).
pub struct ChunkReader<R: Read> {
    inner: R,
    buf: Vec<u8>,
    pos: usize,
    offset: u64,
    eof: bool,
    spans: SpanCrc,
    /// The damaged stretch being crossed: its file offset and what was wrong first.
    bad: Option<(u64, String)>,
    /// Whether a chunk in that stretch claimed to run past the end of the file.
    bad_runs_past_end: bool,
    /// Damage found so far (at most [`MAX_DAMAGE_LISTED`] entries).
    pub damage: Vec<Damage>,
    /// Damaged places found after the list was full, and their bytes.
    pub unlisted: (u64, u64),
    /// File offset of the first unlisted place.
    unlisted_at: u64,
}

impl<R: Read> ChunkReader<R> {
    /// Read chunks starting at file offset `offset` (after the header).
    pub fn new(inner: R, offset: u64) -> ChunkReader<R> {
        ChunkReader {
            inner,
            buf: Vec::with_capacity(1 << 20),
            pos: 0,
            offset,
            eof: false,
            spans: SpanCrc::default(),
            bad: None,
            bad_runs_past_end: false,
            damage: Vec::new(),
            unlisted: (0, 0),
            unlisted_at: 0,
        }
    }

    /// The damage found, listed places first, then (when there were more than
    /// [`MAX_DAMAGE_LISTED`]) one entry counting the rest; the reader's list is emptied.
    pub fn take_damage(&mut self) -> Vec<Damage> {
        let mut d = std::mem::take(&mut self.damage);
        let (n, bytes) = std::mem::take(&mut self.unlisted);
        if n > 0 {
            d.push(Damage {
                offset: self.unlisted_at,
                what: format!("{n} more damaged places, not listed"),
                skipped: bytes,
            });
        }
        d
    }

    /// Bytes of memory the reader's buffer holds (bounded by the caps, whatever the file says).
    pub fn buffer_capacity(&self) -> usize {
        self.buf.capacity()
    }

    fn record(&mut self, d: Damage) {
        if self.damage.len() < MAX_DAMAGE_LISTED {
            self.damage.push(d);
        } else {
            if self.unlisted.0 == 0 {
                self.unlisted_at = d.offset;
            }
            self.unlisted.0 += 1;
            self.unlisted.1 += d.skipped;
        }
    }

    /// Something is wrong at `at`: open a damaged stretch there (unless one is open), move on.
    fn bad_at(&mut self, at: u64, what: impl FnOnce() -> String, skip: usize) {
        if self.bad.is_none() {
            self.bad = Some((at, what()));
        }
        self.pos += skip;
    }

    /// The damaged stretch ends at `end` (a good chunk or the end of the file): note it.
    fn close_bad(&mut self, end: u64, at_eof: bool) {
        if let Some((from, what)) = self.bad.take() {
            let what = if at_eof && self.bad_runs_past_end {
                "file ends inside a chunk (cut off)".to_string()
            } else {
                what
            };
            self.record(Damage {
                offset: from,
                what,
                skipped: end - from,
            });
        }
        self.bad_runs_past_end = false;
    }

    fn fill(&mut self, need: usize) -> io::Result<()> {
        while self.buf.len() - self.pos < need && !self.eof {
            if self.pos > 0 && self.pos > self.buf.len() / 2 {
                self.buf.drain(..self.pos);
                self.offset += self.pos as u64;
                self.pos = 0;
                self.spans.clear();
            }
            let old = self.buf.len();
            let missing = need - (old - self.pos);
            self.buf.resize(old + missing.max(1 << 20), 0);
            let n = loop {
                match self.inner.read(&mut self.buf[old..]) {
                    Err(e) if e.kind() == io::ErrorKind::Interrupted => continue,
                    r => break r,
                }
            };
            let n = match n {
                Ok(n) => n,
                Err(e) => {
                    self.buf.truncate(old);
                    return Err(e);
                }
            };
            self.buf.truncate(old + n);
            if n == 0 {
                self.eof = true;
            }
        }
        Ok(())
    }

    /// The next good chunk (None at the end).
    pub fn next_chunk(&mut self) -> io::Result<Option<Chunk>> {
        loop {
            self.fill(CHUNK_HEAD + 4)?;
            let avail = self.buf.len() - self.pos;
            let at = self.offset + self.pos as u64;
            if avail == 0 {
                self.close_bad(at, true);
                return Ok(None);
            }
            let rest = &self.buf[self.pos..];
            if avail < CHUNK_HEAD + 4 && self.eof {
                // too short for a chunk: the end of one cut off, or damaged bytes
                if rest.starts_with(&SYNC[..avail.min(4)]) {
                    self.bad_runs_past_end = true;
                }
                self.bad_at(at, || "file ends inside a chunk (cut off)".into(), avail);
                continue;
            }
            if rest[..4] != SYNC {
                let skip = rest[1..]
                    .windows(4)
                    .position(|w| w == SYNC)
                    .map_or(avail.saturating_sub(3).max(1), |i| i + 1);
                self.bad_at(at, || "no chunk here (damaged bytes)".into(), skip);
                continue;
            }
            let len = u32::from_le_bytes([rest[6], rest[7], rest[8], rest[9]]);
            let kind = match rest[4] {
                1 => ChunkKind::Data,
                2 => ChunkKind::Mark,
                3 => ChunkKind::Link,
                k => {
                    self.bad_at(at, || format!("unknown chunk kind {k}"), 1);
                    continue;
                }
            };
            if len > MAX_PAYLOAD {
                self.bad_at(at, || format!("chunk length {len} exceeds the cap"), 1);
                continue;
            }
            let total = CHUNK_HEAD + len as usize + 4;
            self.fill(total)?;
            let avail = self.buf.len() - self.pos;
            if avail < total {
                // the length runs past the end: a cut, unless a good chunk follows
                self.bad_runs_past_end = true;
                self.bad_at(
                    at,
                    || format!("chunk length {len} runs past the end of the file"),
                    1,
                );
                continue;
            }
            let p = self.pos;
            let want = u32::from_le_bytes(
                self.buf[p + total - 4..p + total]
                    .try_into()
                    .expect("4 bytes"),
            );
            if self.spans.crc(&self.buf, p + 4, p + total - 4) != want {
                self.bad_at(at, || "chunk checksum mismatch".into(), 1);
                continue;
            }
            self.close_bad(at, false);
            let rest = &self.buf[p..p + total];
            let host_ns = u64::from_le_bytes(rest[10..18].try_into().expect("8 bytes"));
            let chunk = Chunk {
                kind,
                host_ns,
                payload: rest[CHUNK_HEAD..total - 4].to_vec(),
                offset: at,
            };
            self.pos += total;
            return Ok(Some(chunk));
        }
    }
}

/// Write a header + chunks to any writer (tests, tools).
pub fn write_all(
    w: &mut impl Write,
    h: &Header,
    chunks: &[(ChunkKind, u64, Vec<u8>)],
) -> io::Result<()> {
    w.write_all(&encode_header(h))?;
    let mut buf = Vec::new();
    for (k, t, p) in chunks {
        buf.clear();
        encode_chunk(*k, *t, p, &mut buf);
        w.write_all(&buf)?;
    }
    Ok(())
}
