//! The learning pass: which tips learn, and one read of the capture that counts their
//! values into histograms (whole record and drift segments) and learns from them.

use super::histogram::{from_histogram, segment_levels, SEGMENT_BIN};
use super::outcome::TipLevels;
use super::record::RecordLevels;
use super::DRIFT_SEGMENT_S;
use crate::offline::level_drift;
use crate::offline::threads::{map_on_threads, offline_threads};
use crate::shared::capture::Capture;
use crate::shared::error::HostError;
use crate::shared::rig::MAX_PROBES;
use frothline_core::levels::LEARN_STRIDE;
use frothline_core::{ChainConfig, LevelSource, Polarity, TipConfig};
use std::path::Path;

/// Frames read per block by the learning pass.
const BLOCK_FRAMES: usize = 1 << 15;

/// Bins of a tip's whole-record histogram: one per i16 value.
const WHOLE_BINS: usize = 1 << 16;

/// Bins of a drift segment's histogram (`SEGMENT_BIN` values each).
const SEGMENT_BINS: usize = WHOLE_BINS / SEGMENT_BIN;

/// A tip to learn: its probe's index in the layout, trailing or not, its configuration.
pub type LearningTip = (usize, bool, TipConfig);

/// The tips of `cfg` that learn their levels; `layout_index` maps the chain's probe index
/// to the layout's (a station chain holds a subset of the layout's probes).
pub fn learning_tips(
    cfg: &ChainConfig<MAX_PROBES>,
    layout_index: impl Fn(usize) -> usize,
) -> Vec<LearningTip> {
    let mut out = Vec::new();
    for (i, p) in cfg.probes.iter().enumerate() {
        for (trailing, tip) in [(false, Some(p.leading)), (true, p.trailing)] {
            if let Some(t) = tip.filter(|t| t.levels == LevelSource::Learnt) {
                out.push((layout_index(i), trailing, t));
            }
        }
    }
    out
}

/// Learn the levels of `tips` from the capture at `path` (opened afresh: the replay reads
/// it again after), with the smallest accepted swing `min_swing` (counts).
pub fn learn(path: &Path, tips: &[LearningTip], min_swing: u16) -> Result<RecordLevels, HostError> {
    learn_with(path, tips, min_swing, false)
}

/// [`learn`], and with `track_drift` the levels of every [`DRIFT_SEGMENT_S`] segment too.
pub fn learn_with(
    path: &Path,
    tips: &[LearningTip],
    min_swing: u16,
    track_drift: bool,
) -> Result<RecordLevels, HostError> {
    learn_threads(path, tips, min_swing, track_drift, offline_threads())
}

/// One tip's counts: its channel, its histogram over the whole record, and one histogram of
/// `SEGMENT_BIN`-count bins per drift segment.
#[derive(Debug, PartialEq)]
struct TipCounts {
    channel: usize,
    whole: Vec<u32>,
    segments: Vec<Vec<u32>>,
}

impl TipCounts {
    /// Empty counts for the same tip.
    fn fresh(&self) -> TipCounts {
        TipCounts {
            channel: self.channel,
            whole: vec![0u32; self.whole.len()],
            segments: Vec::new(),
        }
    }

    /// Add the counts of `other` (the same tip, another stretch of the record), saturating
    /// as the counting does.
    fn add(&mut self, other: &TipCounts) {
        let sum = |into: &mut Vec<u32>, from: &[u32]| {
            if into.len() < from.len() {
                into.resize(from.len(), 0);
            }
            for (a, &b) in into.iter_mut().zip(from) {
                *a = a.saturating_add(b);
            }
        };
        sum(&mut self.whole, &other.whole);
        if self.segments.len() < other.segments.len() {
            self.segments.resize_with(other.segments.len(), Vec::new);
        }
        for (into, from) in self.segments.iter_mut().zip(&other.segments) {
            sum(into, from);
        }
    }
}

/// Read the frames `start..end` of `cap` (positioned at `start`; `end` past the data reads
/// to its end) and count them into `counts`.
fn count_stretch(
    cap: &mut Capture,
    start: u64,
    end: u64,
    counts: &mut [TipCounts],
    segment_frames: u64,
) -> Result<(), HostError> {
    let channels = cap.channels().max(1);
    let mut buf = Vec::with_capacity(BLOCK_FRAMES * channels);
    let mut pieces = Vec::new();
    let mut at = start;
    while at < end {
        let want = (end - at).min(BLOCK_FRAMES as u64) as usize;
        let n = cap.read_frames(&mut buf, want)?;
        if n == 0 {
            break;
        }
        pieces_of(at, n, segment_frames, &mut pieces);
        count(counts, &buf, channels, &pieces);
        at += n as u64;
    }
    Ok(())
}

/// A stretch of a block's frames inside one segment (`None`: no segments), as frame
/// indices into the block (first, end); its first frame is on the learning stride's grid.
type Piece = (usize, usize, Option<usize>);

/// A tip's channel, its whole-record histogram and its histogram of the current segment.
type Lane<'a> = (
    usize,
    &'a mut [u32; WHOLE_BINS],
    Option<&'a mut [u32; SEGMENT_BINS]>,
);

/// Count every `LEARN_STRIDE`-th frame of `pieces` of `block` into the histograms of `tips`
/// (a segment's histogram made when a tip first meets its segment). Frames
/// outside, tips inside: each frame's cache line is read once for all the tips (a block is
/// a megabyte at 16 channels; read once per tip, it came from beyond the caches each time).
fn count(tips: &mut [TipCounts], block: &[i16], channels: usize, pieces: &[Piece]) {
    for &(first, end, seg) in pieces {
        if let Some(k) = seg {
            for t in tips.iter_mut() {
                while t.segments.len() <= k {
                    t.segments.push(vec![0u32; SEGMENT_BINS]);
                }
            }
        }
        let Some(piece) = block.get(first * channels..end * channels) else {
            continue;
        };
        // Each tip's histograms looked up once per piece, not at every sample; as arrays
        // of their fixed lengths, so a sample's bins need no bounds test.
        let mut lanes: Vec<Lane<'_>> = tips
            .iter_mut()
            .filter(|t| t.channel < channels)
            .filter_map(|t| {
                let whole: &mut [u32; WHOLE_BINS] = t.whole.as_mut_slice().try_into().ok()?;
                let segment = seg
                    .and_then(|k| t.segments.get_mut(k))
                    .and_then(|v| v.as_mut_slice().try_into().ok());
                Some((t.channel, whole, segment))
            })
            .collect();
        for frame in piece.chunks_exact(channels).step_by(LEARN_STRIDE as usize) {
            for (channel, whole, segment) in lanes.iter_mut() {
                let Some(&x) = frame.get(*channel) else {
                    continue;
                };
                let b = (x as u16 ^ 0x8000) as usize;
                let c = &mut whole[b];
                *c = c.saturating_add(1);
                if let Some(coarse) = segment {
                    let cell = &mut coarse[b / SEGMENT_BIN];
                    *cell = cell.saturating_add(1);
                }
            }
        }
    }
}

/// The pieces of a block of `n` frames starting at frame `at`: cut at segment starts
/// (segments of `segment_frames`, 0 for none), so each piece belongs to one segment, each
/// starting on the learning stride's grid.
fn pieces_of(at: u64, n: usize, segment_frames: u64, pieces: &mut Vec<Piece>) {
    pieces.clear();
    let mut first = ((LEARN_STRIDE - at % LEARN_STRIDE) % LEARN_STRIDE) as usize;
    while first < n {
        let f0 = at + first as u64;
        let (end, seg) = match f0.checked_div(segment_frames) {
            Some(k) => (
                (((k + 1) * segment_frames - at) as usize).min(n),
                Some(k as usize),
            ),
            None => (n, None),
        };
        pieces.push((first, end, seg));
        // The next piece starts on the stride grid.
        let next = end.max(first + 1);
        first = next + ((LEARN_STRIDE - (at + next as u64) % LEARN_STRIDE) % LEARN_STRIDE) as usize;
    }
}

/// Count the whole capture `cap` (just opened, from `path`) into `counts`, on up to
/// `threads` threads.
fn count_capture(
    path: &Path,
    cap: &mut Capture,
    counts: &mut Vec<TipCounts>,
    segment_frames: u64,
    threads: usize,
) -> Result<(), HostError> {
    // Stretches of at least two blocks each: a short capture is read on one thread.
    let stretches = (cap.frames() / (2 * BLOCK_FRAMES as u64)).max(1);
    let threads = (threads.max(1) as u64).min(stretches) as usize;
    if threads == 1 {
        count_stretch(cap, 0, u64::MAX, counts, segment_frames)?;
    } else {
        // Each thread reads its own stretch of the capture and counts every tip into its
        // own histograms; the counts are added afterwards. A sum of saturating counts,
        // added saturating, is the count saturated: the levels do not depend on the number
        // of threads, and the reading (the copy out of the page cache) runs in parallel.
        let total = cap.frames();
        let per = total.div_ceil(threads as u64);
        let parts: Vec<Result<Vec<TipCounts>, HostError>> = std::thread::scope(|scope| {
            let handles: Vec<_> = (0..threads as u64)
                .map(|k| {
                    let mut own: Vec<TipCounts> = counts.iter().map(TipCounts::fresh).collect();
                    let (start, end) = ((k * per).min(total), ((k + 1) * per).min(total));
                    scope.spawn(move || -> Result<Vec<TipCounts>, HostError> {
                        let mut cap = Capture::open(path)?;
                        cap.end_at_cut();
                        cap.seek_frame(start)?;
                        count_stretch(&mut cap, start, end, &mut own, segment_frames)?;
                        Ok(own)
                    })
                })
                .collect();
            handles
                .into_iter()
                .map(|h| h.join().unwrap_or_else(|e| std::panic::resume_unwind(e)))
                .collect()
        });
        // The first stretch's counts take the others in (no copy into fresh ones).
        let mut parts = parts.into_iter();
        if let Some(first) = parts.next() {
            *counts = first?;
        }
        for part in parts {
            for (into, from) in counts.iter_mut().zip(part?) {
                into.add(&from);
            }
        }
    }
    Ok(())
}

/// [`learn_with`] on `threads` threads: with more than one, each reads and counts its own
/// stretch of the capture (counts, and so levels, do not depend on the number).
pub fn learn_threads(
    path: &Path,
    tips: &[LearningTip],
    min_swing: u16,
    track_drift: bool,
    threads: usize,
) -> Result<RecordLevels, HostError> {
    if tips.is_empty() {
        return Ok(RecordLevels::default());
    }
    let mut cap = Capture::open(path)?;
    // A capture that stopped abruptly is learnt from what it holds; the processing pass
    // that follows reports the cut.
    cap.end_at_cut();
    let mut counts: Vec<TipCounts> = tips
        .iter()
        .map(|t| TipCounts {
            channel: t.2.channel as usize,
            whole: vec![0u32; WHOLE_BINS],
            segments: Vec::new(),
        })
        .collect();
    let segment_frames = if track_drift {
        ((DRIFT_SEGMENT_S * cap.sample_rate() as f64).round() as u64).max(LEARN_STRIDE)
    } else {
        0
    };
    count_capture(path, &mut cap, &mut counts, segment_frames, threads)?;
    let hist: Vec<Vec<u32>> = counts
        .iter_mut()
        .map(|t| std::mem::take(&mut t.whole))
        .collect();
    let seg_hist: Vec<Vec<Vec<u32>>> = counts.into_iter().map(|t| t.segments).collect();
    // Each tip decided on its own (a 65 536-bin histogram and one per segment), the tips
    // spread over the threads.
    let per_tip: Vec<(usize, &LearningTip)> = tips.iter().enumerate().collect();
    let decided = map_on_threads(&per_tip, threads, |&(i, &(probe, trailing, tip))| {
        let whole = hist.get(i).map_or(&[][..], |h| h.as_slice());
        let levels = TipLevels {
            probe,
            trailing,
            channel: tip.channel,
            outcome: from_histogram(whole, tip.polarity, min_swing),
        };
        let segments: Vec<_> = seg_hist
            .get(i)
            .map_or(&[][..], |s| s.as_slice())
            .iter()
            .map(|coarse| segment_levels(coarse, tip.polarity, min_swing))
            .collect();
        (levels, segments)
    });
    let (out, segments): (Vec<_>, Vec<_>) = decided.into_iter().unzip();
    let mut levels = RecordLevels {
        tips: out,
        segments,
        segment_frames,
        segment_one_phase: Vec::new(),
    };
    let polarities: Vec<Polarity> = tips.iter().map(|t| t.2.polarity).collect();
    levels.borrow_swing(&hist, &polarities);
    levels.segment_one_phase = levels
        .tips
        .iter()
        .zip(&seg_hist)
        .map(|(t, sh)| {
            let swing = t.outcome.levels().map(|l| (l.air - l.water).abs());
            sh.iter()
                .map(|coarse| {
                    swing.and_then(|w| level_drift::one_phase_level(coarse, SEGMENT_BIN, w))
                })
                .collect()
        })
        .collect();
    Ok(levels)
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::rngs::StdRng;
    use rand::{Rng, SeedableRng};

    /// A two-channel 16-bit capture of `frames` frames: each tip switches between a water
    /// and an air level (runs of pseudo-random length) with noise, the levels drifting.
    fn write_capture(path: &Path, frames: u32) {
        let spec = hound::WavSpec {
            channels: 2,
            sample_rate: 40_000,
            bits_per_sample: 16,
            sample_format: hound::SampleFormat::Int,
        };
        let mut w = hound::WavWriter::create(path, spec).unwrap();
        let mut rng = StdRng::seed_from_u64(7);
        let (mut air, mut left) = ([false; 2], [0u32; 2]);
        for f in 0..frames {
            for ch in 0..2 {
                if left[ch] == 0 {
                    air[ch] = !air[ch];
                    left[ch] = rng.random_range(5..405);
                }
                left[ch] -= 1;
                let drift = (f / 4_000) as i32 * (ch as i32 + 1);
                let level = if air[ch] { 24_000 } else { 2_000 } + drift;
                let noise: i32 = rng.random_range(-300..=300);
                w.write_sample((level + noise).clamp(-32_768, 32_767) as i16)
                    .unwrap();
            }
        }
        w.finalize().unwrap();
    }

    fn counts_on(path: &Path, threads: usize) -> Vec<TipCounts> {
        let mut cap = Capture::open(path).unwrap();
        cap.end_at_cut();
        let mut counts: Vec<TipCounts> = (0..2)
            .map(|channel| TipCounts {
                channel,
                whole: vec![0u32; WHOLE_BINS],
                segments: Vec::new(),
            })
            .collect();
        count_capture(path, &mut cap, &mut counts, 40_000, threads).unwrap();
        counts
    }

    /// Stretches read on several threads give the counts of one reader, histogram bin by
    /// histogram bin, drift segments included, also when the file was cut short inside
    /// the second stretch (and a third stretch lies wholly past the cut).
    #[test]
    fn stretches_on_threads_count_what_one_reader_counts() {
        let dir = tempfile::tempdir().unwrap();
        let whole = dir.path().join("whole.wav");
        // Six blocks and a bit: three stretches of two blocks and more.
        let frames = 6 * BLOCK_FRAMES as u32 + 1_234;
        write_capture(&whole, frames);
        let one = counts_on(&whole, 1);
        let samples: u64 = one[0].whole.iter().map(|&c| u64::from(c)).sum();
        assert_eq!(samples, u64::from(frames).div_ceil(LEARN_STRIDE));
        assert!(one[0].segments.len() >= 5, "{}", one[0].segments.len());
        for threads in [2, 3] {
            assert!(counts_on(&whole, threads) == one, "{threads} threads");
        }
        // The same file cut 40 % in: the header still declares every frame.
        let cut = dir.path().join("cut.wav");
        let bytes = std::fs::read(&whole).unwrap();
        std::fs::write(&cut, &bytes[..bytes.len() * 2 / 5]).unwrap();
        let one = counts_on(&cut, 1);
        for threads in [2, 3] {
            assert!(
                counts_on(&cut, threads) == one,
                "cut file, {threads} threads"
            );
        }
    }
}
