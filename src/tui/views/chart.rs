//! A braille dot canvas (2 × 4 dots a cell) drawn straight into a buffer, so
//! chart backgrounds and marker lines stay under the curves.

use ratatui::buffer::Buffer;
use ratatui::layout::Rect;
use ratatui::style::Style;

/// Dot bits of a braille cell, by (column, row) within the cell (Unicode braille patterns).
const BITS: [[u8; 4]; 2] = [[0x01, 0x02, 0x04, 0x40], [0x08, 0x10, 0x20, 0x80]];

/// A canvas of `w × h` cells.
#[derive(Debug, Clone)]
pub struct Braille {
    w: usize,
    h: usize,
    bits: Vec<u8>,
    style: Vec<Style>,
}

impl Braille {
    /// An empty canvas.
    pub fn new(w: u16, h: u16) -> Self {
        let n = w as usize * h as usize;
        Braille {
            w: w as usize,
            h: h as usize,
            bits: vec![0; n],
            style: vec![Style::new(); n],
        }
    }
    /// Width in dots.
    pub fn dots_w(&self) -> usize {
        self.w * 2
    }
    /// Height in dots.
    pub fn dots_h(&self) -> usize {
        self.h * 4
    }
    /// Set one dot (outside the canvas is ignored).
    pub fn dot(&mut self, x: i64, y: i64, style: Style) {
        if x < 0 || y < 0 || x as usize >= self.dots_w() || y as usize >= self.dots_h() {
            return;
        }
        let (x, y) = (x as usize, y as usize);
        let i = (y / 4) * self.w + x / 2;
        self.bits[i] |= BITS[x % 2][y % 4];
        self.style[i] = style;
    }
    /// A straight run of dots.
    pub fn line(&mut self, x0: i64, y0: i64, x1: i64, y1: i64, style: Style) {
        let (dx, dy) = ((x1 - x0).abs(), -(y1 - y0).abs());
        let (sx, sy) = (if x0 < x1 { 1 } else { -1 }, if y0 < y1 { 1 } else { -1 });
        let (mut x, mut y, mut err) = (x0, y0, dx + dy);
        for _ in 0..10_000 {
            self.dot(x, y, style);
            if x == x1 && y == y1 {
                break;
            }
            let e2 = 2 * err;
            if e2 >= dy {
                err += dy;
                x += sx;
            }
            if e2 <= dx {
                err += dx;
                y += sy;
            }
        }
    }
    /// Whether a cell has any dot.
    pub fn used(&self, cx: u16, cy: u16) -> bool {
        let i = cy as usize * self.w + cx as usize;
        self.bits.get(i).is_some_and(|b| *b != 0)
    }
    /// Draw the dotted cells into `area` (its top-left is the canvas's), keeping backgrounds.
    pub fn render(&self, area: Rect, buf: &mut Buffer) {
        for cy in 0..self.h.min(area.height as usize) {
            for cx in 0..self.w.min(area.width as usize) {
                let i = cy * self.w + cx;
                if self.bits[i] == 0 {
                    continue;
                }
                let ch = char::from_u32(0x2800 + self.bits[i] as u32).unwrap_or('•');
                if let Some(cell) = buf.cell_mut((area.x + cx as u16, area.y + cy as u16)) {
                    cell.set_char(ch);
                    let st = self.style[i];
                    if let Some(fg) = st.fg {
                        cell.set_fg(fg);
                    }
                    cell.modifier.insert(st.add_modifier);
                }
            }
        }
    }
}

/// Linear interpolation of samples `ys` at abscissae `xs` (ascending) at `x`; `None` outside.
pub fn interp(xs: &[f64], ys: &[f64], x: f64) -> Option<f64> {
    if xs.is_empty() || x < xs[0] || x > xs[xs.len() - 1] {
        return None;
    }
    let i = xs.partition_point(|v| *v <= x);
    if i == 0 {
        return ys.first().copied();
    }
    if i >= xs.len() {
        return ys.last().copied();
    }
    let (x0, x1) = (xs[i - 1], xs[i]);
    let f = if x1 > x0 { (x - x0) / (x1 - x0) } else { 0.0 };
    Some(ys[i - 1] + f * (ys[i] - ys[i - 1]))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn dots_make_braille() {
        let mut b = Braille::new(2, 1);
        b.dot(0, 0, Style::new());
        b.dot(3, 3, Style::new());
        let mut buf = Buffer::empty(Rect::new(0, 0, 2, 1));
        b.render(Rect::new(0, 0, 2, 1), &mut buf);
        // U+2801 is dot 1, U+2880 is dot 8 (Unicode braille patterns block).
        assert_eq!(buf[(0, 0)].symbol(), "\u{2801}");
        assert_eq!(buf[(1, 0)].symbol(), "\u{2880}");
    }

    #[test]
    fn interpolates() {
        assert_eq!(interp(&[0.0, 10.0], &[0.0, 100.0], 2.5), Some(25.0));
        assert_eq!(interp(&[0.0, 10.0], &[0.0, 100.0], 11.0), None);
    }
}
