//! The drivers of a steady replay: every frame of a capture through a core chain, on one
//! thread ([`drive`]) or with the probes split over worker threads, one chain each
//! ([`drive_parallel`]), handing the records on in the order one chain gives them.

use crate::offline::replay_common::LevelSchedule;
use crate::offline::threads::BlockPool;
use crate::shared::capture::Capture;
use crate::shared::error::HostError;
use crate::shared::rig::HostChain;
use crate::shared::rig::HostRecord as ProbeWindow;
use indicatif::ProgressBar;
use std::sync::Arc;

/// Frames read from the capture per block.
const BLOCK_FRAMES: usize = 1 << 15;
/// Windows per block at most in the parallel driver: the records of a block travel from the
/// workers to the writer together, so short windows get shorter blocks and the records in
/// flight stay a few megabytes whatever the window length.
const WINDOWS_PER_BLOCK: usize = 256;

/// Frames per block for `policy` (results do not depend on it: the core's records do not
/// depend on how samples are split into pushes).
fn block_frames(policy: &frothline_core::WindowPolicy) -> usize {
    match policy {
        frothline_core::WindowPolicy::Frames(n) => (*n as usize)
            .saturating_mul(WINDOWS_PER_BLOCK)
            .clamp(1024, BLOCK_FRAMES),
        _ => BLOCK_FRAMES,
    }
}

/// Push every frame of `cap` through `chain`, handing each record to `sink`.
pub fn drive(
    cap: &mut Capture,
    chain: &mut HostChain,
    progress: &ProgressBar,
    sink: impl FnMut(ProbeWindow) -> Result<(), HostError>,
) -> Result<u64, HostError> {
    drive_with(cap, chain, None, progress, sink)
}

/// [`drive`] with the levels of `schedule` applied as the record goes.
pub fn drive_with(
    cap: &mut Capture,
    chain: &mut HostChain,
    schedule: Option<&LevelSchedule>,
    progress: &ProgressBar,
    mut sink: impl FnMut(ProbeWindow) -> Result<(), HostError>,
) -> Result<u64, HostError> {
    let mut buf = Vec::with_capacity(BLOCK_FRAMES * cap.channels());
    let mut frames = 0u64;
    loop {
        let n = cap.read_frames(&mut buf, BLOCK_FRAMES)?;
        if n == 0 {
            break;
        }
        frames += n as u64;
        push_all(chain, &buf, schedule, &Some, &mut |r| sink(r))?;
        progress.inc(n as u64);
    }
    finish_all(chain, &mut |r| sink(r))?;
    Ok(frames)
}

/// Push a whole block, draining records as the chain's queue fills, and cut at the
/// schedule's segment starts to apply their levels.
fn push_all<E>(
    chain: &mut HostChain,
    block: &[i16],
    schedule: Option<&LevelSchedule>,
    local: &dyn Fn(usize) -> Option<usize>,
    sink: &mut dyn FnMut(ProbeWindow) -> Result<(), E>,
) -> Result<(), E> {
    let channels = (chain.config().channels as usize).max(1);
    let mut rest = block;
    while !rest.is_empty() {
        let mut piece = rest;
        if let Some(s) = schedule.filter(|s| s.segment_frames > 0) {
            let at = chain.frames();
            s.apply(chain, at, local);
            let to_next = s.segment_frames - at % s.segment_frames;
            let take = (to_next as usize).saturating_mul(channels).min(rest.len());
            piece = &rest[..take];
        }
        let mut left = piece;
        while !left.is_empty() {
            let used = chain.push(left);
            left = &left[used..];
            while let Some(r) = chain.poll_lean_with(|r| r.without_sums()) {
                sink(r)?;
            }
        }
        rest = &rest[piece.len()..];
    }
    Ok(())
}

/// Close the record and drain every remaining record.
fn finish_all<E>(
    chain: &mut HostChain,
    sink: &mut dyn FnMut(ProbeWindow) -> Result<(), E>,
) -> Result<(), E> {
    while chain.finish().is_err() {
        while let Some(r) = chain.poll_lean_with(|r| r.without_sums()) {
            sink(r)?;
        }
    }
    while let Some(r) = chain.poll_lean_with(|r| r.without_sums()) {
        sink(r)?;
    }
    Ok(())
}

/// Like [`drive`], with the probes split over worker threads, one chain each, fed the same
/// blocks. Probes are independent under the `Whole` and fixed-duration window policies, so
/// the records are the ones one chain would give; they are handed to `sink` in the same
/// order (by window start, then probe). Other policies run on one chain.
pub fn drive_parallel(
    cap: &mut Capture,
    chain: Box<HostChain>,
    workers: usize,
    progress: &ProgressBar,
    sink: impl FnMut(ProbeWindow) -> Result<(), HostError>,
) -> Result<u64, HostError> {
    drive_parallel_with(cap, chain, None, workers, progress, sink)
}

/// [`drive_parallel`] with the levels of `schedule` applied as the record goes.
pub fn drive_parallel_with(
    cap: &mut Capture,
    chain: Box<HostChain>,
    schedule: Option<&LevelSchedule>,
    workers: usize,
    progress: &ProgressBar,
    mut sink: impl FnMut(ProbeWindow) -> Result<(), HostError>,
) -> Result<u64, HostError> {
    drive_parallel_prepared(cap, chain, schedule, workers, progress, &|_| (), |r, ()| {
        sink(r)
    })
}

/// [`drive_parallel_with`], where each record first goes through `prepare` on the thread
/// whose chain gave it (with its layout probe index already in place): what `prepare`
/// returns comes to `sink` with the record. On one thread `prepare` runs just before
/// `sink`. Work that depends only on the record (formatting its row, say) done in
/// `prepare` is spread over the workers instead of waiting on the writer.
pub fn drive_parallel_prepared<T: Send>(
    cap: &mut Capture,
    chain: Box<HostChain>,
    schedule: Option<&LevelSchedule>,
    workers: usize,
    progress: &ProgressBar,
    prepare: &(dyn Fn(&mut ProbeWindow) -> T + Sync),
    mut sink: impl FnMut(ProbeWindow, T) -> Result<(), HostError>,
) -> Result<u64, HostError> {
    use frothline_core::WindowPolicy;
    use std::collections::BTreeMap;
    use std::sync::mpsc;
    let cfg = chain.config().clone();
    let independent = matches!(cfg.window, WindowPolicy::Whole | WindowPolicy::Frames(_));
    let workers = workers.min(cfg.probes.len());
    if workers <= 1 || !independent {
        let mut chain = chain;
        return drive_with(cap, &mut chain, schedule, progress, |mut r| {
            let prepared = prepare(&mut r);
            sink(r, prepared)
        });
    }
    // Contiguous groups of probes, balanced by tip count.
    let tips: Vec<usize> = cfg
        .probes
        .iter()
        .map(|p| 1 + p.trailing.is_some() as usize)
        .collect();
    let total: usize = tips.iter().sum();
    let mut groups: Vec<Vec<usize>> = vec![Vec::new(); workers];
    let mut acc = 0;
    for (i, t) in tips.iter().enumerate() {
        let g = (acc * workers / total).min(workers - 1);
        groups[g].push(i);
        acc += t;
    }
    groups.retain(|g| !g.is_empty());
    // Each worker's chain reads only the channels of its own probes, renumbered from 0 in
    // channel order: the core runs every channel of a frame through its detectors, so a
    // chain over the whole frame would do the others' work too.
    let mut chains = Vec::new();
    for g in &groups {
        let mut used: Vec<usize> = g
            .iter()
            .flat_map(|&i| {
                let p = &cfg.probes[i];
                std::iter::once(p.leading.channel).chain(p.trailing.map(|t| t.channel))
            })
            .map(usize::from)
            .collect();
        used.sort_unstable();
        used.dedup();
        let local_channel = |c: u8| used.iter().position(|&u| u == c as usize).unwrap_or(0) as u8;
        let mut c = cfg.clone();
        c.channels = lane_width(used.len()) as u8;
        c.probes.clear();
        for &i in g {
            let mut p = cfg.probes[i];
            p.leading.channel = local_channel(p.leading.channel);
            if let Some(t) = p.trailing.as_mut() {
                t.channel = local_channel(t.channel);
            }
            let _ = c.probes.push(p);
        }
        let c = HostChain::new(c)
            .map_err(|e| HostError::Usage(format!("internal: split chain refused: {e}")))?;
        chains.push((Box::new(c), g.clone(), used));
    }
    let channels = cap.channels().max(1);
    std::thread::scope(|scope| {
        let (rec_tx, rec_rx) = mpsc::channel::<(usize, Vec<(ProbeWindow, T)>)>();
        let mut block_txs = Vec::new();
        for (w, (mut chain, global, used)) in chains.into_iter().enumerate() {
            let (tx, rx) = mpsc::sync_channel::<Arc<Vec<i16>>>(2);
            block_txs.push(tx);
            let rec_tx = rec_tx.clone();
            scope.spawn(move || {
                let out = std::cell::RefCell::new(Vec::new());
                let mut keep = |mut r: ProbeWindow| -> Result<(), ()> {
                    r.probe = global[r.probe as usize] as u8;
                    let prepared = prepare(&mut r);
                    out.borrow_mut().push((r, prepared));
                    Ok(())
                };
                let local = |g: usize| global.iter().position(|&x| x == g);
                let width = chain.config().channels as usize;
                let mut own = Vec::new();
                for block in rx {
                    gather(&block, channels, &used, width, &mut own);
                    drop(block);
                    let _ = push_all(&mut chain, &own, schedule, &local, &mut keep);
                    let _ = rec_tx.send((w, out.take()));
                }
                let _ = finish_all(&mut chain, &mut keep);
                let _ = rec_tx.send((w, out.take()));
            });
        }
        drop(rec_tx);
        let n_workers = block_txs.len();
        type Pending<T> = BTreeMap<(u64, u8), (ProbeWindow, T)>;
        let mut pending: Pending<T> = BTreeMap::new();
        let mut last_start = vec![0u64; n_workers];
        let mut flush = |pending: &mut Pending<T>, upto: u64| -> Result<(), HostError> {
            while let Some(entry) = pending.first_entry() {
                if entry.key().0 >= upto {
                    break;
                }
                let (r, prepared) = entry.remove();
                sink(r, prepared)?;
            }
            Ok(())
        };
        let mut take = |w: usize, recs: Vec<(ProbeWindow, T)>, pending: &mut Pending<T>| {
            for (r, prepared) in recs {
                last_start[w] = last_start[w].max(r.start);
                pending.insert((r.start, r.probe), (r, prepared));
            }
            *last_start.iter().min().unwrap_or(&0)
        };
        let mut frames = 0u64;
        let block_frames = block_frames(&cfg.window);
        let mut pool = BlockPool::<Vec<i16>>::default();
        let result: Result<(), HostError> = (|| {
            loop {
                let mut block = pool.free_block();
                let n = cap.read_frames(Arc::make_mut(&mut block), block_frames)?;
                if n == 0 {
                    break;
                }
                frames += n as u64;
                for tx in &block_txs {
                    let _ = tx.send(Arc::clone(&block));
                }
                pool.keep(block);
                while let Ok((w, recs)) = rec_rx.try_recv() {
                    let upto = take(w, recs, &mut pending);
                    flush(&mut pending, upto)?;
                }
                progress.inc(n as u64);
            }
            Ok(())
        })();
        drop(block_txs);
        for (w, recs) in rec_rx.iter() {
            let upto = take(w, recs, &mut pending);
            if result.is_ok() {
                flush(&mut pending, upto)?;
            }
        }
        result?;
        flush(&mut pending, u64::MAX)?;
        Ok(frames)
    })
}

/// Channels of a worker's frames for `used` channels: the next width the core runs
/// frame-major (2 to 64 channels, a power of two), so the spare lanes cost no slower path;
/// the spare channels are held at 0 and read by no tip.
fn lane_width(used: usize) -> usize {
    match used {
        0..=64 => used.next_power_of_two().max(2),
        n => n,
    }
}

/// Frames of `channels` channels in `block` as frames of `width` channels in `out`: channel
/// `used[k]` at `k`, the rest 0.
fn gather(block: &[i16], channels: usize, used: &[usize], width: usize, out: &mut Vec<i16>) {
    let frames = block.len() / channels;
    out.clear();
    out.resize(frames * width, 0);
    let (first, k) = (used.first().copied().unwrap_or(0), used.len());
    let contiguous = used.iter().enumerate().all(|(i, &c)| c == first + i);
    let frames_in = block.chunks_exact(channels);
    let frames_out = out.chunks_exact_mut(width);
    match (contiguous, k) {
        // Copies of a fixed length, which the compiler turns into plain vector moves.
        (true, 8) => copy_runs::<8>(frames_in, frames_out, first),
        (true, 4) => copy_runs::<4>(frames_in, frames_out, first),
        (true, 16) => copy_runs::<16>(frames_in, frames_out, first),
        _ => {
            for (src, dst) in frames_in.zip(frames_out) {
                for (d, &c) in dst.iter_mut().zip(used) {
                    *d = src.get(c).copied().unwrap_or(0);
                }
            }
        }
    }
}

/// Copy `K` channels from `first` of each frame to the start of each output frame.
fn copy_runs<'a, const K: usize>(
    frames_in: impl Iterator<Item = &'a [i16]>,
    frames_out: impl Iterator<Item = &'a mut [i16]>,
    first: usize,
) {
    for (src, dst) in frames_in.zip(frames_out) {
        dst[..K].copy_from_slice(&src[first..first + K]);
    }
}

#[cfg(test)]
mod tests {
    use super::{gather, lane_width};

    #[test]
    fn lane_widths_are_the_frame_major_ones() {
        assert_eq!(lane_width(1), 2);
        assert_eq!(lane_width(3), 4);
        assert_eq!(lane_width(8), 8);
        assert_eq!(lane_width(9), 16);
        assert_eq!(lane_width(65), 65);
    }

    #[test]
    fn gather_moves_each_used_channel_and_zeroes_the_rest() {
        // Two frames of 6 channels: sample = 10 * frame + channel.
        let block: Vec<i16> = (0..2)
            .flat_map(|f| (0..6).map(move |c| 10 * f + c))
            .collect();
        let mut out = vec![7; 3];
        gather(&block, 6, &[1, 4, 5], 4, &mut out);
        assert_eq!(out, [1, 4, 5, 0, 11, 14, 15, 0]);
        let block: Vec<i16> = (0..2)
            .flat_map(|f| (0..12).map(move |c| 100 * f + c))
            .collect();
        gather(&block, 12, &[2, 3, 4, 5], 4, &mut out);
        assert_eq!(out, [2, 3, 4, 5, 102, 103, 104, 105]);
    }
}
