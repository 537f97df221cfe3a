//! The hierarchical queue of the flooding algorithms (reconstruction, watershed): one
//! first-in-first-out list per integer level, all threaded through one entry buffer, so a
//! window with thousands of levels costs eight bytes per level and no allocation per level.
//!
//! F. Meyer (1991), "Un algorithme optimal de ligne de partage des eaux", 8e congrès
//! Reconnaissance des Formes et Intelligence Artificielle (AFCET), Lyon, pp. 847–857 (the
//! hierarchical queue; reference from memory).

/// First-in-first-out lists of pixel indices, one per level `0..=top`.
pub struct LevelQueue {
    /// First and last entry of each level.
    ends: Vec<(u32, u32)>,
    /// (pixel, next entry of the same level).
    entries: Vec<(u32, u32)>,
    /// One bit per level, set while its list holds entries: the next level with work is found
    /// a word of 64 levels at a time, not by visiting every empty level.
    occupied: Vec<u64>,
}

impl LevelQueue {
    const NONE: u32 = u32::MAX;

    /// An empty queue for levels `0..=top`.
    pub fn new(top: u32) -> LevelQueue {
        LevelQueue {
            ends: vec![(Self::NONE, Self::NONE); top as usize + 1],
            entries: Vec::new(),
            occupied: vec![0; top as usize / 64 + 1],
        }
    }

    /// Appends `pixel` to the list of `level`.
    pub fn push(&mut self, level: u32, pixel: u32) {
        let entry = self.entries.len() as u32;
        self.entries.push((pixel, Self::NONE));
        let (first, last) = &mut self.ends[level as usize];
        if *first == Self::NONE {
            *first = entry;
            self.occupied[level as usize / 64] |= 1 << (level % 64);
        } else {
            self.entries[*last as usize].1 = entry;
        }
        *last = entry;
    }

    /// Takes the oldest pixel of `level`, if any.
    pub fn pop(&mut self, level: u32) -> Option<u32> {
        let (first, _) = &mut self.ends[level as usize];
        let (pixel, next) = *self.entries.get(*first as usize)?;
        *first = next;
        if next == Self::NONE {
            self.occupied[level as usize / 64] &= !(1 << (level % 64));
        }
        Some(pixel)
    }

    /// The highest level at most `level` whose list holds entries, if any.
    pub fn highest_occupied(&self, level: u32) -> Option<u32> {
        let mut word = level as usize / 64;
        // Bits 0..=level % 64 of the first word.
        let mut bits = self.occupied[word] & (u64::MAX >> (63 - level % 64));
        loop {
            if bits != 0 {
                return Some((word * 64 + 63 - bits.leading_zeros() as usize) as u32);
            }
            word = word.checked_sub(1)?;
            bits = self.occupied[word];
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn levels_are_first_in_first_out_and_independent() {
        // Hand-made: first in, first out within a level (the watershed's tie rule), levels
        // not mixed, pushes while a level is being emptied come out after the older entries.
        let mut q = LevelQueue::new(3);
        q.push(2, 10);
        q.push(0, 5);
        q.push(2, 11);
        assert_eq!(q.pop(2), Some(10));
        q.push(2, 12);
        assert_eq!((q.pop(2), q.pop(2), q.pop(2)), (Some(11), Some(12), None));
        assert_eq!((q.pop(0), q.pop(0), q.pop(3)), (Some(5), None, None));
        q.push(2, 13);
        assert_eq!(q.pop(2), Some(13));
    }

    #[test]
    fn the_highest_occupied_level_is_found_across_words() {
        // Hand-made, against a plain scan of the levels: entries at 3, 64, 200 of 0..=300,
        // asked from every level, before and after levels empty.
        let mut q = LevelQueue::new(300);
        for (level, pixel) in [(3, 1), (64, 2), (200, 3), (200, 4)] {
            q.push(level, pixel);
        }
        let scan = |held: &[u32], from: u32| held.iter().copied().filter(|&l| l <= from).max();
        for from in 0..=300 {
            assert_eq!(q.highest_occupied(from), scan(&[3, 64, 200], from), "from {from}");
        }
        assert_eq!(q.pop(200), Some(3));
        assert_eq!(q.highest_occupied(300), Some(200));
        assert_eq!(q.pop(200), Some(4));
        assert_eq!(q.highest_occupied(300), Some(64));
        assert_eq!((q.pop(64), q.pop(3)), (Some(2), Some(1)));
        assert_eq!(q.highest_occupied(300), None);
        q.push(63, 9);
        assert_eq!((q.highest_occupied(62), q.highest_occupied(63)), (None, Some(63)));
    }
}
