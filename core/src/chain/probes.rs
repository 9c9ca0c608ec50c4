//! The chain's probes: each tip's phase detector and window statistics, and each dual-tip
//! probe's correlator, fed one run of frames at a time.

use crate::correlation::{Correlator, MAX_RUN_FRAMES};
use crate::phase::{Edge, EdgeSink, PhaseDetector};
use crate::probe_config::{DetectorConfig, ProbeConfig, TipConfig};
use crate::record::TipStats;
use crate::tip_stats::TipAccumulator;

/// Longest run of frames handed to the tips at once: keeps a run of a wide frame in L1 (and
/// bounds the correlators' buffer of leading-tip edges).
pub(super) const RUN_FRAMES: usize = MAX_RUN_FRAMES;

/// Feeds a tip's statistics and one more sink with the same edges.
pub(super) struct Feed<'a, S>(pub(super) &'a mut TipAccumulator, pub(super) S);

impl<S: EdgeSink> EdgeSink for Feed<'_, S> {
    #[inline]
    fn edge(&mut self, edge: Edge) {
        self.0.edge(edge);
        self.1.edge(edge);
    }
}

/// Finds the frame at which the `need`-th bubble (air -> water interface) closes.
pub(super) struct BubbleCounter {
    pub(super) need: u32,
    pub(super) seen: u32,
    pub(super) at: Option<u64>,
}

impl EdgeSink for BubbleCounter {
    #[inline]
    fn edge(&mut self, edge: Edge) {
        if !edge.to_air && self.at.is_none() {
            self.seen += 1;
            if self.seen >= self.need {
                self.at = Some(edge.frame);
            }
        }
    }
}

/// Run a copy of `detector` over `run` (frames from `first`) to find where the `need`-th
/// bubble closes. Apart from the caller, so the copy takes stack only when it is made.
#[inline(never)]
pub(super) fn look_ahead(
    detector: &PhaseDetector,
    run: &[i16],
    channels: usize,
    first: u64,
    need: u32,
) -> BubbleCounter {
    let mut peek = detector.clone();
    let mut counter = BubbleCounter {
        need,
        seen: 0,
        at: None,
    };
    peek.process(run, channels, first, &mut counter);
    counter
}

#[derive(Clone, Debug)]
pub(super) struct Tip {
    pub(super) detector: PhaseDetector,
    pub(super) stats: TipAccumulator,
}

impl Tip {
    /// All zero bytes (an unused probe slot).
    pub(super) const ZERO: Self = Tip {
        detector: PhaseDetector::ZERO,
        stats: TipAccumulator::ZERO,
    };

    /// Start afresh, in place, for `cfg`.
    pub(super) fn configure(&mut self, cfg: &TipConfig, det: &DetectorConfig, initial_air: bool) {
        self.detector.configure(cfg, det, initial_air);
        self.stats = TipAccumulator::new();
        self.stats.set_near_wake(det.near_wake);
    }

    #[inline]
    pub(super) fn run<S: EdgeSink>(
        &mut self,
        frames: &[i16],
        channels: usize,
        first: u64,
        extra: S,
    ) {
        let n = (frames.len() / channels) as u32;
        let mut sink = Feed(&mut self.stats, extra);
        let counts = self.detector.process(frames, channels, first, &mut sink);
        self.stats.add_run(n, counts);
    }

    /// Close the window into `out` (in place).
    pub(super) fn close_into(&mut self, out: &mut TipStats) {
        self.stats.close_into(out, self.detector.levels())
    }
}

/// One probe's state. The trailing tip and the correlator are always there (an `Option`
/// would take the same room) and in use for a dual-tip probe only, so a probe slot can be
/// (re)built in place.
#[derive(Clone, Debug)]
pub(super) struct ProbeState<const L: usize> {
    pub(super) lead: Tip,
    pub(super) trail: Tip,
    pub(super) corr: Correlator<L>,
    /// The probe has a trailing tip (and so a correlator).
    pub(super) dual: bool,
}

impl<const L: usize> ProbeState<L> {
    /// All zero bytes (an unused probe slot).
    pub(super) const ZERO: Self = ProbeState {
        lead: Tip::ZERO,
        trail: Tip::ZERO,
        corr: Correlator::ZERO,
        dual: false,
    };

    /// Start afresh, in place, for probe `p` (the state a new chain has).
    pub(super) fn configure(&mut self, p: &ProbeConfig, det: &DetectorConfig, initial_air: bool) {
        self.lead.configure(&p.leading, det, initial_air);
        self.dual = p.trailing.is_some();
        if let Some(t) = &p.trailing {
            self.trail.configure(t, det, initial_air);
            self.corr.restart(p.max_lag, 0, initial_air, initial_air);
        }
    }

    pub(super) fn trail(&self) -> Option<&Tip> {
        self.dual.then_some(&self.trail)
    }

    pub(super) fn corr(&self) -> Option<&Correlator<L>> {
        self.dual.then_some(&self.corr)
    }

    /// The leading tip, and the trailing tip and correlator of a dual-tip probe.
    pub(super) fn parts_mut(&mut self) -> (&mut Tip, Option<&mut Tip>, Option<&mut Correlator<L>>) {
        let ProbeState {
            lead,
            trail,
            corr,
            dual,
        } = self;
        if *dual {
            (lead, Some(trail), Some(corr))
        } else {
            (lead, None, None)
        }
    }
}

/// The probes of a chain: `P` slots, the first `len` in use. The slots stay in place (a
/// configuration rebuilds them where they are), so no probe's state is ever moved.
#[derive(Clone, Debug)]
pub(super) struct Probes<const P: usize, const L: usize> {
    pub(super) slots: [ProbeState<L>; P],
    pub(super) len: usize,
}

impl<const P: usize, const L: usize> Probes<P, L> {
    pub(super) const fn new() -> Self {
        Probes {
            slots: [ProbeState::ZERO; P],
            len: 0,
        }
    }

    pub(super) fn configure(
        &mut self,
        probes: &[ProbeConfig],
        det: &DetectorConfig,
        initial_air: bool,
    ) {
        self.len = 0;
        for (slot, p) in self.slots.iter_mut().zip(probes) {
            slot.configure(p, det, initial_air);
            self.len += 1;
        }
    }

    pub(super) fn in_use(&self) -> &[ProbeState<L>] {
        self.slots.get(..self.len).unwrap_or(&[])
    }

    pub(super) fn iter(&self) -> core::slice::Iter<'_, ProbeState<L>> {
        self.in_use().iter()
    }

    pub(super) fn iter_mut(&mut self) -> core::slice::IterMut<'_, ProbeState<L>> {
        self.slots.get_mut(..self.len).unwrap_or(&mut []).iter_mut()
    }

    pub(super) fn get(&self, i: usize) -> Option<&ProbeState<L>> {
        self.in_use().get(i)
    }

    pub(super) fn get_mut(&mut self, i: usize) -> Option<&mut ProbeState<L>> {
        self.slots.get_mut(..self.len)?.get_mut(i)
    }

    pub(super) fn len(&self) -> usize {
        self.len
    }

    pub(super) fn is_empty(&self) -> bool {
        self.len == 0
    }
}
