//! The end of a live session: the link is drained before it is closed.
//!
//! When a session ends (its duration is over, `q`, Ctrl-C), bytes the device already sent
//! are still on their way: in the port's buffers, in a reader's batch (gathered for up to
//! [`crate::live::watch::GATHER`]), in the channel to the session. Closing at once drops the last
//! frames (a 12 s demo lost 4 of 480 window results). So the session first tells whoever
//! asked to be told (the demo stops its simulated device there), then keeps taking what
//! the readers hand on until the link has been quiet for [`QUIET`], or for at most
//! [`DRAIN_MAX`] in all (a device that keeps streaming is read up to a quiet gap between
//! its frames, never for ever).

use std::sync::mpsc::{Receiver, RecvTimeoutError};
use std::time::{Duration, Instant};

/// Silence on the link that ends the drain: longer than a reader's gathering time, so a
/// batch still being gathered is not taken for silence.
pub const QUIET: Duration = Duration::from_millis(150);

/// Longest drain.
pub const DRAIN_MAX: Duration = Duration::from_secs(2);

/// What a drain did.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct Drained {
    /// Messages taken.
    pub messages: u64,
    /// True if it stopped at [`DRAIN_MAX`] rather than at a quiet link.
    pub cut: bool,
}

/// Take messages from `rx` into `handle` until none came for `quiet`, the senders are gone,
/// or `max` has passed; the first error of `handle` ends it.
pub fn drain<M, E>(
    rx: &Receiver<M>,
    quiet: Duration,
    max: Duration,
    mut handle: impl FnMut(M) -> Result<(), E>,
) -> Result<Drained, E> {
    let start = Instant::now();
    let mut out = Drained::default();
    loop {
        let left = max.saturating_sub(start.elapsed());
        if left.is_zero() {
            out.cut = true;
            return Ok(out);
        }
        match rx.recv_timeout(quiet.min(left)) {
            Ok(m) => {
                out.messages += 1;
                handle(m)?;
            }
            Err(RecvTimeoutError::Timeout) => {
                out.cut = start.elapsed() >= max;
                return Ok(out);
            }
            Err(RecvTimeoutError::Disconnected) => return Ok(out),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::sync::mpsc;

    /// Messages sent before the drain and in bursts closer than the quiet time are all
    /// taken; the drain ends at the first silence (the sender is still alive).
    #[test]
    fn drain_takes_everything_sent_until_the_link_is_quiet() {
        let (tx, rx) = mpsc::channel();
        for i in 0..5 {
            tx.send(i).unwrap();
        }
        let t = std::thread::spawn(move || {
            for i in 5..10 {
                std::thread::sleep(Duration::from_millis(20));
                tx.send(i).unwrap();
            }
            // Silence, then one more that the drain must not wait for.
            std::thread::sleep(Duration::from_millis(2500));
            let _ = tx.send(99);
        });
        let mut got = Vec::new();
        let d = drain(
            &rx,
            Duration::from_millis(600),
            Duration::from_secs(30),
            |m| {
                got.push(m);
                Ok::<(), ()>(())
            },
        )
        .unwrap();
        assert_eq!(got, (0..10).collect::<Vec<_>>());
        assert_eq!(
            d,
            Drained {
                messages: 10,
                cut: false
            }
        );
        t.join().unwrap();
    }

    /// A sender that never falls silent is read for the longest drain, then left.
    #[test]
    fn drain_of_an_endless_stream_stops_at_its_longest() {
        let (tx, rx) = mpsc::channel();
        let stop = std::sync::Arc::new(std::sync::atomic::AtomicBool::new(false));
        let s = stop.clone();
        let t = std::thread::spawn(move || {
            while !s.load(std::sync::atomic::Ordering::Relaxed) {
                let _ = tx.send(1u8);
                std::thread::sleep(Duration::from_millis(1));
            }
        });
        let d = drain(
            &rx,
            Duration::from_millis(200),
            Duration::from_millis(300),
            |_| Ok::<(), ()>(()),
        )
        .unwrap();
        stop.store(true, std::sync::atomic::Ordering::Relaxed);
        t.join().unwrap();
        assert!(d.cut);
        assert!(d.messages > 0);
    }

    /// An error of the handler ends the drain with that error.
    #[test]
    fn drain_stops_at_the_first_error() {
        let (tx, rx) = mpsc::channel();
        for i in 0..3 {
            tx.send(i).unwrap();
        }
        drop(tx);
        let mut seen = 0;
        let r = drain(&rx, QUIET, DRAIN_MAX, |m| {
            seen += 1;
            if m == 1 {
                Err("bad")
            } else {
                Ok(())
            }
        });
        assert_eq!(r, Err("bad"));
        assert_eq!(seen, 2);
    }
}
