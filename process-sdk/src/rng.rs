//! The counter-based random generator that makes every module deterministic.
//!
//! Why this exists: particles are processed in parallel chunks and their
//! order of arrival at a module depends on nothing but the batch, so a law
//! must never share a generator between records. Each record instead
//! carries an [`RngKey`] (run seed, particle id, event counter, stream) set
//! by the host, and the generator is a pure function of that key and of how
//! many numbers have been drawn from it. A law can therefore draw as many
//! numbers as it likes (rejection sampling) and the result is the same on
//! any thread count, natively or in wasm.
//!
//! The generator is Philox4x32-10 (Salmon, Moraes, Dror & Shaw 2011,
//! "Parallel random numbers: as easy as 1, 2, 3", SC'11): a keyed bijection
//! of a 128-bit counter, built from 32-bit multiplies so that it is cheap
//! on wasm32. The 64-bit Philox key is the run seed; the counter words are
//! `[block | stream << 24, event, particle low, particle high | step << 8]`:
//! particle ids below 2^40 ([`MAX_PARTICLE_ID`]) and steps below 2^24 each
//! have their own bits, so every (particle, event, stream, step) names its
//! own sequence of 2^24 blocks.

use crate::records::RngKey;

const M0: u32 = 0xD251_1F53;
const M1: u32 = 0xCD9E_8D57;
const W0: u32 = 0x9E37_79B9;
const W1: u32 = 0xBB67_AE85;

/// Number of 128-bit blocks one key can produce before its counter would
/// run into the next stream: 2^24 blocks, i.e. 2^25 64-bit draws.
pub const BLOCKS_PER_KEY: u32 = 1 << 24;

/// Particle ids must stay below this (2^40) so that they do not overlap
/// the step's bits in the counter, dimensionless.
pub const MAX_PARTICLE_ID: u64 = 1 << 40;

#[inline(always)]
fn mulhilo(a: u32, b: u32) -> (u32, u32) {
    let p = (a as u64) * (b as u64);
    ((p >> 32) as u32, p as u32)
}

/// The raw Philox4x32 bijection with 10 rounds: counter and key in, four
/// 32-bit words out. Exposed for known-answer tests.
#[inline]
pub fn philox4x32_10(ctr: [u32; 4], key: [u32; 2]) -> [u32; 4] {
    let mut c = ctr;
    let mut k = key;
    for round in 0..10 {
        if round > 0 {
            k[0] = k[0].wrapping_add(W0);
            k[1] = k[1].wrapping_add(W1);
        }
        let (hi0, lo0) = mulhilo(M0, c[0]);
        let (hi1, lo1) = mulhilo(M1, c[2]);
        c = [hi1 ^ c[1] ^ k[0], lo1, hi0 ^ c[3] ^ k[1], lo0];
    }
    c
}

/// A deterministic stream of random numbers for one record.
///
/// Build it with [`Rng::new`] from the record's key; the samplers
/// (uniform, normal, Maxwellian flux speed, cosine-law and isotropic
/// directions) are methods in [`crate::sample`]. Each Philox block gives
/// two 64-bit words, `w0 = x0 | x1 << 32` then `w1 = x2 | x3 << 32`; the
/// words are held in plain fields (not an indexed array) so that the
/// generator stays in registers, natively and in wasm.
#[derive(Clone, Debug)]
pub struct Rng {
    key: [u32; 2],
    ctr: [u32; 4],
    w0: u64,
    w1: u64,
    /// 64-bit words of the current block not yet used: 2, 1 or 0.
    left: u8,
    /// A second normal deviate kept from the last Box-Muller pair.
    pub(crate) spare_normal: Option<f64>,
}

impl Rng {
    /// A generator positioned at the first number of the stream named by `key`.
    #[inline]
    pub fn new(key: RngKey) -> Rng {
        let stream = key.stream_id() << 24;
        let high = ((key.particle >> 32) as u32 & 0xFF) | (key.step() << 8);
        Rng {
            key: [key.seed as u32, (key.seed >> 32) as u32],
            ctr: [stream, key.event, key.particle as u32, high],
            w0: 0,
            w1: 0,
            left: 0,
            spare_normal: None,
        }
    }

    #[inline]
    fn refill(&mut self) {
        let x = philox4x32_10(self.ctr, self.key);
        self.w0 = x[0] as u64 | (x[1] as u64) << 32;
        self.w1 = x[2] as u64 | (x[3] as u64) << 32;
        // Only the low 24 bits count blocks; the high byte names the stream.
        let stream = self.ctr[0] & 0xFF00_0000;
        self.ctr[0] = stream | (self.ctr[0].wrapping_add(1) & 0x00FF_FFFF);
        self.left = 2;
    }

    /// The next 64 uniformly distributed bits.
    #[inline]
    pub fn next_u64(&mut self) -> u64 {
        if self.left == 0 {
            self.refill();
        }
        self.left -= 1;
        if self.left == 1 { self.w0 } else { self.w1 }
    }

    /// The next 32 uniformly distributed bits (the high half of a 64-bit word).
    #[inline]
    pub fn next_u32(&mut self) -> u32 {
        (self.next_u64() >> 32) as u32
    }

    /// A uniform deviate on the open interval (0, 1), dimensionless, with
    /// 52 random bits: (k + 1/2) 2^-52 for k uniform in [0, 2^52), so never
    /// exactly 0 or 1 and both `ln(u)` and `ln(1 - u)` are always finite.
    #[inline]
    pub fn uniform(&mut self) -> f64 {
        // k + 1/2 < 2^52 is exactly representable (a 53-bit mantissa), and
        // the signed conversion is one instruction on x86-64 and wasm32.
        (((self.next_u64() >> 12) as i64) as f64 + 0.5) * (1.0 / 4_503_599_627_370_496.0)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn philox_known_answers() {
        // Known-answer vectors of Philox4x32-10, from memory of the
        // Random123 distribution's kat_vectors file (Salmon et al. 2011).
        assert_eq!(
            philox4x32_10([0, 0, 0, 0], [0, 0]),
            [0x6627_e8d5, 0xe169_c58d, 0xbc57_ac4c, 0x9b00_dbd8]
        );
        assert_eq!(
            philox4x32_10([u32::MAX; 4], [u32::MAX; 2]),
            [0x408f_276d, 0x41c8_3b0e, 0xa20b_c7c6, 0x6d54_51fd]
        );
        assert_eq!(
            philox4x32_10(
                [0x243f_6a88, 0x85a3_08d3, 0x1319_8a2e, 0x0370_7344],
                [0xa409_3822, 0x299f_31d0]
            ),
            [0xd16c_fe09, 0x94fd_cceb, 0x5001_e420, 0x2412_6ea1]
        );
    }

    #[test]
    fn streams_differ_and_repeat() {
        let k = RngKey { seed: 7, particle: 11, event: 3, stream: 1 };
        let a: Vec<u64> = {
            let mut r = Rng::new(k);
            (0..16).map(|_| r.next_u64()).collect()
        };
        let b: Vec<u64> = {
            let mut r = Rng::new(k);
            (0..16).map(|_| r.next_u64()).collect()
        };
        assert_eq!(a, b);
        for other in [
            RngKey { seed: 8, ..k },
            RngKey { particle: 12, ..k },
            RngKey { event: 4, ..k },
            RngKey { stream: 2, ..k },
            RngKey::at_step(7, 11, 3, 1, 1),
            RngKey::at_step(7, 11, 3, 1, 0xFF_FFFF),
            RngKey { particle: 11 | (1 << 32), ..k },
        ] {
            let mut r = Rng::new(other);
            let c: Vec<u64> = (0..16).map(|_| r.next_u64()).collect();
            assert_ne!(a, c);
        }
    }

    #[test]
    fn uniform_extremes_stay_inside_the_open_interval() {
        // The largest and smallest 52-bit values map strictly inside (0, 1).
        let top = ((((1u64 << 52) - 1) as i64) as f64 + 0.5) * (1.0 / 4_503_599_627_370_496.0);
        let bottom = 0.5 * (1.0 / 4_503_599_627_370_496.0);
        assert!(top < 1.0 && bottom > 0.0);
    }

    #[test]
    fn uniform_moments() {
        // Uniform(0,1): mean 1/2, variance 1/12 (textbook); 3 sigma bounds.
        let n = 200_000;
        let mut r = Rng::new(RngKey { seed: 1, particle: 2, event: 0, stream: 0 });
        let xs: Vec<f64> = (0..n).map(|_| r.uniform()).collect();
        let mean = xs.iter().sum::<f64>() / n as f64;
        let var = xs.iter().map(|x| (x - mean).powi(2)).sum::<f64>() / n as f64;
        assert!((mean - 0.5).abs() < 3.0 * (1.0 / 12.0f64 / n as f64).sqrt());
        assert!((var - 1.0 / 12.0).abs() < 3.0 * (1.0 / 180.0f64 / n as f64).sqrt());
        assert!(xs.iter().all(|&x| x > 0.0 && x < 1.0));
    }

    #[test]
    fn step_and_stream_are_separate_parts_of_the_key() {
        let k = RngKey::at_step(5, 9, 2, crate::records::stream::FLIGHT, 1234);
        assert_eq!(k.stream_id(), crate::records::stream::FLIGHT);
        assert_eq!(k.step(), 1234);
        // Step 0 is the plain key of ABI 1.0: old records keep their streams.
        assert_eq!(
            RngKey::at_step(5, 9, 2, 3, 0),
            RngKey { seed: 5, particle: 9, event: 2, stream: 3 }
        );
        // The step and the high particle bits have separate counter bits.
        let a = Rng::new(RngKey::at_step(5, MAX_PARTICLE_ID - 1, 0, 1, 0)).next_u64();
        let b = Rng::new(RngKey::at_step(5, (1 << 32) - 1, 0, 1, 1)).next_u64();
        assert_ne!(a, b);
        // No host stream is ever a module stream.
        for h in crate::records::stream::HOST_STREAMS {
            assert!(!crate::records::stream::MODULE_STREAMS.contains(&h));
            assert!(h < 0x100);
        }
    }
}
