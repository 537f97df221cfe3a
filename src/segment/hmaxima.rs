//! Seeds for the watershed: the h-maxima of the distance map, i.e. maxima whose dynamic
//! (height above the saddle to a taller peak) is at least `h`.

use crate::numeric::Grid;

/// Levels per pixel of distance when values are quantised for the bucket queue: 1/256 px is
/// far below the precision of a segmented outline.
pub const LEVELS_PER_UNIT: f64 = 256.0;

/// Marks the h-maxima of `values` (non-negative, e.g. a distance map) inside `mask`: pixels
/// where `values − R(values − h) ≥ h`, with `R` the grey reconstruction by dilation under
/// `values` (8-connected).
///
/// # Method
/// P. Soille (2003), *Morphological Image Analysis*, 2nd ed., Springer, §6.3.4 (h-maxima via
/// reconstruction); reconstruction by Vincent's (1993) hybrid algorithm (see `reconstruct`),
/// over values quantised to 1/[`LEVELS_PER_UNIT`] (departure: values are rounded to that step).
/// As scikit-image `h_maxima`, a dynamic exactly equal to `h` keeps its seed.
pub fn h_maxima(values: &[f32], mask: &[bool], width: usize, height: usize, h: f64) -> Vec<bool> {
    let (levels, rec, h_levels) = reconstruct(values, mask, width, height, h);
    (0..levels.len())
        .map(|i| mask[i] && levels[i] >= h_levels && levels[i] - rec[i] >= h_levels)
        .collect()
}

/// Seeds from the h-maxima as regional maxima of the reconstruction `R(values − h)`: one label
/// per regional maximum (a plateau of `R` with no higher 8-neighbour in `mask`), given to
/// that plateau's pixels where `values − R ≥ h`. Unlike [`h_maxima`] read as a pixel set, two
/// peaks of equal height joined above `peak − h` form one plateau of `R` and so one seed: a
/// maximum's dynamic is measured to the saddle toward a peak at least as high, so of two equal
/// peaks whose saddle is shallower than `h`, only one stands (Soille 2003, §6.3.4, where the
/// h-maxima are `RMAX(HMAX_h(f))`; M. Grimaud (1992), "New measure of contrast: the dynamics",
/// Proc. SPIE 1769:292–305). Returns the labels (0 = no seed) and their count.
///
/// A landscape with one regional maximum (most of a frame's objects: 97% of the calls on the
/// benchmark recording, 73% on a tissue-like one) is answered without the reconstruction: from
/// any pixel a path that never descends leads to that maximum (a plateau that is no maximum
/// has a higher neighbour), so `R(values − h) = min(values, top − h)` (floored at 0), whose one
/// regional maximum, the connected upper set `values ≥ top − h`, keeps exactly its pixels at
/// the top, `top` at least `h` (none otherwise). Tested against the scan of the reconstruction.
pub fn h_maxima_seeds(values: &[f32], mask: &[bool], width: usize, height: usize, h: f64) -> (Vec<u32>, u32) {
    let levels = masked_levels(values, mask);
    let h_levels = levels_of(h);
    if let Some(top) = only_regional_maximum(&levels, mask, width, height) {
        let mut seeds = vec![0u32; levels.len()];
        if top < h_levels {
            return (seeds, 0);
        }
        for (s, (&l, &m)) in seeds.iter_mut().zip(levels.iter().zip(mask)) {
            *s = u32::from(m & (l == top));
        }
        return (seeds, 1);
    }
    let rec = reconstruct_levels(&levels, mask, width, height, h_levels);
    let n = levels.len();
    let grid = Grid::new(width, height);
    let is_peak = |p: usize| levels[p] >= h_levels && levels[p] - rec[p] >= h_levels;
    let mut visited = vec![false; n];
    let mut members = Vec::new();
    // Each regional maximum that holds a peak: its first pixel and its peaks. A plateau
    // without a peak gives no seed, so only plateaus reached from a peak are explored (most
    // of a landscape is slope); seeds are then numbered in raster order of their plateau's
    // first pixel, as a scan from every pixel would number them.
    let mut maxima: Vec<(usize, Vec<usize>)> = Vec::new();
    for start in 0..n {
        if !mask[start] || visited[start] || !is_peak(start) {
            continue;
        }
        // The plateau of `rec` through `start`, and whether anything around it is higher.
        let level = rec[start];
        visited[start] = true;
        members.clear();
        members.push(start);
        let mut is_maximum = true;
        let mut cursor = 0;
        while cursor < members.len() {
            let p = members[cursor];
            cursor += 1;
            for q in grid.neighbours8(p).filter(|&q| mask[q]) {
                if rec[q] > level {
                    is_maximum = false;
                } else if rec[q] == level && !visited[q] {
                    visited[q] = true;
                    members.push(q);
                }
            }
        }
        if is_maximum {
            let first = members.iter().copied().min().unwrap_or(start);
            maxima.push((first, members.iter().copied().filter(|&p| is_peak(p)).collect()));
        }
    }
    maxima.sort_unstable_by_key(|&(first, _)| first);
    let mut seeds = vec![0u32; n];
    for (k, (_, peaks)) in maxima.iter().enumerate() {
        for &p in peaks {
            seeds[p] = k as u32 + 1;
        }
    }
    (seeds, maxima.len() as u32)
}

/// The quantised levels of `values`, the reconstruction by dilation of `levels − h` under
/// them (within `mask`, 8-connected), and `h` in levels.
///
/// # Method
/// L. Vincent (1993), "Morphological grayscale reconstruction in image analysis", IEEE Trans.
/// Image Process. 2(2):176–201, doi:10.1109/83.217222, the hybrid algorithm: one raster scan
/// and one anti-raster scan carry the marker along most of its paths in memory order; the
/// pixels of the second scan that could still raise a later neighbour seed a first-in-first-
/// out propagation that finishes the job. The reconstruction is unique, so this is the same
/// result as propagating from the highest level down, at a fraction of the cost.
fn reconstruct(values: &[f32], mask: &[bool], width: usize, height: usize, h: f64) -> (Vec<u32>, Vec<u32>, u32) {
    let levels = masked_levels(values, mask);
    let h_levels = levels_of(h);
    let rec = reconstruct_levels(&levels, mask, width, height, h_levels);
    (levels, rec, h_levels)
}

/// The quantised levels of `values` inside `mask`, 0 outside it. Outside the mask nothing is
/// reconstructed (callers read only the mask's pixels): level and marker 0 there, so that no
/// neighbour's mask need be asked (a 0 raises no maximum, and a pixel at its level is never
/// queued or raised).
fn masked_levels(values: &[f32], mask: &[bool]) -> Vec<u32> {
    // f32 arithmetic: distances of a frame are far below 2^24 / 256, so the product is exact
    // enough and `as u32` saturates.
    let mut levels = vec![0u32; values.len()];
    quantise_levels(values, LEVELS_PER_UNIT as f32, 0.5, &mut levels);
    // A select per pixel rather than a branch on the mask (which vectorises).
    for (l, &m) in levels.iter_mut().zip(mask) {
        *l = if m { *l } else { 0 };
    }
    levels
}

/// A height `h` in levels.
fn levels_of(h: f64) -> u32 {
    (h * LEVELS_PER_UNIT).round().max(0.0) as u32
}

/// The level of the regional maximum of `levels` within `mask` (8-connected plateaus with no
/// higher 8-neighbour), when there is exactly one; `None` when there are more (or none). Each
/// pixel's highest 8-neighbour comes from a 3 x 3 maximum taken a row of maxima at a time
/// (vectorised; outside the mask every level is 0, which makes no pixel lower), and only the
/// plateaus of pixels without a higher neighbour are explored.
fn only_regional_maximum(levels: &[u32], mask: &[bool], width: usize, height: usize) -> Option<u32> {
    let around = neighbourhood_maxima(levels, width, height);
    // Pixels without a higher neighbour, found in one vectorised pass (most are on slopes).
    let flat = without_higher_neighbour(mask, levels, &around);
    let grid = Grid::new(width, height);
    let mut visited = vec![false; levels.len()];
    let mut plateau = Vec::new();
    let mut found = None;
    for start in set_positions(&flat) {
        if visited[start] {
            continue;
        }
        let level = levels[start];
        let mut is_maximum = true;
        visited[start] = true;
        plateau.clear();
        plateau.push(start);
        while let Some(p) = plateau.pop() {
            is_maximum &= flat[p];
            for q in grid.neighbours8(p) {
                if mask[q] && levels[q] == level && !visited[q] {
                    visited[q] = true;
                    plateau.push(q);
                }
            }
        }
        if is_maximum {
            if found.is_some() {
                return None;
            }
            found = Some(level);
        }
    }
    found
}

crate::multiversioned! {
    /// Whether each pixel is in `mask` and no neighbour is higher (`around`: the largest level
    /// of its 3 x 3 neighbourhood). On the wider instruction levels, whose unsigned
    /// comparisons take eight pixels at once.
    fn without_higher_neighbour / without_higher_neighbour_with(
        mask: &[bool],
        levels: &[u32],
        around: &[u32]
    ) -> Vec<bool> {
        (mask.iter().zip(levels.iter().zip(around)))
            .map(|(&m, (&l, &a))| m & (a <= l))
            .collect()
    }
}

/// The positions of the `true` values of `flags`, in order: pieces of 32 with none are
/// passed over by one test each (a component's pixels without a higher neighbour are few).
fn set_positions(flags: &[bool]) -> impl Iterator<Item = usize> + '_ {
    flags.chunks(32).enumerate().flat_map(|(k, piece)| {
        let any = piece.iter().fold(false, |any, &f| any | f);
        let looked_at = if any { 0..piece.len() } else { 0..0 };
        looked_at.filter(|&i| piece[i]).map(move |i| 32 * k + i)
    })
}

crate::multiversioned! {
    /// The largest of each pixel's 3 x 3 neighbourhood (pixels past the edges left out): the
    /// maxima of three neighbouring columns in each row first, then of three rows of those.
    /// On the wider instruction levels, which have the unsigned maximum the baseline lacks
    /// (AVX2's `vpmaxud`, eight pixels at once).
    fn neighbourhood_maxima / neighbourhood_maxima_with(levels: &[u32], width: usize, height: usize) -> Vec<u32> {
        let mut across = levels.to_vec();
        for (row, out) in levels
            .chunks_exact(width.max(1))
            .zip(across.chunks_exact_mut(width.max(1)))
        {
            for (o, &l) in out[1..].iter_mut().zip(row) {
                *o = (*o).max(l);
            }
            for (o, &r) in out.iter_mut().zip(&row[1.min(row.len())..]) {
                *o = (*o).max(r);
            }
        }
        let mut around = across.clone();
        let w = width.max(1);
        for y in 0..height {
            let out = &mut around[y * w..(y + 1) * w];
            if y > 0 {
                out.iter_mut()
                    .zip(&across[(y - 1) * w..y * w])
                    .for_each(|(o, &a)| *o = (*o).max(a));
            }
            if y + 1 < height {
                out.iter_mut()
                    .zip(&across[(y + 1) * w..(y + 2) * w])
                    .for_each(|(o, &a)| *o = (*o).max(a));
            }
        }
        around
    }
}

/// The reconstruction by dilation of `levels − h_levels` (floored at 0) under `levels` (0
/// outside `mask`), 8-connected: the work of [`reconstruct`].
fn reconstruct_levels(levels: &[u32], mask: &[bool], width: usize, height: usize, h_levels: u32) -> Vec<u32> {
    // Marker = value − h (as levels, floored at 0); reconstruction starts from it.
    let mut rec: Vec<u32> = levels.iter().map(|&v| v.saturating_sub(h_levels)).collect();
    // Only the mask's box is scanned: outside it every level and marker is 0, and a 0 neither
    // raises a neighbour nor is raised (its level caps it), so a neighbour outside the box
    // counts as 0. Row by row: the neighbours in the row scanned before are taken for the
    // whole row at once (`from_row`), then the row is swept along, each pixel after its
    // neighbour in the row.
    let (rows, columns) = mask_box(mask, width);
    let (c0, n) = (columns.start, columns.len());
    let (mut from_row, mut lowest) = (vec![0u32; n], vec![0u32; n]);
    let mut queue = Vec::new();
    for y in rows.clone() {
        let row = y * width + c0..y * width + c0 + n;
        let before = (y > rows.start).then(|| (y - 1) * width + c0);
        raise_row(&mut rec, levels, row.clone(), before, &mut from_row, false);
    }
    for y in rows.clone().rev() {
        let row = y * width + c0..y * width + c0 + n;
        let before = (y + 1 < rows.end).then(|| (y + 1) * width + c0);
        raise_row(&mut rec, levels, row.clone(), before, &mut from_row, true);
        // A pixel that could still raise a neighbour scanned before it (the next in the row,
        // or one in the row below) seeds the propagation.
        lowest_raisable(&rec, levels, row.clone(), before, &mut lowest);
        for (p, &low) in row.clone().zip(lowest.iter()).rev() {
            if low < rec[p] {
                queue.push(p);
            }
        }
    }
    // First in, first out, as Vincent's propagation.
    let grid = Grid::new(width, height);
    let mut next = 0;
    while let Some(&p) = queue.get(next) {
        next += 1;
        for q in grid.neighbours8(p) {
            if rec[q] < rec[p] && rec[q] != levels[q] {
                rec[q] = rec[p].min(levels[q]);
                queue.push(q);
            }
        }
    }
    rec
}

/// One row of a scan of [`reconstruct`]: each pixel of `row` in `rec` raised to the largest of
/// itself, its three neighbours in the row scanned before (that row's pixels from index
/// `before` on, under the row's; none for the scan's first row) and its neighbour scanned
/// before it in the row (the left one, or the right one when `backward`), then capped by its
/// level. Neighbours past the row's ends count as 0. The neighbours in the other row are taken
/// for the whole row first, into `from_row` (vectorised); only the sweep along the row is
/// sequential.
fn raise_row(
    rec: &mut [u32],
    levels: &[u32],
    row: std::ops::Range<usize>,
    before: Option<usize>,
    from_row: &mut [u32],
    backward: bool,
) {
    let n = row.len();
    let from_row = &mut from_row[..n];
    from_row.copy_from_slice(&rec[row.clone()]);
    if let Some(b) = before {
        let other = &rec[b..b + n];
        from_row.iter_mut().zip(other).for_each(|(m, &o)| *m = (*m).max(o));
        if n > 1 {
            from_row[1..].iter_mut().zip(other).for_each(|(m, &o)| *m = (*m).max(o));
            from_row[..n - 1]
                .iter_mut()
                .zip(&other[1..])
                .for_each(|(m, &o)| *m = (*m).max(o));
        }
    }
    let (rec_row, levels_row) = (&mut rec[row.clone()], &levels[row]);
    let mut run = 0;
    let mut sweep = |i: usize| {
        run = from_row[i].max(run).min(levels_row[i]);
        rec_row[i] = run;
    };
    if backward {
        (0..n).rev().for_each(&mut sweep);
    } else {
        (0..n).for_each(&mut sweep);
    }
}

/// For each pixel of `row` (in a backward scan of [`reconstruct`]), the lowest marker among
/// its neighbours scanned before it (the next one in the row and the three in the row below,
/// from index `before`) that are still below their level (`u32::MAX` if none): the pixel can
/// raise one of them exactly when this is below its own marker. Whole rows at a time
/// (vectorised).
fn lowest_raisable(
    rec: &[u32],
    levels: &[u32],
    row: std::ops::Range<usize>,
    before: Option<usize>,
    lowest: &mut [u32],
) {
    let n = row.len();
    let lowest = &mut lowest[..n];
    let raisable = |q: usize| if rec[q] < levels[q] { rec[q] } else { u32::MAX };
    lowest.fill(u32::MAX);
    for (i, low) in lowest.iter_mut().enumerate().take(n.saturating_sub(1)) {
        *low = raisable(row.start + i + 1);
    }
    if let Some(b) = before {
        for (i, low) in lowest.iter_mut().enumerate() {
            let mut m = (*low).min(raisable(b + i));
            if i > 0 {
                m = m.min(raisable(b + i - 1));
            }
            if i + 1 < n {
                m = m.min(raisable(b + i + 1));
            }
            *low = m;
        }
    }
}

/// The rows and the columns of a `width`-wide mask that hold any of its pixels (empty ranges
/// for an empty mask).
fn mask_box(mask: &[bool], width: usize) -> (std::ops::Range<usize>, std::ops::Range<usize>) {
    let mut any_in_column = vec![false; width];
    let (mut first_row, mut end_row) = (usize::MAX, 0);
    for (y, row) in mask.chunks_exact(width.max(1)).enumerate() {
        if row.contains(&true) {
            (first_row, end_row) = (first_row.min(y), y + 1);
            any_in_column.iter_mut().zip(row).for_each(|(a, &m)| *a |= m);
        }
    }
    let first_column = any_in_column.iter().position(|&a| a).unwrap_or(0);
    let end_column = any_in_column.iter().rposition(|&a| a).map_or(0, |x| x + 1);
    (first_row.min(end_row)..end_row, first_column..end_column)
}

crate::multiversioned! {
    /// `(max(v, 0) · scale + offset) as u32` for each value, with the `as` conversion's
    /// saturation (NaN and below 0 to 0, 2³² and above to `u32::MAX`): flooding levels from
    /// a distance map or landscape. Written so that it vectorises (a saturating conversion in
    /// the loop stays scalar): the product is clamped into the range where truncation is
    /// defined, and the top is selected apart.
    pub(crate) fn quantise_levels / quantise_levels_with(values: &[f32], scale: f32, offset: f32, out: &mut [u32]) {
        const BELOW_2_32: f32 = 4_294_967_040.0; // the largest f32 below 2³²
        for (o, &v) in out.iter_mut().zip(values) {
            let x = v.max(0.0) * scale + offset;
            // Not `clamp`: it keeps a NaN, and the conversion below must never see one.
            #[allow(clippy::manual_clamp)]
            let inside = x.max(0.0).min(BELOW_2_32);
            // SAFETY: `inside` is finite and within 0..=u32::MAX (f32::max drops a NaN).
            let truncated = unsafe { inside.to_int_unchecked::<u32>() };
            *o = if x >= 4_294_967_296.0 { u32::MAX } else { truncated };
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A one-row profile: two peaks `a` and `b` at columns 2 and 8, a saddle `s` at 5.
    fn profile(a: f32, s: f32, b: f32) -> Vec<f32> {
        vec![
            0.0,
            0.5 * a,
            a,
            0.5 * (a + s),
            s,
            s,
            0.5 * (b + s),
            0.5 * (b + s),
            b,
            0.5 * b,
            0.0,
        ]
    }

    fn seed_columns(v: &[f32], h: f64) -> Vec<(usize, u32)> {
        let mask = vec![true; v.len()];
        let (seeds, _) = h_maxima_seeds(v, &mask, v.len(), 1, h);
        seeds
            .iter()
            .enumerate()
            .filter(|(_, &l)| l > 0)
            .map(|(i, &l)| (i, l))
            .collect()
    }

    #[test]
    fn levels_convert_as_rusts_saturating_cast_on_every_instruction_level() {
        // Source: the Rust reference's float-to-integer `as` (truncation toward zero, NaN to
        // 0, saturation at both ends): the vectorised conversion must agree on ordinary
        // distances, the edges of the range and non-finite values, on every level.
        let mut values: Vec<f32> = (0..5000).map(|i| i as f32 * 0.013).collect();
        values.extend([
            f32::NAN,
            f32::INFINITY,
            f32::NEG_INFINITY,
            -3.0,
            -0.0,
            0.0,
            16_777_215.0,
            16_777_216.0,
        ]);
        values.extend([
            1.677_721_5e7,
            1.677_721_6e7,
            3.4e38,
            4_294_967_040.0 / 256.0,
            4_294_967_296.0 / 256.0,
        ]);
        for (scale, offset) in [(256.0f32, 0.5f32), (256.0, 0.0), (1.0, -2.5)] {
            let want: Vec<u32> = values.iter().map(|&v| (v.max(0.0) * scale + offset) as u32).collect();
            for level in crate::simd::levels() {
                let mut got = vec![7u32; values.len()];
                quantise_levels_with(level, &values, scale, offset, &mut got);
                assert_eq!(got, want, "{level:?} scale {scale} offset {offset}");
            }
        }
    }

    /// The seeds of the definition in the doc of h_maxima_seeds (Soille 2003, §6.3.4: seeds
    /// are RMAX of the reconstruction, each keeping its pixels where values − R ≥ h), written
    /// as the plain scan: every plateau of R, in raster order of its first pixel, explored
    /// over 8 neighbours within the mask; a plateau with no higher neighbour that holds such
    /// pixels is the next seed. The seeds and their count.
    fn seeds_by_definition(values: &[f32], mask: &[bool], (w, h): (usize, usize), seed_h: f64) -> (Vec<u32>, u32) {
        let (levels, rec, h_levels) = reconstruct(values, mask, w, h, seed_h);
        let grid = Grid::new(w, h);
        let mut plateau_of = vec![usize::MAX; w * h];
        let mut want = vec![0u32; w * h];
        let mut count = 0;
        for start in (0..w * h).filter(|&p| mask[p]) {
            if plateau_of[start] != usize::MAX {
                continue;
            }
            plateau_of[start] = start;
            let mut members = vec![start];
            let mut highest = true;
            let mut k = 0;
            while k < members.len() {
                let p = members[k];
                k += 1;
                for q in grid.neighbours8(p).filter(|&q| mask[q]) {
                    highest &= rec[q] <= rec[start];
                    if rec[q] == rec[start] && plateau_of[q] == usize::MAX {
                        plateau_of[q] = start;
                        members.push(q);
                    }
                }
            }
            let peaks: Vec<usize> = members
                .into_iter()
                .filter(|&p| levels[p] >= h_levels && levels[p] - rec[p] >= h_levels)
                .collect();
            if highest && !peaks.is_empty() {
                count += 1;
                peaks.into_iter().for_each(|p| want[p] = count);
            }
        }
        (want, count)
    }

    #[test]
    fn neighbourhood_maxima_and_flat_pixels_by_definition_on_every_level() {
        // Source: definition (a pixel's 3 x 3 maximum over the neighbours inside the image;
        // a pixel is flat when it is in the mask and none of them is higher), brute force,
        // on random levels with many ties, one-row and one-column images included, every
        // instruction level; and the positions of the flat pixels in order, as a filter over
        // all of them gives.
        let mut rng = crate::numeric::Rng::new(31);
        for (w, h) in [(1usize, 1usize), (1, 9), (9, 1), (7, 5), (40, 33), (65, 3)] {
            let levels: Vec<u32> = (0..w * h)
                .map(|_| (rng.uniform() * 5.0) as u32 * 1_000_000_000)
                .collect();
            let mask: Vec<bool> = (0..w * h).map(|_| rng.uniform() < 0.8).collect();
            let want: Vec<u32> = (0..w * h)
                .map(|p| {
                    let (x, y) = ((p % w) as isize, (p / w) as isize);
                    let mut m = 0;
                    for (dx, dy) in (-1..=1).flat_map(|dy| (-1..=1).map(move |dx| (dx, dy))) {
                        let (u, v) = (x + dx, y + dy);
                        if (0..w as isize).contains(&u) && (0..h as isize).contains(&v) {
                            m = m.max(levels[v as usize * w + u as usize]);
                        }
                    }
                    m
                })
                .collect();
            let flat_want: Vec<bool> = (0..w * h).map(|p| mask[p] && want[p] <= levels[p]).collect();
            for level in crate::simd::levels() {
                let around = neighbourhood_maxima_with(level, &levels, w, h);
                assert_eq!(around, want, "{level:?} {w} x {h}");
                assert_eq!(
                    without_higher_neighbour_with(level, &mask, &levels, &around),
                    flat_want,
                    "{level:?}"
                );
            }
            let positions: Vec<usize> = set_positions(&flat_want).collect();
            let by_filter: Vec<usize> = (0..w * h).filter(|&p| flat_want[p]).collect();
            assert_eq!(positions, by_filter, "{w} x {h}");
        }
    }

    #[test]
    fn a_landscape_with_one_maximum_seeds_as_the_reconstruction_says() {
        // Source: the same definition (`seeds_by_definition`, through the reconstruction) on
        // landscapes with one regional maximum, which h_maxima_seeds answers without it:
        // quantised bumps (a flat top, flat shoulders that are no maxima) on masks of one
        // piece with holes and ragged edges, h from 0 to above the top (no seed). Then two
        // pieces of mask, or a second bump: more than one maximum, so the reconstruction.
        let (w, h) = (23, 19);
        let mut rng = crate::numeric::Rng::new(31);
        let mut single = 0;
        for round in 0..60 {
            let (bx, by) = (4.0 + 14.0 * rng.uniform(), 4.0 + 10.0 * rng.uniform());
            let (height, step) = (1.0 + 6.0 * rng.uniform(), [0.25, 0.5, 1.0][round % 3]);
            let second = round % 4 == 3;
            let values: Vec<f32> = (0..w * h)
                .map(|p| {
                    let (x, y) = ((p % w) as f64, (p / w) as f64);
                    let bump = |cx: f64, cy: f64| height * (-((x - cx).powi(2) + (y - cy).powi(2)) / 30.0).exp();
                    let v = if second {
                        bump(bx, by).max(bump(w as f64 - bx, h as f64 - by))
                    } else {
                        bump(bx, by)
                    };
                    ((v / step).floor() * step) as f32
                })
                .collect();
            // Ragged edges and holes, but one piece: every hole is away from the edge and
            // from the others.
            let mask: Vec<bool> = (0..w * h)
                .map(|p| {
                    let (x, y) = (p % w, p / w);
                    let edge = x.min(y).min(w - 1 - x).min(h - 1 - y);
                    let hole = x % 5 == 2 && y % 5 == 2 && rng.uniform() < 0.3;
                    let split = round % 5 == 4 && x == w / 2;
                    (edge > 0 || rng.uniform() < 0.6) && !hole && !split
                })
                .collect();
            for seed_h in [0.0, 0.25, 1.0, 3.0, 8.0] {
                let levels = masked_levels(&values, &mask);
                single += usize::from(only_regional_maximum(&levels, &mask, w, h).is_some());
                let want = seeds_by_definition(&values, &mask, (w, h), seed_h);
                let (seeds, count) = h_maxima_seeds(&values, &mask, w, h, seed_h);
                assert_eq!((count, seeds), (want.1, want.0), "round {round}, h {seed_h}");
            }
        }
        assert!(single > 100, "most landscapes here have one maximum ({single})");
    }

    #[test]
    fn seeds_are_the_regional_maxima_of_the_reconstruction_in_raster_order() {
        // Source: the definition in the doc of h_maxima_seeds (Soille 2003, §6.3.4: seeds are
        // RMAX of the reconstruction, each keeping its pixels where values − R ≥ h), written
        // as the plain scan: every plateau of R, in raster order of its first pixel, explored
        // over 8 neighbours within the mask; a plateau with no higher neighbour that holds
        // such pixels is the next seed. Smooth random landscapes (many plateaus and maxima)
        // with holes in the mask, several h.
        let (w, h) = (41, 29);
        let mut rng = crate::numeric::Rng::new(8);
        for round in 0..6 {
            let bumps: Vec<(f64, f64, f64)> = (0..12)
                .map(|_| {
                    (
                        rng.uniform() * w as f64,
                        rng.uniform() * h as f64,
                        1.0 + 5.0 * rng.uniform(),
                    )
                })
                .collect();
            let values: Vec<f32> = (0..w * h)
                .map(|p| {
                    let (x, y) = ((p % w) as f64, (p / w) as f64);
                    let top = bumps
                        .iter()
                        .map(|&(bx, by, a)| a * (-((x - bx).powi(2) + (y - by).powi(2)) / 18.0).exp())
                        .fold(0.0, f64::max);
                    (top * 4.0).round() as f32 / 4.0
                })
                .collect();
            let mask: Vec<bool> = (0..w * h).map(|_| rng.uniform() > 0.05).collect();
            for seed_h in [0.25, 0.5, 1.0, 2.0] {
                let (want, count) = seeds_by_definition(&values, &mask, (w, h), seed_h);
                let (got, n) = h_maxima_seeds(&values, &mask, w, h, seed_h);
                assert!(count > 1, "round {round}: a landscape with several seeds");
                assert_eq!((n, got), (count, want), "round {round}, h {seed_h}");
            }
        }
    }

    #[test]
    fn reconstruction_is_the_fixed_point_of_geodesic_dilation() {
        // Source: the definition of grey reconstruction by dilation (Vincent 1993, §2):
        // repeat "dilate the marker by one 8-neighbourhood step within the mask, then cap it
        // by the image" until nothing changes. Random landscape with holes in the mask
        // reaching the image's edges, and with a mask whose box lies well inside the image
        // (as an object's in its window).
        let (w, h) = (37, 23);
        let mut rng = crate::numeric::Rng::new(5);
        let values: Vec<f32> = (0..w * h).map(|_| (rng.uniform() * 6.0) as f32).collect();
        let holes: Vec<bool> = (0..w * h).map(|_| rng.uniform() > 0.15).collect();
        let inside: Vec<bool> = (0..w * h)
            .map(|p| (4..30).contains(&(p % w)) && (5..19).contains(&(p / w)) && holes[p])
            .collect();
        for mask in [holes, inside] {
            reconstruction_is_the_fixed_point_on(&values, &mask, w, h);
        }
    }

    /// [`reconstruction_is_the_fixed_point_of_geodesic_dilation`] on one mask.
    fn reconstruction_is_the_fixed_point_on(values: &[f32], mask: &[bool], w: usize, h: usize) {
        let (levels, rec, h_levels) = reconstruct(values, mask, w, h, 1.0);
        let mut naive: Vec<u32> = levels.iter().map(|&v| v.saturating_sub(h_levels)).collect();
        loop {
            let next: Vec<u32> = (0..w * h)
                .map(|p| {
                    if !mask[p] {
                        return naive[p];
                    }
                    let m = Grid::new(w, h)
                        .neighbours8(p)
                        .filter(|&q| mask[q])
                        .fold(naive[p], |m, q| m.max(naive[q]));
                    m.min(levels[p])
                })
                .collect();
            if next == naive {
                break;
            }
            naive = next;
        }
        let inside = |r: &[u32]| (0..w * h).filter(|&p| mask[p]).map(|p| r[p]).collect::<Vec<_>>();
        assert_eq!(inside(&rec), inside(&naive));
        assert!(inside(&rec).iter().zip(inside(&levels)).any(|(&r, l)| r < l && r > 0));
    }

    #[test]
    fn seeds_follow_the_dynamics_of_the_peaks() {
        // Source: the definition of a maximum's dynamic (Grimaud 1992): the descent needed to
        // reach a higher (or equal) peak; hand-made profiles.
        // Deep saddle: both peaks have dynamic 6 ≥ 2, two seeds.
        assert_eq!(seed_columns(&profile(8.0, 2.0, 8.0), 2.0), vec![(2, 1), (8, 2)]);
        // Equal peaks, saddle 1 below them: one of the two has dynamic 1 < 2, so one seed
        // (both peak pixels, one label), where the pixel-set reading gives two.
        assert_eq!(seed_columns(&profile(8.0, 7.0, 8.0), 2.0), vec![(2, 1), (8, 1)]);
        let mask = vec![true; 11];
        let pixel_set = h_maxima(&profile(8.0, 7.0, 8.0), &mask, 11, 1, 2.0);
        assert_eq!(pixel_set.iter().filter(|&&b| b).count(), 2);
        // Unequal peaks, shallow saddle: only the higher one.
        assert_eq!(seed_columns(&profile(8.0, 7.0, 7.5), 2.0), vec![(2, 1)]);
    }
}
