//! Seeded noise, the same on every machine and every release of the toolchain.
//!
//! Uniform numbers come from SplitMix64 (Steele, Lea & Flood, "Fast splittable
//! pseudorandom number generators", OOPSLA 2014; the constants are the published
//! ones), Gaussian ones from the Box-Muller transform (Box & Muller, "A note on the
//! generation of random normal deviates", Annals of Mathematical Statistics, 1958).
//! A generator of our own keeps golden traces stable across dependency updates.

/// A standard normal generator.
#[derive(Clone, Debug)]
pub struct Gaussian {
    state: u64,
    spare: Option<f64>,
}

impl Gaussian {
    /// A generator from a seed.
    pub fn new(seed: u64) -> Self {
        Self {
            state: seed,
            spare: None,
        }
    }

    /// A uniform number in (0, 1].
    pub fn uniform(&mut self) -> f64 {
        self.state = self.state.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.state;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^= z >> 31;
        // 53 random bits, shifted to (0, 1] so the logarithm below is finite.
        ((z >> 11) as f64 + 1.0) / (1u64 << 53) as f64
    }

    /// A sample of the standard normal distribution.
    pub fn sample(&mut self) -> f64 {
        if let Some(s) = self.spare.take() {
            return s;
        }
        let r = (-2.0 * self.uniform().ln()).sqrt();
        let theta = 2.0 * std::f64::consts::PI * self.uniform();
        self.spare = Some(r * theta.sin());
        r * theta.cos()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn moments_are_those_of_a_standard_normal() {
        let mut g = Gaussian::new(42);
        let n = 200_000;
        let (mut s1, mut s2) = (0.0, 0.0);
        for _ in 0..n {
            let x = g.sample();
            s1 += x;
            s2 += x * x;
        }
        let mean = s1 / n as f64;
        let var = s2 / n as f64 - mean * mean;
        // Standard error of the mean is 1/sqrt(n) = 0.0022; allow about 4 of them.
        assert!(mean.abs() < 0.01, "{mean}");
        assert!((var - 1.0).abs() < 0.015, "{var}");
    }

    #[test]
    fn same_seed_same_numbers() {
        let (mut a, mut b) = (Gaussian::new(7), Gaussian::new(7));
        for _ in 0..10 {
            assert_eq!(a.sample().to_bits(), b.sample().to_bits());
        }
    }
}
