//! Derived figures: interfacial area and Sauter diameter against the stereology of random
//! spheres, the cluster tally against a direct count, and its random-arrival reference
//! against a direct Monte Carlo with a general-purpose RNG (`rand`'s `StdRng`).

use frothline_core::chord::ChordStats;
use frothline_core::cluster::NearWake;
use frothline_core::derived::{
    interfacial_area, pair_probability, pair_probability_by, sauter_diameter, Derived,
    RandomClusters,
};
use frothline_core::tip_stats::TipAccumulator;
use frothline_core::{Edge, EdgeSink};
use rand::rngs::StdRng;
use rand::{Rng, SeedableRng};
use rand_distr::{Distribution, Gamma};

/// Spheres of one diameter `D` placed at random in a flow moving at `V` past a needle: each
/// sphere is pierced at a uniformly random point of its cross-section (offset `r` with
/// `r²` uniform on `0..R²`), giving a chord `2 sqrt(R² − r²)`. The mean chord of a convex
/// body is `4 Vol/S` (Cauchy's formula; for a sphere `2D/3`), so `C = F (2D/3)/V`, and the
/// dual-tip relations must give back `d = 1.5 C V / F = D` and `a = 6 C / D = 4 F / V`
/// (the definition of the specific area of spheres, `n π D²` per `n π D³/6` of air).
#[test]
fn area_and_sauter_diameter_of_random_spheres() {
    let mut rng = StdRng::seed_from_u64(18);
    let d_m = 3.0e-3;
    let v = 2.0f64;
    let n = 200_000;
    let total_air_s: f64 = (0..n)
        .map(|_| {
            let r2: f64 = rng.random::<f64>() * (d_m / 2.0) * (d_m / 2.0);
            2.0 * ((d_m / 2.0) * (d_m / 2.0) - r2).sqrt() / v
        })
        .sum();
    let record_s = 2000.0; // C about 0.1
    let f = n as f64 / record_s;
    let c = total_air_s / record_s;
    let d = sauter_diameter(c as f32, f as f32, v as f32).unwrap() as f64;
    assert!(
        (d / d_m - 1.0).abs() < 0.01,
        "Sauter diameter {d} for spheres of {d_m}"
    );
    let a = interfacial_area(f as f32, v as f32).unwrap() as f64;
    let a_spheres = 6.0 * c / d_m;
    assert!(
        (a / a_spheres - 1.0).abs() < 0.01,
        "a = {a} against 6C/D = {a_spheres}"
    );
}

/// Alternating renewal chords, frames: independent gamma bubble chords (shape 2) and water
/// chords of gamma shape `kw` (1: exponential, Poisson arrivals).
fn renewal(
    rng: &mut StdRng,
    n: usize,
    bubble_mean: f64,
    water_mean: f64,
    kw: f64,
) -> Vec<(u32, u32)> {
    let k = 2.0;
    let gb = Gamma::new(k, bubble_mean / k).unwrap();
    let gw = Gamma::new(kw, water_mean / kw).unwrap();
    (0..n)
        .map(|_| {
            let b = gb.sample(rng).round().max(1.0) as u32;
            let w = gw.sample(rng).round().max(1.0) as u32;
            (b, w)
        })
        .collect()
}

/// The near-wake rule counted directly on a list of (bubble, following water) chords:
/// returns (pairs, clusters, bubbles in clusters).
fn direct_count(chords: &[(u32, u32)]) -> (u32, u32, u32) {
    let pair: Vec<bool> = chords[..chords.len() - 1]
        .iter()
        .map(|&(b, w)| w < b)
        .collect();
    let pairs = pair.iter().filter(|&&p| p).count() as u32;
    let clusters = (0..pair.len())
        .filter(|&i| pair[i] && (i == 0 || !pair[i - 1]))
        .count() as u32;
    // Bubble i is in a cluster when it pairs with the next or the previous one pairs with it.
    let in_cluster = (0..chords.len())
        .filter(|&i| (i < pair.len() && pair[i]) || (i > 0 && pair[i - 1]))
        .count() as u32;
    (pairs, clusters, in_cluster)
}

/// Feed the chords to a tip accumulator as edges, starting in water at frame 0.
fn tally(chords: &[(u32, u32)]) -> frothline_core::TipStats {
    tally_by(chords, NearWake::CHORD)
}

/// [`tally`] with the near-wake criterion `wake`.
fn tally_by(chords: &[(u32, u32)], wake: NearWake) -> frothline_core::TipStats {
    let mut acc = TipAccumulator::new();
    acc.set_near_wake(wake);
    let mut t = 1000u64;
    acc.edge(Edge {
        frame: 0,
        to_air: false,
    });
    for &(b, w) in chords {
        acc.edge(Edge {
            frame: t,
            to_air: true,
        });
        t += b as u64;
        acc.edge(Edge {
            frame: t,
            to_air: false,
        });
        t += w as u64;
    }
    // The next bubble starts: the last water chord is closed.
    acc.edge(Edge {
        frame: t,
        to_air: true,
    });
    let frames = t as u32;
    acc.add_run(
        frames,
        frothline_core::phase::RunCounts {
            air: chords.iter().map(|c| c.0).sum(),
            rail: 0,
            unlearnt: 0,
        },
    );
    acc.close(None)
}

#[test]
fn tally_matches_a_direct_count() {
    let mut rng = StdRng::seed_from_u64(7);
    let chords = renewal(&mut rng, 5000, 80.0, 300.0, 2.0);
    let stats = tally(&chords);
    let (pairs, clusters, clustered) = direct_count(&chords);
    assert_eq!(stats.clusters.judged, chords.len() as u32);
    assert_eq!(stats.clusters.pairs, pairs);
    assert_eq!(stats.clusters.clusters, clusters);
    assert_eq!(stats.clusters.clustered, clustered);
}

/// The random-arrival reference of `frothline_core::derived` against a direct Monte Carlo:
/// many independent records of Poisson arrivals (exponential water chords) drawn with
/// `rand` (general-purpose RNG), clusters counted directly by the near-wake rule,
/// averaged, against the reference computed from the records' bubble chord histogram and
/// mean water chord. Three chord-mean ratios, from rare to common pairs.
#[test]
fn random_reference_matches_monte_carlo() {
    let mut rng = StdRng::seed_from_u64(90);
    for (bubble_mean, water_mean) in [(40.0, 400.0), (100.0, 250.0), (200.0, 150.0)] {
        let (mut n, mut pairs, mut clusters, mut clustered) = (0u64, 0u64, 0u64, 0u64);
        let mut bubbles = ChordStats::new();
        let mut water = ChordStats::new();
        for _ in 0..20 {
            let chords = renewal(&mut rng, 5000, bubble_mean, water_mean, 1.0);
            let (p, c, k) = direct_count(&chords);
            n += chords.len() as u64;
            pairs += p as u64;
            clusters += c as u64;
            clustered += k as u64;
            for &(b, w) in &chords {
                bubbles.add(b);
                water.add(w);
            }
        }
        let p_hist = pair_probability(&bubbles, water.mean().unwrap()).unwrap() as f64;
        let p_mc = pairs as f64 / n as f64;
        // The histogram's bins are 19 % wide (a chord at the bin's middle).
        assert!(
            (p_hist - p_mc).abs() < 0.005 + 0.03 * p_mc,
            "pair probability {p_hist} against Monte Carlo {p_mc} ({bubble_mean}/{water_mean})"
        );
        let r = RandomClusters::new(p_hist as f32, 1.0);
        let frac_mc = clustered as f64 / n as f64;
        let rate_mc = clusters as f64 / n as f64; // clusters per bubble (F = 1)
        let size_mc = clustered as f64 / clusters as f64;
        assert!(
            (r.clustered_fraction as f64 / frac_mc - 1.0).abs() < 0.05,
            "clustered fraction {} against {frac_mc}",
            r.clustered_fraction
        );
        assert!(
            (r.cluster_rate_hz as f64 / rate_mc - 1.0).abs() < 0.05,
            "clusters per bubble {} against {rate_mc}",
            r.cluster_rate_hz
        );
        assert!(
            (r.bubbles_per_cluster.unwrap() as f64 / size_mc - 1.0).abs() < 0.05,
            "bubbles per cluster {:?} against {size_mc}",
            r.bubbles_per_cluster
        );
    }
}

/// Grouping put in on purpose (a third of the bubbles followed by a water chord of a tenth
/// of their own chord) stands far above the reference; Poisson arrivals do not, and
/// water chords more regular than exponential (gamma shape 2) give fewer pairs.
#[test]
fn grouping_is_seen_only_when_present() {
    let mut rng = StdRng::seed_from_u64(3);
    let plain = renewal(&mut rng, 4000, 80.0, 300.0, 1.0);
    let regular = renewal(&mut rng, 4000, 80.0, 300.0, 2.0);
    let mut grouped = plain.clone();
    for c in grouped.iter_mut() {
        if rng.random::<f64>() < 1.0 / 3.0 {
            c.1 = (c.0 / 10).max(1);
        }
    }
    let fs = 40_000.0;
    let d_plain = Derived::of_tip(&tally(&plain), fs, Some(2.0));
    let d_grouped = Derived::of_tip(&tally(&grouped), fs, Some(2.0));
    let z_plain = d_plain.grouping_z.unwrap();
    let z_grouped = d_grouped.grouping_z.unwrap();
    assert!(z_plain.abs() < 3.0, "random record z = {z_plain}");
    let z_regular = Derived::of_tip(&tally(&regular), fs, None)
        .grouping_z
        .unwrap();
    assert!(z_regular < -3.0, "regular record z = {z_regular}");
    assert!(z_grouped > 10.0, "grouped record z = {z_grouped}");
    let f = d_grouped.clustered_fraction.unwrap();
    let f0 = d_grouped.random.unwrap().clustered_fraction;
    assert!(f > f0 + 0.2, "clustered {f} against random {f0}");
}

#[test]
fn derived_figures_need_their_inputs() {
    let s = tally(&[(100, 200), (100, 200), (100, 200)]);
    let d = Derived::of_tip(&s, 40_000.0, None);
    assert_eq!(d.interfacial_area_per_m, None);
    assert_eq!(d.sauter_diameter_mm, None);
    assert_eq!(d.chord_length_median_mm, None);
    assert!(d.cluster_rate_hz.is_some());
    let d = Derived::of_tip(&s, 40_000.0, Some(2.0));
    // 100 frames at 40 kHz and 2 m/s: 5 mm (worked example).
    assert!((d.chord_length_mean_mm.unwrap() - 5.0).abs() < 1e-4);
    assert_eq!(interfacial_area(10.0, 0.0), None);
    assert_eq!(sauter_diameter(0.1, 0.0, 2.0), None);
    assert_eq!(sauter_diameter(f32::NAN, 1.0, 2.0), None);
}

/// The chord quantile with the continuity and density-slope corrections against the exact
/// quantiles of the continuous chords themselves (sorted; the histogram gets them rounded
/// to whole frames, as a detector counts them), for exponential and gamma chords from a
/// few to a few thousand frames: within 1.5 % (median) and 2 % (p90).
#[test]
fn chord_quantiles_follow_the_sample() {
    use frothline_core::derived::chord_quantile;
    let mut rng = StdRng::seed_from_u64(5);
    for (shape, mean) in [
        (1.0, 20.0),
        (2.0, 17.0),
        (2.0, 300.0),
        (1.0, 2000.0),
        (4.0, 60.0),
    ] {
        let g = Gamma::new(shape, mean / shape).unwrap();
        let mut chords: Vec<f64> = (0..1500)
            .map(|_| g.sample(&mut rng))
            .filter(|x: &f64| *x >= 1.0)
            .collect();
        let mut s = ChordStats::new();
        for &c in &chords {
            s.add(c.round() as u32);
        }
        chords.sort_by(f64::total_cmp);
        for (q, tol) in [(0.5, 0.015), (0.9, 0.02)] {
            let exact = chords[((chords.len() - 1) as f64 * q).round() as usize];
            let got = chord_quantile(&s, q as f32).unwrap() as f64;
            assert!(
                (got / exact - 1.0).abs() < tol,
                "shape {shape} mean {mean} q {q}: {got} against {exact}"
            );
        }
    }
}

/// The near-wake criterion as a fixed time or as a fraction of the bubble's chord: the tally
/// counts what a direct count by the same rule gives, and under Poisson arrivals
/// (exponential water chords drawn with `rand`) the pair fraction is `1 − exp(−T/W̄)` for a
/// time `T` (the exponential distribution's CDF at `T`; analytic case) and the reference
/// `pair_probability_by` agrees with the Monte Carlo for both forms.
#[test]
fn fixed_time_and_fractional_near_wake() {
    let mut rng = StdRng::seed_from_u64(41);
    let chords = renewal(&mut rng, 20_000, 100.0, 250.0, 1.0);
    let n = (chords.len() - 1) as f64;
    // The last chord's water closes the record: judged, and counted by the tally too.
    let count = |rule: &dyn Fn(u32, u32) -> bool| {
        chords.iter().filter(|&&(b, w)| rule(w, b)).count() as u32
    };
    let mut bubbles = ChordStats::new();
    let mut water = ChordStats::new();
    for &(b, w) in &chords {
        bubbles.add(b);
        water.add(w);
    }
    let w_mean = water.mean().unwrap();
    for (wake, rule) in [
        (
            NearWake {
                frames: 60,
                chord_permille: 0,
            },
            Box::new(|w: u32, _b: u32| w < 60) as Box<dyn Fn(u32, u32) -> bool>,
        ),
        (
            NearWake {
                frames: 0,
                chord_permille: 500,
            },
            Box::new(|w: u32, b: u32| 2 * w < b),
        ),
    ] {
        let stats = tally_by(&chords, wake);
        assert_eq!(stats.clusters.wake, wake, "the record names its criterion");
        assert_eq!(stats.clusters.pairs, count(&*rule), "{wake:?}");
        let p_mc = stats.clusters.pairs as f64 / n;
        let p_ref = pair_probability_by(&bubbles, w_mean, wake).unwrap() as f64;
        if wake.frames > 0 {
            let exact = 1.0 - (-(wake.frames as f64) / w_mean as f64).exp();
            // f32 arithmetic and micromath's exp: a few parts in a million.
            assert!((p_ref - exact).abs() < 1e-4, "{p_ref} vs {exact}");
        }
        // 20 000 draws: a standard error of about 0.003 on p.
        assert!(
            (p_ref - p_mc).abs() < 0.012 + 0.03 * p_mc,
            "{wake:?}: reference {p_ref} against Monte Carlo {p_mc}"
        );
        // The window's derived figures use the criterion the record carries.
        let d = Derived::of_tip(&stats, 40_000.0, None);
        let r = d.random.unwrap();
        assert!(
            (r.pair_probability as f64 - p_ref).abs() < 0.02,
            "{r:?} vs {p_ref}"
        );
    }
}
