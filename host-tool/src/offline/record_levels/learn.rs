//! The learning pass: which tips learn, and one read of the capture that counts their
//! values into histograms (whole record and drift segments) and learns from them.

use super::histogram::{from_histogram, segment_levels, SEGMENT_BIN};
use super::outcome::TipLevels;
use super::record::RecordLevels;
use super::DRIFT_SEGMENT_S;
use crate::offline::level_drift;
use crate::offline::threads::{offline_threads, BlockPool};
use crate::shared::capture::Capture;
use crate::shared::error::HostError;
use crate::shared::rig::MAX_PROBES;
use frothline_core::levels::LEARN_STRIDE;
use frothline_core::{ChainConfig, LevelSource, Polarity, TipConfig};
use std::path::Path;

/// Frames read per block by the learning pass.
const BLOCK_FRAMES: usize = 1 << 15;

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
struct TipCounts {
    channel: usize,
    whole: Vec<u32>,
    segments: Vec<Vec<u32>>,
}

/// A stretch of a block's frames inside one segment (`None`: no segments), as frame
/// indices into the block (first, end); its first frame is on the learning stride's grid.
type Piece = (usize, usize, Option<usize>);

/// A tip's channel, its whole-record histogram and its histogram of the current segment.
type Lane<'a> = (usize, &'a mut [u32], Option<&'a mut [u32]>);

/// Count every `LEARN_STRIDE`-th frame of `pieces` of `block` into the histograms of `tips`
/// (`bins`: bins of a segment histogram, made when a tip first meets its segment). Frames
/// outside, tips inside: each frame's cache line is read once for all the tips (a block is
/// a megabyte at 16 channels; read once per tip, it came from beyond the caches each time).
fn count(tips: &mut [TipCounts], block: &[i16], channels: usize, pieces: &[Piece], bins: usize) {
    for &(first, end, seg) in pieces {
        if let Some(k) = seg {
            for t in tips.iter_mut() {
                while t.segments.len() <= k {
                    t.segments.push(vec![0u32; bins]);
                }
            }
        }
        let Some(piece) = block.get(first * channels..end * channels) else {
            continue;
        };
        // Each tip's histograms looked up once per piece, not at every sample.
        let mut lanes: Vec<Lane<'_>> = tips
            .iter_mut()
            .filter(|t| t.channel < channels)
            .map(|t| {
                let segment = seg
                    .and_then(|k| t.segments.get_mut(k))
                    .map(|v| v.as_mut_slice());
                (t.channel, t.whole.as_mut_slice(), segment)
            })
            .collect();
        for frame in piece.chunks_exact(channels).step_by(LEARN_STRIDE as usize) {
            for (channel, whole, segment) in lanes.iter_mut() {
                let Some(&x) = frame.get(*channel) else {
                    continue;
                };
                let b = (x as u16 ^ 0x8000) as usize;
                if let Some(c) = whole.get_mut(b) {
                    *c = c.saturating_add(1);
                }
                if let Some(cell) = segment.as_mut().and_then(|v| v.get_mut(b / SEGMENT_BIN)) {
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

/// A block of frames read and its pieces, shared by the counting threads.
type Block = std::sync::Arc<(Vec<i16>, Vec<Piece>)>;

/// [`learn_with`] on `threads` threads: with more than one, this thread reads the capture
/// and hands each block to counting threads, one per group of tips, that run behind it
/// (counts, and so levels, do not depend on the number).
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
    let channels = cap.channels().max(1);
    let mut counts: Vec<TipCounts> = tips
        .iter()
        .map(|t| TipCounts {
            channel: t.2.channel as usize,
            whole: vec![0u32; 1 << 16],
            segments: Vec::new(),
        })
        .collect();
    let segment_frames = if track_drift {
        ((DRIFT_SEGMENT_S * cap.sample_rate() as f64).round() as u64).max(LEARN_STRIDE)
    } else {
        0
    };
    let bins = (1 << 16) / SEGMENT_BIN;
    let threads = threads.clamp(1, tips.len());
    let mut at = 0u64;
    if threads == 1 {
        let mut buf = Vec::with_capacity(BLOCK_FRAMES * channels);
        let mut pieces = Vec::new();
        loop {
            let n = cap.read_frames(&mut buf, BLOCK_FRAMES)?;
            if n == 0 {
                break;
            }
            pieces_of(at, n, segment_frames, &mut pieces);
            count(&mut counts, &buf, channels, &pieces, bins);
            at += n as u64;
        }
    } else {
        std::thread::scope(|scope| -> Result<(), HostError> {
            let mut txs = Vec::new();
            for g in counts.chunks_mut(tips.len().div_ceil(threads)) {
                let (tx, rx) = std::sync::mpsc::sync_channel::<Block>(2);
                txs.push(tx);
                scope.spawn(move || {
                    for b in rx {
                        count(g, &b.0, channels, &b.1, bins);
                    }
                });
            }
            let mut pool = BlockPool::default();
            loop {
                let mut block: Block = pool.free_block();
                let (buf, pieces) = std::sync::Arc::make_mut(&mut block);
                let n = cap.read_frames(buf, BLOCK_FRAMES)?;
                if n == 0 {
                    return Ok(());
                }
                pieces_of(at, n, segment_frames, pieces);
                at += n as u64;
                for tx in &txs {
                    let _ = tx.send(std::sync::Arc::clone(&block));
                }
                pool.keep(block);
            }
        })?;
    }
    let hist: Vec<Vec<u32>> = counts
        .iter_mut()
        .map(|t| std::mem::take(&mut t.whole))
        .collect();
    let seg_hist: Vec<Vec<Vec<u32>>> = counts.into_iter().map(|t| t.segments).collect();
    let out = tips
        .iter()
        .zip(&hist)
        .map(|(&(probe, trailing, tip), h)| TipLevels {
            probe,
            trailing,
            channel: tip.channel,
            outcome: from_histogram(h, tip.polarity, min_swing),
        })
        .collect();
    let segments = seg_hist
        .iter()
        .zip(tips)
        .map(|(sh, t)| {
            sh.iter()
                .map(|coarse| segment_levels(coarse, t.2.polarity, min_swing))
                .collect()
        })
        .collect();
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
