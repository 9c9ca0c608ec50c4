//! Running means with confidence intervals for serially correlated window values.
//!
//! Successive analysis windows of one probe are not independent (large eddies, surges and
//! slow level drifts span several windows), so the textbook interval `s / sqrt(n)` over the
//! windows is too narrow. The method of non-overlapping batch means groups consecutive
//! windows into batches long enough for their means to be nearly independent, and builds a
//! Student-t interval from the spread of the batch means (Law, *Simulation Modeling and
//! Analysis*, batch-means section; Schmeiser 1982, "Batch size effects in the analysis of
//! simulation output", Operations Research 30(3), advises 10 to 30 batches — both from
//! memory).
//!
//! The number of windows is not known in advance, so the batches are dynamic (Yeh and
//! Schmeiser 2000, "Simulation output analysis via dynamic batch means", Proc. Winter
//! Simulation Conference, from memory): a fixed array of [`MAX_BATCHES`] batches of equal
//! size; when it is full, neighbours are merged pairwise and the batch size doubles. Memory
//! is fixed, the work per value is O(1) amortised, and the batch count stays between
//! `MAX_BATCHES / 2` and `MAX_BATCHES` once that many values came in.
//!
//! Values carry weights (a window's duration, or its bubbles): a batch mean is the weighted
//! mean of its windows, the overall mean is the weighted mean of every value, exactly. The
//! interval treats the batch means as equally reliable (equal-length windows make them so).

/// Batches kept (even). Between 16 and 32 batch means enter an interval once 32 values came.
pub const MAX_BATCHES: usize = 32;

/// Batches needed before an interval is called converged (fewer batches give a wide
/// t quantile and an unreliable spread). Common practice, no source.
pub const MIN_BATCHES_FOR_CONVERGENCE: usize = 10;

/// Two-sided 95 % quantiles of Student's t, t(0.975; df) for df = 1..=31 (standard table
/// values, e.g. Abramowitz and Stegun table 26.10; checked against `statrs` in the tests).
const T975: [f64; 31] = [
    12.706, 4.303, 3.182, 2.776, 2.571, 2.447, 2.365, 2.306, 2.262, 2.228, 2.201, 2.179, 2.160,
    2.145, 2.131, 2.120, 2.110, 2.101, 2.093, 2.086, 2.080, 2.074, 2.069, 2.064, 2.060, 2.056,
    2.052, 2.048, 2.045, 2.042, 2.040,
];

/// t(0.975; df): the table, and the normal quantile 1.960 beyond it.
pub fn t975(df: usize) -> Option<f64> {
    match df {
        0 => None,
        d if d <= T975.len() => Some(T975[d - 1]),
        _ => Some(1.960),
    }
}

/// One batch: weighted sum and weight.
#[derive(Clone, Copy, Debug, Default, PartialEq)]
struct Batch {
    sum: f64,
    weight: f64,
}

impl Batch {
    fn add(&mut self, other: Batch) {
        self.sum += other.sum;
        self.weight += other.weight;
    }
    fn mean(self) -> Option<f64> {
        (self.weight > 0.0).then(|| self.sum / self.weight)
    }
}

/// A running weighted mean and its batch-means confidence interval.
#[derive(Clone, Debug, PartialEq)]
pub struct BatchMeans {
    full: [Batch; MAX_BATCHES],
    /// Full batches in `full`.
    filled: usize,
    /// The batch being filled, and the values in it.
    current: Batch,
    in_current: u64,
    /// Values per batch (a power of two).
    batch_size: u64,
    total: Batch,
    values: u64,
}

impl Default for BatchMeans {
    fn default() -> Self {
        BatchMeans {
            full: [Batch::default(); MAX_BATCHES],
            filled: 0,
            current: Batch::default(),
            in_current: 0,
            batch_size: 1,
            total: Batch::default(),
            values: 0,
        }
    }
}

/// A mean and its 95 % confidence interval.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Estimate {
    /// The weighted mean of every value.
    pub mean: f64,
    /// Half-width of the 95 % interval (none with fewer than 2 full batches).
    pub half_width: Option<f64>,
    /// Full batches behind the interval.
    pub batches: usize,
    /// Values behind the mean.
    pub values: u64,
}

impl Estimate {
    /// Half-width over |mean| (none when either is missing or the mean is 0).
    pub fn relative_half_width(&self) -> Option<f64> {
        let h = self.half_width?;
        (self.mean != 0.0 && self.mean.is_finite()).then(|| h / self.mean.abs())
    }

    /// True when the interval is at most `target` of the mean (relative), on enough batches.
    pub fn converged(&self, target: f64) -> bool {
        self.batches >= MIN_BATCHES_FOR_CONVERGENCE
            && self.relative_half_width().is_some_and(|r| r <= target)
    }
}

impl BatchMeans {
    /// No value yet.
    pub fn new() -> Self {
        Self::default()
    }

    /// Add `value` with `weight`. Non-finite values and weights, and weights of zero or
    /// less, are ignored.
    pub fn push(&mut self, value: f64, weight: f64) {
        if !(value.is_finite() && weight.is_finite() && weight > 0.0) {
            return;
        }
        let b = Batch {
            sum: value * weight,
            weight,
        };
        self.total.add(b);
        self.values = self.values.saturating_add(1);
        self.current.add(b);
        self.in_current += 1;
        if self.in_current < self.batch_size {
            return;
        }
        self.full[self.filled] = self.current;
        self.filled += 1;
        self.current = Batch::default();
        self.in_current = 0;
        if self.filled == MAX_BATCHES {
            for i in 0..MAX_BATCHES / 2 {
                let mut m = self.full[2 * i];
                m.add(self.full[2 * i + 1]);
                self.full[i] = m;
            }
            for b in &mut self.full[MAX_BATCHES / 2..] {
                *b = Batch::default();
            }
            self.filled = MAX_BATCHES / 2;
            self.batch_size = self.batch_size.saturating_mul(2);
        }
    }

    /// Values taken.
    pub fn values(&self) -> u64 {
        self.values
    }

    /// Values per batch now.
    pub fn batch_size(&self) -> u64 {
        self.batch_size
    }

    /// The mean and its interval; none before the first value.
    pub fn estimate(&self) -> Option<Estimate> {
        let mean = self.total.mean()?;
        let means: Vec<f64> = self.full[..self.filled]
            .iter()
            .filter_map(|b| b.mean())
            .collect();
        let b = means.len();
        let half_width = t975(b.saturating_sub(1)).map(|t| {
            let m = means.iter().sum::<f64>() / b as f64;
            let var = means.iter().map(|x| (x - m) * (x - m)).sum::<f64>() / (b - 1) as f64;
            t * (var / b as f64).sqrt()
        });
        Some(Estimate {
            mean,
            half_width,
            batches: b,
            values: self.values,
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::SeedableRng;
    use rand_distr::{Distribution, Normal};

    /// The t table against statrs' inverse CDF of Student's t (a reference library).
    #[test]
    fn t_table_matches_statrs() {
        use statrs::distribution::{ContinuousCDF, StudentsT};
        for df in 1..=31usize {
            let t = StudentsT::new(0.0, 1.0, df as f64).unwrap();
            let want = t.inverse_cdf(0.975);
            let got = t975(df).unwrap();
            assert!((got - want).abs() < 6e-4, "df {df}: {got} vs {want}");
        }
        assert_eq!(t975(0), None);
        assert_eq!(t975(1000), Some(1.960));
    }

    /// Merging batches keeps the overall weighted mean exact and the count within bounds.
    #[test]
    fn the_mean_is_exact_and_batches_stay_in_bounds() {
        let mut b = BatchMeans::new();
        let (mut sw, mut s) = (0.0, 0.0);
        for i in 0..1000 {
            let (x, w) = ((i % 7) as f64, 1.0 + (i % 3) as f64);
            b.push(x, w);
            s += x * w;
            sw += w;
            let e = b.estimate().unwrap();
            assert!((e.mean - s / sw).abs() < 1e-12);
            if i >= MAX_BATCHES {
                assert!((MAX_BATCHES / 2..MAX_BATCHES).contains(&e.batches), "{e:?}");
            }
        }
        b.push(f64::NAN, 1.0);
        b.push(1.0, 0.0);
        b.push(1.0, f64::INFINITY);
        assert_eq!(b.values(), 1000);
        assert_eq!(BatchMeans::new().estimate(), None);
    }

    /// AR(1) series x_t = phi x_{t-1} + e_t (mean 0): the batch-means interval covers the
    /// true mean about 95 % of the time, where the naive interval s/sqrt(n) does not. The
    /// variance of the mean of an AR(1) series is sigma^2/n (1 + phi)/(1 - phi) for large n
    /// (Box and Jenkins, *Time Series Analysis*, from memory): with phi = 0.8 the naive
    /// half-width is 3 times too narrow, and its coverage falls near 50 %.
    #[test]
    fn batch_means_cover_the_mean_of_a_correlated_series() {
        let mut rng = rand::rngs::StdRng::seed_from_u64(7);
        let normal = Normal::new(0.0, 1.0).unwrap();
        let (runs, n, phi) = (400, 2000, 0.8);
        let (mut covered, mut naive_covered) = (0, 0);
        for _ in 0..runs {
            let mut b = BatchMeans::new();
            let mut x: f64 = normal.sample(&mut rng) / (1.0f64 - phi * phi).sqrt();
            let (mut s, mut s2) = (0.0, 0.0);
            for _ in 0..n {
                x = phi * x + normal.sample(&mut rng);
                b.push(x, 1.0);
                s += x;
                s2 += x * x;
            }
            let e = b.estimate().unwrap();
            if e.mean.abs() <= e.half_width.unwrap() {
                covered += 1;
            }
            let m = s / n as f64;
            let sd = ((s2 - n as f64 * m * m) / (n - 1) as f64).sqrt();
            if m.abs() <= 1.96 * sd / (n as f64).sqrt() {
                naive_covered += 1;
            }
        }
        let cov = covered as f64 / runs as f64;
        let naive = naive_covered as f64 / runs as f64;
        assert!((0.90..=0.985).contains(&cov), "batch means coverage {cov}");
        assert!(naive < 0.75, "naive coverage {naive}");
    }

    /// Independent values: the interval approaches 1.96 sigma / sqrt(n) of the normal law.
    #[test]
    fn independent_values_give_the_classical_width() {
        let mut rng = rand::rngs::StdRng::seed_from_u64(3);
        let normal = Normal::new(5.0, 2.0).unwrap();
        let mut b = BatchMeans::new();
        let n = 1 << 16;
        for _ in 0..n {
            b.push(normal.sample(&mut rng), 1.0);
        }
        let e = b.estimate().unwrap();
        let classical = 1.96 * 2.0 / (n as f64).sqrt();
        // 16..32 batch means estimate the spread to about +-25 %, and t(15) = 2.131.
        assert!(
            (0.6..1.6).contains(&(e.half_width.unwrap() / classical)),
            "{e:?} vs {classical}"
        );
        assert!((e.mean - 5.0).abs() < 4.0 * classical);
        assert!(e.converged(0.01));
        assert!(!e.converged(1e-6));
    }
}
