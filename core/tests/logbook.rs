//! The frame log under power loss: a simulated NOR flash that cuts power after a random
//! number of word writes (the current word half written, an erase half done), after which
//! every operation fails until the bytes are mounted again. Checked at every cut: the log
//! mounts, no record whose append returned `Ok` is lost, and no record that was not
//! appended (or a corrupted one) is returned.

use embedded_storage::nor_flash::{ErrorType, NorFlash, NorFlashErrorKind, ReadNorFlash};
use frothline_core::logbook::{FieldLogger, LogError, Logbook, LoggerState, MAX_RECORD_BYTES};
use frothline_core::wire::{self, Body, Frame, Health, WindowResult, MAX_FRAME_BYTES};
use rand::rngs::StdRng;
use rand::{Rng, SeedableRng};

const PAGE: usize = 2048;

#[derive(Debug)]
struct PowerLost;

impl embedded_storage::nor_flash::NorFlashError for PowerLost {
    fn kind(&self) -> NorFlashErrorKind {
        NorFlashErrorKind::Other
    }
}

/// NOR flash over a Vec: erase sets 0xFF, a write can only clear bits (AND). `budget`
/// word writes (an erase counts as one) succeed; the next one is cut half way and the
/// device is dead from then on.
struct SimFlash<const W: usize> {
    mem: Vec<u8>,
    budget: Option<u64>,
    dead: bool,
    rng: StdRng,
    /// Sector erases carried out.
    erases: u32,
}

impl<const W: usize> SimFlash<W> {
    fn new(mem: Vec<u8>, budget: Option<u64>, seed: u64) -> Self {
        SimFlash {
            mem,
            budget,
            dead: false,
            rng: StdRng::seed_from_u64(seed),
            erases: 0,
        }
    }

    /// One more operation allowed? False: power is cut now.
    fn tick(&mut self) -> bool {
        match &mut self.budget {
            None => true,
            Some(0) => {
                self.dead = true;
                false
            }
            Some(n) => {
                *n -= 1;
                true
            }
        }
    }
}

impl<const W: usize> ErrorType for SimFlash<W> {
    type Error = PowerLost;
}

impl<const W: usize> ReadNorFlash for SimFlash<W> {
    const READ_SIZE: usize = 1;

    fn read(&mut self, offset: u32, bytes: &mut [u8]) -> Result<(), PowerLost> {
        let o = offset as usize;
        if self.dead || o + bytes.len() > self.mem.len() {
            return Err(PowerLost);
        }
        bytes.copy_from_slice(&self.mem[o..o + bytes.len()]);
        Ok(())
    }

    fn capacity(&self) -> usize {
        self.mem.len()
    }
}

impl<const W: usize> NorFlash for SimFlash<W> {
    const WRITE_SIZE: usize = W;
    const ERASE_SIZE: usize = PAGE;

    fn erase(&mut self, from: u32, to: u32) -> Result<(), PowerLost> {
        let (a, b) = (from as usize, to as usize);
        assert!(a % PAGE == 0 && b % PAGE == 0 && a <= b && b <= self.mem.len());
        if self.dead {
            return Err(PowerLost);
        }
        if !self.tick() {
            // Cut: part of the sector erased, in one of two orders.
            let k = self.rng.random_range(0..=(b - a));
            if self.rng.random_bool(0.5) {
                self.mem[a..a + k].fill(0xFF);
            } else {
                self.mem[b - k..b].fill(0xFF);
            }
            return Err(PowerLost);
        }
        self.mem[a..b].fill(0xFF);
        self.erases += ((b - a) / PAGE) as u32;
        Ok(())
    }

    fn write(&mut self, offset: u32, bytes: &[u8]) -> Result<(), PowerLost> {
        let o = offset as usize;
        assert!(
            o.is_multiple_of(W)
                && bytes.len().is_multiple_of(W)
                && o + bytes.len() <= self.mem.len()
        );
        if self.dead {
            return Err(PowerLost);
        }
        for (i, word) in bytes.chunks(W).enumerate() {
            let at = o + i * W;
            // NOR: every byte is programmed once between erases.
            assert!(
                self.mem[at..at + W].iter().all(|&b| b == 0xFF),
                "write over programmed bytes at {at}"
            );
            if !self.tick() {
                let k = self.rng.random_range(0..W);
                for (m, w) in self.mem[at..at + k].iter_mut().zip(word) {
                    *m &= w;
                }
                return Err(PowerLost);
            }
            for (m, w) in self.mem[at..at + W].iter_mut().zip(word) {
                *m &= w;
            }
        }
        Ok(())
    }
}

fn random_record(rng: &mut StdRng, max: usize) -> Vec<u8> {
    let n = if rng.random_bool(0.1) {
        rng.random_range(1..=max)
    } else {
        rng.random_range(1..=max.min(160))
    };
    let mut v = vec![0u8; n];
    for b in &mut v {
        // Plenty of 0x00 and 0xFF, the values that look like erased flash or delimiters.
        *b = match rng.random_range(0..4) {
            0 => 0x00,
            1 => 0xFF,
            _ => rng.random(),
        };
    }
    v
}

fn read_all<const W: usize>(log: &mut Logbook<SimFlash<W>>) -> Vec<Vec<u8>> {
    log.records()
        .map(|r| r.expect("read of a powered flash").to_vec())
        .collect()
}

/// Power cycles without the ring recycling pages: after every cut the log holds exactly
/// the acknowledged records. Returns (cut points, records checked).
fn cuts_without_eviction<const W: usize>(seed: u64, epochs: usize, cycles: usize) -> (u64, u64) {
    let mut rng = StdRng::seed_from_u64(seed);
    let (mut cuts, mut checked) = (0u64, 0u64);
    for epoch in 0..epochs {
        // Start from erased flash, or from garbage.
        let mem = if epoch % 2 == 0 {
            vec![0xFF; 64 * PAGE]
        } else {
            (0..64 * PAGE).map(|_| rng.random()).collect()
        };
        let mut mem = Some(mem);
        let mut acked: Vec<Vec<u8>> = Vec::new();
        for _ in 0..cycles {
            let budget = rng.random_range(0..1600 / W as u64);
            let flash = SimFlash::<W>::new(mem.take().unwrap(), Some(budget), rng.random());
            let mut log = Logbook::mount(flash).expect("mount never fails on content");
            let inflight = loop {
                let rec = random_record(&mut rng, MAX_RECORD_BYTES);
                match log.append(&rec) {
                    Ok(()) => acked.push(rec),
                    Err(LogError::Flash) => break rec,
                    Err(e) => panic!("unexpected {e:?}"),
                }
            };
            cuts += 1;
            assert_eq!(log.stats().pages_recycled, 0, "test sized to not recycle");
            // Power back: a fresh view of the same bytes.
            let mut f = log.into_inner();
            f.dead = false;
            f.budget = None;
            let mut log = Logbook::mount(f).expect("mount after a cut");
            assert_eq!(log.stats().pages_recycled, 0);
            let got = read_all(&mut log);
            // The record being written when power was cut may be there in full (its commit
            // word was programmed before the cut was noticed) or not at all.
            if got.len() == acked.len() + 1 && got.last() == Some(&inflight) {
                acked.push(inflight);
            }
            assert_eq!(
                got.len(),
                acked.len(),
                "epoch {epoch}: records lost or added"
            );
            assert!(got == acked, "epoch {epoch}: a record differs");
            checked += got.len() as u64;
            mem = Some(log.into_inner().mem);
        }
    }
    (cuts, checked)
}

#[test]
fn power_cuts_lose_no_acknowledged_record() {
    let (cuts, checked) = cuts_without_eviction::<4>(0x10_6B00, 24, 50);
    assert!(cuts >= 1000, "{cuts} cut points");
    eprintln!("write unit 4: {cuts} cut points, {checked} records checked");
    // Other write units (8, 16 bytes: flash with ECC words).
    let (c8, _) = cuts_without_eviction::<8>(0x10_6B08, 4, 40);
    let (c16, _) = cuts_without_eviction::<16>(0x10_6B16, 4, 40);
    assert_eq!(c8 + c16, 320);
}

/// A small ring that recycles pages: after every cut the log is a contiguous suffix of the
/// acknowledged records that holds at least every record of the last power cycle.
#[test]
fn power_cuts_with_ring_recycling() {
    let mut rng = StdRng::seed_from_u64(0x51_4E6);
    let mut mem = Some(vec![0xFF; 6 * PAGE]);
    let mut acked: Vec<Vec<u8>> = Vec::new();
    let mut recycled = 0u32;
    for cycle in 0..1200 {
        let budget = rng.random_range(0..300);
        let flash = SimFlash::<4>::new(mem.take().unwrap(), Some(budget), rng.random());
        let mut log = Logbook::mount(flash).expect("mount");
        let before = acked.len();
        let inflight = loop {
            let rec = random_record(&mut rng, 300);
            match log.append(&rec) {
                Ok(()) => acked.push(rec),
                Err(_) => break rec,
            }
        };
        recycled += log.stats().pages_recycled;
        let mut f = log.into_inner();
        f.dead = false;
        f.budget = None;
        let mut log = Logbook::mount(f).expect("mount after a cut");
        let got = read_all(&mut log);
        if got.last() == Some(&inflight) && acked.last() != Some(&inflight) {
            acked.push(inflight);
        }
        assert!(got.len() <= acked.len(), "cycle {cycle}: records added");
        let start = acked.len() - got.len();
        assert!(
            got[..] == acked[start..],
            "cycle {cycle}: not a suffix of the acknowledged records"
        );
        assert!(
            start <= before,
            "cycle {cycle}: records of the last cycle lost"
        );
        mem = Some(log.into_inner().mem);
    }
    assert!(recycled > 50, "the ring recycled only {recycled} pages");
}

#[test]
fn garbage_and_damage_mount_and_return_only_valid_records() {
    let mut rng = StdRng::seed_from_u64(7);
    for round in 0..60 {
        // Pure garbage: mounts, returns nothing valid (CRC-32 over every record).
        let mem: Vec<u8> = match round % 3 {
            0 => (0..8 * PAGE).map(|_| rng.random()).collect(),
            1 => vec![0x00; 8 * PAGE],
            _ => vec![0xFF; 8 * PAGE],
        };
        let mut log = Logbook::mount(SimFlash::<4>::new(mem, None, 1)).expect("mount");
        assert!(read_all(&mut log).is_empty());
        // A real log, then random bit damage: only appended records come back, in order.
        log.erase_all().unwrap();
        let recs: Vec<Vec<u8>> = (0..80).map(|_| random_record(&mut rng, 400)).collect();
        for r in &recs {
            log.append(r).unwrap();
        }
        assert_eq!(read_all(&mut log), recs);
        let mut mem = log.into_inner().mem;
        for _ in 0..rng.random_range(1..20) {
            let i = rng.random_range(0..mem.len());
            mem[i] ^= 1 << rng.random_range(0..8);
        }
        let mut log = Logbook::mount(SimFlash::<4>::new(mem, None, 1)).expect("mount");
        let got = read_all(&mut log);
        let mut j = 0;
        for g in &got {
            while j < recs.len() && &recs[j] != g {
                j += 1;
            }
            assert!(j < recs.len(), "a record that was never appended");
            j += 1;
        }
        // Appending after damage still works and reads back last.
        log.append(b"after").unwrap();
        assert_eq!(
            read_all(&mut log).last().map(|v| &v[..]),
            Some(&b"after"[..])
        );
    }
}

#[test]
fn geometry_and_sizes() {
    // One page only: refused.
    let one = SimFlash::<4>::new(vec![0xFF; PAGE], None, 1);
    assert_eq!(Logbook::mount(one).err(), Some(LogError::Geometry));
    let mut log = Logbook::mount(SimFlash::<4>::new(vec![0xFF; 2 * PAGE], None, 1)).unwrap();
    assert!(log.is_empty());
    assert_eq!(log.append(&[]), Err(LogError::RecordSize));
    assert_eq!(
        log.append(&[1u8; MAX_RECORD_BYTES + 1]),
        Err(LogError::RecordSize)
    );
    log.append(&[2u8; MAX_RECORD_BYTES]).unwrap();
    assert_eq!(read_all(&mut log), vec![vec![2u8; MAX_RECORD_BYTES]]);
}

fn window_frame(seq: u16, start: u64) -> Vec<u8> {
    let f = Frame {
        device: 7,
        seq,
        body: Body::window(WindowResult {
            probe: 0,
            start,
            frames: 400,
            void_fraction: 1234,
            bubble_rate: 5000,
            bubbles: 20,
            chords: None,
            correlation: None,
            flags: 0,
        }),
    };
    let mut buf = [0u8; MAX_FRAME_BYTES];
    wire::encode(&f, &mut buf).unwrap().to_vec()
}

fn health_frame(seq: u16) -> Vec<u8> {
    let f = Frame {
        device: 7,
        seq,
        body: Body::Health(Health {
            samples_dropped: 0,
            saturated_samples: 0,
            tips_stuck: 0,
            buffer_high_water: 0,
            windows_dropped: 0,
            frames_dropped: 0,
            uptime_frames: seq as u64,
        }),
    };
    let mut buf = [0u8; MAX_FRAME_BYTES];
    wire::encode(&f, &mut buf).unwrap().to_vec()
}

#[test]
fn field_logger_pre_trigger_and_capture() {
    let mut log = Logbook::mount(SimFlash::<4>::new(vec![0xFF; 8 * PAGE], None, 1)).unwrap();
    let mut fl: FieldLogger<4> = FieldLogger::new(5);
    assert_eq!(fl.state(), LoggerState::Idle);
    let frames: Vec<Vec<u8>> = (0..30).map(|i| window_frame(i, i as u64 * 400)).collect();
    fl.result(&frames[0], &mut log).unwrap(); // idle: dropped
    fl.arm();
    for f in &frames[1..11] {
        fl.result(f, &mut log).unwrap();
    }
    assert_eq!(fl.pending(), 4);
    assert!(log.is_empty());
    let front = health_frame(100);
    fl.front_detected(&front, &mut log).unwrap();
    assert_eq!(fl.state(), LoggerState::Capturing { remaining: 5 });
    for f in &frames[11..20] {
        fl.result(f, &mut log).unwrap();
    }
    assert_eq!(fl.state(), LoggerState::Armed);
    let mut want: Vec<Vec<u8>> = frames[7..11].to_vec();
    want.push(front);
    want.extend_from_slice(&frames[11..16]);
    let got = read_all(&mut log);
    assert_eq!(got, want);
    // Every stored record is a wire frame the decoder reads.
    let mut dec: wire::Decoder = wire::Decoder::new();
    let mut n = 0;
    for r in &got {
        if let wire::FeedResult::Frame { .. } = dec.feed(r) {
            n += 1;
        }
    }
    assert_eq!(n, got.len());
    assert_eq!(fl.stats().triggers, 1);
    assert_eq!(fl.stats().logged, 10);
    // Re-armed: the ring fills again from the results after the capture.
    assert_eq!(fl.pending(), 4);
}

/// The log's use as the device status reports it: nothing on an erased region, the head
/// page up to its write offset, whole pages before it, never more than the `pages - 1`
/// pages that hold records at once (the ring recycles from there), and the same figure
/// after a remount (as after a power cycle).
#[test]
fn used_bytes_follow_the_pages_written_and_stop_at_the_ring() {
    let pages = 4;
    let mut log = Logbook::mount(SimFlash::<4>::new(vec![0xFF; pages * PAGE], None, 1)).unwrap();
    assert_eq!(log.used_bytes(), 0);
    assert_eq!(log.record_capacity(), (pages - 1) * PAGE);
    let record = [0x5Au8; 100];
    // One record: page header 12 bytes, record header 8 + 100 payload, commit 4.
    log.append(&record).unwrap();
    assert_eq!(log.used_bytes(), 12 + 8 + 100 + 4);
    let per_page = log.records_per_page(record.len());
    for _ in 1..per_page {
        log.append(&record).unwrap();
    }
    let one_page = log.used_bytes();
    assert_eq!(one_page, 12 + per_page * 112);
    log.append(&record).unwrap();
    assert_eq!(
        log.used_bytes(),
        PAGE + 12 + 112,
        "a full page, then the new head"
    );
    let mut last = log.used_bytes();
    for _ in 0..per_page * pages * 2 {
        log.append(&record).unwrap();
        let u = log.used_bytes();
        assert!(u <= log.record_capacity());
        // It falls only when a new head page opens: the page after the head counts as
        // given up from then on.
        assert!(
            u >= last || u == (pages - 2) * PAGE + 12 + 112,
            "{last} -> {u}"
        );
        last = u;
    }
    assert!(log.stats().pages_recycled > 0);
    let used = log.used_bytes();
    assert!(used > (pages - 2) * PAGE, "{used}");
    let log = Logbook::mount(log.into_inner()).unwrap();
    assert_eq!(log.used_bytes(), used);
}

/// Scheduled erases: on a region that was never erased, `prepare` erases the pages a
/// capture needs before the front; the capture itself erases nothing and every frame of it
/// reads back.
#[test]
fn prepared_capture_erases_nothing() {
    let mut log = Logbook::mount(SimFlash::<4>::new(vec![0; 8 * PAGE], None, 1)).unwrap();
    let mut fl: FieldLogger<4> = FieldLogger::new(20);
    let frames: Vec<Vec<u8>> = (0..40).map(|i| window_frame(i, i as u64 * 400)).collect();
    let rl = frames.iter().map(Vec::len).max().unwrap();
    fl.set_reserve(4 + 1 + 20, rl);
    assert!(!fl.ready(&log));
    fl.arm();
    assert!(fl.prepare(&mut log).unwrap());
    assert!(fl.ready(&log));
    let erased = log.into_inner();
    let at_arm = erased.erases;
    assert!(at_arm >= 1);
    let mut log = Logbook::mount(erased).unwrap();
    // A fresh mount forgets what was prepared; preparing again only reads the pages.
    assert!(fl.prepare(&mut log).unwrap());
    assert_eq!(log.stats().pages_pre_erased, 0);
    for f in &frames[..6] {
        fl.result(f, &mut log).unwrap();
    }
    let front = health_frame(100);
    fl.front_detected(&front, &mut log).unwrap();
    for f in &frames[6..26] {
        fl.result(f, &mut log).unwrap();
    }
    assert_eq!(fl.state(), LoggerState::Armed);
    assert_eq!(fl.stats().logged, 25);
    assert_eq!(fl.stats().no_space, 0);
    let got = read_all(&mut log);
    assert_eq!(got.len(), 25);
    assert_eq!(
        log.into_inner().erases,
        at_arm,
        "an erase inside the capture"
    );
}

/// Out of prepared space inside a capture: no erase, the capture ends, the frames that
/// did not fit are counted, and those logged read back; the control (erase inside the
/// capture allowed) erases and logs them all.
#[test]
fn capture_out_of_prepared_space_stops_counted() {
    for erase_in_capture in [false, true] {
        let mut log = Logbook::mount(SimFlash::<4>::new(vec![0; 4 * PAGE], None, 1)).unwrap();
        // The longest frame (seq 999, a start past 2^16): a page holds at least per_page.
        let len = window_frame(999, 1 << 20).len();
        let per_page = log.records_per_page(len) as u32;
        // A capture of two pages' worth; room prepared for one page.
        let cap = 2 * per_page;
        let mut fl: FieldLogger<2> = FieldLogger::new(cap);
        let frames: Vec<Vec<u8>> = (0..cap)
            .map(|i| window_frame(i as u16, i as u64 * 400))
            .collect();
        fl.set_reserve(per_page, len);
        fl.set_erase_in_capture(erase_in_capture);
        fl.arm();
        assert!(fl.prepare(&mut log).unwrap());
        let f = log.into_inner();
        let at_arm = f.erases;
        assert_eq!(at_arm, 1);
        let mut log = Logbook::mount(f).unwrap();
        assert!(fl.prepare(&mut log).unwrap());
        fl.front_detected(&window_frame(999, 0), &mut log).unwrap();
        let mut refused = 0;
        for fr in &frames {
            if fl.result(fr, &mut log) == Err(LogError::NotPrepared) {
                refused += 1;
            }
        }
        let st = *fl.stats();
        let ready = fl.ready(&log);
        let got = read_all(&mut log);
        let erases = log.into_inner().erases - at_arm;
        if erase_in_capture {
            assert_eq!(st.logged, cap + 1);
            assert_eq!(got.len() as u32, cap + 1);
            assert!(erases >= 1);
            assert_eq!(st.no_space, 0);
        } else {
            assert_eq!(erases, 0, "an erase inside the capture");
            assert_eq!(st.captures_cut, 1);
            assert_eq!(st.no_space, 1);
            assert_eq!(refused, 1);
            assert!(st.logged >= per_page && st.logged < cap);
            assert_eq!(got.len() as u32, st.logged);
            assert_eq!(fl.state(), LoggerState::Armed);
            assert!(!ready);
        }
    }
}

/// Power cuts inside `prepare` on a recycling ring: the log always mounts, holds only
/// acknowledged records in order, and keeps every record of its head page.
#[test]
fn power_cuts_while_preparing() {
    let mut rng = StdRng::seed_from_u64(0x9E_E5E);
    let mut mem = Some(vec![0xFF; 6 * PAGE]);
    let mut acked: Vec<Vec<u8>> = Vec::new();
    let mut pre_erased = 0;
    for cycle in 0..400 {
        let f = SimFlash::<4>::new(mem.take().unwrap(), None, rng.random());
        let mut log = Logbook::mount(f).expect("mount");
        for _ in 0..rng.random_range(1..20) {
            let rec = random_record(&mut rng, 300);
            log.append(&rec).unwrap();
            acked.push(rec);
        }
        let mut f = log.into_inner();
        f.budget = Some(rng.random_range(0..4));
        let mut log = Logbook::mount(f).expect("mount");
        let r = log.prepare(rng.random_range(1..60), 300);
        pre_erased += log.stats().pages_pre_erased;
        let mut f = log.into_inner();
        f.dead = false;
        f.budget = None;
        let mut log = Logbook::mount(f).expect("mount after a cut");
        let got = read_all(&mut log);
        // In order, each acknowledged: a subsequence of `acked`.
        let mut it = acked.iter();
        for g in &got {
            assert!(
                it.any(|a| a == g),
                "cycle {cycle}: a record out of order or never appended"
            );
        }
        assert_eq!(
            got.last(),
            acked.last(),
            "cycle {cycle}: the newest record lost"
        );
        if r.is_ok() {
            // Prepared without a cut: every record not given up is still there.
            assert!(!got.is_empty());
        }
        mem = Some(log.into_inner().mem);
    }
    assert!(pre_erased > 50, "only {pre_erased} pages erased ahead");
}
