//! Bytes received on a port: decoded into frames, checked for sequence gaps and CRC
//! failures, and turned into events and output rows.

use super::{Event, Rejected, RunMark, SeqGap, Session, SessionReport};
use crate::shared::error::HostError;
use frothline_core::wire::{Body, FeedResult, NackReason, SeqCheck};

impl Session {
    /// Bytes received on `port` at `t_us`: archived first, then decoded.
    pub fn received(
        &mut self,
        port: usize,
        t_us: u64,
        bytes: &[u8],
    ) -> Result<Vec<Event>, HostError> {
        self.archive_do(|a| a.append(port as u16, t_us, bytes))?;
        self.now_us = t_us;
        let mut events = Vec::new();
        let mut frames = Vec::new();
        {
            let Some(p) = self.ports.get_mut(port) else {
                return Ok(events);
            };
            p.bytes += bytes.len() as u64;
            let mut rest = bytes;
            while !rest.is_empty() {
                let r = p.decoder.feed(rest);
                rest = r.remaining();
                match r {
                    FeedResult::Consumed => break,
                    FeedResult::Frame { frame, seq, .. } => frames.push((frame, seq)),
                    FeedResult::Unsupported { header, seq, .. } => {
                        if let SeqCheck::Gap(n) = seq {
                            push_gap(
                                &mut self.report,
                                &mut events,
                                port,
                                header.device,
                                header.seq,
                                n,
                                t_us,
                            );
                        }
                        events.push(Event::Unsupported { port, header });
                    }
                    FeedResult::BadFraming { .. } => events.push(Event::Rejected {
                        port,
                        why: Rejected::Framing,
                    }),
                    FeedResult::CrcFailure { .. } => events.push(Event::Rejected {
                        port,
                        why: Rejected::Crc,
                    }),
                    FeedResult::Malformed { .. } => events.push(Event::Rejected {
                        port,
                        why: Rejected::Malformed,
                    }),
                    FeedResult::Oversize { .. } => events.push(Event::Rejected {
                        port,
                        why: Rejected::Oversize,
                    }),
                }
            }
        }
        for (frame, seq) in frames {
            let device = frame.device;
            match seq {
                SeqCheck::Gap(n) => push_gap(
                    &mut self.report,
                    &mut events,
                    port,
                    device,
                    frame.seq,
                    n,
                    t_us,
                ),
                SeqCheck::Duplicate => {
                    events.push(Event::Duplicate {
                        port,
                        device,
                        seq: frame.seq,
                    });
                    continue;
                }
                SeqCheck::Restarted => events.push(Event::Restarted { port, device }),
                _ => {}
            }
            self.frame(port, device, t_us, frame.body, &mut events)?;
        }
        self.flush()?;
        Ok(events)
    }

    fn frame(
        &mut self,
        port: usize,
        device: u16,
        t_us: u64,
        body: Body,
        events: &mut Vec<Event>,
    ) -> Result<(), HostError> {
        let kind = body.kind();
        if !kind.is_from_device() {
            events.push(Event::Stray { port, device, kind });
            return Ok(());
        }
        match body {
            Body::Describe(desc) => {
                self.describe(port, device, &desc)?;
                events.push(Event::Describe { port, device, desc });
            }
            Body::Windows(ws) => {
                for w in ws {
                    self.window(port, device, w, None)?;
                    events.push(Event::Window {
                        port,
                        device,
                        result: w,
                    });
                }
            }
            Body::FullWindows(fs) => {
                for f in fs {
                    self.window(port, device, f.result, Some(f.extras))?;
                    events.push(Event::Window {
                        port,
                        device,
                        result: f.result,
                    });
                }
            }
            Body::Front(front) => {
                self.front(port, device, &front)?;
                events.push(Event::Front {
                    port,
                    device,
                    front,
                });
            }
            Body::Profile(fit) => {
                self.profile(port, device, &fit)?;
                events.push(Event::Profile { port, device, fit });
            }
            Body::RunStart(run) => {
                // A new run: its frame numbers count from 0 again, earlier fronts no longer
                // apply.
                if let Some(d) = self.devices.get_mut(&(port, device)) {
                    d.fronts.clear();
                }
                self.runs
                    .started(port, device, run.label.as_str().to_string(), t_us);
                self.report.runs.push(RunMark {
                    port,
                    device,
                    run: run.clone(),
                    host_time_us: t_us,
                });
                events.push(Event::RunStart { port, device, run });
            }
            Body::Health(health) => events.push(Event::Health {
                port,
                device,
                health,
            }),
            Body::DeviceStatus(status) => {
                self.status(port, device, &status)?;
                events.push(Event::Status {
                    port,
                    device,
                    status,
                });
            }
            Body::Derived(ds) => {
                for d in &ds {
                    self.derived(port, device, d)?;
                }
            }
            Body::TipHealth(tips) => {
                self.tip_health(port, device, &tips)?;
                events.push(Event::TipHealth { port, device, tips });
            }
            Body::Levels(levels) => events.push(Event::Levels {
                port,
                device,
                levels,
            }),
            Body::Ack(a) => self.reply(port, device, a.seq, None, events),
            Body::Nack(n) => self.reply(port, device, n.seq, Some(n.reason), events),
            _ => events.push(Event::Stray { port, device, kind }),
        }
        Ok(())
    }

    fn reply(
        &mut self,
        port: usize,
        device: u16,
        seq: u16,
        nack: Option<NackReason>,
        events: &mut Vec<Event>,
    ) {
        let command = self.ports.get(port).and_then(|p| p.commands.kind_of(seq));
        events.push(Event::Reply {
            port,
            device,
            seq,
            command,
            nack,
        });
    }
}

fn push_gap(
    report: &mut SessionReport,
    events: &mut Vec<Event>,
    port: usize,
    device: u16,
    seq: u16,
    missing: u16,
    t_us: u64,
) {
    report.seq_gaps.push(SeqGap {
        port,
        device,
        seq,
        missing,
        host_time_us: t_us,
    });
    events.push(Event::SeqGap {
        port,
        device,
        seq,
        missing,
    });
}
