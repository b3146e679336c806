//! A fixed-memory summary of every accepted reading.
//!
//! At most `N` slots of (time, mean value, time variance, count), stored as
//! separate arrays so nothing is lost to padding. When a reading arrives and
//! every slot is taken, the adjacent pair whose union is tightest in time
//! (smallest count × time variance, oldest first on ties) is merged into their
//! count-weighted mean time and value. The slots then span the whole run, and
//! each slot's mean has its noise variance divided by its count.

use crate::Real;

/// The history buffer. Times are hours since the estimator's origin.
#[derive(Clone, Debug)]
pub(crate) struct History<T, const N: usize> {
    time_h: [T; N],
    value: [T; N],
    /// Variance of the reading times within each slot, h².
    spread_h2: [T; N],
    count: [u16; N],
    len: u8,
}

impl<T: Real, const N: usize> History<T, N> {
    const CHECK: () = assert!(N >= 8 && N <= 255, "history length must be 8..=255");

    pub(crate) fn new() -> Self {
        let () = Self::CHECK;
        Self {
            time_h: [T::ZERO; N],
            value: [T::ZERO; N],
            spread_h2: [T::ZERO; N],
            count: [0; N],
            len: 0,
        }
    }

    pub(crate) fn len(&self) -> usize {
        usize::from(self.len)
    }

    /// Slot `i`: (time in hours since origin, mean value, count).
    pub(crate) fn slot(&self, i: usize) -> (T, T, u16) {
        (self.time_h[i], self.value[i], self.count[i])
    }

    /// Variance of the reading times merged into slot `i`, h².
    pub(crate) fn spread_h2(&self, i: usize) -> T {
        self.spread_h2[i]
    }

    #[cfg(test)]
    /// Total readings represented (counts saturate at `u16::MAX` per slot).
    pub(crate) fn total(&self) -> u32 {
        self.count[..self.len()].iter().map(|&c| u32::from(c)).sum()
    }

    /// Adds one reading. A reading at the newest slot's time is averaged into
    /// it (a duplicate timestamp loses nothing).
    pub(crate) fn push(&mut self, time_h: T, value: T) {
        let len = self.len();
        if len > 0 {
            let last = len - 1;
            if !(time_h > self.time_h[last]) {
                self.merge_into(last, time_h, value, 1, T::ZERO);
                return;
            }
        }
        if len == N {
            self.merge_cheapest_pair();
        }
        let len = self.len();
        self.time_h[len] = time_h;
        self.value[len] = value;
        self.spread_h2[len] = T::ZERO;
        self.count[len] = 1;
        // len < N <= 255 here, so the cast cannot truncate.
        self.len = u8::try_from(len + 1).unwrap_or(u8::MAX);
    }

    /// Merges (time, value, count, time spread) into slot `i`: count-weighted
    /// means, and the pooled variance of the times (within plus between).
    fn merge_into(&mut self, i: usize, time_h: T, value: T, count: u16, spread_h2: T) {
        let c0 = T::from_u32(u32::from(self.count[i]));
        let c1 = T::from_u32(u32::from(count));
        let total = c0 + c1;
        let mean = (self.time_h[i] * c0 + time_h * c1) / total;
        let d0 = self.time_h[i] - mean;
        let d1 = time_h - mean;
        self.spread_h2[i] =
            (c0 * (self.spread_h2[i] + d0 * d0) + c1 * (spread_h2 + d1 * d1)) / total;
        self.time_h[i] = mean;
        self.value[i] = (self.value[i] * c0 + value * c1) / total;
        self.count[i] = self.count[i].saturating_add(count);
    }

    /// Merges the adjacent pair whose union has the smallest count × time
    /// variance (the second moment about its mean time): close-in-time pairs
    /// go first, so a slot never straddles a long gap while finer merges
    /// remain, and the curvature correction of the fit stays small.
    fn merge_cheapest_pair(&mut self) {
        let len = self.len();
        let mut best = 0;
        let mut best_cost = T::INFINITY;
        for i in 0..len - 1 {
            let c0 = T::from_u32(u32::from(self.count[i]));
            let c1 = T::from_u32(u32::from(self.count[i + 1]));
            let gap = self.time_h[i + 1] - self.time_h[i];
            // Second moment of the union about its mean (parallel-axis rule).
            let cost = c0 * self.spread_h2[i]
                + c1 * self.spread_h2[i + 1]
                + c0 * c1 / (c0 + c1) * gap * gap;
            // Near-ties (within 0.01 %) go to the older pair, so rounding
            // cannot make f32 and f64 summarise the same run differently.
            if cost < best_cost * T::from_f64(0.9999) {
                best_cost = cost;
                best = i;
            }
        }
        let (t, v, c) = self.slot(best + 1);
        let spread = self.spread_h2[best + 1];
        self.merge_into(best, t, v, c, spread);
        for j in best + 1..len - 1 {
            self.time_h[j] = self.time_h[j + 1];
            self.value[j] = self.value[j + 1];
            self.spread_h2[j] = self.spread_h2[j + 1];
            self.count[j] = self.count[j + 1];
        }
        self.len -= 1;
    }
}

#[cfg(test)]
mod tests {
    use super::History;

    #[test]
    fn merging_keeps_count_and_weighted_means() {
        let mut h = History::<f64, 8>::new();
        let mut sum_t = 0.0;
        let mut sum_v = 0.0;
        for i in 0..100 {
            let t = f64::from(i);
            let v = 2.0 * t + 1.0;
            sum_t += t;
            sum_v += v;
            h.push(t, v);
        }
        assert_eq!(h.len(), 8);
        assert_eq!(h.total(), 100);
        // Count-weighted means are preserved exactly by every merge.
        let (mut wt, mut wv) = (0.0, 0.0);
        for i in 0..h.len() {
            let (t, v, c) = h.slot(i);
            wt += t * f64::from(c);
            wv += v * f64::from(c);
            // A linear signal stays on its line after averaging.
            assert!((v - (2.0 * t + 1.0)).abs() < 1e-9);
        }
        assert!((wt - sum_t).abs() < 1e-6 && (wv - sum_v).abs() < 1e-6);
        // Pooled time variance: slot 0 holds readings 0..c at unit spacing,
        // whose variance is (c² − 1)/12 (discrete uniform, common formula).
        let c = f64::from(h.slot(0).2);
        assert!((h.spread_h2(0) - (c * c - 1.0) / 12.0).abs() < 1e-9);
        // Recent detail is kept: the newest slot is the newest reading.
        assert_eq!(h.slot(7), (99.0, 199.0, 1));
        // Times stay strictly increasing.
        for i in 1..h.len() {
            assert!(h.slot(i).0 > h.slot(i - 1).0);
        }
    }

    #[test]
    fn duplicate_time_is_averaged_into_the_newest_slot() {
        let mut h = History::<f32, 8>::new();
        h.push(1.0, 0.1);
        h.push(1.0, 0.3);
        assert_eq!(h.len(), 1);
        let (t, v, c) = h.slot(0);
        assert_eq!((t, c), (1.0, 2));
        assert!((v - 0.2).abs() < 1e-7);
    }
}
