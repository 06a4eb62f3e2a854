//! Random streams per work chunk, and direction sampling.
//!
//! A ray's random numbers depend on what is computed (master seed, job key, chunk index),
//! never on the thread that computes it: results are bit-for-bit reproducible for a seed
//! whatever the thread count. `Stream` alone names the generator crate.

use crate::geometry::Vec3;
use crate::geometry::lanes::LANES;
use rand::{RngCore, SeedableRng};
use rand_xoshiro::Xoshiro256PlusPlus;

/// One SplitMix64 step: a bijective 64-bit mixer. Source: G. L. Steele, D. Lea &
/// C. H. Flood, "Fast splittable pseudorandom number generators", OOPSLA 2014.
#[inline]
pub fn splitmix64(x: u64) -> u64 {
    let mut z = x.wrapping_add(0x9E37_79B9_7F4A_7C15);
    z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
    z ^ (z >> 31)
}

/// A deterministic random stream for one work chunk.
#[derive(Clone, Debug)]
pub struct Stream {
    rng: Xoshiro256PlusPlus,
}

impl Stream {
    /// Stream for (master seed, job key, chunk index): the triple is mixed by chained
    /// SplitMix64 so nearby keys give unrelated streams, then seeds xoshiro256++
    /// (D. Blackman & S. Vigna, ACM TOMS 47(4), 36 (2021)).
    pub fn new(seed: u64, job_key: u64, chunk: u64) -> Self {
        let h = splitmix64(splitmix64(splitmix64(seed) ^ job_key) ^ chunk);
        Stream {
            rng: Xoshiro256PlusPlus::seed_from_u64(h),
        }
    }

    /// Uniform in [0, 1) with 53 random bits.
    #[inline]
    pub fn uniform(&mut self) -> f64 {
        (self.rng.next_u64() >> 11) as f64 * (1.0 / (1u64 << 53) as f64)
    }

    /// Raw 64 random bits.
    #[inline]
    pub fn next_u64(&mut self) -> u64 {
        self.rng.next_u64()
    }

    /// Cosine-weighted direction in the hemisphere around +z (pdf cos θ / π), as an ideal
    /// Lambertian surface emits. Malley's method: uniform disc point lifted to the hemisphere.
    #[inline]
    pub fn cosine_hemisphere(&mut self) -> Vec3 {
        let sin2 = self.uniform();
        let phi = std::f64::consts::TAU * self.uniform();
        let s = sin2.sqrt();
        Vec3::new(s * phi.cos(), s * phi.sin(), (1.0 - sin2).max(0.0).sqrt())
    }

    /// Uniform direction in the hemisphere around +z (pdf 1/(2π)).
    #[inline]
    pub fn uniform_hemisphere(&mut self) -> Vec3 {
        let cos_t = 1.0 - self.uniform();
        let sin_t = (1.0 - cos_t * cos_t).max(0.0).sqrt();
        let phi = std::f64::consts::TAU * self.uniform();
        Vec3::new(sin_t * phi.cos(), sin_t * phi.sin(), cos_t)
    }
}

/// One xoshiro256++ generator per packet lane ([`LANES`]), stored lane by lane, so that one
/// step of all of them compiles to a few SIMD integer instructions (for the packet tracer:
/// random numbers for the rays in flight). The algorithm is xoshiro256++ (D. Blackman &
/// S. Vigna, "Scrambled linear pseudorandom number generators", ACM TOMS 47(4), 36 (2021)),
/// the generator of
/// [`Stream`]; each lane is seeded from its parent stream through SplitMix64.
#[derive(Clone, Debug)]
pub struct LaneStreams {
    s: [[u64; LANES]; 4],
}

impl LaneStreams {
    /// The generators seeded from `parent` (deterministically: four of its draws per lane,
    /// mixed).
    pub fn from_stream(parent: &mut Stream) -> Self {
        let mut s = [[0u64; LANES]; 4];
        for lane in 0..LANES {
            for word in &mut s {
                word[lane] = splitmix64(parent.next_u64());
            }
            // xoshiro's one forbidden state (all zero) has probability 2^-256; excluded anyway.
            if s.iter().all(|w| w[lane] == 0) {
                s[0][lane] = 1;
            }
        }
        LaneStreams { s }
    }

    /// The next 64 bits of every lane.
    #[inline(always)]
    pub fn next_u64(&mut self) -> [u64; LANES] {
        let [s0, s1, s2, s3] = &mut self.s;
        let out = std::array::from_fn(|l| {
            s0[l]
                .wrapping_add(s3[l])
                .rotate_left(23)
                .wrapping_add(s0[l])
        });
        for l in 0..LANES {
            let t = s1[l] << 17;
            s2[l] ^= s0[l];
            s3[l] ^= s1[l];
            s1[l] ^= s2[l];
            s0[l] ^= s3[l];
            s2[l] ^= t;
            s3[l] = s3[l].rotate_left(45);
        }
        out
    }

    /// A uniform number in [0, 1) per lane, from the top 52 bits (an exponent-stuffing
    /// conversion that needs no integer-to-float instruction).
    #[inline(always)]
    pub fn uniform(&mut self) -> [f64; LANES] {
        self.next_u64()
            .map(|x| f64::from_bits((x >> 12) | 0x3FF0_0000_0000_0000) - 1.0)
    }

    /// Two uniform numbers in [0, 1) per lane from one draw: its upper and its lower 32 bits
    /// (steps of 2⁻³², fine enough for points of a unit cell), converted as in
    /// [`Self::uniform`].
    #[inline(always)]
    pub fn uniform_pair(&mut self) -> ([f64; LANES], [f64; LANES]) {
        let x = self.next_u64();
        let unit = |bits: u64| f64::from_bits((bits << 20) | 0x3FF0_0000_0000_0000) - 1.0;
        (x.map(|x| unit(x >> 32)), x.map(|x| unit(x & 0xFFFF_FFFF)))
    }
}

/// Packs a wavelength index and an incidence index into a job key.
#[inline]
pub fn job_key(wavelength_index: u32, incidence_index: u32) -> u64 {
    ((wavelength_index as u64) << 32) | incidence_index as u64
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn streams_are_reproducible_and_distinct() {
        let a: Vec<u64> = (0..4).map(|_| Stream::new(7, 1, 2).next_u64()).collect();
        assert!(a.windows(2).all(|w| w[0] == w[1]));
        assert_ne!(
            Stream::new(7, 1, 2).next_u64(),
            Stream::new(7, 1, 3).next_u64()
        );
        assert_ne!(
            Stream::new(7, 1, 2).next_u64(),
            Stream::new(7, 2, 2).next_u64()
        );
    }

    #[test]
    fn cosine_hemisphere_mean_cos_is_two_thirds() {
        // ⟨cos θ⟩ = ∫cos²θ sinθ dθ dφ / π = 2/3 for the cosine-weighted hemisphere.
        let mut s = Stream::new(1, 0, 0);
        let n = 200_000;
        let m: f64 = (0..n).map(|_| s.cosine_hemisphere().z).sum::<f64>() / n as f64;
        // σ(cos) = √(1/2 − 4/9) ≈ 0.236, so 4σ/√n ≈ 0.0021.
        assert!((m - 2.0 / 3.0).abs() < 0.0021, "mean cos {m}");
    }

    #[test]
    fn lanes_follow_the_reference_xoshiro256plusplus() {
        // Each lane must be the xoshiro256++ sequence of its state, as the rand_xoshiro
        // crate computes it (reference implementation of Blackman & Vigna 2021).
        let mut parent = Stream::new(3, 4, 5);
        let mut lanes = LaneStreams::from_stream(&mut parent);
        let mut reference: Vec<Xoshiro256PlusPlus> = (0..LANES)
            .map(|l| {
                let mut seed = [0u8; 32];
                for (w, word) in lanes.s.iter().enumerate() {
                    seed[8 * w..8 * w + 8].copy_from_slice(&word[l].to_le_bytes());
                }
                Xoshiro256PlusPlus::from_seed(seed)
            })
            .collect();
        for _ in 0..1000 {
            let got = lanes.next_u64();
            for (l, r) in reference.iter_mut().enumerate() {
                assert_eq!(got[l], r.next_u64());
            }
        }
        // Uniforms: in [0, 1), mean 1/2 (σ of the mean of 4·10⁵ is 0.00046; 5σ bound).
        let n = 100_000;
        let mut sum = 0.0;
        for _ in 0..n {
            for u in lanes.uniform() {
                assert!((0.0..1.0).contains(&u));
                sum += u;
            }
        }
        assert!((sum / (4 * n) as f64 - 0.5).abs() < 0.0023);
    }

    #[test]
    fn uniform_pairs_are_the_halves_of_one_draw_and_independent() {
        let mut a = LaneStreams::from_stream(&mut Stream::new(8, 9, 10));
        let mut b = LaneStreams::from_stream(&mut Stream::new(8, 9, 10));
        let n = 100_000;
        let (mut su, mut sv, mut suv) = (0.0, 0.0, 0.0);
        for _ in 0..n {
            let (u, v) = a.uniform_pair();
            let x = b.next_u64();
            for l in 0..LANES {
                assert!((0.0..1.0).contains(&u[l]) && (0.0..1.0).contains(&v[l]));
                // exact: 32-bit integers scaled by 2⁻³²
                assert_eq!(u[l], (x[l] >> 32) as f64 / 4_294_967_296.0);
                assert_eq!(v[l], (x[l] & 0xFFFF_FFFF) as f64 / 4_294_967_296.0);
                (su, sv, suv) = (su + u[l], sv + v[l], suv + u[l] * v[l]);
            }
        }
        // Means 1/2 and covariance 0 (σ of the mean of 4·10⁵ uniforms 0.00046, of u·v's
        // about 0.00036: 5σ bounds).
        let m = (4 * n) as f64;
        assert!((su / m - 0.5).abs() < 0.0023 && (sv / m - 0.5).abs() < 0.0023);
        assert!((suv / m - (su / m) * (sv / m)).abs() < 0.0018);
    }
}
