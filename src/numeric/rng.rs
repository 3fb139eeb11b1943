//! The crate's pseudo-random generator: xoshiro256** (Blackman and Vigna,
//! "Scrambled linear pseudorandom number generators", 2018), its state
//! filled from a 64-bit seed by SplitMix64 (Steele, Lea and Flood 2014), as
//! the authors recommend.
//!
//! Variates: uniform floats are the top 53 bits times 2^-53, in [0, 1)
//! ([`Rng::uniform`]) or in (0, 1] ([`Rng::uniform_pos`], for logarithms);
//! uniform integers below `m` use Lemire's multiply-shift with rejection
//! (unbiased); standard normals use Marsaglia's polar method (Marsaglia and
//! Bray 1964), exact in distribution, both values of each accepted pair used.
//!
//! Parallel streams: [`Rng::jump`] advances the state by 2^128 steps (the
//! authors' jump polynomial), so [`streams`] hands each fixed-size chunk of
//! work its own non-overlapping sequence. A chunk's draws depend only on the
//! seed and the chunk's index, never on the thread that runs it.

/// xoshiro256** state, plus the second normal of the last polar pair.
#[derive(Clone, Debug)]
pub struct Rng {
    s: [u64; 4],
    spare: Option<f64>,
}

/// One SplitMix64 step.
pub fn splitmix64(state: &mut u64) -> u64 {
    *state = state.wrapping_add(0x9e37_79b9_7f4a_7c15);
    let mut z = *state;
    z = (z ^ (z >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
    z ^ (z >> 31)
}

/// The top 53 bits of `bits` times 2^-53: uniform in [0, 1) when `bits` is.
#[inline(always)]
pub fn unit_f64(bits: u64) -> f64 {
    (bits >> 11) as f64 * (1.0 / 9007199254740992.0)
}

/// The jump polynomial of xoshiro256** for 2^128 steps (from the authors'
/// reference code).
const JUMP: [u64; 4] = [0x180e_c6d3_3cfd_0aba, 0xd5a6_1266_f0c9_392c, 0xa958_2618_e03f_c9aa, 0x39ab_dc45_29b1_661c];

impl Rng {
    pub fn new(seed: u64) -> Rng {
        let mut st = seed;
        Rng { s: [splitmix64(&mut st), splitmix64(&mut st), splitmix64(&mut st), splitmix64(&mut st)], spare: None }
    }

    #[inline(always)]
    pub fn next_u64(&mut self) -> u64 {
        let s = &mut self.s;
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

    /// Advances the generator by 2^128 draws (equivalent to that many calls
    /// of `next_u64`); drops a pending normal.
    pub fn jump(&mut self) {
        let mut acc = [0u64; 4];
        for &j in &JUMP {
            for b in 0..64 {
                if j & (1u64 << b) != 0 {
                    for (a, s) in acc.iter_mut().zip(&self.s) {
                        *a ^= *s;
                    }
                }
                self.next_u64();
            }
        }
        self.s = acc;
        self.spare = None;
    }

    /// Uniform in [0, 1).
    #[inline(always)]
    pub fn uniform(&mut self) -> f64 {
        unit_f64(self.next_u64())
    }

    /// Uniform in (0, 1]: safe to take the logarithm of.
    #[inline(always)]
    pub fn uniform_pos(&mut self) -> f64 {
        ((self.next_u64() >> 11) + 1) as f64 * (1.0 / 9007199254740992.0)
    }

    /// Uniform in `0..m` (`m >= 1`).
    pub fn below(&mut self, m: u64) -> u64 {
        let threshold = m.wrapping_neg() % m;
        loop {
            let p = u128::from(self.next_u64()) * u128::from(m);
            if (p as u64) >= threshold {
                return (p >> 64) as u64;
            }
        }
    }

    /// A pair of independent standard normals (Marsaglia's polar method: a
    /// uniform point `(u, v)` of the unit disk, accepted with probability
    /// pi/4, gives `(u, v) sqrt(-2 ln s / s)`, `s = u^2 + v^2`).
    #[inline(always)]
    pub fn normal_pair(&mut self) -> (f64, f64) {
        loop {
            // Uniform in [-1, 1) from the top 53 bits.
            let u = (self.next_u64() >> 11) as f64 * (2.0 / 9007199254740992.0) - 1.0;
            let v = (self.next_u64() >> 11) as f64 * (2.0 / 9007199254740992.0) - 1.0;
            let s = u * u + v * v;
            if s < 1.0 && s > 0.0 {
                let f = (-2.0 * s.ln() / s).sqrt();
                return (u * f, v * f);
            }
        }
    }

    /// A standard normal variate (the second of each polar pair is kept for
    /// the next call).
    #[inline(always)]
    pub fn normal(&mut self) -> f64 {
        if let Some(z) = self.spare.take() {
            return z;
        }
        let (a, b) = self.normal_pair();
        self.spare = Some(b);
        a
    }

    /// Fills `out` with standard normals, two per polar pair (an odd last
    /// one through [`Rng::normal`]).
    #[inline(always)]
    pub fn fill_normal(&mut self, out: &mut [f64]) {
        let mut it = out.chunks_exact_mut(2);
        for p in &mut it {
            let (a, b) = self.normal_pair();
            p[0] = a;
            p[1] = b;
        }
        if let [last] = it.into_remainder() {
            *last = self.normal();
        }
    }
}

/// `n` generators for `n` chunks of work: the first seeded from `seed`, each
/// next one the previous jumped by 2^128 draws (non-overlapping streams).
pub fn streams(seed: u64, n: usize) -> Vec<Rng> {
    let mut r = Rng::new(seed);
    let mut out = Vec::with_capacity(n);
    for _ in 0..n {
        out.push(r.clone());
        r.jump();
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn splitmix64_reference_values() {
        // from memory: the reference C code of SplitMix64 (Vigna) seeded
        // with 0 starts 0xe220a8397b1dcdaf, 0x6e789e6aa1b965f4.
        let mut s = 0u64;
        assert_eq!(splitmix64(&mut s), 0xe220_a839_7b1d_cdaf);
        assert_eq!(splitmix64(&mut s), 0x6e78_9e6a_a1b9_65f4);
    }

    #[test]
    fn jump_is_linear_and_moves_the_state() {
        // The jump is linear over GF(2): jump(a) ^ jump(b) = jump(a ^ b) for
        // states a, b (a property of any F2-linear map; common practice).
        let (mut a, mut b) = (Rng::new(1), Rng::new(2));
        let mut c = Rng { s: [a.s[0] ^ b.s[0], a.s[1] ^ b.s[1], a.s[2] ^ b.s[2], a.s[3] ^ b.s[3]], spare: None };
        a.jump();
        b.jump();
        c.jump();
        for i in 0..4 {
            assert_eq!(a.s[i] ^ b.s[i], c.s[i]);
        }
        // and it moves the state (streams differ)
        let mut d = Rng::new(1);
        let first = d.next_u64();
        let mut e = Rng::new(1);
        e.jump();
        assert_ne!(e.next_u64(), first);
    }

    #[test]
    fn normal_moments() {
        // common practice: sample mean and variance of 200 000 normals within
        // 5 standard errors; fourth moment 3 within 5 standard errors (sd of
        // z^4 is sqrt(96)).
        let mut r = Rng::new(11);
        let n = 200_000;
        let z: Vec<f64> = (0..n).map(|_| r.normal()).collect();
        let m = z.iter().sum::<f64>() / n as f64;
        let v = z.iter().map(|x| x * x).sum::<f64>() / n as f64;
        let k = z.iter().map(|x| x.powi(4)).sum::<f64>() / n as f64;
        let se = 1.0 / (n as f64).sqrt();
        assert!(m.abs() < 5.0 * se, "{m}");
        assert!((v - 1.0).abs() < 5.0 * 2f64.sqrt() * se, "{v}");
        assert!((k - 3.0).abs() < 5.0 * 96f64.sqrt() * se, "{k}");
        let mut r = Rng::new(5);
        let u: Vec<f64> = (0..1000).map(|_| r.uniform_pos()).collect();
        assert!(u.iter().all(|&v| v > 0.0 && v <= 1.0));
    }
}
