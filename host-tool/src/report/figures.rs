//! The figures. Each is a small struct of borrowed data implementing
//! [`Figure`](super::render::Figure); the decision to draw or skip a figure is taken in
//! `report::run`, so a figure here always has something to show.
//!
//! Conventions: elevation is vertical (as in the flow); one colour and marker per probe in
//! every figure; fits are lines, measurements are markers; at most [`MAX_POINTS`] window
//! markers per probe (evenly thinned beyond, said in the HTML).

mod chart;
mod chord;
mod count_rate;
mod ctx;
mod decay;
mod profile;
mod velocity;

pub use chart::fmt_num;
pub use chord::{ChordFigure, ChordQuantity};
pub use count_rate::CountRateFigure;
pub use ctx::{fmax_all, thinned, Ctx, MAX_POINTS};
pub use decay::{DecayFigure, DecayStation};
pub use profile::ProfileFigure;
pub use velocity::VelocityFigure;
