//! A small seeded random number generator of our own, used for every random
//! step (demo data, splits, bootstraps), so that outputs depend on nothing
//! but this code: a dependency upgrade can never change them.
//!
//! The generator is xoshiro256** (Blackman & Vigna 2021, "Scrambled linear
//! pseudorandom number generators", ACM TOMS 47(4)), seeded through
//! SplitMix64 as its authors recommend. Normals come from the Box–Muller
//! transform (Box & Muller 1958), which uses exactly two uniforms per pair.

/// A seeded xoshiro256** generator.
#[derive(Debug, Clone)]
pub struct Rng {
    state: [u64; 4],
    spare_normal: Option<f64>,
}

fn splitmix64(x: &mut u64) -> u64 {
    *x = x.wrapping_add(0x9E37_79B9_7F4A_7C15);
    let mut z = *x;
    z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
    z ^ (z >> 31)
}

impl Rng {
    /// A generator whose whole output is fixed by `seed`.
    pub fn new(seed: u64) -> Self {
        let mut x = seed;
        Rng {
            state: [splitmix64(&mut x), splitmix64(&mut x), splitmix64(&mut x), splitmix64(&mut x)],
            spare_normal: None,
        }
    }

    /// The next 64 random bits.
    pub fn next_u64(&mut self) -> u64 {
        let s = &mut self.state;
        let result = s[1].wrapping_mul(5).rotate_left(7).wrapping_mul(9);
        let t = s[1] << 17;
        s[2] ^= s[0];
        s[3] ^= s[1];
        s[1] ^= s[2];
        s[0] ^= s[3];
        s[2] ^= t;
        s[3] = s[3].rotate_left(45);
        result
    }

    /// Uniform on [0, 1) with 53 random bits.
    pub fn uniform(&mut self) -> f64 {
        (self.next_u64() >> 11) as f64 * (1.0 / (1u64 << 53) as f64)
    }

    /// Standard normal (Box–Muller; the second value of each pair is kept
    /// for the next call).
    pub fn normal(&mut self) -> f64 {
        if let Some(z) = self.spare_normal.take() {
            return z;
        }
        // 1 − u lies in (0, 1], so the logarithm is finite.
        let radius = (-2.0 * (1.0 - self.uniform()).ln()).sqrt();
        let angle = std::f64::consts::TAU * self.uniform();
        self.spare_normal = Some(radius * angle.sin());
        radius * angle.cos()
    }

    /// The seed of one independent stream derived from `seed`.
    pub fn stream_seed(seed: u64, stream: u64) -> u64 {
        Rng::new(seed ^ stream.wrapping_mul(0x9E37_79B9_7F4A_7C15)).next_u64()
    }

    /// True with probability `p`.
    pub fn bernoulli(&mut self, p: f64) -> bool {
        self.uniform() < p
    }

    /// An index drawn with the given probabilities (which sum to 1).
    pub fn choose(&mut self, probabilities: &[f64]) -> usize {
        let u = self.uniform();
        let mut cumulative = 0.0;
        for (i, p) in probabilities.iter().enumerate() {
            cumulative += p;
            if u < cumulative {
                return i;
            }
        }
        probabilities.len() - 1
    }

    /// Poisson with mean `lambda` (Knuth's product-of-uniforms method; fine
    /// for the small means used here).
    pub fn poisson(&mut self, lambda: f64) -> u32 {
        let limit = (-lambda).exp();
        let mut k = 0;
        let mut product = self.uniform();
        while product > limit {
            k += 1;
            product *= self.uniform();
        }
        k
    }

    /// Student's t with an integer number of degrees of freedom: a normal
    /// over the root of a chi-square (a sum of squared normals) over its
    /// degrees of freedom.
    pub fn student_t(&mut self, degrees_of_freedom: u32) -> f64 {
        let z = self.normal();
        let chi_square: f64 = (0..degrees_of_freedom).map(|_| self.normal().powi(2)).sum();
        z / (chi_square / f64::from(degrees_of_freedom)).sqrt()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn reference_output() {
        // SplitMix64 from seed 0 gives 0xE220A8397B1DCDAF first (Vigna's
        // reference implementation, splitmix64.c).
        let mut x = 0u64;
        assert_eq!(splitmix64(&mut x), 0xE220_A839_7B1D_CDAF);
    }

    #[test]
    fn same_seed_same_stream() {
        let a: Vec<u64> = {
            let mut r = Rng::new(7);
            (0..5).map(|_| r.next_u64()).collect()
        };
        let mut r = Rng::new(7);
        let b: Vec<u64> = (0..5).map(|_| r.next_u64()).collect();
        assert_eq!(a, b);
        assert_ne!(Rng::new(8).next_u64(), a[0]);
    }

    #[test]
    fn moments_are_right() {
        let mut r = Rng::new(1);
        let n = 200_000;
        let draws: Vec<f64> = (0..n).map(|_| r.normal()).collect();
        let mean = draws.iter().sum::<f64>() / n as f64;
        let var = draws.iter().map(|z| (z - mean).powi(2)).sum::<f64>() / n as f64;
        // Monte-Carlo error of the mean is 1/sqrt(n) ≈ 0.0022; allow 4 SE.
        assert!(mean.abs() < 0.009, "mean {mean}");
        assert!((var - 1.0).abs() < 0.013, "variance {var}");
        let poisson_mean = (0..n).map(|_| f64::from(r.poisson(1.5))).sum::<f64>() / n as f64;
        assert!((poisson_mean - 1.5).abs() < 0.011, "poisson mean {poisson_mean}");
    }
}
