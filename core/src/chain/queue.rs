//! The closed windows waiting to be polled, and the raw correlation sums kept beside them.

use crate::correlation::{CorrelationResult, CorrelationSums};
use crate::record::{ProbeWindow, TipStats};

/// The closed windows waiting to be polled, oldest first, in `P` slots: records without
/// their raw correlation sums (those wait in the [`SumsStore`], if the chain keeps them;
/// a record type of no lag slots), built in place in their slot and lent out from there.
#[derive(Clone, Debug)]
pub(super) struct RecordQueue<const P: usize> {
    pub(super) slots: [ProbeWindow<0>; P],
    pub(super) head: usize,
    pub(super) len: usize,
}

impl<const P: usize> RecordQueue<P> {
    /// An empty slot, all zero bytes (so an empty chain's `static` stays in `.bss`): the
    /// options are `Some` of values whose own options are `None` (a `None` of the outer
    /// ones would be a non-zero niche value). Slots are written in full before they are
    /// read.
    pub(super) const EMPTY_SLOT: ProbeWindow<0> = ProbeWindow {
        trail: Some(TipStats::ZERO),
        correlation: Some(CorrelationResult::none(0)),
        ..ProbeWindow::<0>::ZERO
    };

    pub(super) const fn new() -> Self {
        RecordQueue {
            slots: [Self::EMPTY_SLOT; P],
            head: 0,
            len: 0,
        }
    }

    pub(super) fn capacity(&self) -> usize {
        P
    }

    pub(super) fn len(&self) -> usize {
        self.len
    }

    pub(super) fn clear(&mut self) {
        self.head = 0;
        self.len = 0;
    }

    /// The oldest record.
    pub(super) fn front(&self) -> Option<&ProbeWindow<0>> {
        if self.len == 0 {
            return None;
        }
        self.slots.get(self.head)
    }

    /// Drop the oldest record.
    pub(super) fn pop_front(&mut self) {
        if self.len > 0 {
            self.head = (self.head + 1).checked_rem(P).unwrap_or(0);
            self.len -= 1;
        }
    }

    /// The slot of a new newest record, to be filled in place (`None` when full).
    pub(super) fn push_slot(&mut self) -> Option<&mut ProbeWindow<0>> {
        if self.len >= P {
            return None;
        }
        let at = (self.head + self.len).checked_rem(P).unwrap_or(0);
        self.len += 1;
        self.slots.get_mut(at)
    }
}

/// The raw correlation sums of the queued records that have them, oldest first, in up to
/// `S` slots (none at all for `S = 0`).
#[derive(Clone, Debug)]
pub(super) struct SumsStore<const L: usize, const S: usize> {
    pub(super) slots: [Option<CorrelationSums<L>>; S],
    pub(super) head: usize,
    pub(super) len: usize,
}

impl<const L: usize, const S: usize> SumsStore<L, S> {
    pub(super) const NONE: Option<CorrelationSums<L>> = None;

    pub(super) const fn new() -> Self {
        SumsStore {
            slots: [Self::NONE; S],
            head: 0,
            len: 0,
        }
    }

    pub(super) fn clear(&mut self) {
        for s in self.slots.iter_mut() {
            *s = None;
        }
        self.head = 0;
        self.len = 0;
    }

    /// Keep `sums` (dropped when there is no room: never so in a chain, which has a slot
    /// for every record it can queue, or none at all).
    pub(super) fn push(&mut self, sums: CorrelationSums<L>) {
        let at = (self.head + self.len).checked_rem(S).unwrap_or(0);
        if self.len < S {
            if let Some(slot) = self.slots.get_mut(at) {
                *slot = Some(sums);
                self.len += 1;
            }
        }
    }

    pub(super) fn pop(&mut self) -> Option<CorrelationSums<L>> {
        if self.len == 0 {
            return None;
        }
        let out = self.slots.get_mut(self.head)?.take();
        self.head = (self.head + 1).checked_rem(S).unwrap_or(0);
        self.len -= 1;
        out
    }
}
