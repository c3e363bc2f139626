//! Exact order statistics of a tensor's values without holding them: the values at chosen ranks
//! of the ascending order (`f32::total_cmp`, the order calibration sorts by), found in two
//! passes over the values with histograms of their bits.
//!
//! Each f32 maps to a 32-bit key whose unsigned order is `total_cmp`'s ([`key`]). Pass 1 counts
//! the keys' upper 16 bits (65,536 bins): the bin holding rank `r` is where the running count
//! passes `r`. Pass 2 counts the lower 16 bits of the keys in those bins only: a (bin, lower
//! bits) pair is one exact f32 value, so the value at rank `r` is read off the counts. The result
//! is the value `sorted[r]` of a full sort, bit for bit (an exact selection, not an estimate),
//! for 512 KB per tensor plus 512 KB per bin holding a wanted rank.
use std::collections::BTreeMap;

const BINS: usize = 1 << 16;

/// The key of `v`: unsigned order of keys is `f32::total_cmp` order of values.
pub fn key(v: f32) -> u32 {
    let b = v.to_bits();
    if b >> 31 == 1 {
        !b
    } else {
        b | 0x8000_0000
    }
}

/// The value of a key.
pub fn value(k: u32) -> f32 {
    f32::from_bits(if k >> 31 == 1 { k & 0x7fff_ffff } else { !k })
}

/// Pass 1: counts of the keys' upper halves, and the smallest and largest key.
#[derive(Debug, Clone)]
pub struct Coarse {
    counts: Vec<u64>,
    n: u64,
    min: u32,
    max: u32,
}

impl Default for Coarse {
    fn default() -> Self {
        Coarse {
            counts: vec![0; BINS],
            n: 0,
            min: u32::MAX,
            max: 0,
        }
    }
}

impl Coarse {
    /// Counts one value.
    pub fn add(&mut self, v: f32) {
        let k = key(v);
        if let Some(c) = self.counts.get_mut((k >> 16) as usize) {
            *c += 1;
        }
        self.n += 1;
        self.min = self.min.min(k);
        self.max = self.max.max(k);
    }

    /// Values counted.
    pub fn len(&self) -> usize {
        self.n as usize
    }

    /// Whether no value was counted.
    pub fn is_empty(&self) -> bool {
        self.n == 0
    }

    /// The smallest value in `total_cmp` order (`sorted[0]`); 0 without values.
    pub fn first(&self) -> f32 {
        if self.n == 0 {
            0.0
        } else {
            value(self.min)
        }
    }

    /// The largest value (`sorted[n - 1]`); 0 without values.
    pub fn last(&self) -> f32 {
        if self.n == 0 {
            0.0
        } else {
            value(self.max)
        }
    }

    /// The bin holding rank `r` (0-based) and how many values lie in the bins below it.
    fn locate(&self, r: u64) -> Option<(u16, u64)> {
        let mut below = 0u64;
        for (b, &c) in self.counts.iter().enumerate() {
            if r < below + c {
                return u16::try_from(b).ok().map(|b| (b, below));
            }
            below += c;
        }
        None
    }

    /// Pass 2's counter for the values at `ranks` (out-of-range ranks are ignored).
    pub fn select(&self, ranks: &[usize]) -> Fine {
        let mut bins = BTreeMap::new();
        let mut wanted = Vec::new();
        for &r in ranks {
            if let Some((b, below)) = self.locate(r as u64) {
                bins.entry(b).or_insert_with(|| vec![0u64; BINS]);
                wanted.push((r, b, r as u64 - below));
            }
        }
        Fine { bins, wanted }
    }
}

/// Pass 2: counts of the lower halves of the keys in the bins that hold a wanted rank.
#[derive(Debug, Clone)]
pub struct Fine {
    bins: BTreeMap<u16, Vec<u64>>,
    /// (rank, its bin, its rank within the bin).
    wanted: Vec<(usize, u16, u64)>,
}

impl Fine {
    /// Counts one value (the same values, in any order, as pass 1).
    pub fn add(&mut self, v: f32) {
        let k = key(v);
        if let Some(c) = self.bins.get_mut(&((k >> 16) as u16)) {
            if let Some(c) = c.get_mut((k & 0xffff) as usize) {
                *c += 1;
            }
        }
    }

    /// The value at each wanted rank: `(rank, sorted[rank])`.
    pub fn values(&self) -> BTreeMap<usize, f32> {
        let mut out = BTreeMap::new();
        for &(r, b, within) in &self.wanted {
            let Some(counts) = self.bins.get(&b) else {
                continue;
            };
            let mut below = 0u64;
            for (low, &c) in counts.iter().enumerate() {
                if within < below + c {
                    out.insert(r, value((u32::from(b) << 16) | low as u32));
                    break;
                }
                below += c;
            }
        }
        out
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn keys_order_as_total_cmp() {
        let mut v = vec![
            -f32::MAX,
            -1.5,
            -f32::MIN_POSITIVE,
            -0.0,
            0.0,
            1e-45,
            1.0,
            3e38,
            f32::INFINITY,
        ];
        let keys: Vec<u32> = v.iter().map(|&x| key(x)).collect();
        assert!(keys.windows(2).all(|w| w[0] < w[1]));
        v.reverse();
        for x in v {
            assert_eq!(value(key(x)).to_bits(), x.to_bits());
        }
    }

    #[test]
    fn two_passes_select_the_sorted_values_exactly() {
        // Many repeats (a ReLU's zeros), values packed into one coarse bin, and both signs.
        let mut v: Vec<f32> = (0..20_000)
            .map(|i: i32| match i % 5 {
                0 | 1 => 0.0,
                2 => 1.0 + (i as f32) * 1e-7,
                3 => -((i * 7919 % 1000) as f32) / 7.0,
                _ => (i * 104_729 % 10_007) as f32 * 0.03,
            })
            .collect();
        v.push(-0.0);
        let mut coarse = Coarse::default();
        v.iter().for_each(|&x| coarse.add(x));
        let mut sorted = v.clone();
        sorted.sort_by(f32::total_cmp);
        let n = sorted.len();
        let ranks = [0, 1, 7, n / 3, n / 2, n / 2 + 1, n - 2, n - 1, n];
        let mut fine = coarse.select(&ranks);
        v.iter().rev().for_each(|&x| fine.add(x));
        let got = fine.values();
        for r in &ranks[..ranks.len() - 1] {
            assert_eq!(got[r].to_bits(), sorted[*r].to_bits(), "rank {r}");
        }
        assert!(!got.contains_key(&n));
        assert_eq!(coarse.first().to_bits(), sorted[0].to_bits());
        assert_eq!(coarse.last(), sorted[n - 1]);
        assert_eq!(coarse.len(), n);
    }
}
