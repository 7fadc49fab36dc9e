//! Row-major buffers made row by row in parallel, each item written once: no pass that fills the
//! buffer before the rows are computed (a frame's heat-map samples and pixels are made fresh
//! every full redraw, and a fill of their 6–12 MB first would be a serial pass over memory).

use rayon::prelude::*;
use std::mem::MaybeUninit;

/// Hands the items of one row to the buffer in order. A row takes at most its width; what a
/// row leaves unwritten is padded (see [`par_rows_vec`]).
pub struct RowWriter<'a, T> {
    slots: &'a mut [MaybeUninit<T>],
    written: usize,
}

impl<T> RowWriter<'_, T> {
    /// Write the next item of the row (ignored once the row is full).
    #[inline(always)]
    pub fn push(&mut self, value: T) {
        if let Some(slot) = self.slots.get_mut(self.written) {
            slot.write(value);
            self.written += 1;
        }
    }

    /// Write the items of `values` next, as far as the row has room (one pass, no check per
    /// item).
    #[inline(always)]
    pub fn extend(&mut self, values: impl IntoIterator<Item = T>) {
        let mut n = self.written;
        for (slot, v) in self.slots[self.written..].iter_mut().zip(values) {
            slot.write(v);
            n += 1;
        }
        self.written = n;
    }

    /// Write `value` into every remaining item of the row.
    pub fn fill_rest(&mut self, value: T)
    where
        T: Copy,
    {
        while self.written < self.slots.len() {
            self.push(value);
        }
    }
}

/// A `rows` × `width` row-major vector whose row `r` is what `row(r, writer)` pushes, rows made
/// in parallel; items a row does not push are `pad`.
pub fn par_rows_vec<T: Copy + Send + Sync>(
    rows: usize,
    width: usize,
    pad: T,
    row: impl Fn(usize, &mut RowWriter<T>) + Sync,
) -> Vec<T> {
    let n = rows * width;
    let mut out: Vec<T> = Vec::with_capacity(n);
    if width > 0 {
        out.spare_capacity_mut()[..n]
            .par_chunks_mut(width)
            .enumerate()
            .for_each(|(r, slots)| {
                let mut w = RowWriter { slots, written: 0 };
                row(r, &mut w);
                w.fill_rest(pad);
            });
    }
    // SAFETY: the capacity is at least `n` (`with_capacity(n)`), and each of the first `n`
    // slots was initialised above: the slots are split into disjoint chunks of `width` (the
    // last possibly shorter) covering all `n` when `width > 0`, and every chunk's writer leaves
    // `written == slots.len()` — `push` initialises slot `written` before counting it,
    // `extend` initialises each slot after `written` before counting it, and
    // `fill_rest` pushes until the count reaches the chunk's length. When `width == 0`, `n` is 0.
    // `T: Copy` has no drop glue, so nothing could leak or double-drop if a row panicked.
    unsafe { out.set_len(n) };
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn rows_hold_what_was_pushed_and_the_rest_is_padded() {
        // Row r pushes r items (r·10 + c), more than the width on the last rows.
        let v = par_rows_vec(7, 5, -1i64, |r, w| {
            for c in 0..r {
                w.push((r * 10 + c) as i64);
            }
        });
        assert_eq!(v.len(), 35);
        for r in 0..7 {
            for c in 0..5 {
                let want = if c < r { (r * 10 + c) as i64 } else { -1 };
                assert_eq!(v[r * 5 + c], want, "row {r} column {c}");
            }
        }
        // Slices: the row takes what fits.
        let v = par_rows_vec(3, 4, 9u8, |r, w| {
            w.extend([1, 2, 3][..r + 1].iter().copied());
            w.extend([7, 7]);
        });
        assert_eq!(v, [1, 7, 7, 9, 1, 2, 7, 7, 1, 2, 3, 7]);
        // Iterators: the row takes what fits, then pushes go on after them.
        let v = par_rows_vec(2, 3, 0u16, |r, w| {
            w.extend((0..r as u16 + 1).map(|k| k + 5));
            w.push(9);
            w.extend(100..200);
        });
        assert_eq!(v, [5, 9, 100, 5, 6, 9]);
        assert!(par_rows_vec(3, 0, 0u8, |_, w| w.push(1)).is_empty());
        assert!(par_rows_vec(0, 4, 0u8, |_, w| w.push(1)).is_empty());
    }
}
