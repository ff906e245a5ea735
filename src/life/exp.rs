//! `exp` and `expm1` in plain IEEE-754 arithmetic, for the rates a projection computes
//! cell by cell.
//!
//! Every scenario turns thousands of cells into m = exp(a + b k) and q = 1 − exp(−m). The
//! platform's `exp` and `expm1` are calls a loop cannot vectorise, and their last bits
//! belong to the C library. These are written with additions, multiplications and bit
//! operations only (no fused multiply-add, no table, no branch on the value), so a loop
//! over a slice compiles to SIMD, and every lane, compilation (SSE2, or AVX2 picked at run
//! time) and machine gives the same bits.
//!
//! Method (Cody & Waite's reduction, as in fdlibm): x = n ln 2 + r with n = round(x/ln 2)
//! and |r| ≤ ln 2 / 2, ln 2 split in two so that n ln2_hi is exact; expm1(r) by its Taylor
//! series to r^13/13! (truncation below 2^−56 relative); then exp(x) = 2^n (1 + expm1(r))
//! and expm1(x) = 2^n expm1(r) + (2^n − 1), 2^n applied as two exact powers of two so that
//! results near overflow and in the subnormal range round once. Against the C library on
//! the tested ranges (tests below): exp within 1 ulp; expm1 within 1 ulp for |x| below
//! ln 2 / 2, where it is the series itself, and within 2 beyond (the rounding of
//! expm1(r) is scaled by 2^n there), about 4e−16 relative.

/// ln 2, high part (6.93147180369123816490e−1): its last 21 mantissa bits are zero, so
/// n × LN2_HI is exact for |n| < 2^21 (fdlibm's split, from memory; the test checks
/// LN2_HI + LN2_LO = ln 2).
const LN2_HI: f64 = f64::from_bits(0x3fe6_2e42_fee0_0000);
/// ln 2 − LN2_HI (1.90821492927058770002e−10).
const LN2_LO: f64 = f64::from_bits(0x3dea_39ef_3579_3c76);
/// 1 / ln 2.
const LOG2_E: f64 = std::f64::consts::LOG2_E;
/// 1.5 × 2^52: adding it rounds a number below 2^51 in magnitude to an integer (nearest,
/// ties to even), which then sits in the low mantissa bits.
const ROUNDER: f64 = 6_755_399_441_055_744.0;
/// |x| beyond which exp(x) is 0 or ∞ and expm1(x) is −1 or ∞ in f64: inputs are clamped
/// there so that n stays small (NaN passes through).
const CLAMP: f64 = 1400.0;

/// 1/k! for k = 2 ..= 13, the Taylor coefficients of expm1 after r.
const TAYLOR: [f64; 12] = [
    1.0 / 2.0,
    1.0 / 6.0,
    1.0 / 24.0,
    1.0 / 120.0,
    1.0 / 720.0,
    1.0 / 5_040.0,
    1.0 / 40_320.0,
    1.0 / 362_880.0,
    1.0 / 3_628_800.0,
    1.0 / 39_916_800.0,
    1.0 / 479_001_600.0,
    1.0 / 6_227_020_800.0,
];

/// x = n ln 2 + r: returns (expm1(r), 2^⌊n/2⌋, 2^(n − ⌊n/2⌋)).
#[inline(always)]
fn reduce(x: f64) -> (f64, f64, f64) {
    // `clamp` leaves NaN as it is (`min`/`max` would not).
    let x = x.clamp(-CLAMP, CLAMP);
    let t = x * LOG2_E + ROUNDER;
    let n_f = t - ROUNDER;
    // n in the low bits of t's mantissa: t and ROUNDER share their exponent.
    let n = (t.to_bits() as i64).wrapping_sub(ROUNDER.to_bits() as i64);
    let r = (x - n_f * LN2_HI) - n_f * LN2_LO;
    let mut poly = TAYLOR[11];
    for &c in TAYLOR[..11].iter().rev() {
        poly = c + r * poly;
    }
    let p = r + r * r * poly;
    // 2^n as two factors, each within the normal exponents for |n| ≤ 2044 (n + 2048 ≥ 0,
    // so a logical shift halves it).
    let half = ((n + 2048) as u64 >> 1) as i64 - 1024;
    let power = |e: i64| f64::from_bits(((e + 1023) as u64) << 52);
    (p, power(half), power(n - half))
}

/// e^x.
#[inline(always)]
pub fn exp(x: f64) -> f64 {
    let (p, s1, s2) = reduce(x);
    ((1.0 + p) * s1) * s2
}

/// e^x − 1, accurate near 0.
#[inline(always)]
pub fn exp_m1(x: f64) -> f64 {
    let (p, s1, s2) = reduce(x);
    (p * s1) * s2 + (s1 * s2 - 1.0)
}

/// Replaces every x of `xs` by e^x.
pub fn exp_in_place(xs: &mut [f64]) {
    map_in_place(xs, exp);
}

/// Replaces every m of `ms` by 1 − e^−m, the one-year rate q of a constant force m.
pub fn q_from_force_in_place(ms: &mut [f64]) {
    map_in_place(ms, q_from_force);
}

/// 1 − e^−m: the one-year rate q of a constant force m.
#[inline(always)]
pub fn q_from_force(m: f64) -> f64 {
    -exp_m1(-m)
}

/// Applies `f` to every element of `xs`, in a loop compiled for AVX2 where the CPU has it:
/// four lanes, the same operations, the same bits.
#[inline(always)]
fn map_in_place(xs: &mut [f64], f: impl Fn(f64) -> f64) {
    #[cfg(target_arch = "x86_64")]
    if std::arch::is_x86_feature_detected!("avx2") {
        // SAFETY: the CPU has AVX2.
        unsafe { map_in_place_avx2(xs, f) };
        return;
    }
    for x in xs {
        *x = f(*x);
    }
}

/// [`map_in_place`]'s loop compiled for AVX2.
///
/// # Safety
/// The CPU has AVX2.
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx2")]
unsafe fn map_in_place_avx2(xs: &mut [f64], f: impl Fn(f64) -> f64) {
    for x in xs {
        *x = f(*x);
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::{RngExt, SeedableRng};

    /// Distance in units in the last place between two finite f64 of the same sign.
    fn ulps(a: f64, b: f64) -> u64 {
        if a == b {
            return 0;
        }
        assert_eq!(a.is_sign_negative(), b.is_sign_negative(), "{a} {b}");
        a.to_bits().abs_diff(b.to_bits())
    }

    #[test]
    fn ln2_is_split_exactly() {
        assert_eq!(LN2_HI + LN2_LO, std::f64::consts::LN_2);
        assert_eq!(LN2_HI.to_bits() & ((1 << 21) - 1), 0);
    }

    #[test]
    fn exp_is_within_one_ulp_of_the_c_library() {
        // Against the platform's libm (glibc on the reference machine), itself within an
        // ulp of the true value: uniform draws over the whole finite range, densely over
        // the rates' range (ln m from −12 to 1), and around 0.
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(11);
        let mut worst = 0;
        for i in 0..400_000 {
            let x: f64 = match i % 4 {
                0 => rng.random_range(-708.0..709.7),
                1 => rng.random_range(-12.0..1.0),
                2 => rng.random_range(-1e-3..1e-3),
                _ => rng.random_range(-745.0..-708.0),
            };
            let (ours, libm) = (exp(x), x.exp());
            let d = if libm < f64::MIN_POSITIVE {
                // Subnormal results: a whole unit is the least difference.
                ours.to_bits().abs_diff(libm.to_bits())
            } else {
                ulps(ours, libm)
            };
            assert!(d <= 1, "exp({x}) = {ours}, libm {libm}");
            worst = worst.max(d);
        }
        assert!(worst <= 1);
    }

    #[test]
    fn exp_m1_is_within_two_ulps_of_the_c_library() {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(12);
        let mut beyond_one = 0;
        for i in 0..400_000 {
            let x: f64 = match i % 4 {
                0 => rng.random_range(-50.0..709.0),
                1 => -rng.random_range(1e-6..3.0),
                2 => rng.random_range(-1e-8..1e-8),
                _ => rng.random_range(-0.34..0.34),
            };
            let (ours, libm) = (exp_m1(x), x.exp_m1());
            let d = ulps(ours, libm);
            // The series alone (n = 0) keeps to 1 ulp.
            let limit = if x.abs() < 0.34 { 1 } else { 2 };
            assert!(d <= limit, "expm1({x}) = {ours}, libm {libm}");
            beyond_one += usize::from(d > 1);
        }
        // Two ulps is the rare case, not the rule.
        assert!(beyond_one < 4_000, "{beyond_one} of 400,000 beyond 1 ulp");
    }

    #[test]
    fn edges_and_exact_values() {
        // Closed forms: e^0 = 1, e^(k ln 2) = 2^k to rounding of k ln 2, the limits.
        assert_eq!(exp(0.0), 1.0);
        assert_eq!(exp_m1(0.0), 0.0);
        assert_eq!(exp(f64::INFINITY), f64::INFINITY);
        assert_eq!(exp(f64::NEG_INFINITY), 0.0);
        assert_eq!(exp(710.0), f64::INFINITY);
        assert_eq!(exp(-746.0), 0.0);
        assert_eq!(exp_m1(-60.0), -1.0);
        assert_eq!(exp_m1(f64::NEG_INFINITY), -1.0);
        assert_eq!(exp_m1(710.0), f64::INFINITY);
        assert!(exp(f64::NAN).is_nan() && exp_m1(f64::NAN).is_nan());
        for k in -1000..1000 {
            let x = f64::from(k) * std::f64::consts::LN_2;
            assert!(ulps(exp(x), x.exp()) <= 1, "{k}");
        }
        // expm1(x) = x + x²/2 to within the next term for tiny x.
        let x = 1e-10;
        assert!((exp_m1(x) - (x + x * x / 2.0)).abs() <= x * 1e-16);
        assert_eq!(q_from_force(0.0), 0.0);
        assert_eq!(q_from_force(f64::INFINITY), 1.0);
    }

    #[test]
    fn slices_give_the_scalar_bits_in_every_compilation() {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(13);
        let xs: Vec<f64> = (0..1001).map(|_| rng.random_range(-12.0..2.0)).collect();
        let mut e = xs.clone();
        exp_in_place(&mut e);
        let mut q = xs.iter().map(|x| x.abs()).collect::<Vec<_>>();
        let forces = q.clone();
        q_from_force_in_place(&mut q);
        for i in 0..xs.len() {
            assert_eq!(e[i].to_bits(), exp(xs[i]).to_bits());
            assert_eq!(q[i].to_bits(), q_from_force(forces[i]).to_bits());
        }
        // The plain compilation, whatever the CPU.
        let mut plain = xs.clone();
        for x in &mut plain {
            *x = std::hint::black_box(exp)(*x);
        }
        assert_eq!(
            plain.iter().map(|x| x.to_bits()).collect::<Vec<_>>(),
            e.iter().map(|x| x.to_bits()).collect::<Vec<_>>()
        );
    }
}
