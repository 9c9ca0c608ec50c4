//! Arbitrary text as a layout file, parsed and validated by the host's layout reader.
//!
//! Input: the bytes, read as UTF-8 (lossily). Checks: no panic; an error names the file;
//! an accepted layout has at least one probe, no channel twice, finite geometry within
//! the documented bounds, and survives the station grouping and the channel check.
#![no_main]

use frothline_host::shared::layout::{
    Layout, MAX_ABS_X_MM, MAX_ELEVATION_MM, MAX_LAYOUT_PROBES, MAX_TIP_SPACING_MM,
};
use libfuzzer_sys::fuzz_target;
use std::path::Path;

fuzz_target!(|data: &[u8]| {
    let text = String::from_utf8_lossy(data);
    let file = Path::new("fuzz.toml");
    match Layout::parse(&text, file) {
        Err(e) => assert!(e.to_string().starts_with("fuzz.toml"), "{e}"),
        Ok(l) => {
            assert!(!l.probes.is_empty() && l.probes.len() <= MAX_LAYOUT_PROBES);
            let mut channels: Vec<usize> = l.probes.iter().flat_map(|p| p.channels()).collect();
            let n = channels.len();
            channels.sort_unstable();
            channels.dedup();
            assert_eq!(channels.len(), n, "a channel used twice");
            for p in &l.probes {
                assert!((0.0..=MAX_ELEVATION_MM).contains(&p.elevation_mm));
                assert!(p.x_mm.abs() <= MAX_ABS_X_MM);
                if let Some(s) = p.tip_spacing_mm {
                    assert!(s > 0.0 && s <= MAX_TIP_SPACING_MM);
                }
            }
            let in_stations: usize = l.stations().iter().map(|(_, m)| m.len()).sum();
            assert_eq!(in_stations, l.probes.len());
            let _ = l.check_channels(channels.last().map_or(0, |c| c + 1), file);
            let _ = l.check_channels(1, file);
        }
    }
});
