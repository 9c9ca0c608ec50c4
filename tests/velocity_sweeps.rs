//! Interfacial velocity and turbulence intensity through the whole path a user takes:
//! `frothline synth` scenarios (Gaussian per-bubble velocities) -> layout -> the core chain.

use frothline_core::WindowPolicy;
use frothline_host::shared::layout::Layout;
use frothline_host::shared::rig::FullRecord as ProbeWindow;
use frothline_host::shared::rig::{chain_config, Counts, HostChain};
use frothline_host::synth::{output::layout_toml, Generator, Scenario};
use std::path::Path;

#[derive(Clone, Copy)]
struct Case {
    c: f64,
    f: f64,
    v: f64,
    tu: f64,
    rate: u32,
    seconds: f64,
    shape: f64,
    seed: u64,
}

/// Render the scenario and run the chain over it with one window; return the record and
/// the layout. Runs on a thread with a large stack: a host chain is built on the stack
/// before it is boxed, and debug builds do not elide the copy.
fn run(case: &Case) -> (ProbeWindow, Layout) {
    let case = Case { ..*case };
    std::thread::Builder::new()
        .stack_size(256 << 20)
        .spawn(move || run_here(&case))
        .unwrap()
        .join()
        .unwrap()
}

fn run_here(case: &Case) -> (ProbeWindow, Layout) {
    let text = format!(
        "duration_s = {secs}\nsample_rate_hz = {rate}\nseed = {seed}\n\
         [signal]\nnoise_sigma_counts = 150.0\nwetting_time_us = 5.0\ndewetting_time_us = 10.0\n\
         [signal.drift]\nkind = \"none\"\n\
         [defaults]\ntips = 2\ntip_spacing_mm = 6.0\nchord_shape = {shape}\np_miss = 0.1\nextra_rate_ratio = 0.1\n\
         [[probe]]\nname = \"P\"\nelevation_mm = 20.0\nvoid_fraction = {c}\nbubble_rate_hz = {f}\n\
         velocity_m_s = {v}\nturbulence_intensity = {tu}\n",
        secs = case.seconds,
        rate = case.rate,
        seed = case.seed,
        shape = case.shape,
        c = case.c,
        f = case.f,
        v = case.v,
        tu = case.tu,
    );
    let scenario = Scenario::from_toml_str(&text).unwrap();
    let resolved = scenario.resolve().unwrap();
    let layout = Layout::parse(
        &layout_toml(&scenario, &resolved, &[]),
        Path::new("synth.toml"),
    )
    .unwrap();
    let gen = Generator::new(scenario, case.seed).unwrap();
    let cap = gen.render_interleaved();
    let mut cfg = chain_config(
        &layout,
        cap.channels as usize,
        cap.sample_rate_hz,
        WindowPolicy::Whole,
        &Counts,
    )
    .unwrap();
    // Fixed levels from the generator's signal (3000 / 26000 counts): no learning period.
    for p in cfg.probes.iter_mut() {
        for t in core::iter::once(&mut p.leading).chain(p.trailing.iter_mut()) {
            t.levels = frothline_core::LevelSource::Fixed {
                air: 26_000,
                water: 3_000,
            };
        }
    }
    let mut chain = Box::new(HostChain::new(cfg).unwrap());
    let mut rest = &cap.samples[..];
    let mut out = Vec::new();
    while !rest.is_empty() {
        let n = chain.push(rest);
        rest = &rest[n..];
        while let Some(r) = chain.poll() {
            out.push(r);
        }
    }
    chain.finish().unwrap();
    out.extend(std::iter::from_fn(|| chain.poll()));
    assert_eq!(out.len(), 1);
    (out.pop().unwrap(), layout)
}

fn velocity(rec: &ProbeWindow, rate: u32) -> Option<f32> {
    rec.correlation.as_ref()?.velocity_m_s(6.0, rate as f32)
}

/// V = spacing / T, the definition of the interfacial velocity of a dual-tip probe (common
/// practice, no source): over C 0.02-0.9 and V 0.5-8 m/s at 20 and 40 kHz, the velocity is
/// within 2 % of the generating value wherever the peak coefficient is at least 0.5. The
/// generator's transit time is spacing / V_i averaged over bubbles, whose mean exceeds
/// spacing / V by the factor (1 + Tu^2) for Gaussian V_i; Tu = 0.05 here keeps that bias at
/// 0.25 %.
#[test]
fn velocity_within_two_percent_across_void_fraction_velocity_and_rate() {
    let mut checked = 0;
    let mut report = Vec::new();
    for &rate in &[20_000u32, 40_000] {
        for &(c, f) in &[(0.02, 40.0), (0.2, 120.0), (0.5, 150.0), (0.9, 60.0)] {
            for &v in &[0.5, 2.0, 8.0] {
                let case = Case {
                    c,
                    f,
                    v,
                    tu: 0.05,
                    rate,
                    seconds: 8.0,
                    shape: 2.0,
                    seed: 11,
                };
                let (rec, _) = run(&case);
                let peak = rec
                    .correlation
                    .as_ref()
                    .and_then(|c| c.peak_coefficient)
                    .unwrap_or(0.0);
                let got = velocity(&rec, rate);
                report.push(format!("fs {rate} C {c} V {v}: peak {peak:.2} V {got:?}"));
                if peak >= 0.5 {
                    let got = got.expect("a velocity where the peak is strong") as f64;
                    assert!(
                        (got - v).abs() <= 0.02 * v,
                        "fs {rate} C {c} V {v}: got {got} (peak {peak})"
                    );
                    checked += 1;
                }
            }
        }
    }
    println!("{}", report.join("\n"));
    assert!(
        checked >= 18,
        "only {checked} of 24 cases had a peak >= 0.5:\n{}",
        report.join("\n")
    );
}

/// Tu = 0.851 sqrt(tau05^2 - T05^2) / T (the published correlation-width method for dual-tip
/// probes; it assumes Gaussian velocity fluctuations small enough that the transit time is
/// Gaussian too, and a cross-correlation that is the auto-correlation smeared by the
/// transit-time spread). Checked where those assumptions hold: bubbles arriving as a Poisson
/// stream (exponential chords, shape 1) with chords short next to the transit-time spread.
/// The published value is within 15 % up to Tu = 0.3; at 0.4 the transit time spacing / V of
/// Gaussian velocities is strongly skewed and the published value reads about 25 % low, so
/// the check there is on the skew-corrected value (core::correlation::tu_for_gaussian_velocity,
/// the exact inversion for Gaussian velocities), which is within 15 % over 0.1-0.4. Where the
/// method breaks regardless: evenly spaced bubbles (gamma shape >> 1) or chords as long as
/// the spread make the peak width reflect the bubble train, not the velocity fluctuations.
#[test]
fn turbulence_intensity_within_fifteen_percent_from_point_one_to_point_four() {
    use frothline_core::correlation::tu_for_gaussian_velocity;
    let mut report = Vec::new();
    for &tu in &[0.1, 0.2, 0.3, 0.4] {
        let case = Case {
            c: 0.03,
            f: 150.0,
            v: 1.0,
            tu,
            rate: 40_000,
            seconds: 40.0,
            shape: 1.0,
            seed: 5,
        };
        let (rec, _) = run(&case);
        // Chords short next to the transit-time spread: Tu is a measure, not an index.
        assert!(
            !rec.flags.contains(frothline_core::Flags::TU_INDEX),
            "Tu {tu}: flagged tu_index, {:?}",
            rec.correlation
        );
        let c = rec.correlation.unwrap();
        let published = c.turbulence_intensity.expect("Tu defined") as f64;
        let corrected =
            tu_for_gaussian_velocity(published as f32).expect("inside the table") as f64;
        report.push(format!(
            "Tu {tu}: published {published:.3}, skew-corrected {corrected:.3}"
        ));
        if tu <= 0.3 {
            assert!(
                (published - tu).abs() <= 0.15 * tu,
                "Tu {tu}: published {published}\n{}",
                report.join("\n")
            );
        }
        assert!(
            (corrected - tu).abs() <= 0.15 * tu,
            "Tu {tu}: corrected {corrected}\n{}",
            report.join("\n")
        );
    }
    println!("{}", report.join("\n"));
}

/// Chords long next to the transit-time spread (C 0.5 at 120 Hz: chords of about 4 ms
/// against a transit-time half-width of about 0.5 ms at V = 2.7 m/s, Tu = 0.16 over 6 mm)
/// make the published formula read high, as the convolution of an exponential
/// auto-correlation with a Gaussian transit-time density predicts (module documentation of
/// `frothline_core::correlation`: 50 % and more once T05 reaches the half-width), and the
/// window says that its Tu is only an index (`tu_index`: tau05 < 4 T05). The reference is
/// the generator's true Tu.
#[test]
fn long_chords_next_to_the_transit_spread_flag_tu_as_an_index() {
    let case = Case {
        c: 0.5,
        f: 120.0,
        v: 2.7,
        tu: 0.16,
        rate: 40_000,
        seconds: 30.0,
        shape: 1.0,
        seed: 7,
    };
    let (rec, _) = run(&case);
    let c = rec.correlation.unwrap();
    let (w, t05) = (c.tau05_frames.unwrap(), c.t05_frames.unwrap());
    assert!(w < 4.0 * t05, "tau05 {w} T05 {t05}");
    assert!(
        rec.flags.contains(frothline_core::Flags::TU_INDEX),
        "{:?}",
        rec.flags
    );
    let published = c.turbulence_intensity.expect("Tu defined") as f64;
    assert!(
        published > 1.15 * case.tu,
        "Tu {published} for a true {}",
        case.tu
    );
}
