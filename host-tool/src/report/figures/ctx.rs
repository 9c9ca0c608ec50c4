//! What every figure reads ([`Ctx`]) and the figure-wide values taken from it: the marker
//! limit and whether it thinned a probe, and the envelope fitted to all probes.

use super::super::input::{Run, Window};
use super::super::stats::{envelope_fmax, ProbeSummary, Selection};
use super::chart::fmt_num;

/// Most window markers drawn per probe and figure.
pub const MAX_POINTS: usize = 1500;

/// What every figure reads.
#[derive(Clone, Copy)]
pub struct Ctx<'r> {
    /// The run.
    pub run: &'r Run,
    /// Per-probe summaries, in probe order.
    pub summaries: &'r [ProbeSummary],
    /// Windows entering means and fits.
    pub sel: Selection,
}

impl<'r> Ctx<'r> {
    /// Windows of probe `p` that enter means and fits.
    pub fn used(&self, p: usize) -> impl Iterator<Item = &'r Window> + 'r {
        let sel = self.sel;
        self.run
            .windows
            .iter()
            .filter(move |w| w.probe == p && sel.uses(w))
    }

    /// A probe's name for legends; with probes at several streamwise positions the
    /// position is added.
    pub fn probe_label(&self, p: usize) -> String {
        let probe = &self.run.probes[p];
        match (self.several_x(), probe.x_mm) {
            (true, Some(x)) => format!("{} (x = {} mm)", probe.name, fmt_num(x)),
            _ => probe.name.clone(),
        }
    }

    pub(super) fn several_x(&self) -> bool {
        let xs: Vec<f64> = self.run.probes.iter().filter_map(|q| q.x_mm).collect();
        xs.iter().any(|&x| (x - xs[0]).abs() > 1e-9)
    }

    /// Elevations for drawing: probes sharing an elevation (at different streamwise
    /// positions) are drawn slightly apart, by 1.2 % of the highest elevation each.
    pub fn drawn_elevations(&self) -> Vec<Option<f64>> {
        let ys: Vec<Option<f64>> = self.run.probes.iter().map(|p| p.elevation_mm).collect();
        let top = ys.iter().flatten().fold(0.0f64, |a, &b| a.max(b));
        let step = 0.012 * top;
        let mut out = ys.clone();
        for (i, y) in ys.iter().enumerate() {
            let Some(y) = y else { continue };
            let same: Vec<usize> = (0..ys.len())
                .filter(|&j| ys[j].is_some_and(|v| (v - y).abs() < 1e-6))
                .collect();
            if same.len() > 1 {
                let k = same.iter().position(|&j| j == i).unwrap_or(0) as f64;
                out[i] = Some(y + (k - (same.len() - 1) as f64 / 2.0) * step);
            }
        }
        out
    }
}

/// True when a probe has more used windows than [`MAX_POINTS`] (markers were thinned).
pub fn thinned(ctx: &Ctx, p: usize) -> bool {
    ctx.used(p).count() > MAX_POINTS
}

/// The envelope fitted to every used window of every probe.
pub fn fmax_all(ctx: &Ctx) -> Option<f64> {
    envelope_fmax(
        (0..ctx.run.probes.len())
            .flat_map(|p| ctx.used(p))
            .filter_map(|w| Some((w.void_fraction?, w.count_rate_hz?))),
    )
}
