//! Buffers kept per thread from one use to the next (a filter's intermediate rows, a frame's
//! prepared image, its label image), so that a frame's work does not begin by allocating and
//! filling frame-sized buffers again. Each kind of buffer has a slot of its own (a
//! `thread_local!` `RefCell<Vec<T>>`); a buffer is taken out of its slot while in use, so
//! that work started on the same thread meanwhile (rayon runs stolen work there) gets its own.

use std::cell::RefCell;
use std::thread::LocalKey;

/// A thread's slot for one spare buffer.
pub type Slot<T> = LocalKey<RefCell<Vec<T>>>;

/// The buffer kept in `slot`, with at least `n` values, when it has room for them: its
/// values are stale up to the length it was kept at, and `fill` from there to `n` (a buffer
/// longer than asked is not cut, so that a small use between two large ones does not make the
/// next large one fill it again). `None` when the slot holds no buffer that large.
pub fn take<T: Clone>(slot: &'static Slot<T>, n: usize, fill: T) -> Option<Vec<T>> {
    let mut buffer = slot.with_borrow_mut(|kept| (kept.capacity() >= n).then(|| std::mem::take(kept)))?;
    if buffer.len() < n {
        buffer.resize(n, fill);
    }
    Some(buffer)
}

/// [`take`], or else a new buffer of `n` values `fill`, written rather than taken zeroed (see
/// [`crate::numeric::filled`]: a zeroed block's first writes fault).
pub fn take_or_new<T: Clone>(slot: &'static Slot<T>, n: usize, fill: T) -> Vec<T> {
    match take(slot, n, fill.clone()) {
        Some(buffer) => buffer,
        None => crate::numeric::filled(n, fill),
    }
}

/// Keeps `buffer` in `slot` for the next [`take`], unless the slot holds a larger one.
pub fn keep<T>(slot: &'static Slot<T>, buffer: Vec<T>) {
    slot.with_borrow_mut(|kept| {
        if buffer.capacity() >= kept.capacity() {
            *kept = buffer;
        }
    });
}

#[cfg(test)]
mod tests {
    use super::*;

    thread_local! {
        static SLOT: RefCell<Vec<u32>> = const { RefCell::new(Vec::new()) };
    }

    #[test]
    fn a_kept_buffer_comes_back_cut_or_filled_to_the_length_asked() {
        // Source: the contract above, step by step on a thread of its own: nothing kept gives
        // None; a buffer kept comes back with its values where they were, uncut, and `fill`
        // past its length up to the length asked; a larger buffer is not replaced by a smaller
        // one; one too small is not taken.
        std::thread::spawn(|| {
            assert_eq!(take(&SLOT, 1, 0), None);
            keep(&SLOT, vec![7, 8, 9]);
            assert_eq!(take(&SLOT, 2, 0), Some(vec![7, 8, 9]));
            assert_eq!(take(&SLOT, 1, 0), None, "taken out while in use");
            let mut grown = Vec::with_capacity(10);
            grown.extend([1, 2]);
            keep(&SLOT, grown);
            assert_eq!(take(&SLOT, 5, 4), Some(vec![1, 2, 4, 4, 4]));
            keep(&SLOT, Vec::with_capacity(100));
            keep(&SLOT, vec![3; 2]);
            assert_eq!(take(&SLOT, 50, 6), Some(vec![6; 50]), "the larger kept");
            keep(&SLOT, vec![5; 3]);
            assert_eq!(take(&SLOT, 4, 0), None, "too small");
            assert_eq!(take_or_new(&SLOT, 4, 2), vec![2; 4], "a new one when too small");
            assert_eq!(take_or_new(&SLOT, 2, 9), vec![5; 3], "the kept one, uncut");
        })
        .join()
        .unwrap();
    }
}
