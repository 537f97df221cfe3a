//! A tiny 3x5 bitmap font of our own for captions (digits and a few letters), so that no font
//! file or text-rendering dependency is needed.

/// Rows of a glyph, 3 bits each (bit 2 = left column).
fn glyph(c: char) -> Option<[u8; 5]> {
    Some(match c {
        '0' => [7, 5, 5, 5, 7],
        '1' => [2, 6, 2, 2, 7],
        '2' => [7, 1, 7, 4, 7],
        '3' => [7, 1, 3, 1, 7],
        '4' => [5, 5, 7, 1, 1],
        '5' => [7, 4, 7, 1, 7],
        '6' => [7, 4, 7, 5, 7],
        '7' => [7, 1, 2, 2, 2],
        '8' => [7, 5, 7, 5, 7],
        '9' => [7, 5, 7, 1, 7],
        't' => [2, 7, 2, 2, 3],
        'm' => [0, 7, 7, 5, 5],
        'i' => [2, 0, 2, 2, 2],
        'h' => [4, 4, 7, 5, 5],
        's' => [0, 3, 6, 1, 6],
        '.' => [0, 0, 0, 0, 2],
        'n' => [0, 6, 5, 5, 5],
        '=' => [0, 7, 0, 7, 0],
        ' ' => [0, 0, 0, 0, 0],
        _ => return None,
    })
}

/// Draws `text` at (x, y) with each font pixel a `scale` x `scale` block, calling `put` for
/// every lit pixel. Unknown characters are skipped.
pub fn draw_text(text: &str, x: u32, y: u32, scale: u32, mut put: impl FnMut(u32, u32)) {
    let mut cx = x;
    for c in text.chars() {
        if let Some(rows) = glyph(c) {
            for (r, bits) in rows.iter().enumerate() {
                for col in 0..3 {
                    if bits & (4 >> col) != 0 {
                        for dy in 0..scale {
                            for dx in 0..scale {
                                put(cx + col * scale + dx, y + r as u32 * scale + dy);
                            }
                        }
                    }
                }
            }
        }
        cx += 4 * scale;
    }
}

/// Width in pixels of `text` at `scale`.
pub fn text_width(text: &str, scale: u32) -> u32 {
    text.chars().count() as u32 * 4 * scale
}
