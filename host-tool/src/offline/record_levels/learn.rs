//! The learning pass: which tips learn, and one read of the capture that counts their
//! values into histograms (whole record and drift segments) and learns from them.

use super::histogram::{from_histogram, segment_levels, SEGMENT_BIN};
use super::outcome::TipLevels;
use super::record::RecordLevels;
use super::DRIFT_SEGMENT_S;
use crate::offline::level_drift;
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
    if tips.is_empty() {
        return Ok(RecordLevels::default());
    }
    let mut cap = Capture::open(path)?;
    // A capture that stopped abruptly is learnt from what it holds; the processing pass
    // that follows reports the cut.
    cap.end_at_cut();
    let channels = cap.channels().max(1);
    let chans: Vec<usize> = tips.iter().map(|t| t.2.channel as usize).collect();
    let mut hist = vec![vec![0u32; 1 << 16]; chans.len()];
    let segment_frames = if track_drift {
        ((DRIFT_SEGMENT_S * cap.sample_rate() as f64).round() as u64).max(LEARN_STRIDE)
    } else {
        0
    };
    let bins = (1 << 16) / SEGMENT_BIN;
    // Per tip, per segment: a histogram of `SEGMENT_BIN`-count bins.
    let mut seg_hist: Vec<Vec<Vec<u32>>> = vec![Vec::new(); chans.len()];
    let mut buf = Vec::with_capacity(BLOCK_FRAMES * channels);
    let mut at = 0u64;
    loop {
        let n = cap.read_frames(&mut buf, BLOCK_FRAMES)?;
        if n == 0 {
            break;
        }
        let skip = ((LEARN_STRIDE - at % LEARN_STRIDE) % LEARN_STRIDE) as usize;
        // Cut the block at segment starts, so each piece belongs to one segment.
        let mut first = skip;
        while first < n {
            let f0 = at + first as u64;
            let (end, seg) = match f0.checked_div(segment_frames) {
                Some(k) => (
                    (((k + 1) * segment_frames - at) as usize).min(n),
                    Some(k as usize),
                ),
                None => (n, None),
            };
            if let Some(k) = seg {
                for sh in seg_hist.iter_mut() {
                    while sh.len() <= k {
                        sh.push(vec![0u32; bins]);
                    }
                }
            }
            let piece = &buf[first * channels..end * channels];
            for frame in piece.chunks_exact(channels).step_by(LEARN_STRIDE as usize) {
                for ((h, sh), &c) in hist.iter_mut().zip(seg_hist.iter_mut()).zip(&chans) {
                    if let Some(&x) = frame.get(c) {
                        let b = (x as u16 ^ 0x8000) as usize;
                        h[b] = h[b].saturating_add(1);
                        if let Some(cell) = seg
                            .and_then(|k| sh.get_mut(k))
                            .map(|v| &mut v[b / SEGMENT_BIN])
                        {
                            *cell = cell.saturating_add(1);
                        }
                    }
                }
            }
            // The next piece starts on the stride grid.
            let next = end.max(first + 1);
            first =
                next + ((LEARN_STRIDE - (at + next as u64) % LEARN_STRIDE) % LEARN_STRIDE) as usize;
        }
        at += n as u64;
    }
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
