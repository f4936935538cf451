//! Damaged recordings: whatever was done to a file, every intact chunk reads back, nothing that
//! was not written is returned, the damage list stays short, and fake sync markers cost time
//! and memory in proportion to the file only.

use slackmeter::record::format::{
    CHUNK_HEAD, Chunk, ChunkKind, ChunkReader, Damage, Header, MAX_DAMAGE_LISTED, MAX_PAYLOAD,
    SYNC, encode_chunk, encode_header,
};
use slackmeter::sim::{BenchModel, SimProbe};

/// xorshift64*: deterministic trials.
struct Rng(u64);
impl Rng {
    fn next(&mut self) -> u64 {
        self.0 ^= self.0 >> 12;
        self.0 ^= self.0 << 25;
        self.0 ^= self.0 >> 27;
        self.0.wrapping_mul(0x2545_F491_4F6C_DD1D)
    }
    fn below(&mut self, n: u64) -> u64 {
        self.next() % n
    }
}

/// A file of 80 chunks (data of the virtual probe in pieces of many sizes, marks, link
/// events): its bytes, its chunks (kind, payload) and their spans in the file.
/// A file's bytes, its chunks (kind, payload) and their spans.
type Sample = (Vec<u8>, Vec<(ChunkKind, Vec<u8>)>, Vec<(usize, usize)>);

fn sample() -> Sample {
    let mut p = SimProbe::new(BenchModel::scenario("sagging").unwrap(), vec![]);
    p.start();
    let mut file = encode_header(&Header {
        tool: "test".into(),
        source: "test".into(),
        ..Header::default()
    });
    let mut chunks = Vec::new();
    let mut spans = Vec::new();
    for i in 0..80u64 {
        let (kind, payload) = match i % 10 {
            3 => (ChunkKind::Mark, format!("mark {i}").into_bytes()),
            7 => (
                ChunkKind::Link,
                format!(r#"{{"event":"lost","reason":"test {i}"}}"#).into_bytes(),
            ),
            _ => {
                p.run_until((i + 1) as f64 * 3e5 * (1 + i % 4) as f64);
                (ChunkKind::Data, std::mem::take(p.output()))
            }
        };
        let start = file.len();
        encode_chunk(kind, 1000 + i, &payload, &mut file);
        spans.push((start, file.len()));
        chunks.push((kind, payload));
    }
    (file, chunks, spans)
}

fn read_all(bytes: &[u8], from: usize) -> (Vec<Chunk>, Vec<Damage>, usize) {
    let mut r = ChunkReader::new(&bytes[from..], from as u64);
    let mut got = Vec::new();
    while let Some(c) = r.next_chunk().unwrap() {
        got.push(c);
    }
    let cap = r.buffer_capacity();
    (got, r.take_damage(), cap)
}

/// One kind of damage at one place of the original file.
#[derive(Debug)]
enum Op {
    Flip(usize, u8),
    Delete(usize, usize),
    Insert(usize, Vec<u8>),
    /// A chunk's length field set to a value that runs past the end of the file.
    LongLength(usize, u32),
}

impl Op {
    fn at(&self) -> usize {
        match self {
            Op::Flip(p, _) | Op::Delete(p, _) | Op::Insert(p, _) | Op::LongLength(p, _) => *p,
        }
    }
    /// Whether it changes bytes of the span (an insertion at either end leaves it whole).
    fn touches(&self, (s, e): (usize, usize)) -> bool {
        match self {
            Op::Flip(p, _) => (s..e).contains(p),
            Op::Delete(p, n) => *p < e && p + n > s,
            Op::Insert(p, _) => s < *p && *p < e,
            Op::LongLength(p, _) => *p < e && p + 4 > s,
        }
    }
    fn apply(&self, f: &mut Vec<u8>) {
        match self {
            Op::Flip(p, m) => f[*p] ^= m,
            Op::Delete(p, n) => {
                let n = (*n).min(f.len() - p);
                f.drain(*p..p + n);
            }
            Op::Insert(p, b) => {
                f.splice(*p..*p, b.iter().copied());
            }
            Op::LongLength(p, v) => f[*p..p + 4].copy_from_slice(&v.to_le_bytes()),
        }
    }
}

fn fake_header(len: u32) -> Vec<u8> {
    let mut h = SYNC.to_vec();
    h.extend_from_slice(&[1, 0]);
    h.extend_from_slice(&len.to_le_bytes());
    h.extend_from_slice(&7u64.to_le_bytes());
    h
}

/// Damage at 1 to 8 random places per trial, 300 trials (about 1 350 places): bit flips,
/// deleted and inserted runs, fake chunk headers, and length fields that run past the end of
/// the file (within the cap). Every chunk no damage touched reads back, in order, and nothing
/// else.
#[test]
fn damage_at_random_places_recovers_every_intact_chunk() {
    let (file, chunks, spans) = sample();
    let head = spans[0].0;
    let mut rng = Rng(0x5eed_0fda_3a9e);
    let (mut places, mut intact_total, mut damaged_total) = (0usize, 0usize, 0usize);
    for trial in 0..300 {
        let k = 1 + rng.below(8) as usize;
        let mut ops: Vec<Op> = Vec::new();
        while ops.len() < k {
            let p = head + rng.below((file.len() - head) as u64) as usize;
            if ops.iter().any(|o| o.at().abs_diff(p) < 64) {
                continue;
            }
            let op = match rng.below(6) {
                0 => Op::Flip(p, 1 << rng.below(8)),
                1 => Op::Delete(p, 1 + rng.below(40) as usize),
                2 => Op::Insert(
                    p,
                    (0..1 + rng.below(40)).map(|_| rng.next() as u8).collect(),
                ),
                3 => Op::Insert(p, fake_header(rng.below(u64::from(MAX_PAYLOAD)) as u32)),
                _ => {
                    // a chunk's own length field, pointing past the end but within the cap
                    let i = rng.below(spans.len() as u64) as usize;
                    let at = spans[i].0 + 6;
                    if ops.iter().any(|o| o.at().abs_diff(at) < 64) {
                        continue;
                    }
                    let past = file.len() - spans[i].0 + rng.below(1 << 20) as usize;
                    Op::LongLength(at, past.min(MAX_PAYLOAD as usize) as u32)
                }
            };
            ops.push(op);
        }
        ops.sort_by_key(|o| std::cmp::Reverse(o.at()));
        let mut f = file.clone();
        for o in &ops {
            o.apply(&mut f);
        }
        let want: Vec<&(ChunkKind, Vec<u8>)> = chunks
            .iter()
            .zip(&spans)
            .filter(|(_, s)| !ops.iter().any(|o| o.touches(**s)))
            .map(|(c, _)| c)
            .collect();
        let (got, damage, _) = read_all(&f, head);
        let got: Vec<(ChunkKind, Vec<u8>)> = got.into_iter().map(|c| (c.kind, c.payload)).collect();
        let want: Vec<(ChunkKind, Vec<u8>)> = want.into_iter().cloned().collect();
        assert_eq!(got.len(), want.len(), "trial {trial}: {ops:?}\n{damage:?}");
        assert!(
            got == want,
            "trial {trial}: other chunks than the intact ones"
        );
        assert!(
            !damage.is_empty() || want.len() == chunks.len(),
            "trial {trial}"
        );
        places += k;
        intact_total += want.len();
        damaged_total += chunks.len() - want.len();
    }
    println!(
        "300 trials, {places} damaged places: {intact_total} intact chunks, all recovered; \
         {damaged_total} damaged chunks lost"
    );
}

/// One chunk's length field set to run past the end (within the cap) loses that chunk only;
/// what follows is no "cut off".
#[test]
fn a_length_past_the_end_loses_one_chunk_not_the_rest() {
    let (mut file, chunks, spans) = sample();
    let (s, _) = spans[10];
    let past = (file.len() - s + 1000) as u32;
    file[s + 6..s + 10].copy_from_slice(&past.to_le_bytes());
    let (got, damage, _) = read_all(&file, spans[0].0);
    assert_eq!(got.len(), chunks.len() - 1);
    assert_eq!(damage.len(), 1, "{damage:?}");
    assert_eq!(damage[0].offset, s as u64);
    assert!(damage[0].what.contains("runs past the end"), "{damage:?}");
    assert_eq!(damage[0].skipped, (spans[11].0 - s) as u64);
}

/// `n` bytes of fake markers, then the sample's chunks: everything after them reads back, the
/// damage is one entry, the buffer stays within the caps.
fn fake_markers_then_data(fill: &[u8], n: usize) {
    let (file, chunks, spans) = sample();
    let head = spans[0].0;
    let mut f = file[..head].to_vec();
    while f.len() < head + n {
        f.extend_from_slice(fill);
    }
    let fake_end = f.len();
    f.extend_from_slice(&file[head..]);
    let (got, damage, cap) = read_all(&f, head);
    assert_eq!(got.len(), chunks.len(), "{damage:?}");
    assert_eq!(damage.len(), 1, "{damage:?}");
    assert_eq!(damage[0].skipped, (fake_end - head) as u64);
    assert!(
        cap <= 3 * (MAX_PAYLOAD as usize + CHUNK_HEAD + 4),
        "buffer {cap}"
    );
}

#[test]
fn a_mebibyte_of_repeated_sync_markers_before_good_data() {
    fake_markers_then_data(&SYNC, 1 << 20);
    // chunk heads that look right (data, a length inside the cap) and fail their CRC
    fake_markers_then_data(&fake_header(60_000), 1 << 20);
    fake_markers_then_data(&fake_header(MAX_PAYLOAD), 1 << 20);
}

#[test]
fn twenty_mebibytes_of_fake_chunk_heads_read_in_bounded_work() {
    fake_markers_then_data(&SYNC, 20 << 20);
    // every head claims the largest chunk, which lies inside the file for most of them
    let mut fill = fake_header(MAX_PAYLOAD - 1);
    fill.extend_from_slice(&[0x55; 46]);
    fake_markers_then_data(&fill, 20 << 20);
}

/// Damage at more places than are listed: the list is capped and its last entry counts the rest.
#[test]
fn the_damage_list_is_capped_and_counts_the_rest() {
    let (file, _, spans) = sample();
    let head = spans[0].0;
    let mut f = file[..head].to_vec();
    let (mut good, mut bad) = (0, 0);
    for i in 0..(MAX_DAMAGE_LISTED + 50) {
        f.extend_from_slice(b"junk");
        bad += 1;
        encode_chunk(ChunkKind::Mark, i as u64, b"ok", &mut f);
        good += 1;
    }
    let (got, damage, _) = read_all(&f, head);
    assert_eq!(got.len(), good);
    assert_eq!(damage.len(), MAX_DAMAGE_LISTED + 1);
    let last = damage.last().unwrap();
    assert!(last.what.contains("50 more"), "{last:?}");
    assert_eq!(last.skipped, 50 * 4);
    assert_eq!(bad, MAX_DAMAGE_LISTED + 50);
}
