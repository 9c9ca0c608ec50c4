//! A capture in memory for the simulated device, with the chain configurations replay
//! would use for it.

use crate::shared::error::HostError;
use crate::shared::layout::Layout;
use crate::shared::rig::{chain_config, Counts, ToCounts, MAX_PROBES};
use crate::shared::stations::{self as transient, StationInfo};
use crate::shared::window_spec::WindowSpec;
use frothline_core::{ChainConfig, WindowPolicy};
use std::path::Path;
use std::sync::Arc;

/// The station chains' configurations of a transient layout (one per station).
pub type StationConfigs = Vec<(StationInfo, ChainConfig<MAX_PROBES>)>;

/// A capture in memory with the chain configuration replay would use for it.
#[derive(Clone, Debug)]
pub struct SimCapture {
    /// Interleaved i16 samples.
    pub samples: Arc<Vec<i16>>,
    /// Channels per frame.
    pub channels: usize,
    /// Frames per second.
    pub sample_rate: u32,
    /// The rig layout.
    pub layout: Layout,
    /// The layout's text (TOML).
    pub layout_text: String,
    /// The chain configuration (window policy included). For a transient layout: the
    /// whole layout's, with the front-relative policy (the device describes it and maps
    /// health by it; the station chains run [`SimCapture::stations`]).
    pub config: ChainConfig<MAX_PROBES>,
    /// A transient layout (`flow.kind = "transient"`): the configuration of each station
    /// chain, as `frothline replay` derives them ([`transient::station_configs`]).
    pub stations: Option<StationConfigs>,
}

/// The chain configurations of `layout` for `window`: the steady one, or for a transient
/// layout the whole layout's (front-relative policy) and one per station.
fn configs(
    layout: &Layout,
    channels: usize,
    fs: u32,
    window: &WindowSpec,
    units: &dyn ToCounts,
    file: &Path,
) -> Result<(ChainConfig<MAX_PROBES>, Option<StationConfigs>), HostError> {
    let config_err = |source| HostError::Config {
        file: file.to_path_buf(),
        source,
    };
    if !transient::is_transient(layout) {
        let policy = window
            .policy(fs, |name| probe_index(layout, name))
            .map_err(HostError::Usage)?;
        let config = chain_config(layout, channels, fs, policy, units).map_err(config_err)?;
        return Ok((config, None));
    }
    let policy = transient::transient_policy(window, fs, layout).map_err(HostError::Usage)?;
    let stations =
        transient::station_configs(layout, channels, fs, policy, units).map_err(config_err)?;
    let mut config =
        chain_config(layout, channels, fs, WindowPolicy::Whole, units).map_err(config_err)?;
    config.window = policy;
    Ok((config, Some(stations)))
}

impl SimCapture {
    /// Frames in the capture.
    pub fn frames(&self) -> usize {
        self.samples.len() / self.channels.max(1)
    }

    /// A WAV capture and its layout, configured as `frothline replay` configures them:
    /// the same checks, the same [`chain_config`] (no chain is built here: a host chain is
    /// large, and the device thread builds its own).
    pub fn from_files(
        capture: &Path,
        layout: &Path,
        window: WindowSpec,
    ) -> Result<Self, HostError> {
        let layout_text = std::fs::read_to_string(layout).unwrap_or_default();
        let layout_doc = Layout::load(layout)?;
        let mut cap = crate::shared::capture::Capture::open(capture)?;
        layout_doc.check_channels(cap.channels(), layout)?;
        crate::shared::rig::check_levels_fit(&layout_doc, &cap, layout)?;
        if layout_doc.probes.len() > MAX_PROBES {
            return Err(HostError::Usage(format!(
                "{}: {} probes, the host handles at most {MAX_PROBES}",
                layout.display(),
                layout_doc.probes.len()
            )));
        }
        let (config, stations) = configs(
            &layout_doc,
            cap.channels(),
            cap.sample_rate(),
            &window,
            &cap,
            layout,
        )?;
        let mut samples = Vec::with_capacity(cap.frames() as usize * cap.channels());
        let mut block = Vec::new();
        loop {
            let n = cap.read_frames(&mut block, 1 << 15)?;
            if n == 0 {
                break;
            }
            samples.extend_from_slice(&block);
        }
        Ok(SimCapture {
            samples: Arc::new(samples),
            channels: cap.channels(),
            sample_rate: cap.sample_rate(),
            layout: layout_doc,
            layout_text,
            config,
            stations,
        })
    }

    /// A synthetic capture of `scenario` (rendered in memory), with the layout `frothline
    /// synth` would write for it.
    pub fn from_scenario(
        scenario: &crate::shared::synthetic::Scenario,
        window: WindowSpec,
    ) -> Result<Self, HostError> {
        let generator = crate::shared::synthetic::Generator::new(scenario.clone(), scenario.seed)?;
        let text = crate::shared::synthetic::output::layout_toml(
            scenario,
            generator.resolved(),
            &generator.tip_levels(),
        );
        let layout = Layout::parse(&text, Path::new("<built-in scenario>"))?;
        let cap = generator.render_interleaved();
        let channels = cap.channels as usize;
        let fs = cap.sample_rate_hz;
        let (config, stations) = configs(
            &layout,
            channels,
            fs,
            &window,
            &Counts,
            Path::new("<built-in scenario>"),
        )?;
        Ok(SimCapture {
            samples: Arc::new(cap.samples),
            channels,
            sample_rate: fs,
            layout,
            layout_text: text,
            config,
            stations,
        })
    }
}

/// The index of the probe called `name` in `layout`.
pub fn probe_index(layout: &Layout, name: &str) -> Option<usize> {
    layout.probes.iter().position(|p| p.name == name)
}
