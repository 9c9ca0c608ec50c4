//! `frothline tipcheck --port`: check every tip of a live device from the tip-health
//! frames it sends (wire kind 0x09: per tip the levels in use, interfaces, flags of its
//! latest window), and with `--set-levels` fix the levels the device has learnt with
//! SetLevels commands (0x26), one per tip, each answered by an Ack or a Nack.
//!
//! The session listens for `--listen` seconds (a dip in still water, then air, or a stretch
//! of flow), keeps each tip's latest report, then prints per tip the levels, swing and
//! interfaces per second, and flags: `not_learnt` (no levels, or the tip's
//! `levels_not_learnt` flag), `stuck` (the tip's `stuck` flag, or no interface in its
//! window), `small_swing` (below 10 % of the 16-bit range, as the capture check), `moved`
//! (a level off the layout's fixed one by more than `--tolerance` of the swing; a device
//! works in ADC counts, so the layout's levels are read as counts). Noise and interface
//! rise times need the raw samples, which a device does not send: check a capture of the
//! same tips for them.

use crate::live::watch::{Ui, WatchOptions};
use crate::live::watch_control::Control;
use crate::shared::commands::Command;
use crate::shared::error::HostError;
use crate::shared::layout::Layout;
use crate::shared::session::Event;
use frothline_core::wire::{Kind, LevelsInUse, NackReason, SetLevels, TipReport, TipState};
use frothline_core::Flags;
use std::collections::BTreeMap;
use std::fmt::Write as _;
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::{mpsc, Arc};
use std::time::{Duration, Instant};

/// One tip as the device reported it.
#[derive(Clone, Debug, PartialEq)]
pub struct LiveTip {
    /// Device id.
    pub device: u16,
    /// Probe name (layout) and index.
    pub probe: String,
    /// Probe index on the device.
    pub probe_index: u8,
    /// Trailing tip (false: leading).
    pub trailing: bool,
    /// Levels in use (air, water), counts.
    pub levels: Option<(i16, i16)>,
    /// |water - air|, counts.
    pub swing: Option<u16>,
    /// Interfaces per second over the reported window.
    pub interfaces_per_s: Option<f32>,
    /// Flags raised (names).
    pub flags: Vec<&'static str>,
    /// The device's answer to SetLevels for this tip: None when not sent, Some(None) for
    /// an Ack, Some(Some(reason)) for a Nack.
    pub set: Option<Option<NackReason>>,
    /// From the device's latest levels-in-use frame (kind 0x0A): true if the tip's levels
    /// are fixed (kept in the device's settings), false if learnt; None if none came.
    pub fixed: Option<bool>,
}

/// What a live check found.
#[derive(Clone, Debug, Default)]
pub struct LiveReport {
    /// One row per reported tip, by device, probe, leading first.
    pub tips: Vec<LiveTip>,
    /// Seconds listened.
    pub listened_s: f64,
    /// Devices reported whose sample rate is not known (no description came).
    pub undescribed: Vec<u16>,
}

fn flags_of(
    t: &TipState,
    frames: u32,
    fixed: Option<crate::shared::layout::FixedLevels>,
    tol: f64,
) -> Vec<&'static str> {
    let f = Flags(t.flags);
    let mut v = Vec::new();
    if t.levels.is_none() || f.contains(Flags::LEVELS_NOT_LEARNT) {
        v.push("not_learnt");
    }
    if f.contains(Flags::STUCK)
        || f.contains(Flags::TRAILING_STUCK)
        || (frames > 0 && t.interfaces == 0)
    {
        v.push("stuck");
    }
    if let Some(l) = t.levels {
        let swing = l.swing();
        if swing < crate::live::dashboard_tips::SMALL_SWING_COUNTS {
            v.push("small_swing");
        }
        if let Some(fx) = fixed {
            let s = swing as f64;
            if (fx.air - l.air as f64).abs() > tol * s
                || (fx.water - l.water as f64).abs() > tol * s
            {
                v.push("moved");
            }
        }
    }
    v
}

/// One tip's row: `t` over a window of `frames` frames (0: no window, the levels only) at
/// `fs` Hz, flagged against `layout`'s levels for probe `probe`.
#[allow(clippy::too_many_arguments)]
fn tip_row(
    device: u16,
    probe: u8,
    trailing: bool,
    t: &TipState,
    frames: u32,
    fs: f32,
    layout: &Layout,
    tolerance: f64,
) -> LiveTip {
    let p = layout.probes.get(probe as usize);
    LiveTip {
        device,
        probe: p.map_or_else(|| format!("p{probe}"), |p| p.name.clone()),
        probe_index: probe,
        trailing,
        levels: t.levels.map(|l| (l.air, l.water)),
        swing: t.levels.map(|l| l.swing()),
        interfaces_per_s: t.interfaces_per_s(frames, fs),
        flags: flags_of(t, frames, p.and_then(|p| p.tip_levels(trailing)), tolerance),
        set: None,
        fixed: None,
    }
}

/// The rows of the latest reports, against `layout`; then the tips that only the
/// levels-in-use frames (`in_use`, per device) named (a device outside a run closes no
/// window, so it sends no tip-health report), with the levels they carry and nothing of
/// switching. Every row takes its `fixed` from `in_use`.
pub fn rows(
    reports: &BTreeMap<(u16, u8), TipReport>,
    rates: &BTreeMap<u16, f32>,
    in_use: &BTreeMap<u16, LevelsInUse>,
    layout: &Layout,
    tolerance: f64,
) -> Vec<LiveTip> {
    let mut out = Vec::new();
    for (&(device, probe), r) in reports {
        let fs = rates.get(&device).copied().unwrap_or(0.0);
        for (trailing, t) in [(false, Some(&r.leading)), (true, r.trailing.as_ref())] {
            if let Some(t) = t {
                out.push(tip_row(
                    device, probe, trailing, t, r.frames, fs, layout, tolerance,
                ));
            }
        }
    }
    for (&device, levels) in in_use {
        for (probe, p) in levels.iter().enumerate() {
            let probe = probe as u8;
            if reports.contains_key(&(device, probe)) {
                continue;
            }
            for (trailing, s) in [(false, Some(&p.leading)), (true, p.trailing.as_ref())] {
                let Some(s) = s else { continue };
                let state = TipState {
                    levels: s.levels,
                    interfaces: 0,
                    bubbles: 0,
                    void_fraction: 0,
                    flags: 0,
                };
                out.push(tip_row(
                    device, probe, trailing, &state, 0, 0.0, layout, tolerance,
                ));
            }
        }
    }
    out.sort_by_key(|t| (t.device, t.probe_index, t.trailing));
    for t in &mut out {
        t.fixed = in_use
            .get(&t.device)
            .and_then(|l| l.get(t.probe_index as usize))
            .and_then(|p| {
                if t.trailing {
                    p.trailing.map(|s| s.fixed)
                } else {
                    Some(p.leading.fixed)
                }
            });
    }
    out
}

/// What a check of a live device needs (the `tipcheck --port` options).
#[derive(Clone, Debug)]
pub struct LiveCheck {
    /// The rig layout (TOML), for probe names and the levels to compare against.
    pub layout: std::path::PathBuf,
    /// Baud rate of the port.
    pub baud: u32,
    /// Seconds to listen before the table (and the SetLevels).
    pub listen: f64,
    /// Fix the levels the device has learnt, one SetLevels command per tip.
    pub set_levels: bool,
    /// A level that moved from the layout's by more than this fraction of the swing is
    /// flagged `moved`.
    pub tolerance: f64,
}

/// Listen to the device on `port`, print the table, and set the levels if asked.
pub fn run(args: &LiveCheck, port: &str) -> Result<LiveReport, HostError> {
    let layout = Layout::load(&args.layout)?;
    if !(args.listen.is_finite() && args.listen > 0.0) {
        return Err(HostError::Usage(format!(
            "--listen {}: give a positive number of seconds",
            args.listen
        )));
    }
    let listen = Duration::from_secs_f64(args.listen);
    let opts = WatchOptions {
        ports: vec![port.to_string()],
        baud: args.baud,
        dir: None,
        layout: Some(layout.clone()),
        layout_text: None,
        ui: Ui::Silent,
        // Room after listening for the SetLevels answers.
        duration: Some(listen + Duration::from_secs(5)),
        startup: vec![],
        view: Default::default(),
        wait_for_port: false,
    };
    let (tx, rx) = mpsc::channel();
    let stop = Arc::new(AtomicBool::new(false));
    let mut reports: BTreeMap<(u16, u8), TipReport> = BTreeMap::new();
    let mut rates: BTreeMap<u16, f32> = BTreeMap::new();
    // The latest levels-in-use frame of each device, and whether one came after every
    // SetLevels was answered (the read-back).
    let mut in_use: BTreeMap<u16, LevelsInUse> = BTreeMap::new();
    let mut read_back = false;
    // SetLevels sent: (device, probe, trailing) in order, and their answers in order.
    let mut sent: Vec<(u16, u8, bool)> = Vec::new();
    let mut answers: Vec<Option<NackReason>> = Vec::new();
    let mut asked = false;
    let t0 = Instant::now();
    {
        let stop2 = stop.clone();
        crate::live::watch::run_controlled(
            opts,
            stop,
            &mut |e| {
                match e {
                    Event::Describe { device, desc, .. } => {
                        rates.insert(*device, desc.sample_rate_millihz as f32 / 1000.0);
                    }
                    // Reports are kept until the SetLevels go out: a device rebuilds its
                    // chain for them, and the windows after it learn again.
                    Event::TipHealth { device, tips, .. } if !asked => {
                        for r in tips {
                            reports.insert((*device, r.probe), *r);
                        }
                    }
                    Event::Levels { device, levels, .. } => {
                        in_use.insert(*device, levels.clone());
                        read_back |= asked && answers.len() >= sent.len();
                    }
                    Event::Reply {
                        command: Some(Kind::SetLevels),
                        nack,
                        ..
                    } => answers.push(*nack),
                    _ => {}
                }
                if t0.elapsed() < listen {
                    return;
                }
                if args.set_levels && !asked {
                    asked = true;
                    for (&(device, probe), r) in &reports {
                        for (trailing, t) in
                            [(false, Some(&r.leading)), (true, r.trailing.as_ref())]
                        {
                            let Some(l) = t.and_then(|t| t.levels) else {
                                continue;
                            };
                            sent.push((device, probe, trailing));
                            let _ = tx.send(Control::Command(Command::SetLevels(SetLevels {
                                probe,
                                trailing,
                                air: l.air,
                                water: l.water,
                            })));
                        }
                    }
                }
                // With --set-levels, on until the levels in use come back after the last
                // answer (the device sends them once a SetLevels has taken effect).
                if !args.set_levels
                    || (answers.len() >= sent.len() && (read_back || sent.is_empty()))
                {
                    stop2.store(true, Ordering::Relaxed);
                }
            },
            rx,
        )?;
    }
    let mut tips = rows(&reports, &rates, &in_use, &layout, args.tolerance);
    for (k, key) in sent.iter().enumerate() {
        if let Some(t) = tips
            .iter_mut()
            .find(|t| (t.device, t.probe_index, t.trailing) == *key)
        {
            t.set = Some(
                answers
                    .get(k)
                    .copied()
                    .unwrap_or(Some(NackReason::Other(0))),
            );
            // Read back: an acknowledged SetLevels must show in the levels the device
            // reported after it, fixed and equal.
            if t.set == Some(None) {
                let kept = in_use
                    .get(&t.device)
                    .and_then(|l| l.get(t.probe_index as usize))
                    .and_then(|p| {
                        if t.trailing {
                            p.trailing
                        } else {
                            Some(p.leading)
                        }
                    });
                let same =
                    kept.is_some_and(|k| k.fixed && k.levels.map(|l| (l.air, l.water)) == t.levels);
                if !same {
                    t.flags.push("not_kept");
                }
            }
        }
    }
    let undescribed = reports
        .keys()
        .map(|k| k.0)
        .filter(|d| !rates.contains_key(d))
        .collect::<std::collections::BTreeSet<_>>()
        .into_iter()
        .collect();
    let report = LiveReport {
        tips,
        listened_s: t0.elapsed().as_secs_f64(),
        undescribed,
    };
    crate::shared::stdout::print(&table(&report, port, args.set_levels));
    Ok(report)
}

/// The printed table.
pub fn table(r: &LiveReport, port: &str, set: bool) -> String {
    let mut o = String::new();
    let _ = writeln!(
        o,
        "tips of the device on {port}, latest reports over {:.1} s (levels in counts):",
        r.listened_s
    );
    let _ = writeln!(
        o,
        "{:<12} {:<8} {:>7} {:>7} {:>6} {:>7} {:<6}  {:<10} flags",
        "probe",
        "tip",
        "air",
        "water",
        "swing",
        "if/s",
        "levels",
        if set { "set" } else { "" }
    );
    let num = |v: Option<String>| v.unwrap_or_else(|| "-".into());
    for t in &r.tips {
        let set_word = match &t.set {
            None => "".to_string(),
            Some(None) => "ack".to_string(),
            Some(Some(n)) => format!("refused: {}", crate::shared::session::nack_text(*n)),
        };
        let _ = writeln!(
            o,
            "{:<12} {:<8} {:>7} {:>7} {:>6} {:>7} {:<6}  {:<10} {}",
            t.probe,
            if t.trailing { "trailing" } else { "leading" },
            num(t.levels.map(|l| l.0.to_string())),
            num(t.levels.map(|l| l.1.to_string())),
            num(t.swing.map(|s| s.to_string())),
            num(t.interfaces_per_s.map(|x| format!("{x:.0}"))),
            match t.fixed {
                Some(true) => "fixed",
                Some(false) => "learnt",
                None => "-",
            },
            set_word,
            if t.flags.is_empty() {
                "-".to_string()
            } else {
                t.flags.join(" ")
            }
        );
    }
    if r.tips.is_empty() {
        let _ = writeln!(
            o,
            "no tip-health report and no levels-in-use frame came: a device sends its levels after each description and tip-health reports after each health frame (about once a second) from the windows of a run; start a run (`frothline watch --port P --start-run LABEL`), listen longer (--listen), or the device's firmware may not send kinds 0x09 and 0x0A"
        );
    }
    for d in &r.undescribed {
        let _ = writeln!(
            o,
            "device {d} sent no description while listening: its sample rate is not known, so interfaces per second are left out"
        );
    }
    let _ = writeln!(
        o,
        "noise and interface rise times need the raw samples: check a capture of the same tips for them"
    );
    o
}
