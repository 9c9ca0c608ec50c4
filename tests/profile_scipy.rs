//! The core's joint profile fit against a general-purpose reference: scipy's
//! `optimize.least_squares` fitting the same models to the same points under the same rule
//! (tests/python/profile_vs_scipy.py: the bracket of Y90, equal weights then two passes
//! weighted from the previous model). They must agree within 1e-3 in n, 1e-3 relative in
//! D' and 0.1 mm in Y90; the standard errors within 2 % of scipy's `(Jᵀ J)⁻¹`; the core's
//! table of χ² quantiles with `scipy.stats.chi2.ppf`.
//!
//! Needs python3 with numpy and scipy (`pip install scipy numpy`, as .ci/run does).

use frothline_core::profile::{
    fit_profile, renewal_sigma, ProfileConfig, ProfilePoint, CHI2_99, MAX_PROFILE_POINTS,
};
use rand::{rngs::StdRng, SeedableRng};
use rand_distr::{Distribution, Normal};
use serde_json::{json, Value};
use std::path::Path;
use std::process::Command;

/// Noisy power-law and exponential profiles on coarse arrays, with and without standard
/// errors (the generating shapes of core/tests/profile.rs).
fn cases() -> Vec<Vec<ProfilePoint>> {
    let mut rng = StdRng::seed_from_u64(3);
    let z = Normal::new(0.0, 1.0).unwrap();
    let arrays: [&[f32]; 4] = [
        &[5.0, 16.0, 27.0, 38.0, 49.0, 60.0],
        &[8.0, 14.0, 26.0, 45.0, 70.0],
        &[15.0, 25.0, 35.0, 45.0, 55.0, 65.0, 75.0],
        &[5.0, 12.0, 20.0, 29.0, 39.0, 50.0, 62.0, 75.0],
    ];
    let mut out = Vec::new();
    for (a, ys) in arrays.iter().enumerate() {
        for &(shape, y90) in &[(0.4f64, 33.0f64), (1.2, 47.0), (2.5, 58.0)] {
            for known in [true, false] {
                for rep in 0..3 {
                    let pts: Vec<ProfilePoint> = ys
                        .iter()
                        .map(|&y| {
                            let y = y as f64;
                            let c0 = if y > y90 {
                                1.0 - 0.1 * (-(y - y90) / 6.0).exp()
                            } else if (a + rep) % 2 == 0 {
                                0.9 * (y / y90).powf(shape)
                            } else {
                                0.9 * ((y / y90 - 1.0) / (shape / 3.0)).exp()
                            };
                            let s0 = renewal_sigma(c0 as f32, 30, None, None) as f64;
                            let c = (c0 + s0 * z.sample(&mut rng)).clamp(0.0, 1.0) as f32;
                            let sigma = if known {
                                renewal_sigma(c, 30, None, None)
                            } else {
                                0.0
                            };
                            ProfilePoint::with_sigma(y as f32, c, sigma)
                        })
                        .collect();
                    out.push(pts);
                }
            }
        }
    }
    out
}

fn opt(v: Option<f32>) -> Value {
    v.map_or(Value::Null, |x| json!(x))
}

#[test]
fn joint_fit_agrees_with_scipy_least_squares() {
    let mut list = Vec::new();
    for pts in cases() {
        assert!(pts.len() <= MAX_PROFILE_POINTS);
        let fit = fit_profile(&pts, &ProfileConfig::default());
        let (Some(p), Some(e)) = (fit.power_law, fit.exponential) else {
            continue;
        };
        list.push(json!({
            "y": pts.iter().map(|p| p.y_mm).collect::<Vec<_>>(),
            "c": pts.iter().map(|p| p.c).collect::<Vec<_>>(),
            "sigma": pts.iter().map(|p| p.sigma).collect::<Vec<_>>(),
            "power_law": {
                "y90": p.y90_mm, "shape": p.exponent, "chi2": p.chi2,
                "se_y90": opt(p.errors.y90_mm), "se_shape": opt(p.errors.shape),
                "converged": !fit.flags.contains(frothline_core::profile::ProfileFlags::POWER_LAW_NOT_CONVERGED),
            },
            "exponential": {
                "y90": e.y90_mm, "shape": e.diffusivity, "chi2": e.chi2,
                "se_y90": opt(e.errors.y90_mm), "se_shape": opt(e.errors.shape),
                "converged": !fit.flags.contains(frothline_core::profile::ProfileFlags::EXPONENTIAL_NOT_CONVERGED),
            },
        }));
    }
    assert!(list.len() >= 60, "{} cases", list.len());
    let doc = json!({ "chi2_99": CHI2_99.to_vec(), "cases": list });
    let dir = tempfile::tempdir().unwrap();
    let file = dir.path().join("cases.json");
    std::fs::write(&file, serde_json::to_string(&doc).unwrap()).unwrap();
    let script = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/python/profile_vs_scipy.py");
    let out = Command::new("python3")
        .arg(&script)
        .arg(&file)
        .output()
        .expect("python3 runs");
    print!("{}", String::from_utf8_lossy(&out.stdout));
    eprint!("{}", String::from_utf8_lossy(&out.stderr));
    assert!(out.status.success(), "the scipy comparison failed");
}
