//! The page surface as the taxels feel it: each dot's height profile spread
//! by the skin's Gaussian kernel, tabulated once as a function of distance
//! from the dot centre, and summed over the few dots near a point.
//!
//! Because the dot is round and the kernel isotropic, the spread profile
//! `H(r) = (G_sigma * h)(r)` depends only on the distance `r`; because the
//! convolution is linear, the spread surface of a line is the sum of the
//! spread profiles of its dots. The table is computed by direct numerical
//! integration over the dot's base (the 2-D Gaussian is separable, so the
//! integral is a sum over columns of column sums). Cost per sample is a few
//! table lookups, independent of the line's length.

use super::geometry::{cell_dot_offsets, PageGeometry};
use crate::braille::Cell;

/// `H(r)` on a regular grid of `r`, with linear interpolation between.
#[derive(Debug, Clone)]
pub(crate) struct SpreadDot {
    step: f64,
    values: Vec<f64>,
    /// Beyond this distance from a dot centre, `H` is taken as 0 (mm).
    pub radius: f64,
}

/// Table step in mm.
const TABLE_STEP_MM: f64 = 0.005;
/// The kernel is cut at this many standard deviations.
const KERNEL_SIGMAS: f64 = 4.0;

impl SpreadDot {
    /// Tabulate the dot of `g` spread by a Gaussian of std `sigma_mm`.
    pub(crate) fn new(g: &PageGeometry, sigma_mm: f64) -> SpreadDot {
        let a = g.dot_radius_mm();
        let radius = a + KERNEL_SIGMAS * sigma_mm;
        let n = (radius / TABLE_STEP_MM).ceil() as usize + 2;
        let values = if sigma_mm < 1e-6 {
            (0..n)
                .map(|k| g.dot_height_at(k as f64 * TABLE_STEP_MM))
                .collect()
        } else {
            // Integration grid over the dot's base square.
            let h = (a / 40.0).min(sigma_mm / 8.0);
            let m = (a / h).ceil() as i64;
            let xs: Vec<f64> = (-m..=m).map(|k| k as f64 * h).collect();
            let gauss = |t: f64| {
                (-(t * t) / (2.0 * sigma_mm * sigma_mm)).exp()
                    / ((2.0 * std::f64::consts::PI).sqrt() * sigma_mm)
            };
            let gy: Vec<f64> = xs.iter().map(|&y| gauss(y)).collect();
            // Column sums C_j = sum_i g(y_i) h(x_j, y_i) dx dy.
            let cols: Vec<f64> = xs
                .iter()
                .map(|&x| {
                    xs.iter()
                        .zip(&gy)
                        .map(|(&y, &w)| w * g.dot_height_at((x * x + y * y).sqrt()))
                        .sum::<f64>()
                        * h
                        * h
                })
                .collect();
            (0..n)
                .map(|k| {
                    let r = k as f64 * TABLE_STEP_MM;
                    xs.iter().zip(&cols).map(|(&x, &c)| gauss(x - r) * c).sum()
                })
                .collect()
        };
        SpreadDot {
            step: TABLE_STEP_MM,
            values,
            radius,
        }
    }

    /// `H(r)` in mm for distance `r >= 0` mm.
    #[inline]
    pub(crate) fn at(&self, r: f64) -> f64 {
        let t = r / self.step;
        let k = t as usize;
        if k + 1 >= self.values.len() {
            return 0.0;
        }
        let f = t - k as f64;
        self.values[k] * (1.0 - f) + self.values[k + 1] * f
    }
}

/// One line of cells laid out for fast sampling.
pub(crate) struct LineSurface<'a> {
    dot: &'a SpreadDot,
    cell_spacing: f64,
    /// Dot offsets `[dx, dy]` from the cell origin, per cell.
    cells: Vec<Vec<[f64; 2]>>,
    /// Rows of the line reach from `y_lo` to `y_hi` (mm), spread included.
    y_lo: f64,
    y_hi: f64,
    /// Reach of a cell along x beyond its origin, spread included.
    x_reach_lo: f64,
    x_reach_hi: f64,
}

impl<'a> LineSurface<'a> {
    pub(crate) fn new(g: &PageGeometry, cells: &[Cell], dot: &'a SpreadDot) -> Self {
        let eight_dot = cells.iter().any(|c| !c.is_six_dot());
        let bottom_row = if eight_dot { 2.0 } else { 1.0 };
        LineSurface {
            dot,
            cell_spacing: g.cell_spacing_mm,
            cells: cells.iter().map(|&c| cell_dot_offsets(g, c)).collect(),
            y_lo: -g.dot_spacing_mm - dot.radius,
            y_hi: bottom_row * g.dot_spacing_mm + dot.radius,
            x_reach_lo: -dot.radius,
            x_reach_hi: g.dot_spacing_mm + dot.radius,
        }
    }

    /// The spread surface height at page point `(x, y)`, mm.
    #[inline]
    pub(crate) fn at(&self, x: f64, y: f64) -> f64 {
        if y < self.y_lo || y > self.y_hi || self.cells.is_empty() {
            return 0.0;
        }
        // Cells whose reach [origin + lo, origin + hi] contains x.
        let lo = ((x - self.x_reach_hi) / self.cell_spacing).ceil();
        let hi = ((x - self.x_reach_lo) / self.cell_spacing).floor();
        if hi < 0.0 || lo > (self.cells.len() - 1) as f64 {
            return 0.0;
        }
        let lo = lo.max(0.0) as usize;
        let hi = (hi as usize).min(self.cells.len() - 1);
        let r2max = self.dot.radius * self.dot.radius;
        let mut sum = 0.0;
        for (c, dots) in self.cells[lo..=hi].iter().enumerate() {
            let ox = (lo + c) as f64 * self.cell_spacing;
            for d in dots {
                let dx = x - ox - d[0];
                let dy = y - d[1];
                let r2 = dx * dx + dy * dy;
                if r2 < r2max {
                    sum += self.dot.at(r2.sqrt());
                }
            }
        }
        sum
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Volume of a spherical cap of base radius a and height h:
    /// V = pi h (3a² + h²) / 6 (standard geometry, from memory).
    fn cap_volume(a: f64, h: f64) -> f64 {
        std::f64::consts::PI * h * (3.0 * a * a + h * h) / 6.0
    }

    #[test]
    fn spreading_keeps_volume() {
        let g = PageGeometry::nls800();
        let d = SpreadDot::new(&g, 0.5);
        // Integrate H over the plane in rings: 2 pi r H(r) dr.
        let dr = 0.001;
        let vol: f64 = (0..((d.radius / dr) as usize))
            .map(|k| {
                let r = (k as f64 + 0.5) * dr;
                2.0 * std::f64::consts::PI * r * d.at(r) * dr
            })
            .sum();
        let want = cap_volume(0.72, 0.48);
        assert!((vol - want).abs() / want < 0.01, "{vol} vs {want}");
        // Spreading lowers the peak.
        assert!(d.at(0.0) < 0.48 && d.at(0.0) > 0.1);
    }

    #[test]
    fn no_spread_is_the_dot_itself() {
        let g = PageGeometry::nls800();
        let d = SpreadDot::new(&g, 0.0);
        assert!((d.at(0.0) - 0.48).abs() < 1e-9);
        assert_eq!(d.at(1.0), 0.0);
    }

    #[test]
    fn line_surface_finds_every_dot() {
        let g = PageGeometry::nls800();
        let d = SpreadDot::new(&g, 0.0);
        let full = Cell::from_mask(0x3F);
        let line = LineSurface::new(&g, &[Cell::EMPTY, full, full], &d);
        for c in 1..3 {
            for dot in 1..=6u8 {
                let [x, y] = g.dot_centre(0, c, dot).unwrap();
                assert!((line.at(x, y) - 0.48).abs() < 1e-9, "cell {c} dot {dot}");
            }
        }
        let [x, y] = g.dot_centre(0, 0, 1).unwrap();
        assert_eq!(line.at(x, y), 0.0);
        assert_eq!(line.at(-10.0, 0.0), 0.0);
        assert_eq!(line.at(1000.0, 0.0), 0.0);
    }
}
