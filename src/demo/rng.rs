//! A hand-written pseudo-random number generator for the demo program.
//!
//! Why not a crate: the bundled `sample-program/` is committed and a test compares it with the
//! generator's output byte for byte. A generator from a dependency may change its stream in a
//! minor release (and seeding helpers differ between versions), which would silently change every
//! generated file. SplitMix64 is a dozen lines that never change.
//!
//! SplitMix64: Steele GL, Lea D, Flood CH, "Fast splittable pseudorandom number generators",
//! OOPSLA 2014; constants as in Vigna's reference `splitmix64.c`. Normal deviates use the
//! Box–Muller transform (Box GEP, Muller ME, *Ann Math Stat* 1958;29:610–611).

/// SplitMix64 generator with a cached second Box–Muller deviate.
#[derive(Debug, Clone)]
pub struct Rng {
    state: u64,
    spare_normal: Option<f64>,
}

/// Golden-ratio increment of SplitMix64.
const GAMMA: u64 = 0x9E37_79B9_7F4A_7C15;

/// The SplitMix64 output function (a 64-bit finaliser), also used to derive stream seeds.
fn mix64(mut z: u64) -> u64 {
    z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
    z ^ (z >> 31)
}

impl Rng {
    /// A generator whose first output is SplitMix64's first output for `seed`.
    pub fn new(seed: u64) -> Self {
        Rng {
            state: seed,
            spare_normal: None,
        }
    }

    /// An independent generator for stream `stream` of `seed`. Each participant gets its own
    /// stream, so one participant's data do not depend on how many numbers another one drew
    /// (and participants can be simulated in parallel).
    pub fn stream(seed: u64, stream: u64) -> Self {
        Rng::new(mix64(
            seed ^ mix64(stream.wrapping_add(1).wrapping_mul(GAMMA)),
        ))
    }

    /// Next 64 random bits.
    pub fn next_u64(&mut self) -> u64 {
        self.state = self.state.wrapping_add(GAMMA);
        mix64(self.state)
    }

    /// Uniform in [0, 1) with 53 random bits.
    pub fn f64(&mut self) -> f64 {
        (self.next_u64() >> 11) as f64 * (1.0 / (1u64 << 53) as f64)
    }

    /// Uniform in [lo, hi).
    pub fn uniform(&mut self, lo: f64, hi: f64) -> f64 {
        lo + (hi - lo) * self.f64()
    }

    /// Uniform integer in [0, n) by multiply-shift (Lemire 2019); the bias, below n/2⁶⁴, does not
    /// matter for demo data. `n` must be positive.
    pub fn below(&mut self, n: usize) -> usize {
        debug_assert!(n > 0);
        ((self.next_u64() as u128 * n as u128) >> 64) as usize
    }

    /// Uniform integer in [lo, hi] (both included).
    pub fn int(&mut self, lo: i64, hi: i64) -> i64 {
        lo + self.below((hi - lo + 1) as usize) as i64
    }

    /// True with probability `p`.
    pub fn chance(&mut self, p: f64) -> bool {
        self.f64() < p
    }

    /// One element of a non-empty slice.
    pub fn pick<'a, T>(&mut self, items: &'a [T]) -> &'a T {
        &items[self.below(items.len())]
    }

    /// Standard normal deviate (Box–Muller, both deviates of a pair are used).
    pub fn normal(&mut self) -> f64 {
        if let Some(z) = self.spare_normal.take() {
            return z;
        }
        // 1 − u lies in (0, 1], so the logarithm is finite.
        let u1 = 1.0 - self.f64();
        let u2 = self.f64();
        let r = (-2.0 * u1.ln()).sqrt();
        let theta = std::f64::consts::TAU * u2;
        self.spare_normal = Some(r * theta.sin());
        r * theta.cos()
    }

    /// Normal deviate with the given mean and standard deviation.
    pub fn gauss(&mut self, mean: f64, sd: f64) -> f64 {
        mean + sd * self.normal()
    }

    /// Fisher–Yates shuffle (Durstenfeld's in-place form).
    pub fn shuffle<T>(&mut self, items: &mut [T]) {
        for i in (1..items.len()).rev() {
            let j = self.below(i + 1);
            items.swap(i, j);
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn splitmix64_matches_the_reference_outputs() {
        // Published reference output for seed 1234567 (Rosetta Code task
        // "Pseudo-random numbers/Splitmix64", which follows Vigna's splitmix64.c).
        let mut r = Rng::new(1234567);
        let want = [
            6457827717110365317u64,
            3203168211198807973,
            9817491932198370423,
            4593380528125082431,
            16408922859458223821,
        ];
        for w in want {
            assert_eq!(r.next_u64(), w);
        }
        // First output for seed 0 is 0xe220a8397b1dcdaf in the same reference implementation.
        assert_eq!(Rng::new(0).next_u64(), 0xE220_A839_7B1D_CDAF);
    }

    #[test]
    fn streams_differ_and_repeat() {
        let a: Vec<u64> = (0..4).map(|_| Rng::stream(7, 1).next_u64()).collect();
        assert!(a.windows(2).all(|w| w[0] == w[1]));
        let mut s1 = Rng::stream(7, 1);
        let mut s2 = Rng::stream(7, 2);
        let same = (0..64).filter(|_| s1.next_u64() == s2.next_u64()).count();
        assert_eq!(same, 0);
    }

    #[test]
    fn uniform_and_integer_ranges_hold() {
        let mut r = Rng::new(99);
        let mut seen = [0usize; 5];
        for _ in 0..10_000 {
            let x = r.f64();
            assert!((0.0..1.0).contains(&x));
            let k = r.int(3, 7);
            assert!((3..=7).contains(&k));
            seen[(k - 3) as usize] += 1;
        }
        // Every value of a 5-way uniform appears about 2000 times out of 10 000
        // (binomial sd ≈ 40, so ±300 is a wide margin).
        for c in seen {
            assert!((1700..=2300).contains(&c), "{seen:?}");
        }
    }

    #[test]
    fn box_muller_gives_standard_normal_moments() {
        let mut r = Rng::new(2026);
        let n = 200_000;
        let xs: Vec<f64> = (0..n).map(|_| r.normal()).collect();
        let mean = xs.iter().sum::<f64>() / n as f64;
        let var = xs.iter().map(|x| (x - mean).powi(2)).sum::<f64>() / (n - 1) as f64;
        // Standard errors: mean 1/√n ≈ 0.0022, variance √(2/n) ≈ 0.0032; 5 SE margins.
        assert!(mean.abs() < 0.011, "mean {mean}");
        assert!((var - 1.0).abs() < 0.016, "var {var}");
        // P(|Z| > 1.96) = 0.05 for a standard normal.
        let tail = xs.iter().filter(|x| x.abs() > 1.96).count() as f64 / n as f64;
        assert!((tail - 0.05).abs() < 0.0025, "tail {tail}");
    }

    #[test]
    fn shuffle_is_a_permutation() {
        let mut r = Rng::new(5);
        let mut v: Vec<usize> = (0..50).collect();
        r.shuffle(&mut v);
        assert_ne!(v, (0..50).collect::<Vec<_>>());
        v.sort_unstable();
        assert_eq!(v, (0..50).collect::<Vec<_>>());
    }
}
