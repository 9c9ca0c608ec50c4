//! The drivers of a steady replay: every frame of a capture through a core chain, on one
//! thread ([`drive`]) or with the probes split over worker threads, one chain each
//! ([`drive_parallel`]), handing the records on in the order one chain gives them.

use crate::offline::replay_common::LevelSchedule;
use crate::shared::capture::Capture;
use crate::shared::error::HostError;
use crate::shared::rig::HostChain;
use crate::shared::rig::HostRecord as ProbeWindow;
use indicatif::ProgressBar;

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
            while let Some(r) = chain.poll() {
                sink(r.without_sums())?;
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
        while let Some(r) = chain.poll() {
            sink(r.without_sums())?;
        }
    }
    while let Some(r) = chain.poll() {
        sink(r.without_sums())?;
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
    use frothline_core::WindowPolicy;
    use std::collections::BTreeMap;
    use std::sync::{mpsc, Arc};
    let cfg = chain.config().clone();
    let independent = matches!(cfg.window, WindowPolicy::Whole | WindowPolicy::Frames(_));
    let workers = workers.min(cfg.probes.len());
    if workers <= 1 || !independent {
        let mut chain = chain;
        return drive_with(cap, &mut chain, schedule, progress, sink);
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
    let mut chains = Vec::new();
    for g in &groups {
        let mut c = cfg.clone();
        c.probes.clear();
        for &i in g {
            let _ = c.probes.push(cfg.probes[i]);
        }
        let c = HostChain::new(c)
            .map_err(|e| HostError::Usage(format!("internal: split chain refused: {e}")))?;
        chains.push((Box::new(c), g.clone()));
    }
    std::thread::scope(|scope| {
        let (rec_tx, rec_rx) = mpsc::channel::<(usize, Vec<ProbeWindow>)>();
        let mut block_txs = Vec::new();
        for (w, (mut chain, global)) in chains.into_iter().enumerate() {
            let (tx, rx) = mpsc::sync_channel::<Arc<Vec<i16>>>(2);
            block_txs.push(tx);
            let rec_tx = rec_tx.clone();
            scope.spawn(move || {
                let out = std::cell::RefCell::new(Vec::new());
                let mut keep = |mut r: ProbeWindow| -> Result<(), ()> {
                    r.probe = global[r.probe as usize] as u8;
                    out.borrow_mut().push(r);
                    Ok(())
                };
                let local = |g: usize| global.iter().position(|&x| x == g);
                for block in rx {
                    let _ = push_all(&mut chain, &block, schedule, &local, &mut keep);
                    let _ = rec_tx.send((w, out.take()));
                }
                let _ = finish_all(&mut chain, &mut keep);
                let _ = rec_tx.send((w, out.take()));
            });
        }
        drop(rec_tx);
        let n_workers = block_txs.len();
        let mut pending: BTreeMap<(u64, u8), ProbeWindow> = BTreeMap::new();
        let mut last_start = vec![0u64; n_workers];
        let mut flush =
            |pending: &mut BTreeMap<(u64, u8), ProbeWindow>, upto: u64| -> Result<(), HostError> {
                while let Some(entry) = pending.first_entry() {
                    if entry.key().0 >= upto {
                        break;
                    }
                    sink(entry.remove())?;
                }
                Ok(())
            };
        let mut take =
            |w: usize, recs: Vec<ProbeWindow>, pending: &mut BTreeMap<(u64, u8), ProbeWindow>| {
                for r in recs {
                    last_start[w] = last_start[w].max(r.start);
                    pending.insert((r.start, r.probe), r);
                }
                *last_start.iter().min().unwrap_or(&0)
            };
        let mut frames = 0u64;
        let block_frames = block_frames(&cfg.window);
        let mut buf = Vec::with_capacity(block_frames * cap.channels());
        let result: Result<(), HostError> = (|| {
            loop {
                let n = cap.read_frames(&mut buf, block_frames)?;
                if n == 0 {
                    break;
                }
                frames += n as u64;
                let block = Arc::new(std::mem::take(&mut buf));
                for tx in &block_txs {
                    let _ = tx.send(Arc::clone(&block));
                }
                buf = Arc::try_unwrap(block)
                    .unwrap_or_else(|_| Vec::with_capacity(block_frames * cap.channels()));
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
