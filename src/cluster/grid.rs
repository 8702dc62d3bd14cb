//! Grid summaries: the weighted centroids of occupied cells, a small stand-in for many
//! rows when the scale of interest is coarser (annealing, refinement, split-and-merge).

use super::Dataset;

/// Weighted centroids of the occupied cells of a grid of side `cell`, in cell order
/// (deterministic): a small stand-in for many rows when the scale of interest is coarser.
pub(crate) fn coarsen(data: &Dataset, cell: f64) -> (Vec<f32>, Vec<f64>) {
    let dim = data.dim();
    if !(cell.is_finite() && cell > 0.0) {
        return (
            data.rows().to_vec(),
            (0..data.len()).map(|i| data.weight(i)).collect(),
        );
    }
    // Each row's cell key; rows sorted by (key, row) so that each cell's rows are
    // consecutive and in row order: the same sums, in the same order, and the same cell
    // order (keys compared as sequences) as a map from key to running sums would give.
    let n = data.len();
    let mut keys = vec![0i64; n * dim];
    for (i, k) in keys.chunks_exact_mut(dim.max(1)).enumerate().take(n) {
        for (kv, &v) in k.iter_mut().zip(data.row(i)) {
            *kv = (v as f64 / cell).floor() as i64;
        }
    }
    let mut order: Vec<u32> = (0..n as u32)
        .filter(|&i| data.weight(i as usize) != 0.0)
        .collect();
    let key = |i: u32| &keys[i as usize * dim..(i as usize + 1) * dim];
    // When every key fits in 64 bits (offset from its dimension's least value, first
    // dimension most significant), sort packed integers: the same order, much faster.
    let mut lo = vec![i64::MAX; dim];
    let mut hi = vec![i64::MIN; dim];
    for &i in &order {
        for ((l, h), &k) in lo.iter_mut().zip(hi.iter_mut()).zip(key(i)) {
            *l = (*l).min(k);
            *h = (*h).max(k);
        }
    }
    let bits: Vec<u32> = lo
        .iter()
        .zip(&hi)
        .map(|(&l, &h)| 64 - ((h as i128 - l as i128).max(0) as u64).leading_zeros())
        .collect();
    // Each cell's rows: `order[starts[c]..starts[c + 1]]`.
    let mut starts: Vec<u32> = Vec::new();
    if !order.is_empty() && bits.iter().sum::<u32>() <= 64 {
        let packed: Vec<(u64, u32)> = order
            .iter()
            .map(|&i| {
                let mut p = 0u64;
                for ((&k, &l), &b) in key(i).iter().zip(&lo).zip(&bits) {
                    p = if b == 64 { 0 } else { p << b } | (k as i128 - l as i128) as u64;
                }
                (p, i)
            })
            .collect();
        // The per-dimension keys are no longer needed: freed before the sort's buffer.
        drop(keys);
        let sorted = radix_sort(packed, bits.iter().sum());
        order.clear();
        for (at, &(p, i)) in sorted.iter().enumerate() {
            if at == 0 || sorted[at - 1].0 != p {
                starts.push(at as u32);
            }
            order.push(i);
        }
    } else {
        order.sort_unstable_by(|&a, &b| key(a).cmp(key(b)).then(a.cmp(&b)));
        for at in 0..order.len() {
            if at == 0 || key(order[at - 1]) != key(order[at]) {
                starts.push(at as u32);
            }
        }
    }
    starts.push(order.len() as u32);
    let mut rows = Vec::with_capacity((starts.len() - 1) * dim);
    let mut weights = Vec::with_capacity(starts.len() - 1);
    let mut sum = vec![0.0f64; dim];
    for run in starts.windows(2) {
        let mut w = 0.0;
        sum.iter_mut().for_each(|s| *s = 0.0);
        for &i in &order[run[0] as usize..run[1] as usize] {
            let i = i as usize;
            let wi = data.weight(i);
            w += wi;
            for (s, &v) in sum.iter_mut().zip(data.row(i)) {
                *s += wi * v as f64;
            }
        }
        rows.extend(sum.iter().map(|v| (v / w) as f32));
        weights.push(w);
    }
    (rows, weights)
}

/// `packed` (key, row) sorted by key then row, for keys of at most `bits` bits and rows
/// given in increasing order: a stable least-significant-digit radix sort, 11 bits a pass
/// (the order `sort_unstable` gives on the pairs, in a few linear passes).
fn radix_sort(mut packed: Vec<(u64, u32)>, bits: u32) -> Vec<(u64, u32)> {
    const DIGIT: u32 = 11;
    let mut spare = vec![(0u64, 0u32); packed.len()];
    let mut shift = 0;
    while shift < bits {
        let digit = |p: u64| ((p >> shift) & ((1 << DIGIT) - 1)) as usize;
        let mut start = vec![0usize; 1 << DIGIT];
        for &(p, _) in &packed {
            start[digit(p)] += 1;
        }
        let mut at = 0;
        for s in start.iter_mut() {
            let n = *s;
            *s = at;
            at += n;
        }
        for &item in &packed {
            let d = digit(item.0);
            spare[start[d]] = item;
            start[d] += 1;
        }
        std::mem::swap(&mut packed, &mut spare);
        shift += DIGIT;
    }
    packed
}

#[cfg(test)]
mod tests {
    use super::radix_sort;

    #[test]
    fn radix_sort_is_the_sorted_order() {
        let mut state = 12345u64;
        let mut packed = Vec::new();
        for i in 0..5000u32 {
            // A small linear congruential stream: many repeated keys of up to 40 bits.
            state = state
                .wrapping_mul(6364136223846793005)
                .wrapping_add(1442695040888963407);
            packed.push(((state >> 24) % (1 << 40) / 1_000_000, i));
        }
        let mut sorted = packed.clone();
        sorted.sort_unstable();
        assert_eq!(radix_sort(packed, 40), sorted);
    }
}
