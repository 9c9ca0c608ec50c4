//! frothline-core: the signal chain of dual-tip phase-detection probes, for small devices.
//!
//! The core turns interleaved ADC samples (one channel per probe tip) into per-window
//! records of void fraction, bubble count rate, chord times and, for dual-tip probes, the
//! cross-correlation of the two tips (interfacial velocity, turbulence intensity). It never
//! allocates, never blocks and never panics: the caller pushes blocks of samples of any
//! length with [`Chain::push`] and drains finished records with [`Chain::poll`], the way a
//! poll loop of a small-device network stack works. All memory is sized by const generics.
//!
//! Stages, one module each:
//! - [`probe_config`] and [`config`]: the settings of tips, probes and the detector (a leaf
//!   module), gathered into a [`ChainConfig`] that is checked once;
//! - [`phase`]: threshold with hysteresis, fixed or learnt air/water levels -> interface edges;
//! - [`levels`]: learning the two levels from a histogram of the signal (Otsu split + modes);
//! - [`tip_stats`]: per-window statistics of one tip (void fraction, counts, chords);
//! - [`chord`]: the log-spaced chord-time histogram and its percentiles;
//! - [`correlation`]: dual-tip cross-correlation (interfacial velocity, turbulence);
//! - [`window`]: analysis-window policies;
//! - [`chain`]: the streaming pipeline that ties them together;
//! - [`record`] and [`flags`]: what comes out; [`wire`]: records as frames (it depends on
//!   the records, never the other way round); [`logbook`]: frames kept on NOR flash;
//! - [`derived`]: chord lengths, interfacial area, Sauter diameter, particle grouping;
//! - transient flows: [`front`] (arrival of a surge front), [`station`] (a chain as one
//!   station: front-relative windows, profile slices), [`profile`] (the void-fraction
//!   profile fit), [`decay`] (the decay of the depth-averaged void fraction).
#![no_std]
#![deny(unsafe_code)]
#![warn(missing_docs)]

pub mod chain;
pub mod chord;
pub mod cluster;
pub mod config;
pub mod correlation;
pub mod decay;
pub mod derived;
pub mod flags;
pub mod front;
pub mod levels;
pub mod logbook;
pub mod phase;
pub mod probe_config;
pub mod profile;
pub mod quotient;
pub mod record;
pub mod station;
#[cfg(test)]
mod test_rng;
pub mod tip_stats;
pub mod window;
pub mod wire;

pub use chain::{Chain, GenericChain, LeanChain, QueueFull};
pub use config::{
    ChainConfig, ConfigError, DetectorConfig, LevelSource, Polarity, ProbeConfig, TipConfig,
};
pub use correlation::{CorrelationResult, CorrelationSums, Correlator, RunBuffer};
pub use flags::Flags;
pub use phase::{Edge, EdgeSink, PhaseDetector};
pub use record::{ProbeWindow, TipStats};
pub use station::{FrontRecord, ProbeArrival, ProfileRecord, StationArrival, StationConfig};
pub use window::WindowPolicy;

/// Largest number of interleaved channels a capture may have (the partial-frame buffer).
pub const MAX_CHANNELS: usize = 64;
