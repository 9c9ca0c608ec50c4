use super::*;
use crate::shared::session::Event;
use frothline_core::wire::{
    Ack, ChordTimes, Correlation, DeviceDescription, Health, Kind, ProbeLayout, TrailingTip,
    WindowResult, WindowSetting,
};
use std::time::Duration;

fn state(now: Instant) -> LiveState {
    state_with(now, [0.05, 0.2, 0.5, 0.8])
}

fn state_with(now: Instant, cs: [f64; 4]) -> LiveState {
    let ports = vec!["/dev/ttyUSB0".to_string()];
    let mut s = LiveState::new(&ports);
    s.started = Some(now - Duration::from_secs(12));
    s.keys_help = "q quit  s start run  e end run  r relearn  d describe".into();
    s.links[0].baud = 115_200;
    let names = ["B2-1", "B2-2", "B2-3", "B2-4"];
    let name = |_: u16, i: usize| names[i].to_string();
    s.apply(&Event::LinkUp { port: 0 }, now, &name);
    let mut desc = DeviceDescription {
        firmware: Default::default(),
        sample_rate_millihz: 20_000_000,
        channels: 8,
        window: WindowSetting::Frames(2000),
        probes: Default::default(),
    };
    let _ = desc.firmware.push_str("sim-0.1.0");
    for (i, y) in [80, 250, 450, 650].into_iter().enumerate() {
        let _ = desc.probes.push(ProbeLayout {
            station: 0,
            leading: 2 * i as u8,
            trailing: Some(TrailingTip {
                channel: 2 * i as u8 + 1,
                spacing: 600,
            }),
            elevation: y,
            x: 0,
        });
    }
    s.apply(
        &Event::Describe {
            port: 0,
            device: 7,
            desc,
        },
        now,
        &name,
    );
    s.pending_labels.insert((0, 1), "flume-3".into());
    s.apply(
        &Event::Sent {
            port: 0,
            seq: 1,
            kind: Kind::StartRun,
        },
        now,
        &name,
    );
    s.apply(
        &Event::Reply {
            port: 0,
            device: 7,
            seq: 1,
            command: Some(Kind::StartRun),
            nack: None,
        },
        now,
        &name,
    );
    for k in 0..6u64 {
        for (i, c) in cs.iter().enumerate() {
            let w = WindowResult {
                probe: i as u8,
                start: k * 2000,
                frames: 2000,
                void_fraction: (c * 10_000.0) as u16,
                bubble_rate: 8_000 + 1000 * i as u32,
                bubbles: 8 + i as u32,
                chords: Some(ChordTimes {
                    mean: 900,
                    median: 700,
                    p10: 200,
                    p90: 2000,
                }),
                correlation: Some(Correlation {
                    velocity: 2400 + 100 * i as i16,
                    peak: 7100,
                    turbulence: Some(1800),
                }),
                flags: if i == 0 && k == 5 { 1 << 8 } else { 0 },
            };
            s.apply(
                &Event::Window {
                    port: 0,
                    device: 7,
                    result: w,
                },
                now,
                &name,
            );
            s.link_batch(0, now, 120, 1, None);
        }
    }
    s.apply(
        &Event::Health {
            port: 0,
            device: 7,
            health: Health {
                uptime_frames: 240_000,
                buffer_high_water: 512,
                ..Default::default()
            },
        },
        now,
        &name,
    );
    s.links[0].lost = 3;
    s.apply(
        &Event::SeqGap {
            port: 0,
            device: 7,
            seq: 40,
            missing: 3,
        },
        now,
        &name,
    );
    let _ = Ack { seq: 0 };
    s
}

#[test]
fn dashboard_shows_probe_rows_and_link_health() {
    let now = Instant::now();
    let s = state(now);
    // A narrow terminal stays readable (columns cut at the right, never shifted).
    let narrow = render_text(&s, now, 100, 30);
    println!("{}", narrow.join("\n"));
    // Running figures with their intervals (equal windows: no spread), the convergence
    // cell waiting for enough windows, the latest flags with the CSV names.
    assert!(narrow.iter().any(
        |l| l.contains("B2-4") && l.contains("65.0 0.800±0.000   110.0±0.0 2.70±0.00 6/10 win")
    ));
    assert!(narrow
        .iter()
        .any(|l| l.contains("B2-1") && l.contains("few_bubbles")));
    // At 80 columns the cut falls on what changes least: the age of the last frame, the
    // link drops, the run's state and the stuck tips stay on screen.
    let tiny = render_text(&s, now, 80, 24).join("\n");
    println!("{tiny}");
    for want in [
        "last frame",
        "link drops",
        "run \"flume-3\" running",
        "stuck tips",
        "V [m/s]",
        "2.70±0.00",
        "done",
    ] {
        assert!(tiny.contains(want), "80 columns lack {want:?}:\n{tiny}");
    }
    let lines = render_text(&s, now, 132, 34);
    println!("{}", lines.join("\n"));
    let text = lines.join("\n");
    for want in [
        "B2-1",
        "B2-4",
        "0.800",
        "lost 3",
        "/dev/ttyUSB0",
        "UP",
        "% of 115200 Bd",
        "frames/s",
        "last frame",
        "run \"flume-3\" running",
        "ACK start-run #1",
        "3 frame(s) lost",
        "C vs elevation",
        "windows",
        "last C",
        "few_bubbles",
        "local codes",
        "q quit",
    ] {
        assert!(text.contains(want), "dashboard lacks {want:?}");
    }
    // The probe table lists the highest probe first, columns aligned.
    let row = |name: &str| lines.iter().position(|l| l.contains(name)).unwrap();
    assert!(row("B2-4") < row("B2-1"));
    let col = |name: &str, v: &str| {
        let l = &lines[row(name)];
        l.find(v).unwrap()
    };
    assert_eq!(col("B2-4", "0.800") + 1, col("B2-1", "0.050") + 1);
}

/// The continuity line on the probe table's lower edge: q_w of the run so far from the
/// running C and V of an array that spans Y90, the layout's discharge beside it, and the word
/// CHECK (not colour alone) beyond the 5 % tolerance.
#[test]
fn the_continuity_check_is_on_the_probe_table() {
    let now = Instant::now();
    let mut s = state_with(now, [0.05, 0.3, 0.7, 0.97]);
    let found = s.continuity();
    assert_eq!(found.len(), 1, "one station of four probes");
    let q = found[0].2.q_water_total_m2_s();
    assert!(q > 0.0);
    let text = render_text(&s, now, 100, 30).join("\n");
    assert!(text.contains(&format!("q_w {q:.4} m²/s")), "{text}");
    s.discharge_m2_s = Some(q * 1.02);
    let text = render_text(&s, now, 100, 30).join("\n");
    assert!(text.contains("-2.0 %") && !text.contains("CHECK"), "{text}");
    s.discharge_m2_s = Some(q * 1.25);
    let lines = render_text(&s, now, 80, 24);
    let text = lines.join("\n");
    println!("{text}");
    assert!(text.contains("-20.0 % CHECK"), "{text}");
}

#[test]
fn a_lost_port_shows_down() {
    let now = Instant::now();
    let mut s = state(now);
    s.apply(
        &Event::LinkDown {
            port: 0,
            reason: "device unplugged".into(),
        },
        now,
        &|_, i| format!("p{i}"),
    );
    let text = render_text(&s, now + Duration::from_secs(5), 132, 34).join("\n");
    println!("{text}");
    assert!(text.contains("DOWN"));
    assert!(text.contains("port lost, reopening every second"));
}

/// A transient flow: one station of five probes, a front, profile fits behind it.
fn transient_state(now: Instant) -> LiveState {
    transient_state_with(now, &[8.0, 24.0, 40.0, 56.0, 72.0])
}

fn transient_state_with(now: Instant, elevations: &[f32]) -> LiveState {
    use frothline_core::wire::quant::{exponent, fraction, spacing};
    use frothline_core::wire::{FrontArrival, ProfileFit};
    let ports = vec!["/dev/pts/3".to_string()];
    let mut s = LiveState::new(&ports);
    s.started = Some(now - Duration::from_secs(3));
    s.links[0].baud = 115_200;
    let name = |_: u16, i: usize| format!("A{}", i + 1);
    s.apply(&Event::LinkUp { port: 0 }, now, &name);
    let mut desc = DeviceDescription {
        firmware: Default::default(),
        sample_rate_millihz: 40_000_000,
        channels: 6,
        window: WindowSetting::Whole,
        probes: Default::default(),
    };
    for (i, y) in elevations.iter().enumerate() {
        let _ = desc.probes.push(ProbeLayout {
            station: 0,
            leading: i as u8,
            trailing: None,
            elevation: frothline_core::wire::quant::length(*y),
            x: 0,
        });
    }
    s.apply(
        &Event::Describe {
            port: 0,
            device: 1,
            desc,
        },
        now,
        &name,
    );
    let front = 20_000u64;
    for p in 0..elevations.len() as u8 {
        let f = FrontArrival {
            probe: p,
            station: 0,
            frame: front + 40 * p as u64,
        };
        s.apply(
            &Event::Front {
                port: 0,
                device: 1,
                front: f,
            },
            now,
            &name,
        );
    }
    let (y90, n) = (62.0f32, 0.7f32);
    for k in 0..14u64 {
        let start = front + 2000 * k;
        for (i, y) in elevations.iter().enumerate() {
            let c = (0.9 * (y / y90).powf(n)).min(1.0) + 0.02 * ((i + k as usize) % 3) as f32;
            let w = WindowResult {
                probe: i as u8,
                start,
                frames: 2000,
                void_fraction: fraction(c.min(1.0)),
                bubble_rate: 0,
                bubbles: 40,
                chords: None,
                correlation: None,
                flags: 0,
            };
            s.apply(
                &Event::Window {
                    port: 0,
                    device: 1,
                    result: w,
                },
                now,
                &name,
            );
        }
        let t = (2000 * k) as f32 / 40_000.0;
        let cmean = 0.22 + 0.35 * (-t / 0.12).exp();
        let fit = ProfileFit {
            station: 0,
            slice_start: start,
            slice_frames: 2000,
            probes_used: elevations.len() as u8,
            y90: Some((y90 * 10.0) as u32),
            mean_void_fraction: Some(fraction(cmean)),
            equivalent_depth: Some(400),
            exponent: Some(exponent(n)),
            fit_rmse: Some(fraction(0.012)),
            flags: 0,
            estimate: 1,
            y90_se: Some(spacing(0.8)),
            mean_void_fraction_se: Some(fraction(0.011)),
            exponent_se: Some(exponent(0.06)),
            equivalent_depth_se: Some(spacing(0.5)),
        };
        s.apply(
            &Event::Profile {
                port: 0,
                device: 1,
                fit,
            },
            now,
            &name,
        );
    }
    s
}

#[test]
fn transient_dashboard_shows_the_profile_fit_and_the_decay() {
    let now = Instant::now();
    let s = transient_state(now);
    let st = &s.stations[&(1, 0)];
    assert_eq!(st.front_frame, Some(20_000));
    assert_eq!(st.series.len(), 14);
    let m = st.decay.and_then(|d| d.model).expect("a decay model");
    assert!((m.tau_s - 0.12).abs() < 0.02, "{m:?}");
    assert!((m.initial - 0.57).abs() < 0.02 && (m.final_level - 0.22).abs() < 0.02);
    let (points, curve) = profile_chart_data(&s);
    assert_eq!(points.len(), 5);
    let (line, y90, n) = curve.expect("a profile curve");
    assert!((y90 - 62.0).abs() < 0.1 && (n - 0.7).abs() < 0.01);
    assert_eq!(line.last().map(|p| p.1), Some(y90));
    let lines = render_text(&s, now, 160, 48);
    println!("{}", lines.join("\n"));
    let text = lines.join("\n");
    for want in [
        "Y90 62.0±0.8 n 0.70±0.06",
        "Cmean 0.222±0.011",
        "C0 0.57",
        "Cf 0.22",
        "tau 0.12",
    ] {
        assert!(text.contains(want), "missing {want:?}");
    }
    // Without a front the decay panel is not shown.
    let mut steady = transient_state(now);
    steady.stations.clear();
    let text = render_text(&steady, now, 132, 42).join("\n");
    assert!(!text.contains("Cmean fit"));
}

/// Every probe name and every panel title is on screen at the tested sizes, for a
/// steady run (4 probes) and a surge like the transient demo (10 probes); where the
/// probe table cannot hold every row, a `+N more` mark says so and paging shows the
/// rest.
#[test]
fn every_probe_and_panel_is_on_screen_at_80x24_100x30_160x48() {
    let now = Instant::now();
    let steady = state(now);
    let elevations: Vec<f32> = (0..10).map(|i| 5.0 + 10.0 * i as f32).collect();
    let mut surge = transient_state_with(now, &elevations);
    surge.keys_help = crate::live::watch::KEYS_HELP.into();
    let steady_names = ["B2-1", "B2-2", "B2-3", "B2-4"];
    let surge_names: Vec<String> = (1..=10).map(|i| format!("A{i}")).collect();
    let cases: [(&LiveState, Vec<&str>, Vec<&str>); 2] = [
        (
            &steady,
            steady_names.to_vec(),
            vec![
                "links and devices",
                "probes",
                "C vs elevation",
                "events",
                "recent windows",
            ],
        ),
        (
            &surge,
            surge_names.iter().map(|s| s.as_str()).collect(),
            vec![
                "links and devices",
                "probes",
                "C vs y",
                "events",
                "Cmean",
                "recent windows",
            ],
        ),
    ];
    for (st, names, titles) in &cases {
        for (w, h) in [(80u16, 24u16), (100, 30), (160, 48)] {
            let lines = render_text(st, now, w, h);
            let text = lines.join("\n");
            println!("{w}x{h}\n{text}");
            for t in titles {
                assert!(text.contains(t), "{w}x{h}: no panel title {t:?}");
            }
            assert!(
                text.contains("local codes") || w < 104,
                "{w}x{h}: safety line"
            );
            // Probe names as whole cells of the table ("A1" must not match "A10").
            let table_names = |lines: &[String]| -> Vec<String> {
                lines
                    .iter()
                    .filter_map(|l| {
                        let cell = l.strip_prefix('│')?.split_whitespace().next()?;
                        Some(cell.trim_start_matches('!').to_string())
                    })
                    .collect()
            };
            let mut seen = table_names(&lines);
            let mut scrolled = (*st).clone();
            let mut pages = 0;
            while text_has_more_below(&render_text(&scrolled, now, w, h)) && pages < 10 {
                scrolled.probe_scroll += 8;
                seen.extend(table_names(&render_text(&scrolled, now, w, h)));
                pages += 1;
            }
            for n in names {
                assert!(seen.iter().any(|s| s == n), "{w}x{h}: probe {n} not shown");
            }
            // The 10 probes fit from 80x24 on; nothing is hidden, so no mark.
            assert_eq!(pages, 0, "{w}x{h}: the probe table should fit");
        }
    }
}

fn text_has_more_below(lines: &[String]) -> bool {
    lines.iter().any(|l| l.contains("more below"))
}

/// More probes than rows: the table says how many are hidden, and paging reaches them.
#[test]
fn a_cut_probe_table_is_marked_and_pages() {
    let now = Instant::now();
    let elevations: Vec<f32> = (0..16).map(|i| 5.0 + 6.0 * i as f32).collect();
    let mut s = transient_state_with(now, &elevations);
    let lines = render_text(&s, now, 80, 24);
    let text = lines.join("\n");
    println!("{text}");
    assert!(text.contains("+"), "no more-mark");
    assert!(text_has_more_below(&lines));
    s.probe_scroll = 100;
    let text = render_text(&s, now, 80, 24).join("\n");
    println!("{text}");
    assert!(text.contains("more above"));
    assert!(text.contains("A1 "), "the lowest probe is reachable");
    assert_eq!(probe_page(16, 100, 5), (11, 16, 0));
    assert_eq!(probe_page(3, 0, 5), (0, 3, 0));
}

/// The strip chart: every probe's series against device time, named in its legend;
/// `c` cycles C, F, V and back to the table.
#[test]
fn the_strip_chart_cycles_quantities_and_names_every_probe() {
    let now = Instant::now();
    let mut s = state(now);
    let data = strip_data(&s, 1);
    assert_eq!(data.len(), 4);
    // B2-4 (highest, first): F = 110 Hz in each of its 6 windows, ending 0.1 s apart.
    assert_eq!(data[0].1.len(), 6);
    assert!((data[0].1[5].0 - 0.6).abs() < 1e-9 && (data[0].1[5].1 - 110.0).abs() < 1e-3);
    for (view, head) in [
        (crate::live::state::StripView::VoidFraction, "strip: C"),
        (crate::live::state::StripView::CountRate, "strip: F"),
        (crate::live::state::StripView::Velocity, "strip: V"),
    ] {
        s.strip_view = view;
        let text = render_text(&s, now, 160, 48).join("\n");
        assert!(text.contains(head), "{head}\n{text}");
        for n in ["B2-1", "B2-2", "B2-3", "B2-4"] {
            assert!(
                text.matches(n).count() >= 2,
                "{n} not in the table and legend"
            );
        }
    }
    assert_eq!(s.strip_view.next(), crate::live::state::StripView::Tips);
    assert_eq!(
        crate::live::state::StripView::Tips.next(),
        crate::live::state::StripView::Table
    );
}

/// The device status sits right after the device id at every size, and a low supply shows
/// the word LOW (not colour alone) in the warning style.
#[test]
fn the_device_status_is_on_screen_at_every_size_and_a_low_supply_warns() {
    use frothline_core::logbook::LoggerState;
    use frothline_core::wire::{DeviceStatus, LoggerStatus};
    let now = Instant::now();
    let mut s = state(now);
    let name = |_: u16, i: usize| format!("p{i}");
    let mut status = DeviceStatus {
        supply_mv: Some(3_297),
        uptime_ms: 725_400,
        logger: Some(LoggerStatus {
            state: LoggerState::Armed,
            used_bytes: 6_144,
            capacity_bytes: 61_440,
        }),
    };
    s.apply(
        &Event::Status {
            port: 0,
            device: 7,
            status,
        },
        now,
        &name,
    );
    assert_eq!(s.devices[&7].status, Some(status));
    for (w, h) in [(80u16, 24u16), (100, 30), (160, 48)] {
        let lines = render_text(&s, now, w, h);
        let text = lines.join("\n");
        println!("{w}x{h}\n{text}");
        let line = lines
            .iter()
            .find(|l| l.contains("device 7"))
            .unwrap_or_else(|| panic!("{w}x{h}: no device line"));
        assert!(line.contains("3.30 V"), "{w}x{h}: {line}");
        assert!(line.contains("up 12 min 05 s"), "{w}x{h}: {line}");
        assert!(line.contains("logger armed"), "{w}x{h}: {line}");
        assert!(!line.contains("LOW"));
    }
    status.supply_mv = Some(2_910);
    status.logger = None;
    s.apply(
        &Event::Status {
            port: 0,
            device: 7,
            status,
        },
        now,
        &name,
    );
    let backend = ratatui::backend::TestBackend::new(80, 24);
    let mut term = ratatui::Terminal::new(backend).unwrap();
    term.draw(|f| draw(f, &s, now)).unwrap();
    let buf = term.backend().buffer().clone();
    let lines = render_text(&s, now, 80, 24);
    let (y, line) = lines
        .iter()
        .enumerate()
        .find(|(_, l)| l.contains("device 7"))
        .unwrap();
    assert!(line.contains("2.91 V LOW"), "{line}");
    // The events say so once, and name the logger's change (armed -> none: the status no
    // longer carries a logger).
    let text = render_text(&s, now, 160, 48).join("\n");
    assert!(
        text.contains("device 7: supply LOW 2.91 V (below 3.0 V)"),
        "{text}"
    );
    assert!(text.contains("device 7: logger armed -> none"), "{text}");
    // A second low status in a row adds no line.
    status.uptime_ms += 1_000;
    s.apply(
        &Event::Status {
            port: 0,
            device: 7,
            status,
        },
        now,
        &name,
    );
    let lows = s
        .history
        .iter()
        .filter(|l| l.contains("supply LOW"))
        .count();
    assert_eq!(lows, 1);
    let x = line.find("2.91").unwrap();
    let x = line[..x].chars().count() as u16;
    assert_eq!(
        buf[(x, y as u16)].fg,
        WARN,
        "the low supply in the warning style"
    );
}
