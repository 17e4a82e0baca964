//! The AVX2 + FMA kernel of [`KeplerSolver`]: four mean anomalies per
//! 256-bit register, interval rows loaded and transposed in registers, then
//! the lane arithmetic shared with the portable path
//! ([`KeplerSolver::refine`]), so both give the same bits.
//!
//! Every `unsafe` here stands for one of two obligations:
//! - the processor executes AVX2 and FMA instructions (undefined behaviour
//!   on one without them). The public entry points check [`has_avx2_fma`]
//!   and only then call a function compiled with
//!   `#[target_feature(enable = "avx2,fma")]`; the `#[inline(always)]`
//!   helpers below are only called from such functions, so they inline
//!   into code compiled for AVX2 (and run only where it is present);
//! - vector loads read 32 bytes in bounds (and, for aligned loads, at a
//!   32-byte boundary). Where the loads come from a reference of the right
//!   type this is checked by the compiler, and the comment says why.

use super::table::{row, IntervalRow, Lanes, CORNER_MAX, INTERVALS};
use super::{
    EccentricAnomaly, KeplerSolver, Solved, GROUP, LANES, ROUND_MAGIC, TWO_PI_1, TWO_PI_2, TWO_PI_3,
};
use std::arch::x86_64::*;
use std::f64::consts::PI;

/// True when the processor has AVX2 and FMA (cached by the standard library).
#[inline]
pub(crate) fn has_avx2_fma() -> bool {
    std::arch::is_x86_feature_detected!("avx2") && std::arch::is_x86_feature_detected!("fma")
}

impl KeplerSolver {
    /// [`Self::solve_reduced`] compiled with hardware fused multiply-add
    /// (`f64::mul_add` is exactly rounded either way, so the result is
    /// the same, only faster).
    ///
    /// # Safety
    /// The processor must have AVX2 and FMA ([`has_avx2_fma`]): the body is
    /// compiled for them.
    #[target_feature(enable = "avx2,fma")]
    pub(super) unsafe fn solve_one_fma(&self, mean_anomaly: f64) -> EccentricAnomaly {
        self.solve_group(&[mean_anomaly]).get(0)
    }

    /// [`Self::solve_many`] with the AVX2 kernel, 4 mean anomalies per
    /// register; a last partial group is padded, so every solve takes the
    /// same path.
    ///
    /// # Safety
    /// The processor must have AVX2 and FMA ([`has_avx2_fma`]): the body is
    /// compiled for them.
    #[target_feature(enable = "avx2,fma")]
    pub(super) unsafe fn solve_many_avx2(
        &self,
        mean_anomalies: &[f64],
        out: &mut [EccentricAnomaly],
    ) {
        let n = mean_anomalies.len().min(out.len());
        let (ms, out) = (&mean_anomalies[..n], &mut out[..n]);
        let mut ms_chunks = ms.chunks_exact(GROUP);
        let mut out_chunks = out.chunks_exact_mut(GROUP);
        for (mc, oc) in (&mut ms_chunks).zip(&mut out_chunks) {
            // SAFETY: AVX2 and FMA are present (this function's contract);
            // `mc` holds exactly GROUP = 4 f64, the 32 bytes the unaligned
            // load reads.
            let solved = unsafe {
                let m = reduce_mean_anomaly_avx2(_mm256_loadu_pd(mc.as_ptr()));
                self.solve_group_avx2(m)
            };
            oc.copy_from_slice(&solved.to_array());
        }
        let rest = ms_chunks.remainder();
        if !rest.is_empty() {
            let mut padded = [0.0; GROUP];
            padded[..rest.len()].copy_from_slice(rest);
            // SAFETY: as above; `padded` is [f64; 4].
            let solved = unsafe {
                let m = reduce_mean_anomaly_avx2(_mm256_loadu_pd(padded.as_ptr()));
                self.solve_group_avx2(m)
            };
            let tail = out_chunks.into_remainder();
            tail.copy_from_slice(&solved.to_array()[..tail.len()]);
        }
    }

    /// [`Self::solve_lanes`] by the AVX2 kernel.
    ///
    /// # Safety
    /// The processor must have AVX2 and FMA ([`has_avx2_fma`]). Call it from
    /// a function compiled for them (as `Orbit::for_each_block_avx2` is) so
    /// that it inlines into vector code.
    #[inline(always)]
    pub(crate) unsafe fn solve_lanes_avx2(&self, mean_anomaly: &[f64; LANES]) -> Solved<LANES> {
        let (lo, hi) = mean_anomaly.split_at(GROUP);
        // SAFETY: AVX2 and FMA are present (this function's contract); `lo`
        // and `hi` each hold GROUP = 4 f64 (LANES = 2 GROUP), the 32 bytes
        // each unaligned load reads.
        let (lo, hi) = unsafe {
            (
                self.solve_group_avx2(_mm256_loadu_pd(lo.as_ptr())),
                self.solve_group_avx2(_mm256_loadu_pd(hi.as_ptr())),
            )
        };
        let join = |a: &[f64; GROUP], b: &[f64; GROUP]| -> [f64; LANES] {
            std::array::from_fn(|i| if i < GROUP { a[i] } else { b[i - GROUP] })
        };
        Solved {
            e_anom: join(&lo.e_anom, &hi.e_anom),
            sin_e: join(&lo.sin_e, &hi.sin_e),
            cos_e: join(&lo.cos_e, &hi.cos_e),
        }
    }

    /// [`Self::solve_group_of_four`] by the AVX2 kernel.
    ///
    /// # Safety
    /// As [`Self::solve_lanes_avx2`].
    #[inline(always)]
    pub(crate) unsafe fn solve_group_of_four_avx2(
        &self,
        mean_anomaly: &[f64; GROUP],
    ) -> Solved<GROUP> {
        // SAFETY: AVX2 and FMA are present (this function's contract);
        // `mean_anomaly` is [f64; 4], the 32 bytes the unaligned load reads.
        unsafe { self.solve_group_avx2(_mm256_loadu_pd(mean_anomaly.as_ptr())) }
    }

    /// The vector kernel: the interval count and the table rows go straight
    /// into registers (rows are loaded four values at a time and
    /// transposed), then the lane arithmetic shared with the portable path
    /// ([`Self::refine`]) runs on them, so both give the same bits. Lanes
    /// near periastron at high e (e > 0.8, E < pi/4) take their rows from
    /// the corner table, found by a second count.
    ///
    /// # Safety
    /// The processor must have AVX2 and FMA; only call it from a function
    /// compiled for them (see the module notes).
    #[inline(always)]
    unsafe fn solve_group_avx2(&self, mean_anomaly: __m256d) -> Solved<GROUP> {
        // SAFETY: AVX2 and FMA are present (this function's contract); the
        // helpers need nothing else (table rows are passed by reference,
        // indices are masked or reduced into range).
        unsafe {
            let abs = _mm256_andnot_pd(_mm256_set1_pd(-0.0), mean_anomaly);
            let k = count_at_or_below(abs, &self.m_ends[1..INTERVALS]);
            match &self.corner {
                Some(corner) if k.iter().any(|&k| (k as usize) < self.corner_intervals) => {
                    let j = count_at_or_below(abs, &corner.m_ends[1..corner.len]);
                    let near = k.map(|k| (k as usize) < self.corner_intervals);
                    let rows: [&IntervalRow; GROUP] = std::array::from_fn(|i| {
                        if near[i] {
                            &corner.rows[j[i] as usize % CORNER_MAX]
                        } else {
                            &self.rows[k[i] as usize & (INTERVALS - 1)]
                        }
                    });
                    // Mixed groups (across the corner table's edge) are fine:
                    // each lane keeps its own row and form.
                    self.refine(&lanes_from_rows(mean_anomaly, abs, &rows, near))
                }
                _ => {
                    let rows = k.map(|k| &self.rows[k as usize & (INTERVALS - 1)]);
                    self.refine(&lanes_from_rows(mean_anomaly, abs, &rows, [false; GROUP]))
                }
            }
        }
    }
}

/// Values [OFFSET, OFFSET + 4) of four table rows as four columns (a 4x4
/// transpose in registers: two unpacks and two lane permutes per pair).
///
/// # Safety
/// The processor must have AVX2; only call it from a function compiled for
/// it. (The loads need nothing from the caller: see below.)
#[inline(always)]
unsafe fn columns<const OFFSET: usize>(rows: &[&IntervalRow; GROUP]) -> [[f64; GROUP]; GROUP] {
    // Checked at compile time: the four values lie inside a row and start
    // at a multiple of 4 f64 = 32 bytes from its start.
    const { assert!(OFFSET + GROUP <= row::LEN && OFFSET.is_multiple_of(GROUP)) };
    // SAFETY: AVX2 is present (this function's contract). Each aligned load
    // reads 32 bytes at row + 8 OFFSET bytes: in bounds by the assertion
    // above, and 32-byte aligned because `IntervalRow` is `align(32)` and
    // 8 OFFSET is a multiple of 32. The transmute reinterprets four
    // registers of four f64 as [[f64; 4]; 4]: same size, every bit pattern
    // is a valid f64.
    unsafe {
        let a = _mm256_load_pd(rows[0].0.as_ptr().add(OFFSET));
        let b = _mm256_load_pd(rows[1].0.as_ptr().add(OFFSET));
        let c = _mm256_load_pd(rows[2].0.as_ptr().add(OFFSET));
        let d = _mm256_load_pd(rows[3].0.as_ptr().add(OFFSET));
        let ab_even = _mm256_unpacklo_pd(a, b);
        let ab_odd = _mm256_unpackhi_pd(a, b);
        let cd_even = _mm256_unpacklo_pd(c, d);
        let cd_odd = _mm256_unpackhi_pd(c, d);
        std::mem::transmute::<[__m256d; GROUP], [[f64; GROUP]; GROUP]>([
            _mm256_permute2f128_pd::<0x20>(ab_even, cd_even),
            _mm256_permute2f128_pd::<0x20>(ab_odd, cd_odd),
            _mm256_permute2f128_pd::<0x31>(ab_even, cd_even),
            _mm256_permute2f128_pd::<0x31>(ab_odd, cd_odd),
        ])
    }
}

/// The kernel's lanes from four interval rows (see [`columns`]).
///
/// # Safety
/// The processor must have AVX2; only call it from a function compiled for
/// it.
#[inline(always)]
unsafe fn lanes_from_rows(
    m: __m256d,
    abs: __m256d,
    rows: &[&IntervalRow; GROUP],
    near_periastron: [bool; GROUP],
) -> Lanes<GROUP> {
    // SAFETY: AVX2 is present (this function's contract); the transmutes
    // reinterpret one register of four f64 as [f64; 4] or [u64; 4] (same
    // size, every bit pattern valid for both).
    unsafe {
        let [start, c0, c1, c2] = columns::<0>(rows);
        let [c3, c4, em, sm] = columns::<4>(rows);
        let [cm, ems, omc, half] = columns::<8>(rows);
        let sign = _mm256_and_pd(m, _mm256_set1_pd(-0.0));
        Lanes {
            near_periastron,
            m: std::mem::transmute::<__m256d, [f64; GROUP]>(abs),
            sign: std::mem::transmute::<__m256d, [u64; GROUP]>(sign),
            start,
            coef: [c0, c1, c2, c3, c4],
            half,
            mid_e: em,
            mid_sin: sm,
            mid_cos: cm,
            mid_e_minus_sin: ems,
            mid_one_minus_cos: omc,
        }
    }
}

/// Per lane, how many of the ascending `ends` are at or below `x` (each
/// true compare is -1; four partial sums keep the chain of additions
/// short, as the solve is latency-bound).
///
/// # Safety
/// The processor must have AVX2; only call it from a function compiled for
/// it.
#[inline(always)]
unsafe fn count_at_or_below(x: __m256d, ends: &[f64]) -> [u64; GROUP] {
    // SAFETY: AVX2 is present (this function's contract); the store writes
    // 32 bytes into `k`, a [u64; 4] (unaligned store, so its alignment of 8
    // is enough).
    unsafe {
        let mut partial = [_mm256_setzero_si256(); 4];
        for (j, &end) in ends.iter().enumerate() {
            let ge = _mm256_cmp_pd::<_CMP_GE_OQ>(x, _mm256_set1_pd(end));
            partial[j % 4] = _mm256_sub_epi64(partial[j % 4], _mm256_castpd_si256(ge));
        }
        let count = _mm256_add_epi64(
            _mm256_add_epi64(partial[0], partial[1]),
            _mm256_add_epi64(partial[2], partial[3]),
        );
        let mut k = [0u64; GROUP];
        _mm256_storeu_si256(k.as_mut_ptr().cast(), count);
        k
    }
}

/// [`super::reduce_mean_anomaly`] on four values at once: the same IEEE
/// operations in the same order, so the same results.
///
/// # Safety
/// The processor must have AVX2; only call it from a function compiled for
/// it.
#[inline(always)]
unsafe fn reduce_mean_anomaly_avx2(m: __m256d) -> __m256d {
    // SAFETY: AVX2 is present (this function's contract); register
    // arithmetic only, no memory access.
    unsafe {
        // For |M| <= pi the reduction is exactly the identity (M / 2pi
        // rounds to k = +0; at M = pi the product is exactly 0.5, which
        // rounds to even, 0), and callers mostly pass reduced values: skip
        // its latency.
        let abs = _mm256_andnot_pd(_mm256_set1_pd(-0.0), m);
        if _mm256_movemask_pd(_mm256_cmp_pd::<_CMP_LE_OQ>(abs, _mm256_set1_pd(PI))) == 0b1111 {
            return m;
        }
        let magic = _mm256_set1_pd(ROUND_MAGIC);
        let k = _mm256_sub_pd(
            _mm256_add_pd(_mm256_mul_pd(m, _mm256_set1_pd(0.5 / PI)), magic),
            magic,
        );
        let r = _mm256_sub_pd(m, _mm256_mul_pd(k, _mm256_set1_pd(TWO_PI_1)));
        let r = _mm256_sub_pd(r, _mm256_mul_pd(k, _mm256_set1_pd(TWO_PI_2)));
        _mm256_sub_pd(r, _mm256_mul_pd(k, _mm256_set1_pd(TWO_PI_3)))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The AVX2 kernel (taken by `solve_many` on this machine when the
    /// processor has AVX2 and FMA) and the portable lane code give the same
    /// bits, for every length (partial groups), corner and non-corner
    /// eccentricities, negative zero, M = +-pi and unreduced M.
    #[test]
    fn vector_kernel_equals_portable_path() {
        let mut ms: Vec<f64> = (0..203)
            .map(|k| -7.0 + 14.0 * ((k as f64 + 0.5) * 0.618_033_988_749_894_9).fract())
            .collect();
        ms.extend([0.0, -0.0, PI, -PI, 1e-9, -1e-300, 0.05, 3.0, 1e4]);
        ms.extend((0..40).map(|k| (k as f64 - 20.0) * 0.003));
        let blank = EccentricAnomaly {
            e_anom: 0.0,
            sin_e: 0.0,
            cos_e: 1.0,
        };
        let bits = |v: &[EccentricAnomaly]| -> Vec<[u64; 3]> {
            v.iter()
                .map(|a| [a.e_anom.to_bits(), a.sin_e.to_bits(), a.cos_e.to_bits()])
                .collect()
        };
        for &e in &[0.0, 0.3, 0.8, 0.81, 0.95, 0.999, 0.999_999] {
            let solver = KeplerSolver::new(e).unwrap();
            for len in [0, 1, 3, 4, 5, 7, 8, 9, ms.len()] {
                let mut fast = vec![blank; len];
                let mut portable = vec![blank; len];
                solver.solve_many(&ms[..len], &mut fast);
                solver.solve_many_portable(&ms[..len], &mut portable);
                assert_eq!(bits(&fast), bits(&portable), "e = {e}, {len} values");
                let one_by_one: Vec<_> = ms[..len].iter().map(|&m| solver.solve(m)).collect();
                assert_eq!(bits(&fast), bits(&one_by_one), "e = {e}, {len} values");
            }
        }
    }
}
