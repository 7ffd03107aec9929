//! [`KeyMap`]: numerators by packed key in an open-addressing table.

/// A key of a [`KeyMap`]: a packed monomial, or a packed monomial with a
/// packed trigonometric factor ([`PackedTrig::code`]).
pub(super) trait SlotKey: Copy + Eq + std::fmt::Debug {
    /// No key: a monomial has exponents of at most 127 in every lane.
    const VACANT: Self;
    /// The key folded to one word before mixing.
    fn fold(self) -> u128;
}

impl SlotKey for u128 {
    const VACANT: u128 = u128::MAX;
    fn fold(self) -> u128 {
        self
    }
}

impl SlotKey for (u128, u128) {
    const VACANT: (u128, u128) = (u128::MAX, 0);
    fn fold(self) -> u128 {
        self.0 ^ self.1.rotate_left(40)
    }
}

/// Numerators by packed monomial: an open-addressing table with linear
/// probing, made for this loop (one multiply to hash a key, one compare of
/// two words to find it; the general hash map costs several times that per
/// product of terms). Entries are never removed; sums that cancel stay as
/// zeros until the terms are taken out.
#[derive(Debug)]
pub(super) struct KeyMap<K> {
    pub(super) slots: Vec<(K, i128)>,
    pub(super) len: usize,
}

/// Numerators by monomial (terms without trigonometric factor).
pub(super) type MonoMap = KeyMap<u128>;
/// Numerators by monomial and trigonometric factor.
pub(super) type WaveMap = KeyMap<(u128, u128)>;

impl<K> Default for KeyMap<K> {
    fn default() -> Self {
        KeyMap {
            slots: Vec::new(),
            len: 0,
        }
    }
}

impl<K: SlotKey> KeyMap<K> {
    pub(super) fn len(&self) -> usize {
        self.len
    }

    /// The home slot of `m` in a table of `mask + 1` slots. The key is
    /// mixed (shift, multiply, shift) so that every lane reaches the low
    /// bits: the bits of a bare product see only the key's lower bits, and
    /// the lanes of higher-numbered symbols would then collide (measured:
    /// 25% slower averaging once two other names were declared first).
    pub(super) fn index(m: K, mask: usize) -> usize {
        let m = m.fold();
        let mut x = (m as u64) ^ ((m >> 64) as u64).rotate_left(32);
        x ^= x >> 29;
        x = x.wrapping_mul(0xBF58_476D_1CE4_E5B9);
        x ^= x >> 32;
        x as usize & mask
    }

    /// The numerator of `m`, inserted as 0 when absent.
    pub(super) fn slot(&mut self, m: K) -> &mut i128 {
        if (self.len + 1) * 2 > self.slots.len() {
            self.grow();
        }
        let mask = self.slots.len() - 1;
        let mut i = Self::index(m, mask);
        loop {
            let k = self.slots[i].0;
            if k == m {
                break;
            }
            if k == K::VACANT {
                self.slots[i].0 = m;
                self.len += 1;
                break;
            }
            i = (i + 1) & mask;
        }
        &mut self.slots[i].1
    }

    pub(super) fn grow(&mut self) {
        let size = (self.slots.len() * 2).max(16);
        let old = std::mem::replace(&mut self.slots, vec![(K::VACANT, 0); size]);
        let mask = size - 1;
        for (m, n) in old.into_iter().filter(|(m, _)| *m != K::VACANT) {
            let mut i = Self::index(m, mask);
            while self.slots[i].0 != K::VACANT {
                i = (i + 1) & mask;
            }
            self.slots[i] = (m, n);
        }
    }

    pub(super) fn iter(&self) -> impl Iterator<Item = (K, i128)> + '_ {
        self.slots.iter().copied().filter(|(m, _)| *m != K::VACANT)
    }

    pub(super) fn values(&self) -> impl Iterator<Item = i128> + '_ {
        self.iter().map(|(_, n)| n)
    }

    pub(super) fn values_mut(&mut self) -> impl Iterator<Item = &mut i128> + '_ {
        self.slots
            .iter_mut()
            .filter(|(m, _)| *m != K::VACANT)
            .map(|(_, n)| n)
    }

    /// The mean distance of the entries from their home slots (1 when
    /// every key sits at home).
    #[cfg(test)]
    pub(super) fn mean_probe(&self) -> f64 {
        let mask = self.slots.len().saturating_sub(1);
        let total: usize = self
            .slots
            .iter()
            .enumerate()
            .filter(|(_, (m, _))| *m != K::VACANT)
            .map(|(i, (m, _))| (i.wrapping_sub(Self::index(*m, mask)) & mask) + 1)
            .sum();
        total as f64 / self.len.max(1) as f64
    }

    /// Empties the table, handing back its entries.
    pub(super) fn take(&mut self) -> Vec<(K, i128)> {
        self.len = 0;
        let mut out = std::mem::take(&mut self.slots);
        out.retain(|(m, _)| *m != K::VACANT);
        out
    }
}
