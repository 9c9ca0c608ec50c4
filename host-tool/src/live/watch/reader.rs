//! The reader threads: one per port, opening it, gathering its bytes and reopening it
//! after a loss, and the messages they send to the main loop.

use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::mpsc::Sender;
use std::sync::Arc;
use std::time::{Duration, Instant};

pub use crate::shared::serial_port::{open_port, READ_TIMEOUT};

/// Pause between attempts to reopen a lost port.
pub const REOPEN_EVERY: Duration = Duration::from_secs(1);

/// What the reader threads tell the main loop.
pub(super) enum LinkMsg {
    Opened {
        port: usize,
        t_us: u64,
        writer: Option<Box<dyn serialport::SerialPort>>,
    },
    OpenFailed {
        port: usize,
        reason: String,
    },
    Bytes {
        port: usize,
        t_us: u64,
        bytes: Vec<u8>,
    },
    Lost {
        port: usize,
        t_us: u64,
        reason: String,
    },
}

fn sleep_unless(stop: &AtomicBool, d: Duration) {
    let end = Instant::now() + d;
    while !stop.load(Ordering::Relaxed) {
        let now = Instant::now();
        if now >= end {
            break;
        }
        std::thread::sleep((end - now).min(Duration::from_millis(25)));
    }
}

/// Reads of one port are gathered for this long (from the first byte) before they go to the
/// session as one piece: at low baud rates a read returns a byte or two, and an archive
/// chunk per read would cost more than the bytes. 50 ms is 24 bytes at 4800 Bd and
/// 576 bytes at 115200 Bd; the live view lags by at most this much.
pub const GATHER: Duration = Duration::from_millis(50);

/// Most bytes gathered before they go out anyway.
const GATHER_BYTES: usize = 4096;

/// Bytes read from a port and not yet handed on, with the arrival time of the first.
#[derive(Default)]
struct Batch {
    bytes: Vec<u8>,
    first: Option<(Instant, u64)>,
}

impl Batch {
    fn add(&mut self, b: &[u8]) {
        if self.first.is_none() {
            self.first = Some((Instant::now(), crate::shared::archive::now_us()));
        }
        self.bytes.extend_from_slice(b);
    }

    fn due(&self) -> bool {
        self.bytes.len() >= GATHER_BYTES || self.first.is_some_and(|(t, _)| t.elapsed() >= GATHER)
    }

    /// Hand the bytes on (nothing if none): an error when the session is gone.
    fn send(&mut self, port: usize, tx: &Sender<LinkMsg>) -> Result<(), ()> {
        let Some((_, t_us)) = self.first.take() else {
            return Ok(());
        };
        let bytes = std::mem::take(&mut self.bytes);
        tx.send(LinkMsg::Bytes { port, t_us, bytes })
            .map_err(|_| ())
    }
}

pub(super) fn reader(
    port: usize,
    path: String,
    baud: u32,
    tx: Sender<LinkMsg>,
    stop: Arc<AtomicBool>,
) {
    let mut last_failure = String::new();
    while !stop.load(Ordering::Relaxed) {
        match open_port(&path, baud) {
            Ok(mut p) => {
                last_failure.clear();
                let writer = p.try_clone().ok();
                if tx
                    .send(LinkMsg::Opened {
                        port,
                        t_us: crate::shared::archive::now_us(),
                        writer,
                    })
                    .is_err()
                {
                    return;
                }
                let mut buf = vec![0u8; 4096];
                let mut batch = Batch::default();
                loop {
                    if stop.load(Ordering::Relaxed) {
                        let _ = batch.send(port, &tx);
                        return;
                    }
                    let lost = match p.read(&mut buf) {
                        Ok(0) => Some("the port reported end of input".to_string()),
                        Ok(n) => {
                            batch.add(&buf[..n]);
                            None
                        }
                        Err(e) => match e.kind() {
                            std::io::ErrorKind::TimedOut
                            | std::io::ErrorKind::WouldBlock
                            | std::io::ErrorKind::Interrupted => None,
                            _ => Some(e.to_string()),
                        },
                    };
                    if (lost.is_some() || batch.due()) && batch.send(port, &tx).is_err() {
                        return;
                    }
                    if let Some(reason) = lost {
                        let msg = LinkMsg::Lost {
                            port,
                            t_us: crate::shared::archive::now_us(),
                            reason,
                        };
                        if tx.send(msg).is_err() {
                            return;
                        }
                        break;
                    }
                }
            }
            Err(e) => {
                let reason = e.to_string();
                if reason != last_failure {
                    last_failure = reason.clone();
                    if tx.send(LinkMsg::OpenFailed { port, reason }).is_err() {
                        return;
                    }
                }
            }
        }
        sleep_unless(&stop, REOPEN_EVERY);
    }
}
