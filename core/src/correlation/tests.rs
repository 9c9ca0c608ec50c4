//! Checks of the correlation sums, the correlator and the analysis against direct sums and
//! analytic cases.

use super::analysis::sqrt;
use super::*;
use crate::phase::{Edge, EdgeSink};

/// Direct sums over samples (definition in the module documentation).
fn direct(a: &[bool], b: &[bool], lags: usize) -> (std::vec::Vec<u64>, std::vec::Vec<u64>) {
    let n = a.len();
    let mut cross = std::vec![0u64; lags];
    let mut auto = std::vec![0u64; lags];
    for tau in 0..lags {
        for t in 0..n.saturating_sub(tau) {
            cross[tau] += (a[t] & b[t + tau]) as u64;
            auto[tau] += (a[t] & a[t + tau]) as u64;
        }
    }
    (cross, auto)
}

fn edges(x: &[bool], first: u64, start_air: bool) -> std::vec::Vec<Edge> {
    let mut out = std::vec::Vec::new();
    let mut prev = start_air;
    for (i, &v) in x.iter().enumerate() {
        if v != prev {
            out.push(Edge {
                frame: first + i as u64,
                to_air: v,
            });
        }
        prev = v;
    }
    out
}

extern crate std;

/// The lag-by-lag stage a 32-bit core runs gives the chunked stage's coefficients, bit
/// for bit (up to the first lag at or below 0 when stopping there): random binary
/// signals of several void fractions and lengths, both functions.
#[test]
fn lag_by_lag_fill_equals_chunked_fill() {
    let mut next = crate::test_rng::xorshift(0x853C_49E6_748F_EA9B);
    for case in 0..60u64 {
        let n = 50 + (next() % 3000) as usize;
        let p_flip = 1 + next() % 40;
        let (mut a, mut b) = (std::vec::Vec::new(), std::vec::Vec::new());
        let (mut sa, mut sb) = (false, false);
        for _ in 0..n {
            sa ^= next() % 100 < p_flip;
            sb ^= next() % 100 < p_flip;
            a.push(sa);
            b.push(sb);
        }
        let mut c = Correlator::<64>::new((20 + case % 44) as u16, 0, false, false);
        let (ea, eb) = (edges(&a, 0, false), edges(&b, 0, false));
        let (mut i, mut j) = (0, 0);
        while i < ea.len() || j < eb.len() {
            if j >= eb.len() || (i < ea.len() && ea[i].frame <= eb[j].frame) {
                c.lead_in_order().edge(ea[i]);
                i += 1;
            } else {
                c.trail_in_order().edge(eb[j]);
                j += 1;
            }
        }
        let mut flags = Flags::NONE;
        let sums = c.close(n as u64, &mut flags);
        let v = sums.view();
        let lags = v.lags();
        for auto in [false, true] {
            for stop in [false, true] {
                let (prod, second, total) = if auto {
                    (v.auto, v.lead_head, v.lead_air)
                } else {
                    (v.cross, v.trail_head, v.trail_air)
                };
                let mut chunked = [f32::NAN; 64];
                let mut single = [f32::NAN; 64];
                let chunked_len = v.fill(&mut chunked, auto, stop);
                let single_len = v.fill_lag_by_lag(
                    &mut single,
                    (&v.lead_tail[..lags], &second[..lags], &prod[..lags]),
                    total,
                    stop,
                );
                assert!(single_len <= chunked_len && chunked_len <= lags);
                if auto && stop {
                    // The analysis of R_aa up to where it stopped is that of the whole
                    // function with the lags after left undefined.
                    let mut rab = [f32::NAN; 64];
                    v.fill(&mut rab, false, false);
                    let (a, fa) = analyse_functions(&rab[..lags], &single[..lags], 0.3);
                    let (b, fb) = analyse_functions(&rab[..lags], &single[..single_len], 0.3);
                    assert_eq!(fa, fb, "case {case}");
                    assert_eq!(
                        a.t05_frames.map(f32::to_bits),
                        b.t05_frames.map(f32::to_bits)
                    );
                    assert_eq!(
                        a.auto_integral_frames.map(f32::to_bits),
                        b.auto_integral_frames.map(f32::to_bits)
                    );
                    assert_eq!(
                        a.turbulence_intensity.map(f32::to_bits),
                        b.turbulence_intensity.map(f32::to_bits)
                    );
                }
                let upto = if stop {
                    chunked[..lags]
                        .iter()
                        .position(|&r| r <= 0.0)
                        .map_or(lags, |k| k + 1)
                } else {
                    lags
                };
                for k in 0..upto {
                    assert_eq!(
                        chunked[k].to_bits(),
                        single[k].to_bits(),
                        "case {case} auto {auto} stop {stop} lag {k}"
                    );
                }
            }
        }
    }
}

/// A window closed with its analysis in place gives the results of the sums it would
/// return, bit for bit, window after window (the next window starts from the same state):
/// random signals, several lag ranges (down to lag 0 alone), windows short enough for the
/// 32-bit stage and longer.
#[test]
fn analysis_in_place_equals_analysis_of_the_sums() {
    let mut next = crate::test_rng::xorshift(0x9E37_79B9_7F4A_7C15);
    for case in 0..40u64 {
        let max_lag = [0u16, 1, 2, 7, 30, 60, 63][case as usize % 7];
        let air = case % 2 == 1;
        let mut inplace = Correlator::<64>::new(max_lag, 0, air, air);
        let mut copied = inplace.clone();
        let (mut sa, mut sb) = (air, air);
        let mut start = 0u64;
        for _ in 0..6 {
            let n = if next().is_multiple_of(8) {
                46_000 + next() % 2_000
            } else {
                10 + next() % 2_000
            };
            let p_flip = 1 + next() % 30;
            // The trailing tip: independent of the leading tip, or its state `delay`
            // frames back (a cross-correlation peak there), or the opposite of it (every
            // coefficient at small lags negative), each with a few flips of its own.
            let (follow, delay) = (case % 3, (next() % (max_lag as u64 + 1)) as usize);
            let mut history = std::collections::VecDeque::from(std::vec![sa; delay]);
            for t in start..start + n {
                let flip_a = next() % 100 < p_flip;
                let own = next() % 100;
                history.push_back(sa ^ flip_a);
                let back = history.pop_front().unwrap_or(sa);
                let flip_b = match follow {
                    0 => own < p_flip,
                    1 => (sb != back) ^ (own < 2),
                    _ => (sb == back) ^ (own < 2),
                };
                for c in [&mut inplace, &mut copied] {
                    if flip_a {
                        c.lead_in_order().edge(Edge {
                            frame: t,
                            to_air: !sa,
                        });
                    }
                    if flip_b {
                        c.trail_in_order().edge(Edge {
                            frame: t,
                            to_air: !sb,
                        });
                    }
                }
                sa ^= flip_a;
                sb ^= flip_b;
            }
            start += n;
            let (mut fa, mut fb) = (Flags::NONE, Flags::NONE);
            let a = inplace.close_analysed(start, 0.3, &mut fa);
            let sums = copied.close(start, &mut fb);
            let (b, f) = sums.analyse(0.3);
            fb |= f;
            assert_eq!(fa, fb, "case {case}");
            assert_eq!(a.max_lag, b.max_lag, "case {case}");
            for (p, q) in [
                (a.peak_lag_frames, b.peak_lag_frames),
                (a.peak_coefficient, b.peak_coefficient),
                (a.secondary_peak_ratio, b.secondary_peak_ratio),
                (a.t05_frames, b.t05_frames),
                (a.tau05_frames, b.tau05_frames),
                (a.turbulence_intensity, b.turbulence_intensity),
                (a.auto_integral_frames, b.auto_integral_frames),
                (a.cross_integral_frames, b.cross_integral_frames),
            ] {
                assert_eq!(p.map(f32::to_bits), q.map(f32::to_bits), "case {case}");
            }
        }
        // And the state they leave is the same: the sums of one more window agree.
        let (mut fa, mut fb) = (Flags::NONE, Flags::NONE);
        assert_eq!(
            inplace.close(start + 100, &mut fa),
            copied.close(start + 100, &mut fb)
        );
    }
}

#[test]
fn sums_equal_direct_sums_on_a_small_case() {
    // A hand-made case with intervals open at both window edges.
    let a: std::vec::Vec<bool> = "1110011000111100000111011"
        .bytes()
        .map(|c| c == b'1')
        .collect();
    let b: std::vec::Vec<bool> = "1011100110001111000001110"
        .bytes()
        .map(|c| c == b'1')
        .collect();
    let mut c = Correlator::<8>::new(7, 100, true, true);
    let mut buf = RunBuffer::new();
    c.begin_run(100, &mut buf);
    for e in edges(&a, 100, true) {
        c.lead(&mut buf).edge(e);
    }
    for e in edges(&b, 100, true) {
        c.trail(&mut buf).edge(e);
    }
    c.end_run(&mut buf);
    let mut flags = Flags::NONE;
    let s = c.close(100 + a.len() as u64, &mut flags);
    let (cross, auto) = direct(&a, &b, 8);
    assert_eq!(s.cross.as_slice(), cross.as_slice());
    assert_eq!(s.auto.as_slice(), auto.as_slice());
    assert_eq!(s.lead_air, a.iter().filter(|&&x| x).count() as u64);
    assert_eq!(s.trail_air, b.iter().filter(|&&x| x).count() as u64);
    for tau in 0..8 {
        let n = a.len() - tau;
        let sa: u64 = a[..n].iter().map(|&x| x as u64).sum();
        let sb: u64 = b[tau..].iter().map(|&x| x as u64).sum();
        let sa2: u64 = a[tau..].iter().map(|&x| x as u64).sum();
        assert_eq!(s.lead_sum(tau), Some(sa), "tau {tau}");
        assert_eq!(s.trail_sum(tau), Some(sb), "tau {tau}");
        assert_eq!(s.lead_lagged_sum(tau), Some(sa2), "tau {tau}");
    }
    assert!(flags.is_empty());
}

/// The lag sums are kept in 32 bits: a window of 2^31 frames or more (14.9 hours at
/// 40 kHz) is flagged rather than given wrapped sums; the next window is clean again.
#[test]
fn a_window_too_long_for_32_bit_sums_is_flagged() {
    let mut c = Correlator::<8>::new(7, 0, false, false);
    let mut flags = Flags::NONE;
    // An edge within the first 2^31 frames, then a close past them.
    c.lead_in_order().edge(Edge {
        frame: 1_000,
        to_air: true,
    });
    c.trail_in_order().edge(Edge {
        frame: 1_003,
        to_air: true,
    });
    let _ = c.close(1 << 31, &mut flags);
    assert!(flags.contains(Flags::CORRELATION_OVERFLOW));
    // An edge past 2^31 frames into its window.
    let start = 1u64 << 31;
    let mut flags = Flags::NONE;
    c.lead_in_order().edge(Edge {
        frame: start + (1 << 31) + 5,
        to_air: false,
    });
    let _ = c.close(start + (1 << 31) + 10, &mut flags);
    assert!(flags.contains(Flags::CORRELATION_OVERFLOW));
    // A short window after it.
    let start = start + (1 << 31) + 10;
    let mut flags = Flags::NONE;
    c.lead_in_order().edge(Edge {
        frame: start + 2,
        to_air: true,
    });
    let _ = c.close(start + 50, &mut flags);
    assert!(!flags.contains(Flags::CORRELATION_OVERFLOW));
}

#[test]
fn sqrt_is_accurate() {
    for x in [1e-6f32, 0.5, 2.0, 3.0, 1e6, 1.234e20, 7.7e30] {
        let r = sqrt(x);
        assert!(((r * r - x) / x).abs() < 3e-7, "{x}: {r}");
    }
    assert_eq!(sqrt(0.0), 0.0);
    assert_eq!(sqrt(-1.0), 0.0);
}

/// Fed tip by tip in runs (the leading tip's edges held in the run buffer, merged as the
/// trailing tip's come), the correlator gives the sums and flags it gives fed in time
/// order, bit for bit: random signals, runs of random lengths, windows that start at
/// frame 0 and far into a window (runs near and past 2^31 frames from its start, where
/// the window times no longer fit 32 bits and the window is flagged).
#[test]
fn runs_of_held_edges_equal_edges_in_time_order() {
    let mut random = crate::test_rng::xorshift(0x2545_F491_4F6C_DD1D);
    let mut next = move |m: u64| random() % m;
    for case in 0..300 {
        let n = 1 + next(700) as usize;
        let p_change = 1 + next(30);
        let mut signal = |start: bool| -> std::vec::Vec<bool> {
            let mut v = start;
            (0..n)
                .map(|_| {
                    if next(p_change) == 0 {
                        v = !v;
                    }
                    v
                })
                .collect()
        };
        let (a0, b0) = (case % 2 == 0, case % 3 == 0);
        let (a, b) = (signal(a0), signal(b0));
        // Where the signals begin, frames into the window.
        let into = match case % 4 {
            0 => 0,
            1 => 3,
            2 => (1u64 << 31) - (1 << 15) - next(1000),
            _ => (1u64 << 31) - next(300),
        };
        let start = next(1 << 20);
        let first = start + into;
        let max_lag = next(40) as u16;
        let end = first + n as u64 + next(5);
        let (ea, eb) = (edges(&a, first, a0), edges(&b, first, b0));

        let mut ordered = Correlator::<40>::new(max_lag, start, a0, b0);
        // Both tips' edges in time order, the leading tip's first at the same frame.
        let (mut i, mut j) = (0, 0);
        while i < ea.len() || j < eb.len() {
            if j >= eb.len() || (i < ea.len() && ea[i].frame <= eb[j].frame) {
                ordered.lead_in_order().edge(ea[i]);
                i += 1;
            } else {
                ordered.trail_in_order().edge(eb[j]);
                j += 1;
            }
        }

        let mut runs = Correlator::<40>::new(max_lag, start, a0, b0);
        let mut buf = RunBuffer::new();
        let mut at = first;
        let (mut i, mut j) = (0, 0);
        while at < first + n as u64 {
            let len = 1 + next(MAX_RUN_FRAMES as u64);
            let stop = (at + len).min(first + n as u64);
            runs.begin_run(at, &mut buf);
            while i < ea.len() && ea[i].frame < stop {
                runs.lead(&mut buf).edge(ea[i]);
                i += 1;
            }
            while j < eb.len() && eb[j].frame < stop {
                runs.trail(&mut buf).edge(eb[j]);
                j += 1;
            }
            runs.end_run(&mut buf);
            at = stop;
        }

        let (mut f1, mut f2) = (Flags::NONE, Flags::NONE);
        let s1 = ordered.close(end, &mut f1);
        let s2 = runs.close(end, &mut f2);
        assert_eq!(
            std::format!("{s1:?}"),
            std::format!("{s2:?}"),
            "case {case}"
        );
        assert_eq!(f1, f2, "case {case}");
        if into == 0 {
            assert!(f1.is_empty(), "case {case}");
            // And the direct sums over the window (the last phases held to its end).
            let hold = |x: &[bool]| {
                let mut v = x.to_vec();
                v.resize((end - start) as usize, *x.last().unwrap_or(&false));
                v
            };
            let (cross, auto) = direct(&hold(&a), &hold(&b), max_lag as usize + 1);
            assert_eq!(s1.cross.as_slice(), cross.as_slice(), "case {case}");
            assert_eq!(s1.auto.as_slice(), auto.as_slice(), "case {case}");
        }
    }
}
