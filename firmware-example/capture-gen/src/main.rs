//! `frothline-capture-gen CAPTURE.wav LAYOUT.toml WINDOW LAGS OUT.rs`
//! `frothline-capture-gen verify-uart CAPTURE.wav LAYOUT.toml WINDOW UART.bin`
//!
//! Writes the firmware's view of a capture as Rust constants (`OUT.rs`, included by the
//! firmware's `src/capture.rs`):
//! - the chain configuration, taken from the host's own replay rig (`replay::open_rig`:
//!   layout parsing and the `rig.rs` mapping of seconds and file units to frames and
//!   counts), so the device and a host replay run the same configuration;
//! - the probe layout for the device-description frame (wire units);
//! - the number and digest of the records a host replay (`replay::run`, the code behind
//!   `frothline replay`) gives for the capture, which the firmware checks its own records
//!   against. The replay runs with the device's causal level rule
//!   (`LevelRule::Device`, `--levels device`): tips without fixed levels learn them during
//!   the record, as the firmware does.
//!
//! `verify-uart` decodes what the firmware sent on its UART (wire frames) and checks that
//! every window result equals the one a host replay of the capture gives, in order, with
//! no frame lost or corrupt.
//!
//! `commands-in OUT.bin` writes the host commands of the firmware's `commands` check (one
//! of every answer of docs/wire-protocol.md section 8) as the bytes QEMU feeds to UART0;
//! `verify-commands UART.bin` checks the firmware's answers to them, in order.
//!
//! `LAGS` is the firmware chain's number of correlation lag slots: every probe's `max_lag`
//! must stay below it, or the device would cap a lag the host does not (the records would
//! differ), and the generator refuses.

#[path = "../../src/digest.rs"]
mod digest;
mod status_check;

use frothline_core::front::FrontConfig;
use frothline_core::profile::ProfileConfig;
use frothline_core::wire::quant;
use frothline_core::{
    ChainConfig, DetectorConfig, LevelSource, Polarity, ProbeConfig, StationConfig, TipConfig,
    WindowPolicy,
};
use frothline_host::offline::replay::{self, ReplayArgs};
use frothline_host::shared::window_spec::WindowSpec;
use std::fmt::Write as _;
use std::path::PathBuf;
use std::process::ExitCode;

fn main() -> ExitCode {
    match run() {
        Ok(()) => ExitCode::SUCCESS,
        Err(e) => {
            eprintln!("frothline-capture-gen: {e}");
            ExitCode::FAILURE
        }
    }
}

fn run() -> Result<(), String> {
    let args: Vec<String> = std::env::args().skip(1).collect();
    if args.first().map(String::as_str) == Some("verify-uart") {
        return verify_uart(&args[1..]);
    }
    if args.first().map(String::as_str) == Some("verify-log") {
        return verify_log(&args[1..]);
    }
    if args.first().map(String::as_str) == Some("commands-in") {
        return commands_in(&args[1..]);
    }
    if args.first().map(String::as_str) == Some("verify-commands") {
        return verify_commands(&args[1..]);
    }
    if args.first().map(String::as_str) == Some("verify-boot") {
        return verify_boot(&args[1..]);
    }
    let [capture, layout, window, lags, out] = args.as_slice() else {
        return Err(
            "usage: frothline-capture-gen CAPTURE.wav LAYOUT.toml WINDOW LAGS OUT.rs".into(),
        );
    };
    let capture = PathBuf::from(capture);
    let layout = PathBuf::from(layout);
    let window: WindowSpec = window.parse()?;
    let lags: usize = lags
        .parse()
        .map_err(|_| format!("LAGS `{lags}` is not a number"))?;

    let (cap, layout_doc, chain) =
        replay::open_rig(&capture, &layout, window.clone()).map_err(|e| e.to_string())?;
    let sample_rate = cap.sample_rate();
    let frames = cap.frames();
    let transient = frothline_host::offline::transient::is_transient(&layout_doc);
    let cfg = if transient {
        station_config(&layout_doc, &cap, &window)?
    } else {
        chain.config().clone()
    };
    drop(chain);

    let tmp = std::env::temp_dir().join(format!("frothline-capture-gen-{}", std::process::id()));
    let report = replay::run(&ReplayArgs {
        capture: capture.clone(),
        layout: layout.clone(),
        out: tmp.clone(),
        window,
        quiet: true,
        levels: frothline_host::offline::record_levels::LevelRule::Device,
        strict: false,
    })
    .map_err(|e| e.to_string())?;
    let _ = std::fs::remove_dir_all(&tmp);
    let mut digest = digest::Digest::new();
    for r in &report.records {
        if !digest.add(r) {
            return Err("a record could not be encoded for the digest".into());
        }
    }

    if lags == 64 && !transient {
        device_shaped_check(&capture, &cfg, &report.records)?;
    }
    for (i, p) in cfg.probes.iter().enumerate() {
        if p.trailing.is_some() && p.max_lag as usize >= lags {
            return Err(format!(
                "probe {i}: max_lag {} frames does not fit the firmware's {lags} lag slots; \
                 set max_lag_ms in the layout",
                p.max_lag
            ));
        }
    }

    let mut s = String::new();
    let w = &mut s;
    let _ = writeln!(
        w,
        "// @generated by scripts/firmware-capture.sh (frothline-capture-gen) from\n\
         // {} and {}: do not edit.\n\
         // The chain configuration is what `frothline replay --window {}` builds for this\n\
         // capture; EXPECTED_* describe the records that replay gives.\n",
        file_name(&capture),
        file_name(&layout),
        args[2]
    );
    let _ = writeln!(w, "/// Frames per second per channel.");
    let _ = writeln!(w, "pub const SAMPLE_RATE_HZ: u32 = {sample_rate};");
    let _ = writeln!(w, "/// Frames in the capture.");
    let _ = writeln!(w, "pub const FRAMES: usize = {frames};");
    emit_chain(w, &cfg)?;
    emit_layout(w, &layout_doc)?;
    let _ = writeln!(w, "/// Records a host replay of the capture gives.");
    let _ = writeln!(w, "pub const EXPECTED_RECORDS: u32 = {};", digest.records());
    let _ = writeln!(w, "/// Their digest (see `src/digest.rs`).");
    let _ = writeln!(
        w,
        "pub const EXPECTED_DIGEST: u64 = {:#018x};",
        digest.value()
    );
    std::fs::write(out, s).map_err(|e| format!("{out}: {e}"))?;
    eprintln!(
        "frothline-capture-gen: {out}: {} probes, {} channels, {frames} frames at {sample_rate} Hz, \
         {} records, digest {:#018x}",
        cfg.probes.len(),
        cfg.channels,
        digest.records(),
        digest.value()
    );
    Ok(())
}

fn file_name(p: &std::path::Path) -> String {
    p.file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_default()
}

/// Exhaustive destructuring below: a field added to the core's configuration types stops
/// this generator from compiling until it is emitted too.
fn emit_chain<const P: usize>(w: &mut String, cfg: &ChainConfig<P>) -> Result<(), String> {
    let ChainConfig {
        channels,
        detector,
        probes,
        window,
        initial_air,
        station,
    } = cfg;
    let DetectorConfig {
        threshold,
        hysteresis,
        learn_period,
        rail_low,
        rail_high,
        min_swing,
        min_peak_coefficient,
        min_bubbles,
        near_wake,
    } = detector;
    let _ = writeln!(w, "/// Interleaved channels per frame.");
    let _ = writeln!(w, "pub const CHANNELS: u8 = {channels};");
    let _ = writeln!(w, "/// Probes in the configuration.");
    let _ = writeln!(w, "pub const PROBES: usize = {};", probes.len());
    let _ = writeln!(
        w,
        "/// The phase every tip is taken to be in before its first interface."
    );
    let _ = writeln!(w, "pub const INITIAL_AIR: bool = {initial_air};");
    let window = match window {
        WindowPolicy::Whole => "WindowPolicy::Whole".to_string(),
        WindowPolicy::Frames(n) => format!("WindowPolicy::Frames({n})"),
        WindowPolicy::AfterFront { frames } => {
            format!("WindowPolicy::AfterFront {{ frames: {frames} }}")
        }
        other => {
            return Err(format!(
                "window policy {other:?} is not supported by the firmware"
            ))
        }
    };
    let _ = writeln!(w, "/// The analysis-window policy.");
    let _ = writeln!(w, "pub const WINDOW: WindowPolicy = {window};");
    let _ = writeln!(w, "/// Detector settings.");
    let _ = writeln!(
        w,
        "pub const DETECTOR: DetectorConfig = DetectorConfig {{\n    threshold: {threshold:?},\n    \
         hysteresis: {hysteresis:?},\n    learn_period: {learn_period},\n    rail_low: {rail_low},\n    \
         rail_high: {rail_high},\n    min_swing: {min_swing},\n    \
         min_peak_coefficient: {min_peak_coefficient:?},\n    min_bubbles: {min_bubbles},\n    \
         near_wake: frothline_core::cluster::NearWake {{ frames: {}, chord_permille: {} }},\n}};",
        near_wake.frames, near_wake.chord_permille
    );
    let _ = writeln!(w, "/// The probes, in layout order.");
    let _ = writeln!(w, "pub const PROBE_CONFIGS: [ProbeConfig; PROBES] = [");
    for p in probes {
        let ProbeConfig {
            leading,
            trailing,
            max_lag,
        } = p;
        let trailing = match trailing {
            Some(t) => format!("Some({})", tip(t)),
            None => "None".into(),
        };
        let _ = writeln!(
            w,
            "    ProbeConfig {{\n        leading: {},\n        trailing: {trailing},\n        max_lag: {max_lag},\n    }},",
            tip(leading)
        );
    }
    let _ = writeln!(w, "];");
    emit_station(w, station.as_ref(), *channels)
}

/// The station settings (transient captures) as a function building them, and the delay
/// ring the chain needs for them (0 samples for a steady capture).
fn emit_station<const P: usize>(
    w: &mut String,
    station: Option<&StationConfig<P>>,
    channels: u8,
) -> Result<(), String> {
    let Some(st) = station else {
        let _ = writeln!(
            w,
            "/// Samples of the chain's delay ring: none (a steady flow)."
        );
        let _ = writeln!(w, "pub const DELAY_RING_SAMPLES: usize = 0;");
        let _ = writeln!(w, "/// The station settings: none (a steady flow).");
        let _ = writeln!(
            w,
            "pub fn station<const P: usize>() -> Option<StationConfig<P>> {{\n    None\n}}"
        );
        return Ok(());
    };
    let StationConfig {
        front,
        delay_frames,
        grace_frames,
        dead_after_frames,
        elevations_mm,
        profile,
        sample_rate_hz,
        reference_depth_m,
        decay_fit_every,
    } = st;
    if *profile != ProfileConfig::default() {
        return Err(format!(
            "profile settings {profile:?} differ from the defaults the firmware emits"
        ));
    }
    let FrontConfig {
        before_air,
        hold_frames,
        burst_interfaces,
        burst_frames,
        settle_frames,
        contact_gap_frames,
    } = front;
    let depth = if reference_depth_m.is_finite() {
        format!("{reference_depth_m:?}")
    } else {
        "f32::NAN".into()
    };
    let ring = (*delay_frames as usize + 1) * channels as usize;
    let _ = writeln!(
        w,
        "/// Samples of the chain's delay ring: (delay + 1) frames of every channel."
    );
    let _ = writeln!(w, "pub const DELAY_RING_SAMPLES: usize = {ring};");
    let _ = writeln!(
        w,
        "/// The station settings of a host replay of this capture."
    );
    let _ = writeln!(
        w,
        "pub fn station<const P: usize>() -> Option<StationConfig<P>> {{\n    \
         let mut s = StationConfig::new({sample_rate_hz:?}, {before_air});\n    \
         s.front = FrontConfig {{\n        before_air: {before_air},\n        \
         hold_frames: {hold_frames},\n        burst_interfaces: {burst_interfaces},\n        \
         burst_frames: {burst_frames},\n        settle_frames: {settle_frames},\n        \
         contact_gap_frames: {contact_gap_frames},\n    }};\n    \
         s.delay_frames = {delay_frames};\n    s.grace_frames = {grace_frames};\n    \
         s.dead_after_frames = {dead_after_frames};\n    s.profile = ProfileConfig::default();\n    \
         s.reference_depth_m = {depth};\n    s.decay_fit_every = {decay_fit_every};"
    );
    for e in elevations_mm {
        let _ = writeln!(w, "    s.elevations_mm.push({e:?}).ok()?;");
    }
    let _ = writeln!(w, "    Some(s)\n}}");
    Ok(())
}

/// The chain configuration of a transient capture's one station, as the host's transient
/// replay builds it.
fn station_config(
    layout: &frothline_host::shared::layout::Layout,
    cap: &frothline_host::shared::capture::Capture,
    window: &WindowSpec,
) -> Result<ChainConfig<{ frothline_host::shared::rig::MAX_PROBES }>, String> {
    use frothline_host::offline::transient;
    let fs = cap.sample_rate();
    let policy = transient::transient_policy(window, fs, layout)?;
    let mut configs = transient::station_configs(layout, cap.channels(), fs, policy, cap)
        .map_err(|e| e.to_string())?;
    if configs.len() != 1 {
        return Err(format!(
            "{} stations: the firmware example runs one station chain",
            configs.len()
        ));
    }
    let (info, cfg) = configs.remove(0);
    if info.probes != (0..layout.probes.len()).collect::<Vec<_>>() {
        return Err("the station's probes are not the layout's probes in order".into());
    }
    Ok(cfg)
}

fn tip(t: &TipConfig) -> String {
    let TipConfig {
        channel,
        polarity,
        levels,
    } = t;
    let polarity = match polarity {
        Polarity::AirHigh => "Polarity::AirHigh",
        Polarity::AirLow => "Polarity::AirLow",
    };
    let levels = match levels {
        LevelSource::Fixed { air, water } => {
            format!("LevelSource::Fixed {{ air: {air}, water: {water} }}")
        }
        LevelSource::Learnt => "LevelSource::Learnt".into(),
    };
    format!("TipConfig {{ channel: {channel}, polarity: {polarity}, levels: {levels} }}")
}

fn emit_layout(
    w: &mut String,
    layout: &frothline_host::shared::layout::Layout,
) -> Result<(), String> {
    let stations = layout.stations();
    let station_of = |i: usize| {
        stations
            .iter()
            .position(|(_, members)| members.contains(&i))
            .unwrap_or(0)
    };
    let _ = writeln!(w, "/// Probe names, in layout order.");
    let _ = writeln!(w, "pub const PROBE_NAMES: [&str; PROBES] = [");
    for p in &layout.probes {
        let _ = writeln!(w, "    {:?},", p.name);
    }
    let _ = writeln!(w, "];");
    let _ = writeln!(
        w,
        "/// Leading -> trailing tip spacing, mm (`None` for a single-tip probe), as the host"
    );
    let _ = writeln!(
        w,
        "/// replay passes it to `WindowResult::from_probe_window_with_spacing`."
    );
    let _ = writeln!(w, "pub const TIP_SPACING_MM: [Option<f32>; PROBES] = [");
    for p in &layout.probes {
        match p.tip_spacing_mm {
            Some(mm) => {
                let _ = writeln!(w, "    Some({:?}),", mm as f32);
            }
            None => {
                let _ = writeln!(w, "    None,");
            }
        }
    }
    let _ = writeln!(w, "];");
    let _ = writeln!(
        w,
        "/// Where the probes sit, in wire units, for the device description."
    );
    let _ = writeln!(w, "pub const PROBE_LAYOUT: [ProbeLayout; PROBES] = [");
    for (i, p) in layout.probes.iter().enumerate() {
        let trailing = match (p.trailing, p.tip_spacing_mm) {
            (Some(ch), Some(mm)) => format!(
                "Some(TrailingTip {{ channel: {ch}, spacing: {} }})",
                quant::spacing(mm as f32)
            ),
            _ => "None".into(),
        };
        let _ = writeln!(
            w,
            "    ProbeLayout {{\n        station: {},\n        leading: {},\n        trailing: {trailing},\n        \
             elevation: {},\n        x: {},\n    }},",
            station_of(i),
            p.leading,
            quant::length(p.elevation_mm as f32),
            quant::length(p.x_mm as f32)
        );
    }
    let _ = writeln!(w, "];");
    Ok(())
}

/// Decode the firmware's UART output and compare its window results with a host replay.
fn verify_uart(args: &[String]) -> Result<(), String> {
    use frothline_core::wire::{Body, Decoder, FeedResult};
    let (logger, args) = match args {
        [rest @ .., last] if last == "--logger" => (true, rest),
        _ => (false, args),
    };
    let [capture, layout, window, uart] = args else {
        return Err(
            "usage: frothline-capture-gen verify-uart CAPTURE.wav LAYOUT.toml WINDOW UART.bin [--logger]"
                .into(),
        );
    };
    let (expected, layout_doc) = host_results(capture, layout, window)?;

    let bytes = std::fs::read(uart).map_err(|e| format!("{uart}: {e}"))?;
    let mut dec: Decoder = Decoder::new();
    let mut got = Vec::new();
    let (mut describes, mut healths, mut last_health) = (0, 0, None);
    let mut fronts_profiles = 0;
    let mut statuses = Vec::new();
    let mut rest: &[u8] = &bytes;
    while !rest.is_empty() {
        let r = dec.feed(rest);
        rest = r.remaining();
        if let FeedResult::Frame { frame, .. } = r {
            match frame.body {
                Body::Describe(d) => {
                    describes += 1;
                    if d.channels as usize != layout_doc.tip_channels().len()
                        || d.probes.len() != layout_doc.probes.len()
                    {
                        return Err(format!(
                            "device description does not match the layout: {d:?}"
                        ));
                    }
                }
                Body::Windows(ws) => got.extend(ws),
                Body::Health(h) => {
                    healths += 1;
                    last_health = Some(h);
                }
                Body::Front(_) | Body::Profile(_) => fronts_profiles += 1,
                Body::DeviceStatus(s) => statuses.push(s),
                Body::RunStart(r) if r.run == 1 => {}
                other => eprintln!("verify-uart: unexpected frame {other:?}"),
            }
        }
    }
    let st = *dec.stats();
    eprintln!(
        "verify-uart: {} bytes, {} frames ({describes} description, {healths} health, \
         {fronts_profiles} front/profile), {} window results \
         (host replay: {}), lost {}, crc failures {}, malformed {}, last health {last_health:?}",
        bytes.len(),
        st.frames,
        got.len(),
        expected.len(),
        st.lost,
        st.crc_failures,
        st.malformed
    );
    if st.lost + st.crc_failures + st.malformed + st.oversize > 0 {
        return Err("frames were lost or corrupt".into());
    }
    if describes == 0 {
        return Err("no device description".into());
    }
    if got.len() != expected.len() {
        return Err(format!(
            "{} window results, the host replay gives {}",
            got.len(),
            expected.len()
        ));
    }
    for (i, (g, e)) in got.iter().zip(&expected).enumerate() {
        if g != e {
            return Err(format!(
                "window result {i} differs:\n  device {g:?}\n  host   {e:?}"
            ));
        }
    }
    eprintln!(
        "verify-uart: every window result equals the host replay's ({} with a correlation, {} with chord times)",
        got.iter().filter(|w| w.correlation.is_some()).count(),
        got.iter().filter(|w| w.chords.is_some()).count()
    );
    status_check::check_uart(&statuses, logger)
}

/// The window results a host replay of `capture` gives, as the wire carries them.
fn host_results(
    capture: &str,
    layout: &str,
    window: &str,
) -> Result<
    (
        Vec<frothline_core::wire::WindowResult>,
        frothline_host::shared::layout::Layout,
    ),
    String,
> {
    use frothline_core::wire::WindowResult;
    let window: WindowSpec = window.parse()?;
    let tmp = std::env::temp_dir().join(format!("frothline-verify-{}", std::process::id()));
    let report = replay::run(&ReplayArgs {
        capture: PathBuf::from(capture),
        layout: PathBuf::from(layout),
        out: tmp.clone(),
        window,
        quiet: true,
        levels: frothline_host::offline::record_levels::LevelRule::Device,
        strict: false,
    })
    .map_err(|e| e.to_string())?;
    let _ = std::fs::remove_dir_all(&tmp);
    let fs = report.sample_rate as f32;
    let results = report
        .records
        .iter()
        .map(|r| {
            let spacing = report
                .layout
                .probes
                .get(r.probe as usize)
                .and_then(|p| p.tip_spacing_mm)
                .map(|mm| mm as f32);
            WindowResult::from_probe_window_with_spacing(r, fs, spacing)
        })
        .collect();
    Ok((results, report.layout))
}

/// Read the field log image the firmware's `logger` mode sent out of UART1 (the NOR flash
/// stand-in: 4096-byte sectors, 4-byte write unit) and check it against a host replay:
/// every logged window result equals the host's for the same probe and window, every
/// window from the front on is in the log in order, a front frame opens the capture and
/// at most the pre-trigger ring's frames precede it.
fn verify_log(args: &[String]) -> Result<(), String> {
    use frothline_core::wire::{Body, Decoder, FeedResult};
    use frothline_host::field::flash_image::{read_log, Geometry};
    let [capture, layout, window, image, pre] = args else {
        return Err(
            "usage: frothline-capture-gen verify-log CAPTURE.wav LAYOUT.toml WINDOW IMAGE.bin PRE_TRIGGER"
                .into(),
        );
    };
    let pre: usize = pre
        .parse()
        .map_err(|_| format!("PRE_TRIGGER `{pre}` is not a number"))?;
    let (expected, _) = host_results(capture, layout, window)?;
    let bytes = std::fs::read(image).map_err(|e| format!("{image}: {e}"))?;
    let geometry = Geometry {
        page_bytes: 4096,
        write_unit: 4,
    };
    let log = read_log(&bytes, geometry).map_err(|e| format!("{image}: {e}"))?;
    let mut dec: Decoder = Decoder::new();
    let mut frames = Vec::new();
    for rec in &log.records {
        // A record is one frame as `wire::encode` wrote it; the delimiter ends it.
        let mut buf = rec.clone();
        if buf.last() != Some(&0) {
            buf.push(0);
        }
        let mut rest: &[u8] = &buf;
        while !rest.is_empty() {
            let r = dec.feed(rest);
            rest = r.remaining();
            if let FeedResult::Frame { frame, .. } = r {
                frames.push(frame);
            }
        }
    }
    let st = *dec.stats();
    if frames.len() != log.records.len() || st.crc_failures + st.malformed + st.oversize > 0 {
        return Err(format!(
            "{} records, {} frames decoded ({st:?})",
            log.records.len(),
            frames.len()
        ));
    }
    let Some(first_front) = frames.iter().position(|f| matches!(f.body, Body::Front(_))) else {
        return Err("no front frame in the log".into());
    };
    // Before the front: the device description the logger writes at a trigger, the device
    // status it writes when its state changes, then the pre-trigger ring.
    let before = frames[..first_front]
        .iter()
        .filter(|f| !matches!(f.body, Body::Describe(_) | Body::DeviceStatus(_)))
        .count();
    if before > pre {
        return Err(format!(
            "{before} frames before the front, the pre-trigger ring holds {pre}"
        ));
    }
    if !frames[..first_front]
        .iter()
        .any(|f| matches!(f.body, Body::Describe(_)))
    {
        return Err("no device description before the front".into());
    }
    let Body::Front(arrival) = frames[first_front].body.clone() else {
        return Err("unreachable: not a front".into());
    };
    let mut logged = Vec::new();
    for f in &frames {
        if let Body::Windows(ws) = &f.body {
            logged.extend(ws.iter().copied());
        }
    }
    for (i, g) in logged.iter().enumerate() {
        match expected
            .iter()
            .find(|e| e.probe == g.probe && e.start == g.start)
        {
            Some(e) if e == g => {}
            Some(e) => {
                return Err(format!(
                    "logged window result {i} differs:\n  device {g:?}\n  host   {e:?}"
                ))
            }
            None => {
                return Err(format!(
                    "logged window result {i} is not in the host replay: {g:?}"
                ))
            }
        }
    }
    // The windows after the front (the pre-front window starts at frame 0) are all in the
    // log, in order: the capture outlasts the record.
    let after: Vec<_> = expected.iter().filter(|e| e.start > 0).collect();
    let logged_after: Vec<_> = logged.iter().filter(|g| g.start > 0).collect();
    if after.len() != logged_after.len() || after.iter().zip(&logged_after).any(|(a, b)| *a != *b) {
        return Err(format!(
            "the log holds {} window results after the front, the host replay gives {}",
            logged_after.len(),
            after.len()
        ));
    }
    let kinds = |k: fn(&Body) -> bool| frames.iter().filter(|f| k(&f.body)).count();
    eprintln!(
        "verify-log: {} bytes, {} pages ({} with a header), {} records = {} frames: {} from the \
         pre-trigger ring, \
         {} front, {} windows, {} profile, {} health; first front at frame {} (probe {}); \
         {} window results equal the host replay's, none missing after the front",
        bytes.len(),
        log.pages,
        log.stats.pages_found,
        log.records.len(),
        frames.len(),
        before,
        kinds(|b| matches!(b, Body::Front(_))),
        kinds(|b| matches!(b, Body::Windows(_))),
        kinds(|b| matches!(b, Body::Profile(_))),
        kinds(|b| matches!(b, Body::Health(_))),
        arrival.frame,
        arrival.probe,
        logged.len()
    );
    let statuses: Vec<_> = frames
        .iter()
        .filter_map(|f| match f.body {
            Body::DeviceStatus(s) => Some(s),
            _ => None,
        })
        .collect();
    status_check::check_log(&statuses)
}

/// Run the capture through a chain of the firmware's shape (`Chain<8, 64>`) with the same
/// configuration, and check that it gives the host replay's records (which the replay keeps
/// without their raw correlation sums): the capacities `P` and `L` must not change the
/// records while the configuration fits them.
fn device_shaped_check<const P: usize, const L: usize>(
    capture: &std::path::Path,
    cfg: &ChainConfig<P>,
    host: &[frothline_core::ProbeWindow<L>],
) -> Result<(), String> {
    let mut small: ChainConfig<8> = ChainConfig::new(cfg.channels, cfg.window);
    small.detector = cfg.detector;
    small.initial_air = cfg.initial_air;
    for p in &cfg.probes {
        small
            .probes
            .push(*p)
            .map_err(|_| "more than 8 probes".to_string())?;
    }
    let mut chain = frothline_core::Chain::<8, 64>::new(small).map_err(|e| e.to_string())?;
    let mut cap =
        frothline_host::shared::capture::Capture::open(capture).map_err(|e| e.to_string())?;
    let mut buf = Vec::new();
    let mut got = Vec::new();
    loop {
        let n = cap.read_frames(&mut buf, 4096).map_err(|e| e.to_string())?;
        if n == 0 {
            break;
        }
        let mut rest = &buf[..];
        while !rest.is_empty() {
            let used = chain.push(rest);
            rest = &rest[used..];
            while let Some(r) = chain.poll() {
                got.push(r.without_sums::<1>());
            }
        }
    }
    while chain.finish().is_err() {
        while let Some(r) = chain.poll() {
            got.push(r.without_sums::<1>());
        }
    }
    while let Some(r) = chain.poll() {
        got.push(r.without_sums::<1>());
    }
    let (mut a, mut b) = (digest::Digest::new(), digest::Digest::new());
    for r in &got {
        a.add(r);
    }
    for r in host {
        b.add(r);
    }
    if a != b {
        let first = got
            .iter()
            .zip(host)
            .position(|(x, y)| format!("{x:?}") != format!("{y:?}"));
        let detail = match first {
            Some(i) => format!(
                "record {i}:\n  Chain<8, 64>: {:?}\n  host:         {:?}",
                got[i], host[i]
            ),
            None => format!("{} records against {}", got.len(), host.len()),
        };
        return Err(format!(
            "a chain of the firmware's shape gives other records than the host replay; {detail}"
        ));
    }
    Ok(())
}

/// COBS of `data` with the delimiter (docs/wire-protocol.md section 1), for hand-made
/// payloads.
fn cobs(data: &[u8]) -> Vec<u8> {
    let mut out = vec![0u8];
    let mut code_at = 0;
    for &b in data {
        if b == 0 || out.len() - code_at == 0xFF {
            out[code_at] = (out.len() - code_at) as u8;
            code_at = out.len();
            out.push(0);
            if b == 0 {
                continue;
            }
        }
        out.push(b);
    }
    out[code_at] = (out.len() - code_at) as u8;
    out.push(0);
    out
}

/// A frame of a hand-made payload (header and body), CRC added.
fn raw_frame(payload: &[u8]) -> Vec<u8> {
    let mut d = payload.to_vec();
    d.extend_from_slice(&frothline_core::wire::crc32(payload).to_le_bytes());
    cobs(&d)
}

/// The commands of the `commands` check and the answer each must get, in order: the seq
/// and `None` for an Ack or the Nack code. Frames that must get no answer have none.
fn command_script() -> Result<(Vec<u8>, Vec<(u16, Option<u8>)>), String> {
    use frothline_core::wire::{Body, Frame, WindowSetting};
    use frothline_host::shared::commands::{Command, CommandLog};
    let mut log = CommandLog::default();
    let mut bytes = Vec::new();
    let mut want = Vec::new();
    let mut send = |bytes: &mut Vec<u8>, c: Command| -> Result<(u16, Vec<u8>), String> {
        let (seq, b) = log.encode(&c)?;
        bytes.extend_from_slice(&b);
        Ok((seq, b))
    };
    // The run started at power-on: a StartRun is already_running, and the same frame
    // again (a host retrying) gets the same answer, not run again.
    let (s, again) = send(&mut bytes, Command::StartRun("again".into()))?;
    bytes.extend_from_slice(&again);
    want.extend([(s, Some(5)), (s, Some(5))]);
    // DescribeRequest, and its repeat: Ack twice, one description.
    let (s, again) = send(&mut bytes, Command::DescribeRequest)?;
    bytes.extend_from_slice(&again);
    want.extend([(s, None), (s, None)]);
    // Unknown kind 0x7E, version 1, a trailing byte after StopRun, a 17-byte label.
    bytes.extend(raw_frame(&[2, 0xFF, 0xFF, 0x03, 0x7E, 0x20]));
    want.push((0x20, Some(1)));
    bytes.extend(raw_frame(&[1, 0xFF, 0xFF, 0x03, 0x21, 0x21]));
    want.push((0x21, Some(6)));
    bytes.extend(raw_frame(&[2, 0xFF, 0xFF, 0x03, 0x21, 0x22, 0x00]));
    want.push((0x22, Some(7)));
    let mut long = vec![2, 0xFF, 0xFF, 0x03, 0x20, 0x23, 17];
    long.extend_from_slice(b"0123456789abcdefg");
    long.push(0);
    bytes.extend(raw_frame(&long));
    want.push((0x23, Some(7)));
    // A zero window and a mask of no probe: bad_argument; valid ones are carried out (the
    // chain is configured afresh, the run's clock going on).
    let (s, _) = send(&mut bytes, Command::SetWindow(WindowSetting::Frames(0)))?;
    want.push((s, Some(2)));
    let (s, _) = send(&mut bytes, Command::SetWindow(WindowSetting::Frames(1000)))?;
    want.push((s, None));
    let (s, _) = send(&mut bytes, Command::Relearn(1 << 20))?;
    want.push((s, Some(2)));
    let (s, _) = send(&mut bytes, Command::Relearn(u32::MAX))?;
    want.push((s, None));
    // SetLevels: a probe the device does not have, levels against the tip's polarity
    // (air above water on these tips), then valid levels, twice (the same levels again
    // change nothing, and are Acked).
    let lv = |probe, air, water| {
        Command::SetLevels(frothline_core::wire::SetLevels {
            probe,
            trailing: false,
            air,
            water,
        })
    };
    let (s, _) = send(&mut bytes, lv(9, 26000, 3000))?;
    want.push((s, Some(2)));
    let (s, _) = send(&mut bytes, lv(0, 3000, 26000))?;
    want.push((s, Some(2)));
    let (s, _) = send(&mut bytes, lv(0, 26000, 3000))?;
    want.push((s, None));
    let (s, _) = send(&mut bytes, lv(0, 26000, 3000))?;
    want.push((s, None));
    // The device's own frame echoed back, and line noise: no answer.
    let mut buf = [0u8; frothline_core::wire::MAX_FRAME_BYTES];
    let echo = Frame {
        device: 0x0F1E,
        seq: 7,
        body: Body::StopRun,
    };
    let echo = frothline_core::wire::encode(&echo, &mut buf).map_err(|e| e.to_string())?;
    bytes.extend_from_slice(echo);
    bytes.extend_from_slice(&[0x55, 0x13, 0x00, 0xFF, 0x00]);
    // StopRun ends the run; a second one is not_running; StartRun then starts run 2.
    let (s, _) = send(&mut bytes, Command::StopRun)?;
    want.push((s, None));
    let (s, _) = send(&mut bytes, Command::StopRun)?;
    want.push((s, Some(4)));
    let (s, _) = send(&mut bytes, Command::StartRun("next".into()))?;
    want.push((s, None));
    Ok((bytes, want))
}

/// Write the command bytes of the `commands` check.
fn commands_in(args: &[String]) -> Result<(), String> {
    let [out] = args else {
        return Err("usage: frothline-capture-gen commands-in OUT.bin".into());
    };
    let (bytes, want) = command_script()?;
    std::fs::write(out, &bytes).map_err(|e| format!("{out}: {e}"))?;
    eprintln!(
        "commands-in: {} bytes, {} answers expected",
        bytes.len(),
        want.len()
    );
    Ok(())
}

/// Check the UART output of the firmware rebooted after the `commands` check (mode `boot`
/// on the settings store it left): the power-on description reports the stored window of
/// 1000 frames, and the run is streamed in such windows from its frame 0.
fn verify_boot(args: &[String]) -> Result<(), String> {
    use frothline_core::wire::{Body, Decoder, FeedResult, WindowSetting};
    let [uart] = args else {
        return Err("usage: frothline-capture-gen verify-boot UART.bin".into());
    };
    let bytes = std::fs::read(uart).map_err(|e| format!("{uart}: {e}"))?;
    let mut dec: Decoder = Decoder::new();
    let (mut first_window, mut starts) = (None, Vec::new());
    let mut rest: &[u8] = &bytes;
    while !rest.is_empty() {
        let r = dec.feed(rest);
        rest = r.remaining();
        if let FeedResult::Frame { frame, .. } = r {
            match frame.body {
                Body::Describe(d) if first_window.is_none() => first_window = Some(d.window),
                Body::Windows(ws) => starts.extend(ws.iter().map(|w| (w.start, w.frames))),
                _ => {}
            }
        }
    }
    eprintln!("verify-boot: described window {first_window:?}, windows (start, frames) {starts:?}");
    if first_window != Some(WindowSetting::Frames(1000)) {
        return Err("the power-on description does not report the stored window".into());
    }
    if !starts.iter().any(|&(s, f)| s == 0 && f == 1000) {
        return Err("no window of 1000 frames from frame 0".into());
    }
    Ok(())
}

/// Check the firmware's answers to the `commands` check, in order; two RunStarts (the run
/// of power-on, unlabelled, and run 2 labelled `next`), three descriptions (power-on, the
/// DescribeRequest carried out, the SetWindow, which reports 1000-frame windows), and run
/// 2 streamed in windows of 1000 frames counted from its frame 0.
fn verify_commands(args: &[String]) -> Result<(), String> {
    use frothline_core::wire::{Body, Decoder, FeedResult, WindowSetting};
    let [uart] = args else {
        return Err("usage: frothline-capture-gen verify-commands UART.bin".into());
    };
    let (_, want) = command_script()?;
    let bytes = std::fs::read(uart).map_err(|e| format!("{uart}: {e}"))?;
    let mut dec: Decoder = Decoder::new();
    let (mut got, mut describes, mut runs) = (Vec::new(), 0, 0);
    let (mut labels, mut run) = (Vec::new(), 0u32);
    let (mut long_windows, mut run2_starts) = (0i64, Vec::new());
    let mut last_window = None;
    let mut rest: &[u8] = &bytes;
    while !rest.is_empty() {
        let r = dec.feed(rest);
        rest = r.remaining();
        if let FeedResult::Frame { frame, .. } = r {
            match frame.body {
                Body::Ack(a) => got.push((a.seq, None)),
                Body::Nack(n) => got.push((n.seq, Some(n.reason.code()))),
                Body::Describe(d) => {
                    describes += 1;
                    last_window = Some(d.window);
                }
                Body::RunStart(r) => {
                    runs += 1;
                    run = r.run;
                    labels.push(r.label.to_string());
                }
                Body::Windows(ws) => {
                    for w in ws {
                        // Run 2's windows: 1000 frames, or shorter and flagged
                        // partial_window (0x10) where the capture ended first (how much
                        // of the capture is left for run 2 depends on when the commands
                        // arrived).
                        if run == 2 {
                            if w.frames > 1000 || (w.frames < 1000 && w.flags & 0x10 == 0) {
                                long_windows = -1_000_000;
                            }
                            long_windows += 1;
                            run2_starts.push((w.start, w.frames));
                        }
                    }
                }
                _ => {}
            }
        }
    }
    let st = *dec.stats();
    eprintln!(
        "verify-commands: {} frames, {} answers (expected {}), {describes} descriptions, {runs} run starts, lost {}, crc failures {}",
        st.frames,
        got.len(),
        want.len(),
        st.lost,
        st.crc_failures
    );
    for (i, (g, w)) in got.iter().zip(&want).enumerate() {
        eprintln!(
            "  answer {i}: seq {} {:?} (expected seq {} {:?})",
            g.0, g.1, w.0, w.1
        );
    }
    if got != want {
        return Err(format!("answers {got:?}, expected {want:?}"));
    }
    eprintln!(
        "verify-commands: run labels {labels:?}, last described window {last_window:?}, run 2 windows (start, frames) {run2_starts:?}"
    );
    if describes != 3 || runs != 2 || st.lost + st.crc_failures + st.malformed > 0 {
        return Err("descriptions, run starts or frame counts differ".into());
    }
    if labels != ["", "next"] || last_window != Some(WindowSetting::Frames(1000)) {
        return Err("run labels or the described window differ".into());
    }
    // Run 2 starts at its frame 0 with the stored window: its windows are 1000 frames
    // from frame 0 (the last one cut short by the end of the capture).
    if long_windows <= 0 || run2_starts.first().map(|w| w.0) != Some(0) {
        return Err("run 2 did not stream 1000-frame windows from its frame 0".into());
    }
    Ok(())
}
