//! The levels-in-use frame (kind 0x0A, docs/wire-protocol.md): what a chain's tips use now,
//! fixed or learnt, and the streamer sending it right after the description.

use frothline_core::wire::{
    decode, levels_in_use, Body, DeviceDescription, Streamer, StreamerConfig, TipLevels,
    WindowSetting, MAX_FRAME_BYTES,
};
use frothline_core::{
    Chain, ChainConfig, LevelSource, Polarity, ProbeConfig, TipConfig, WindowPolicy,
};

fn tip(channel: u8, levels: LevelSource) -> TipConfig {
    TipConfig {
        channel,
        polarity: Polarity::AirHigh,
        levels,
    }
}

/// A dual-tip probe with a fixed leading tip (20000 / 2000) and a learning trailing tip, and a learning single-tip probe on channel 2.
fn chain() -> Chain<4> {
    let mut c: ChainConfig<4> = ChainConfig::new(3, WindowPolicy::Frames(4_000));
    c.detector.learn_period = 2_048;
    c.probes
        .push(ProbeConfig::dual(
            tip(
                0,
                LevelSource::Fixed {
                    air: 20_000,
                    water: 2_000,
                },
            ),
            tip(1, LevelSource::Learnt),
            40,
        ))
        .unwrap();
    c.probes
        .push(ProbeConfig::single(tip(2, LevelSource::Learnt)))
        .unwrap();
    Chain::new(c).unwrap()
}

#[test]
fn a_chain_reports_fixed_and_learnt_levels_per_tip() {
    let mut ch = chain();
    let before = levels_in_use(&ch);
    assert_eq!(before.len(), 2);
    assert_eq!(
        before[0].leading.levels,
        Some(TipLevels {
            air: 20_000,
            water: 2_000
        })
    );
    assert!(before[0].leading.fixed);
    let trailing = before[0].trailing.unwrap();
    assert!(!trailing.fixed);
    assert_eq!(trailing.levels, None, "nothing learnt before any sample");
    assert!(before[1].trailing.is_none());
    assert!(!before[1].leading.fixed && before[1].leading.levels.is_none());

    // Square waves between 18000 and 1000 on every channel, 50 frames a phase: the learning
    // tips find those two levels.
    let mut frames = Vec::new();
    for i in 0..8_000 {
        let v = if (i / 50) % 2 == 0 { 18_000 } else { 1_000 };
        frames.extend_from_slice(&[v, v, v]);
    }
    let mut rest = &frames[..];
    while !rest.is_empty() {
        let used = ch.push(rest);
        rest = &rest[used..];
        while ch.poll().is_some() {}
    }
    let after = levels_in_use(&ch);
    assert!(after[0].leading.fixed, "fixed levels stay fixed");
    assert_eq!(after[0].leading.levels, before[0].leading.levels);
    for t in [after[0].trailing.unwrap(), after[1].leading] {
        let l = t.levels.expect("learnt");
        assert!(!t.fixed);
        assert!(
            (l.air - 18_000).abs() < 200 && (l.water - 1_000).abs() < 200,
            "{l:?}"
        );
    }
}

/// The streamer sends the levels right after the description (docs/wire-protocol.md,
/// section 11), and a newer levels frame replaces a queued one.
#[test]
fn levels_follow_the_description_and_the_latest_wins() {
    let mut s: Streamer<8, 4> = Streamer::new(StreamerConfig {
        link_bytes_per_s: 0,
        ..StreamerConfig::uart_8n1(7, 115_200, 20_000)
    });
    let ch = chain();
    s.offer(Body::Describe(DeviceDescription {
        firmware: heapless::String::new(),
        sample_rate_millihz: 20_000_000,
        channels: 3,
        window: WindowSetting::Frames(4_000),
        probes: heapless::Vec::new(),
    }));
    let mut stale = levels_in_use(&ch);
    stale.pop();
    s.offer(Body::Levels(stale));
    s.offer(Body::Levels(levels_in_use(&ch)));
    let mut bytes = Vec::new();
    while let Some(b) = s.poll(0, MAX_FRAME_BYTES) {
        bytes.extend_from_slice(b);
    }
    let bodies: Vec<Body> = bytes
        .split_mut(|&b| b == 0)
        .filter(|f| !f.is_empty())
        .map(|f| {
            let mut v = f.to_vec();
            v.push(0);
            decode(&mut v).unwrap().body
        })
        .collect();
    assert_eq!(bodies.len(), 2, "{bodies:?}");
    assert!(matches!(bodies[0], Body::Describe(_)));
    assert_eq!(bodies[1], Body::Levels(levels_in_use(&ch)));
}
