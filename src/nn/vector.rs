//! Element-wise maps over contiguous buffers that the compiler can turn into
//! SIMD loops, and an exponential written for them.
//!
//! The platform's `exp` is an opaque call per element, so a loop around it
//! runs one value at a time; [`exp`] here is branch-free arithmetic that
//! vectorises, which makes sigmoid and softmax layers several times faster.
//! It uses only IEEE additions and multiplications (no fused multiply–add,
//! whose availability differs between processors), so its results are the
//! same bit for bit on every machine and at every vector width: training no
//! longer depends on the C library's `exp` the way it did.

/// `e^x`, within about one unit in the last place of the exact value;
/// `+∞` above about 709.78, `0` below about −745.1, NaN for NaN.
///
/// Method: `x = k·ln 2 + r` with `k` the nearest integer to `x / ln 2` and
/// `|r| ≤ ln 2 / 2`, then `e^x = 2^k · e^r` with `e^r` from its Taylor series
/// to degree 13 (the first omitted term is below `4·10⁻¹⁸` relative). `k·ln 2`
/// is taken in two parts, the first with trailing zero bits so that its
/// product with `k` is exact (Cody & Waite, 1980; the constants are
/// fdlibm's). `2^k` is applied as two factors so that results near overflow
/// and in the subnormal range are rounded once, correctly.
#[inline(always)]
pub(super) fn exp(x: f64) -> f64 {
    // ln 2 = LN2_HI + LN2_LO, the first with its low 32 bits zero.
    const LN2_HI: f64 = f64::from_bits(0x3FE6_2E42_FEE0_0000);
    const LN2_LO: f64 = f64::from_bits(0x3DEA_39EF_3579_3C76);
    // 1.5 · 2⁵²: adding it rounds to an integer held in the low mantissa bits.
    const SHIFT: f64 = 6_755_399_441_055_744.0;
    // Past these e^x is 0 or +∞ in f64; clamping keeps k in range.
    let x = x.clamp(-746.0, 710.0);
    let shifted = x * std::f64::consts::LOG2_E + SHIFT;
    let k = shifted - SHIFT;
    let r = (x - k * LN2_HI) - k * LN2_LO;
    // e^r = 1 + (r + r²·t) with t = Σ_{i=2..13} rⁱ⁻²/i!. Adding the two
    // largest terms last keeps the rounding error near half an ulp; t is
    // evaluated by Estrin's scheme (pairs, then pairs of pairs), whose
    // dependency chains are a third as long as Horner's: a vectorised loop
    // over many values is bound by their latency.
    let c = |i: u32| 1.0 / (1..=i).map(f64::from).product::<f64>();
    let r2 = r * r;
    let r4 = r2 * r2;
    let pair = |i: u32| c(i) + c(i + 1) * r;
    let quad = |i: u32| pair(i) + pair(i + 2) * r2;
    let t = quad(2) + (quad(6) + quad(10) * r4) * r4;
    let p = 1.0 + (r + r2 * t);
    // The integer k sits in the low bits of `shifted`; split it in halves
    // k = k1 + k2 and build 2^k1, 2^k2 from the exponent field.
    let ki = shifted.to_bits().wrapping_sub(SHIFT.to_bits()) as i64;
    let k1 = ki >> 1;
    let k2 = ki - k1;
    let scale = |k: i64| f64::from_bits(((k + 1023) as u64) << 52);
    p * scale(k1) * scale(k2)
}

/// Runs `work` compiled for the widest vectors the processor has: AVX-512, AVX2, or
/// neither. `work`'s loops are inlined into a function built for that width, so they
/// vectorise there; `work` must be pure arithmetic for that to pay. The results do not
/// depend on which width runs: each lane does the same IEEE operations, and Rust never
/// fuses them.
#[inline(always)]
fn at_widest<R>(work: impl FnOnce() -> R) -> R {
    #[cfg(target_arch = "x86_64")]
    if std::arch::is_x86_feature_detected!("avx512f") {
        // SAFETY: AVX-512 F was detected.
        return unsafe { with_avx512(work) };
    }
    #[cfg(target_arch = "x86_64")]
    if std::arch::is_x86_feature_detected!("avx2") {
        // SAFETY: AVX2 was detected.
        return unsafe { with_avx2(work) };
    }
    work()
}

#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx2")]
fn with_avx2<R>(work: impl FnOnce() -> R) -> R {
    work()
}

#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx512f")]
fn with_avx512<R>(work: impl FnOnce() -> R) -> R {
    work()
}

/// `values[i] ← f(values[i])` for every element, at the widest vectors there are.
#[inline]
pub(super) fn map<F: Copy>(values: &mut [F], f: impl Fn(F) -> F) {
    at_widest(|| map_scalar(values, f));
}

#[inline(always)]
fn map_scalar<F: Copy>(values: &mut [F], f: impl Fn(F) -> F) {
    values.iter_mut().for_each(|v| *v = f(*v));
}

/// `out[i] ← f(a[i], b[i])` for every `i < out.len()`, at the widest vectors there are.
///
/// # Panics
/// If `a` or `b` is shorter than `out`.
#[inline]
pub(super) fn zip_map<F: Copy>(out: &mut [F], a: &[F], b: &[F], f: impl Fn(F, F) -> F) {
    let (a, b) = (&a[..out.len()], &b[..out.len()]);
    at_widest(|| zip_map_scalar(out, a, b, f));
}

#[inline(always)]
fn zip_map_scalar<F: Copy>(out: &mut [F], a: &[F], b: &[F], f: impl Fn(F, F) -> F) {
    out.iter_mut()
        .zip(a.iter().zip(b))
        .for_each(|(o, (&a, &b))| *o = f(a, b));
}

/// `step(&mut w[i], &mut v[i], g[i])` for every `i < w.len()`: a parameter, its
/// optimiser state and its gradient, at the widest vectors there are.
///
/// # Panics
/// If `v` or `g` is shorter than `w`.
#[inline]
pub(super) fn update<F: Copy>(w: &mut [F], v: &mut [F], g: &[F], step: impl Fn(&mut F, &mut F, F)) {
    let (v, g) = (&mut v[..w.len()], &g[..w.len()]);
    at_widest(|| update_scalar(w, v, g, step));
}

#[inline(always)]
fn update_scalar<F: Copy>(w: &mut [F], v: &mut [F], g: &[F], step: impl Fn(&mut F, &mut F, F)) {
    w.iter_mut()
        .zip(v.iter_mut())
        .zip(g)
        .for_each(|((w, v), &g)| step(w, v, g));
}

/// `values[i] ← f(values[i], other[i])` for every `i < values.len()`, at the widest
/// vectors there are.
///
/// # Panics
/// If `other` is shorter than `values`.
#[inline]
pub(super) fn map_with<F: Copy>(values: &mut [F], other: &[F], f: impl Fn(F, F) -> F) {
    let other = &other[..values.len()];
    at_widest(|| map_with_scalar(values, other, f));
}

#[inline(always)]
fn map_with_scalar<F: Copy>(values: &mut [F], other: &[F], f: impl Fn(F, F) -> F) {
    values
        .iter_mut()
        .zip(other)
        .for_each(|(v, &o)| *v = f(*v, o));
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Distance in units in the last place between two finite doubles.
    fn ulps(a: f64, b: f64) -> u64 {
        let key = |v: f64| {
            let bits = v.to_bits() as i64;
            if bits < 0 { i64::MIN - bits } else { bits }
        };
        key(a).abs_diff(key(b))
    }

    /// Against the platform's `exp` (itself within about half an ulp) over the
    /// whole finite range, densely where sigmoid and softmax use it.
    #[test]
    fn exp_is_within_one_ulp_of_the_platform() {
        let mut worst = (0, 0.0);
        let mut check = |x: f64| {
            let (ours, reference) = (exp(x), x.exp());
            let d = ulps(ours, reference);
            if d > worst.0 {
                worst = (d, x);
            }
        };
        for i in 0..200_000 {
            check(-40.0 + 50.0 * i as f64 / 200_000.0);
        }
        for i in 0..20_000 {
            check(-745.0 + 1454.0 * i as f64 / 20_000.0);
        }
        assert!(worst.0 <= 1, "{} ulps at {}", worst.0, worst.1);
    }

    #[test]
    fn exp_edges() {
        assert_eq!(exp(0.0), 1.0);
        assert_eq!(exp(-0.0), 1.0);
        assert!(ulps(exp(1.0), std::f64::consts::E) <= 1);
        assert_eq!(exp(710.0), f64::INFINITY);
        assert_eq!(exp(f64::INFINITY), f64::INFINITY);
        assert_eq!(exp(-746.0), 0.0);
        assert_eq!(exp(f64::NEG_INFINITY), 0.0);
        assert!(exp(f64::NAN).is_nan());
        // Largest finite and smallest subnormal results.
        assert!(exp(709.78).is_finite());
        let tiny = exp(-744.4);
        assert!(tiny > 0.0 && tiny < f64::MIN_POSITIVE, "{tiny}");
        assert_eq!(ulps(exp(-700.0), (-700.0f64).exp()), 0);
    }

    #[test]
    fn map_matches_the_scalar_loop() {
        let mut values: Vec<f64> = (0..1003).map(|i| (i as f64 - 500.0) / 7.0).collect();
        let expected: Vec<f64> = values.iter().map(|&v| exp(-v.abs())).collect();
        map(&mut values, |v| exp(-v.abs()));
        assert_eq!(values, expected);
    }

    /// Every width of the two-operand maps, into a third buffer and in
    /// place, gives the scalar loop's bits, including the lanes of a ragged end.
    #[test]
    fn every_width_of_the_two_operand_maps_matches_the_scalar_loop() {
        let a: Vec<f64> = (0..1003).map(|i| (i as f64 - 500.0) / 7.0).collect();
        let b: Vec<f64> = (0..1003).map(|i| ((i * 37) % 11) as f64 - 5.5).collect();
        let residual = |o: f64, t: f64| (o - t) / 3.0;
        let expected: Vec<f64> = a.iter().zip(&b).map(|(&o, &t)| residual(o, t)).collect();
        let mut out = vec![f64::NAN; 1003];
        zip_map(&mut out, &a, &b, residual);
        assert_eq!(out, expected);
        let mut in_place = a.clone();
        map_with(&mut in_place, &b, residual);
        assert_eq!(in_place, expected, "in place");
        #[cfg(target_arch = "x86_64")]
        for (width, available) in [
            ("AVX2", std::arch::is_x86_feature_detected!("avx2")),
            ("AVX-512", std::arch::is_x86_feature_detected!("avx512f")),
        ] {
            if !available {
                continue;
            }
            let mut out = vec![f64::NAN; 1003];
            let mut in_place = a.clone();
            let work = || {
                zip_map_scalar(&mut out, &a, &b, residual);
                map_with_scalar(&mut in_place, &b, residual);
            };
            // SAFETY: the width's instructions were detected.
            unsafe {
                match width {
                    "AVX2" => with_avx2(work),
                    _ => with_avx512(work),
                }
            }
            assert_eq!(out, expected, "{width}");
            assert_eq!(in_place, expected, "{width}, in place");
        }
    }

    /// Every width of the parameter update gives the scalar loop's bits (a
    /// momentum step), including the lanes of a ragged end.
    #[test]
    fn every_width_of_the_parameter_update_matches_the_scalar_loop() {
        let start: Vec<f64> = (0..1003).map(|i| (i as f64 - 500.0) / 7.0).collect();
        let velocity: Vec<f64> = (0..1003).map(|i| ((i * 37) % 11) as f64 * 0.01).collect();
        let gradient: Vec<f64> = (0..1003).map(|i| ((i * 13) % 7) as f64 - 3.1).collect();
        let step = |w: &mut f64, v: &mut f64, g: f64| {
            *v = 0.9 * *v - 0.1 * g;
            *w += *v;
        };
        let fresh = || (start.clone(), velocity.clone());
        let (mut w, mut v) = fresh();
        update_scalar(&mut w, &mut v, &gradient, step);
        let expected = (w, v);
        let (mut w, mut v) = fresh();
        update(&mut w, &mut v, &gradient, step);
        assert_eq!((w, v), expected);
        #[cfg(target_arch = "x86_64")]
        {
            if std::arch::is_x86_feature_detected!("avx2") {
                let (mut w, mut v) = fresh();
                // SAFETY: AVX2 was detected.
                unsafe { with_avx2(|| update_scalar(&mut w, &mut v, &gradient, step)) };
                assert_eq!((w, v), expected, "AVX2");
            }
            if std::arch::is_x86_feature_detected!("avx512f") {
                let (mut w, mut v) = fresh();
                // SAFETY: AVX-512 F was detected.
                unsafe { with_avx512(|| update_scalar(&mut w, &mut v, &gradient, step)) };
                assert_eq!((w, v), expected, "AVX-512");
            }
        }
    }

    /// Each vector width this processor has gives the scalar loop's bits,
    /// edge values included (`map` itself takes only the widest).
    #[cfg(target_arch = "x86_64")]
    #[test]
    fn every_vector_width_matches_the_scalar_loop() {
        let mut inputs: Vec<f64> = (0..1003).map(|i| (i as f64 - 500.0) * 1.7).collect();
        inputs.extend([
            0.0,
            -0.0,
            f64::NAN,
            f64::INFINITY,
            f64::NEG_INFINITY,
            709.9,
            -745.5,
        ]);
        let expected: Vec<f64> = inputs.iter().map(|&v| exp(v)).collect();
        let same = |got: &[f64]| {
            got.iter()
                .zip(&expected)
                .all(|(g, e)| g.to_bits() == e.to_bits())
        };
        if std::arch::is_x86_feature_detected!("avx2") {
            let mut values = inputs.clone();
            // SAFETY: AVX2 was detected.
            unsafe { with_avx2(|| map_scalar(&mut values, exp)) };
            assert!(same(&values), "AVX2");
        }
        if std::arch::is_x86_feature_detected!("avx512f") {
            let mut values = inputs.clone();
            // SAFETY: AVX-512 F was detected.
            unsafe { with_avx512(|| map_scalar(&mut values, exp)) };
            assert!(same(&values), "AVX-512");
        }
    }
}
