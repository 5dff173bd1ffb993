//! Numeric column summaries: mean, standard deviation, range and exact
//! quantiles, in a few linear passes.
//!
//! Quantiles are exact order statistics found without sorting the column: a
//! histogram over equal-width buckets between the minimum and the maximum
//! locates the bucket holding each wanted rank (the bucket map is monotone,
//! so bucket order is value order), and only the values in those buckets are
//! sorted. On a skewed column a bucket may hold many values; the answer is
//! still exact, only slower.

use crate::data::schema::NumericSummary;

const BUCKETS: usize = 1 << 12;

/// The power of two that brings a column's largest magnitude near 1: its
/// values are divided by it before sums of squares are taken, so that a
/// column at 1e300 does not overflow and one at 1e-300 does not underflow
/// to a spread of 0. Exactly 1 for everyday magnitudes (1e-100 to 1e100),
/// where dividing would change nothing; the exponent is kept within ±1000
/// so that both the unit and its inverse are normal doubles.
pub fn magnitude_unit(largest: f64) -> f64 {
    if !(largest > 1e-100 && largest < 1e100) && largest.is_finite() && largest > 0.0 {
        2f64.powi((largest.log2().round() as i32).clamp(-1000, 1000))
    } else {
        1.0
    }
}

/// Summarises the non-missing (non-NaN) values of a column; `None` when
/// every value is missing. Mean and standard deviation are computed on the
/// values divided by [`magnitude_unit`], so they are right at any scale a
/// double holds.
pub fn summarize(values: &[f64]) -> Option<NumericSummary> {
    // Pass 1: count, sum and range.
    let mut count = 0usize;
    let mut sum = 0.0;
    let mut min = f64::INFINITY;
    let mut max = f64::NEG_INFINITY;
    for &v in values {
        if !v.is_nan() {
            count += 1;
            sum += v;
            if v < min {
                min = v;
            }
            if v > max {
                max = v;
            }
        }
    }
    if count == 0 {
        return None;
    }
    let unit = magnitude_unit(min.abs().max(max.abs()));
    let inverse_unit = 1.0 / unit;
    if unit != 1.0 {
        // Only at extreme scales: the sum again, of scaled values.
        sum = values.iter().filter(|v| !v.is_nan()).map(|v| v * inverse_unit).sum();
    }
    // The first mean, in units of `unit`.
    let rough_mean = sum / count as f64;
    // Pass 2: deviations about the first mean (the correction term keeps
    // the result accurate when the mean is large against the spread), and
    // the quantile histogram.
    let buckets = Buckets::new(min * inverse_unit, max * inverse_unit);
    let mut histogram = vec![0u32; BUCKETS];
    let mut bucket_of = vec![u16::MAX; values.len()];
    let (mut deviation_sum, mut square_sum) = (0.0, 0.0);
    for (&v, bucket) in values.iter().zip(bucket_of.iter_mut()) {
        if !v.is_nan() {
            let d = v * inverse_unit - rough_mean;
            deviation_sum += d;
            square_sum += d * d;
            let b = buckets.of(v * inverse_unit);
            histogram[b] += 1;
            *bucket = b as u16;
        }
    }
    let n = count as f64;
    let mean = (rough_mean + deviation_sum / n) * unit;
    let variance =
        if count > 1 { ((square_sum - deviation_sum * deviation_sum / n) / (n - 1.0)).max(0.0) } else { 0.0 };
    // A column with two distinct values is never constant, however close.
    let std_dev = if max > min { (variance.sqrt() * unit).max(f64::from_bits(1)) } else { 0.0 };
    let probabilities: Vec<f64> = (1..=9).map(|k| k as f64 / 10.0).chain([0.5]).collect();
    let ranks = type7_ranks(count, &probabilities);
    // Pass 3: the values in the buckets that hold the wanted ranks.
    let order = if max <= min {
        vec![min; ranks.len()]
    } else {
        order_statistics(&histogram, &ranks, values.iter().zip(&bucket_of).map(|(&v, &b)| (usize::from(b), v)))
    };
    let quantiles = interpolate_type7(count, &probabilities, &order);
    Some(NumericSummary { count, mean, std_dev, min, max, deciles: quantiles[..9].to_vec(), median: quantiles[9] })
}

/// Equal-width buckets between the minimum and the maximum; the map from
/// value to bucket is monotone, so bucket order is value order.
struct Buckets {
    min: f64,
    scale: f64,
}

impl Buckets {
    fn new(min: f64, max: f64) -> Self {
        let scale = if max > min { BUCKETS as f64 / (max - min) } else { 0.0 };
        Buckets { min, scale }
    }

    #[inline]
    fn of(&self, v: f64) -> usize {
        (((v - self.min) * self.scale) as usize).min(BUCKETS - 1)
    }
}

/// The 0-based order statistics needed for type 7 quantiles: ⌊h⌋ and ⌈h⌉
/// for each probability, h = (n − 1)p.
fn type7_ranks(count: usize, probabilities: &[f64]) -> Vec<usize> {
    let mut ranks = Vec::with_capacity(probabilities.len() * 2);
    for &p in probabilities {
        let h = (count - 1) as f64 * p;
        ranks.push(h.floor() as usize);
        ranks.push((h.ceil() as usize).min(count - 1));
    }
    ranks
}

fn interpolate_type7(count: usize, probabilities: &[f64], order: &[f64]) -> Vec<f64> {
    probabilities
        .iter()
        .enumerate()
        .map(|(i, &p)| {
            let h = (count - 1) as f64 * p;
            let low = order[2 * i];
            let high = order[2 * i + 1];
            low + (h - h.floor()) * (high - low)
        })
        .collect()
}

/// Type 7 quantiles (Hyndman & Fan 1996, "Sample quantiles in statistical
/// packages", The American Statistician 50(4)): with h = (n − 1)p, the value
/// x₍⌊h⌋₎ + (h − ⌊h⌋)(x₍⌊h⌋+1₎ − x₍⌊h⌋₎), order statistics 0-based. NaN
/// values are ignored; `count`, `min` and `max` describe the others.
pub fn quantiles_type7(values: &[f64], count: usize, min: f64, max: f64, probabilities: &[f64]) -> Vec<f64> {
    let ranks = type7_ranks(count, probabilities);
    let order = if max <= min {
        vec![min; ranks.len()]
    } else {
        let inverse_unit = 1.0 / magnitude_unit(min.abs().max(max.abs()));
        let buckets = Buckets::new(min * inverse_unit, max * inverse_unit);
        let mut histogram = vec![0u32; BUCKETS];
        for &v in values.iter().filter(|v| !v.is_nan()) {
            histogram[buckets.of(v * inverse_unit)] += 1;
        }
        let tagged = values.iter().filter(|v| !v.is_nan()).map(|&v| (buckets.of(v * inverse_unit), v));
        order_statistics(&histogram, &ranks, tagged)
    };
    interpolate_type7(count, probabilities, &order)
}

/// The values at the given 0-based ranks, from the bucket histogram and
/// the (bucket, value) pairs (pairs with a bucket out of range — missing
/// values — are ignored).
fn order_statistics(histogram: &[u32], ranks: &[usize], tagged: impl Iterator<Item = (usize, f64)>) -> Vec<f64> {
    // The first rank held by each bucket.
    let mut starts = vec![0usize; BUCKETS + 1];
    for b in 0..BUCKETS {
        starts[b + 1] = starts[b] + histogram[b] as usize;
    }
    let wanted_bucket = |rank: usize| starts.partition_point(|&s| s <= rank) - 1;
    let mut wanted = vec![false; BUCKETS];
    for &rank in ranks {
        wanted[wanted_bucket(rank)] = true;
    }
    let mut gathered: Vec<(usize, f64)> = Vec::new();
    for (b, v) in tagged {
        if b < BUCKETS && wanted[b] {
            gathered.push((b, v));
        }
    }
    gathered.sort_unstable_by(|a, b| a.0.cmp(&b.0).then(a.1.total_cmp(&b.1)));
    ranks
        .iter()
        .map(|&rank| {
            let b = wanted_bucket(rank);
            let first = gathered.partition_point(|(gb, _)| *gb < b);
            gathered[first + rank - starts[b]].1
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    fn sorted_type7(values: &[f64], p: f64) -> f64 {
        let mut v: Vec<f64> = values.iter().copied().filter(|x| !x.is_nan()).collect();
        v.sort_by(f64::total_cmp);
        let h = (v.len() - 1) as f64 * p;
        let lo = v[h.floor() as usize];
        let hi = v[h.ceil() as usize];
        lo + (h - h.floor()) * (hi - lo)
    }

    #[test]
    fn matches_a_full_sort() {
        // A skewed column with ties and missing values.
        let values: Vec<f64> = (0..10_001)
            .map(|i| if i % 97 == 0 { f64::NAN } else { ((i * 7919) % 1000) as f64 * ((i % 13) as f64).exp() })
            .collect();
        let s = summarize(&values).unwrap();
        for (k, d) in s.deciles.iter().enumerate() {
            assert_eq!(*d, sorted_type7(&values, (k + 1) as f64 / 10.0));
        }
        assert_eq!(s.median, sorted_type7(&values, 0.5));
    }

    /// Mean and standard deviation at the edges of what a double holds:
    /// the values 1, 2, 3 times 10^e have mean 2·10^e and standard
    /// deviation 10^e (n − 1 divisor), at every e.
    #[test]
    fn moments_hold_at_any_scale() {
        for e in [-300, -200, -154, 0, 154, 200, 300] {
            let scale = 10f64.powi(e);
            let s = summarize(&[scale, 2.0 * scale, 3.0 * scale]).unwrap();
            approx::assert_relative_eq!(s.mean, 2.0 * scale, max_relative = 1e-14);
            approx::assert_relative_eq!(s.std_dev, scale, max_relative = 1e-14);
            approx::assert_relative_eq!(s.median, 2.0 * scale, max_relative = 1e-14);
        }
        // Two distinct values are never constant, however close.
        let s = summarize(&[1e-320, 2e-320, 1e-320]).unwrap();
        assert!(s.std_dev > 0.0);
        assert_eq!(summarize(&[7.0, 7.0]).unwrap().std_dev, 0.0);
    }

    #[test]
    fn numpy_percentile_reference() {
        // numpy.percentile([1, 2, 3, 4, 10], [10, 50, 90]) with its default
        // (linear, type 7) method gives 1.4, 3.0, 7.6.
        let s = summarize(&[4.0, 1.0, 10.0, 3.0, 2.0]).unwrap();
        approx::assert_relative_eq!(s.deciles[0], 1.4, max_relative = 1e-12);
        approx::assert_relative_eq!(s.median, 3.0, max_relative = 1e-12);
        approx::assert_relative_eq!(s.deciles[8], 7.6, max_relative = 1e-12);
        // mean 4, sample variance ((9+4+1+0+36)/4) = 12.5
        approx::assert_relative_eq!(s.mean, 4.0, max_relative = 1e-12);
        approx::assert_relative_eq!(s.std_dev, 12.5f64.sqrt(), max_relative = 1e-12);
    }

    #[test]
    fn constant_and_empty_columns() {
        let s = summarize(&[2.5, 2.5, f64::NAN]).unwrap();
        assert_eq!((s.min, s.max, s.std_dev, s.median), (2.5, 2.5, 0.0, 2.5));
        assert!(summarize(&[f64::NAN]).is_none());
    }
}
