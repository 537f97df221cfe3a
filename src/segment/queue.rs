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
}

impl LevelQueue {
    const NONE: u32 = u32::MAX;

    /// An empty queue for levels `0..=top`.
    pub fn new(top: u32) -> LevelQueue {
        LevelQueue {
            ends: vec![(Self::NONE, Self::NONE); top as usize + 1],
            entries: Vec::new(),
        }
    }

    /// Appends `pixel` to the list of `level`.
    pub fn push(&mut self, level: u32, pixel: u32) {
        let entry = self.entries.len() as u32;
        self.entries.push((pixel, Self::NONE));
        let (first, last) = &mut self.ends[level as usize];
        if *first == Self::NONE {
            *first = entry;
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
        Some(pixel)
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
}
