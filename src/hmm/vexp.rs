//! A branch-free exponential for the hot loops of the forward–backward pass.
//!
//! The likelihood needs about N² exponentials per step (N(N − 1) for the transition
//! probabilities, N for the state densities). A call into libm costs a function call
//! and data-dependent branches, which also stops the compiler from vectorising the loop
//! around it. [`exp`] is written with only arithmetic, bit operations and selects, so
//! that a loop over a slice ([`exp_in_place`]) compiles to SIMD code with no call.
//!
//! Accuracy: full double precision — error ≈ ½ ulp (the final sum th + (tl + th·s) is
//! the only rounding that reaches the last place; the table carries 2^(j/128) to
//! ~2⁻¹⁰⁶); the unit test finds every result within 1 ulp of glibc's exp and 99.7 %
//! bit-identical to it on 2 million arguments. Exact at 0 (`exp(0) == 1`), gradual
//! underflow to subnormals and 0, +∞ above ln(f64::MAX), NaN propagated.
//!
//! # Formula
//! Table-driven reduction (Tang 1989, ACM TOMS 15(2), 144–157):
//! x = (128e + j)·ln2/128 + r with |r| ≤ ln2/256, ln 2 split in a high part with trailing zero bits (k·ln2_hi
//! exact) and a low part (Cody & Waite 1980, *Software Manual for the Elementary
//! Functions*; split constants of fdlibm's e_exp.c); eˣ = 2ᵉ · 2^(j/128) · eʳ with
//! 2^(j/128) from a 128-entry head/tail table and eʳ − 1 from its Taylor polynomial of
//! degree 5 (truncation |r|⁶/720 < 2⁻⁶⁰). In the vectorised loop the table lookup is
//! the only scalar part. [`exp`] assembles 2ᵉ in two factors 2^⌊e/2⌉ · 2^(e − ⌊e/2⌉)
//! so that subnormal and near-overflow results need no special case.

const LOG2_E: f64 = std::f64::consts::LOG2_E;
/// ln 2 high part (fdlibm `ln2HI[0]`, 0x3FE62E42_FEE00000: 21 trailing zero bits)
const LN2_HI: f64 = f64::from_bits(0x3FE6_2E42_FEE0_0000);
/// ln 2 − LN2_HI (fdlibm `ln2LO[0]`, 0x3DEA39EF_35793C76)
const LN2_LO: f64 = f64::from_bits(0x3DEA_39EF_3579_3C76);
/// 1.5 · 2⁵²: adding it rounds a |v| < 2⁵¹ to the nearest integer (ties to even) and
/// leaves that integer in the low mantissa bits.
const SHIFTER: f64 = 6_755_399_441_055_744.0;
/// Below this, exp underflows to 0 (e^−745.2 < 2⁻¹⁰⁷⁵); above the upper bound it is +∞.
const X_MIN: f64 = -746.0;
const X_MAX: f64 = 710.0;

// Taylor coefficients 1/n!, n = 2..5 (each a correctly rounded quotient).
const C2: f64 = 1.0 / 2.0;
const C3: f64 = 1.0 / 6.0;
const C4: f64 = 1.0 / 24.0;
const C5: f64 = 1.0 / 120.0;

/// 2^k for an integer-valued k ∈ [−1022, 1023] given as f64.
#[inline(always)]
fn pow2i(k: f64) -> f64 {
    // low mantissa bits of k + SHIFTER hold k (two's complement); k + 1023 is the biased
    // exponent and the shift drops everything above its 11 bits
    let b = (k + SHIFTER).to_bits();
    f64::from_bits(b.wrapping_add(1023) << 52)
}

/// eˣ to full double precision without branches or calls (see the module docs).
#[inline(always)]
pub(crate) fn exp(x: f64) -> f64 {
    // clamp; NaN fails both comparisons and stays NaN
    let x = if x < X_MIN { X_MIN } else { x };
    let x = if x > X_MAX { X_MAX } else { x };
    let (kb, t) = reduce(x);
    // x = (128e + j)·ln2/128 + r with e ∈ [−1077, 1025]: 2ᵉ in two normal factors
    let k = f64::from_bits(kb) - SHIFTER;
    let e = (k - (kb & (TN - 1)) as f64) * (1.0 / TN as f64);
    let e1 = (e * 0.5 + SHIFTER) - SHIFTER;
    let e2 = e - e1;
    t * pow2i(e1) * pow2i(e2)
}

/// Inputs for which [`exp_normal`] is exact: 2ᵉ is a normal number (e ∈ [−1022, 1021]).
const FAST_MIN: f64 = -708.0;
const FAST_MAX: f64 = 708.0;

/// eˣ for x ∈ [FAST_MIN, FAST_MAX] (one power-of-two factor, no clamping); the same
/// value as [`exp`] there, bit for bit.
#[inline(always)]
fn exp_normal(x: f64) -> f64 {
    let (kb, t) = reduce(x);
    // (kb >> 7) = const + e; its low 12 bits + 1023 are the biased exponent of 2ᵉ
    t * f64::from_bits((kb >> TBITS).wrapping_add(1023) << 52)
}

/// Number of table entries 2^(j/128) and its log₂.
const TBITS: u32 = 7;
const TN: u64 = 1 << TBITS;

/// x = k·ln2/128 + r, |r| ≤ ln2/256; returns the bits of k + SHIFTER (k in the low
/// bits) and 2^(j/128)·eʳ for j = k mod 128.
#[inline(always)]
fn reduce(x: f64) -> (u64, f64) {
    let y = x * (TN as f64 * LOG2_E) + SHIFTER;
    let kb = y.to_bits();
    let k = y - SHIFTER;
    // ln2/128 split as ln 2 (hi part: 21 trailing zero bits, k·hi exact for |k| < 2²¹)
    let r = (x - k * (LN2_HI / TN as f64)) - k * (LN2_LO / TN as f64);
    // eʳ − 1 = r + r²(1/2 + r/6 + r²/24 + r³/120); truncation |r|⁶/720 < 2⁻⁶⁰
    let r2 = r * r;
    let s = r + r2 * ((C2 + C3 * r) + r2 * (C4 + C5 * r));
    let j = (kb & (TN - 1)) as usize;
    let (th, tl) = (T_HI[j], T_LO[j]);
    // 2^(j/128)(1 + s) = th + (tl + th·s) (+ tl·s, below 2⁻⁶⁰ relative)
    (kb, th + (tl + th * s))
}

// 2^(j/128) = T_HI[j] + T_LO[j] to ~2⁻¹⁰⁶ relative, j = 0..127 (computed with mpmath
// at 300-bit precision: hi = the double nearest 2^(j/128), lo = the double nearest
// the remainder; given as bit patterns).
const T_HI_BITS: [u64; 128] = [
    0x3ff0000000000000,
    0x3ff0163da9fb3335,
    0x3ff02c9a3e778061,
    0x3ff04315e86e7f85,
    0x3ff059b0d3158574,
    0x3ff0706b29ddf6de,
    0x3ff0874518759bc8,
    0x3ff09e3ecac6f383,
    0x3ff0b5586cf9890f,
    0x3ff0cc922b7247f7,
    0x3ff0e3ec32d3d1a2,
    0x3ff0fb66affed31b,
    0x3ff11301d0125b51,
    0x3ff12abdc06c31cc,
    0x3ff1429aaea92de0,
    0x3ff15a98c8a58e51,
    0x3ff172b83c7d517b,
    0x3ff18af9388c8dea,
    0x3ff1a35beb6fcb75,
    0x3ff1bbe084045cd4,
    0x3ff1d4873168b9aa,
    0x3ff1ed5022fcd91d,
    0x3ff2063b88628cd6,
    0x3ff21f49917ddc96,
    0x3ff2387a6e756238,
    0x3ff251ce4fb2a63f,
    0x3ff26b4565e27cdd,
    0x3ff284dfe1f56381,
    0x3ff29e9df51fdee1,
    0x3ff2b87fd0dad990,
    0x3ff2d285a6e4030b,
    0x3ff2ecafa93e2f56,
    0x3ff306fe0a31b715,
    0x3ff32170fc4cd831,
    0x3ff33c08b26416ff,
    0x3ff356c55f929ff1,
    0x3ff371a7373aa9cb,
    0x3ff38cae6d05d866,
    0x3ff3a7db34e59ff7,
    0x3ff3c32dc313a8e5,
    0x3ff3dea64c123422,
    0x3ff3fa4504ac801c,
    0x3ff4160a21f72e2a,
    0x3ff431f5d950a897,
    0x3ff44e086061892d,
    0x3ff46a41ed1d0057,
    0x3ff486a2b5c13cd0,
    0x3ff4a32af0d7d3de,
    0x3ff4bfdad5362a27,
    0x3ff4dcb299fddd0d,
    0x3ff4f9b2769d2ca7,
    0x3ff516daa2cf6642,
    0x3ff5342b569d4f82,
    0x3ff551a4ca5d920f,
    0x3ff56f4736b527da,
    0x3ff58d12d497c7fd,
    0x3ff5ab07dd485429,
    0x3ff5c9268a5946b7,
    0x3ff5e76f15ad2148,
    0x3ff605e1b976dc09,
    0x3ff6247eb03a5585,
    0x3ff6434634ccc320,
    0x3ff6623882552225,
    0x3ff68155d44ca973,
    0x3ff6a09e667f3bcd,
    0x3ff6c012750bdabf,
    0x3ff6dfb23c651a2f,
    0x3ff6ff7df9519484,
    0x3ff71f75e8ec5f74,
    0x3ff73f9a48a58174,
    0x3ff75feb564267c9,
    0x3ff780694fde5d3f,
    0x3ff7a11473eb0187,
    0x3ff7c1ed0130c132,
    0x3ff7e2f336cf4e62,
    0x3ff80427543e1a12,
    0x3ff82589994cce13,
    0x3ff8471a4623c7ad,
    0x3ff868d99b4492ed,
    0x3ff88ac7d98a6699,
    0x3ff8ace5422aa0db,
    0x3ff8cf3216b5448c,
    0x3ff8f1ae99157736,
    0x3ff9145b0b91ffc6,
    0x3ff93737b0cdc5e5,
    0x3ff95a44cbc8520f,
    0x3ff97d829fde4e50,
    0x3ff9a0f170ca07ba,
    0x3ff9c49182a3f090,
    0x3ff9e86319e32323,
    0x3ffa0c667b5de565,
    0x3ffa309bec4a2d33,
    0x3ffa5503b23e255d,
    0x3ffa799e1330b358,
    0x3ffa9e6b5579fdbf,
    0x3ffac36bbfd3f37a,
    0x3ffae89f995ad3ad,
    0x3ffb0e07298db666,
    0x3ffb33a2b84f15fb,
    0x3ffb59728de5593a,
    0x3ffb7f76f2fb5e47,
    0x3ffba5b030a1064a,
    0x3ffbcc1e904bc1d2,
    0x3ffbf2c25bd71e09,
    0x3ffc199bdd85529c,
    0x3ffc40ab5fffd07a,
    0x3ffc67f12e57d14b,
    0x3ffc8f6d9406e7b5,
    0x3ffcb720dcef9069,
    0x3ffcdf0b555dc3fa,
    0x3ffd072d4a07897c,
    0x3ffd2f87080d89f2,
    0x3ffd5818dcfba487,
    0x3ffd80e316c98398,
    0x3ffda9e603db3285,
    0x3ffdd321f301b460,
    0x3ffdfc97337b9b5f,
    0x3ffe264614f5a129,
    0x3ffe502ee78b3ff6,
    0x3ffe7a51fbc74c83,
    0x3ffea4afa2a490da,
    0x3ffecf482d8e67f1,
    0x3ffefa1bee615a27,
    0x3fff252b376bba97,
    0x3fff50765b6e4540,
    0x3fff7bfdad9cbe14,
    0x3fffa7c1819e90d8,
    0x3fffd3c22b8f71f1,
];
const T_LO_BITS: [u64; 128] = [
    0x0000000000000000,
    0x3c9b61299ab8cdb7,
    0xbc719083535b085d,
    0xbc90a31c1977c96e,
    0x3c8d73e2a475b465,
    0xbc8c91dfe2b13c27,
    0x3c6186be4bb284ff,
    0x3c91487818316136,
    0x3c98a62e4adc610b,
    0x3c901edc16e24f71,
    0x3c403a1727c57b53,
    0xbc6b9bedc44ebd7b,
    0xbc96c51039449b3a,
    0xbc51b514b36ca5c7,
    0xbc932fbf9af1369e,
    0x3c82406ab9eeab0a,
    0xbc819041b9d78a76,
    0xbc911023d1970f6c,
    0x3c8e5b4c7b4968e4,
    0xbc995386352ef607,
    0x3c9e016e00a2643c,
    0xbc91df98027bb78c,
    0x3c8dc775814a8495,
    0x3c82a97e9494a5ee,
    0x3c99b07eb6c70573,
    0x3c8ac155bef4f4a4,
    0x3c82bd339940e9d9,
    0xbc9a4c3a8c3f0d7e,
    0x3c8612e8afad1255,
    0xbc410adcd6381aa4,
    0x3c90024754db41d5,
    0x3c71ca0f45d52383,
    0x3c86f46ad23182e4,
    0x3c8a9ce78e18047c,
    0x3c932721843659a6,
    0xbc8b5cee5c4e4628,
    0xbc963aeabf42eae2,
    0xbc9e958d3c9904bd,
    0xbc75e436d661f5e3,
    0xbc9efff8375d29c3,
    0x3c8ada0911f09ebc,
    0xbc97d023f956f9f3,
    0xbc5ef3691c309278,
    0xbc81c7dde35f7999,
    0x3c489b7a04ef80d0,
    0x3c9c944bd1648a76,
    0x3c73c1a3b69062f0,
    0x3c99cb62f3d1be56,
    0x3c7d4397afec42e2,
    0x3c98ecdbbc6a7833,
    0xbc94b309d25957e3,
    0xbc8f768569bd93ef,
    0xbc807abe1db13cad,
    0xbc8d689cefede59b,
    0x3c99bb2c011d93ad,
    0x3c8295e15b9a1de8,
    0x3c96324c054647ad,
    0x3c3c4b1b816986a2,
    0x3c9ba6f93080e65e,
    0xbc93e2429b56de47,
    0xbc9383c17e40b497,
    0xbc8c483c759d8933,
    0xbc9bb60987591c34,
    0x3c6038ae44f73e65,
    0xbc9bdd3413b26456,
    0xbc72895667ff0b0d,
    0xbc6bbe3a683c88ab,
    0xbc883c0f25860ef6,
    0xbc816e4786887a99,
    0xbc90a8d96c65d53c,
    0xbc90245957316dd3,
    0x3c9866b80a02162d,
    0xbc841577ee04992f,
    0x3c9f124cd1164dd6,
    0x3c705d02ba15797e,
    0xbc927c86626d972b,
    0xbc9d4c1dd41532d8,
    0xbc88d684a341cdfb,
    0xbc9fc6f89bd4f6ba,
    0x3c9994c2f37cb53a,
    0x3c96e9f156864b27,
    0xbc70d55e32e9e3aa,
    0x3c85cc13a2e3976c,
    0xbc9dd6792e582524,
    0xbc675fc781b57ebc,
    0xbc764b7c96a5f039,
    0xbc9d185b7c1b85d1,
    0xbc9173bd91cee632,
    0x3c7c7c46b071f2be,
    0x3c7824ca78e64c6e,
    0xbc9359495d1cd533,
    0x3c96305c7ddc36ab,
    0xbc9d2f6edb8d41e1,
    0x3c9bcb7ecac563c7,
    0x3c90fac90ef7fd31,
    0xbc8f9234cae76cd0,
    0x3c97a1cd345dcc81,
    0xbc9bdef54c80e425,
    0xbc62805e3084d708,
    0xbc9c71dfbbba6de3,
    0xbc75584f7e54ac3b,
    0xbc9efcd30e54292e,
    0x3c823dd07a2d9e84,
    0xbc9efdca3f6b9c73,
    0x3c811065895048dd,
    0x3c9b4537e083c60a,
    0x3c92884dff483cad,
    0x3c71acbc48805c44,
    0x3c7503cbd1e949db,
    0xbc8dd83b53829d72,
    0xbc9cbc3743797a9c,
    0xbc9d487b719d8578,
    0x3c82ed02d75b3707,
    0xbc911ec18beddfe8,
    0x3c9c2300696db532,
    0x3c92da5778f018c3,
    0xbc91a5cd4f184b5c,
    0xbc97b627817a1496,
    0x3c839e8980a9cc8f,
    0x3c92d522ca0c8de2,
    0xbc9e9c23179c2893,
    0xbc9c93f3b411ad8c,
    0x3c9dc7f486a4b6b0,
    0x3c93a1a5bf0d8e43,
    0x3c99d3e12dd8a18b,
    0xbc9dbb12d006350a,
    0x3c874853f3a5931e,
    0x3c62eb74966579e7,
];

static T_HI: [f64; 128] = from_bits_table(&T_HI_BITS);
static T_LO: [f64; 128] = from_bits_table(&T_LO_BITS);

const fn from_bits_table(b: &[u64; 128]) -> [f64; 128] {
    let mut t = [0.0; 128];
    let mut i = 0;
    while i < 128 {
        t[i] = f64::from_bits(b[i]);
        i += 1;
    }
    t
}

/// Replaces every element of `v` by its exponential, bit-identical to [`exp`].
///
/// Blocks of 32 go through [`exp_normal`] (vectorised, no clamping, one scale factor)
/// while recording whether every argument was inside its range; a block with an
/// argument outside it (underflow, overflow, ±∞, NaN — rare here) is redone from a
/// copy of its arguments with the full-range [`exp`].
#[inline]
pub(crate) fn exp_in_place(v: &mut [f64]) {
    const B: usize = 32;
    let mut keep = [0.0; B];
    for blk in v.chunks_mut(B) {
        let keep = &mut keep[..blk.len()];
        keep.copy_from_slice(blk);
        let mut ok = true;
        for x in blk.iter_mut() {
            let y = *x;
            // non-short-circuit `&`: the loop stays branch-free and vectorises
            #[allow(clippy::manual_range_contains)]
            let inside = (y >= FAST_MIN) & (y <= FAST_MAX);
            ok &= inside;
            *x = exp_normal(y);
        }
        if !ok {
            for (x, &y) in blk.iter_mut().zip(keep.iter()) {
                *x = exp(y);
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::{exp, exp_in_place};
    use rand::{Rng, SeedableRng};
    use rand_chacha::ChaCha8Rng;

    /// Distance in units in the last place between two finite positive doubles.
    fn ulps(a: f64, b: f64) -> u64 {
        a.to_bits().abs_diff(b.to_bits())
    }

    // Reference: the platform libm exp (glibc: < 1 ulp). Our exp must be within 1 ulp
    // of it everywhere, i.e. within 2 ulp of the exact value; in practice it matches the
    // correctly rounded value except near rounding ties.
    #[test]
    fn matches_libm_to_one_ulp() {
        let mut rng = ChaCha8Rng::seed_from_u64(5);
        let mut worst = 0;
        let mut differ = 0usize;
        let n = 2_000_000;
        for i in 0..n {
            let x: f64 = match i % 4 {
                0 => rng.random_range(-1.0..1.0),
                1 => rng.random_range(-40.0..40.0),
                2 => rng.random_range(-708.0..709.7),
                _ => rng.random_range(-745.0..-700.0),
            };
            let (a, b) = (exp(x), x.exp());
            let mut one = [x];
            exp_in_place(&mut one);
            assert_eq!(one[0].to_bits(), a.to_bits(), "{x}");
            if a != b {
                differ += 1;
            }
            worst = worst.max(ulps(a, b));
        }
        assert!(worst <= 1, "worst {worst} ulp");
        // ≈ 0.3 % of the arguments differ from libm, by 1 ulp (exact values within a
        // hair of a rounding midpoint, where either result is within ~½ ulp)
        assert!(differ < n / 100, "{differ} of {n} differ");
        eprintln!("{differ} of {n} differ from libm by 1 ulp");
    }

    #[test]
    fn special_values() {
        #[allow(clippy::items_after_statements)]
        fn ulps(a: f64, b: f64) -> u64 {
            a.to_bits().abs_diff(b.to_bits())
        }
        assert_eq!(exp(0.0), 1.0);
        assert_eq!(exp(-0.0), 1.0);
        assert_eq!(exp(f64::NEG_INFINITY), 0.0);
        assert_eq!(exp(-746.0), 0.0);
        assert_eq!(exp(f64::INFINITY), f64::INFINITY);
        assert_eq!(exp(709.79), 709.79_f64.exp());
        assert_eq!(exp(709.8), f64::INFINITY);
        assert!(exp(f64::NAN).is_nan());
        // the block path falls back to the full range for the whole block
        let mut v: Vec<f64> = (0..100).map(|i| -(i as f64) * 9.0).collect();
        v[40] = f64::NAN;
        v[70] = f64::INFINITY;
        let want: Vec<f64> = v.iter().map(|&x| exp(x)).collect();
        exp_in_place(&mut v);
        for (a, b) in v.iter().zip(&want) {
            assert!(a.to_bits() == b.to_bits() || (a.is_nan() && b.is_nan()));
        }
        // gradual underflow: the smallest subnormal region
        for x in [-708.5, -720.0, -740.0, -744.4] {
            let (a, b) = (exp(x), x.exp());
            assert!(
                (a - b).abs() <= 2.0 * f64::from_bits(1).max(b * 2.3e-16),
                "{x}: {a:e} vs {b:e}"
            );
        }
        assert!(ulps(exp(1.0), std::f64::consts::E) <= 1);
    }
}
