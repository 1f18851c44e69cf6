//! Page geometry: where the dots of a line of cells sit on the page, how
//! tall and wide they are, and the dome profile of a single dot.
//!
//! Coordinates are in millimetres on the page. `x` runs along the line (the
//! sliding direction); `x = 0` is the left dot column (dots 1-2-3) of the
//! first cell. `y` runs down the page across the line; `y = 0` is the middle
//! dot row (dots 2 and 5) of the first line, so dots 1 and 4 sit at
//! `y = -dot_spacing` and dots 3 and 6 at `y = +dot_spacing`. Line `j` of a
//! page is centred at `y = j * line_spacing`. Dots 7 and 8 (8-dot braille)
//! sit one more row down, at `y = 2 * dot_spacing`.

use crate::braille::Cell;
use crate::error::{Error, Result};
use ndarray::Array2;

/// Shape of a single dot as a function of the distance from its centre.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum DomeProfile {
    /// A spherical cap: the sphere through the base circle (radius `a`) and
    /// the apex (height `h`) has radius `R = (a² + h²) / (2h)`, and the
    /// surface is `z(r) = sqrt(R² - r²) - (R - h)` for `r <= a`. Embossed and
    /// moulded dots are commonly modelled this way (common practice).
    SphericalCap,
    /// A raised cosine, `z(r) = h * (1 + cos(pi * r / a)) / 2` for `r <= a`:
    /// a softer, worn-looking dot with no edge at the base.
    RaisedCosine,
}

impl DomeProfile {
    /// Height of the profile in mm at distance `r` mm from the dot centre,
    /// for base radius `a` mm and height `h` mm; 0 outside the base.
    pub fn height(self, r: f64, a: f64, h: f64) -> f64 {
        if r >= a || a <= 0.0 || h <= 0.0 {
            return 0.0;
        }
        match self {
            DomeProfile::SphericalCap => {
                let big_r = (a * a + h * h) / (2.0 * h);
                ((big_r * big_r - r * r).max(0.0)).sqrt() - (big_r - h)
            }
            DomeProfile::RaisedCosine => h * 0.5 * (1.0 + (std::f64::consts::PI * r / a).cos()),
        }
        .max(0.0)
    }

    /// The profile's name as the CLI and manifests write it.
    pub fn name(self) -> &'static str {
        match self {
            DomeProfile::SphericalCap => "spherical-cap",
            DomeProfile::RaisedCosine => "raised-cosine",
        }
    }
}

/// Physical dimensions of embossed braille, in millimetres.
///
/// Build one from a preset ([`PageGeometry::nls800`], [`PageGeometry::signage`],
/// [`PageGeometry::low_dots`], or by name with [`PageGeometry::preset`]) and
/// change fields as needed; [`PageGeometry::check`] validates them.
#[derive(Debug, Clone, PartialEq)]
pub struct PageGeometry {
    /// Name written into manifests, e.g. "nls800".
    pub name: String,
    /// Dot base diameter (mm). Default 1.44 (NLS Specification 800).
    pub dot_diameter_mm: f64,
    /// Dot height above the page (mm). Default 0.48 (NLS Specification 800).
    pub dot_height_mm: f64,
    /// Centre-to-centre distance of neighbouring dots within a cell, both
    /// across and down (mm). Default 2.34 (NLS Specification 800).
    pub dot_spacing_mm: f64,
    /// Distance between corresponding dots of neighbouring cells (mm).
    /// Default 6.2 (NLS Specification 800).
    pub cell_spacing_mm: f64,
    /// Distance between corresponding dots of neighbouring lines (mm).
    /// Default 10.0 (NLS Specification 800).
    pub line_spacing_mm: f64,
    /// Shape of each dot. Default [`DomeProfile::SphericalCap`].
    pub profile: DomeProfile,
}

impl Default for PageGeometry {
    fn default() -> Self {
        PageGeometry::nls800()
    }
}

/// Names accepted by [`PageGeometry::preset`].
pub const PAGE_PRESETS: [&str; 3] = ["nls800", "signage", "low-dots"];

impl PageGeometry {
    /// Paper braille per the US Library of Congress, "Specification 800:
    /// Braille Books and Pamphlets" (NLS, 2008), section 3.2: dot base
    /// diameter 1.44 mm (0.057 in), dot height 0.48 mm (0.019 in), dot
    /// spacing 2.34 mm (0.092 in), cell spacing 6.2 mm (0.245 in), line
    /// spacing 10.0 mm (0.400 in).
    pub fn nls800() -> Self {
        PageGeometry {
            name: "nls800".to_string(),
            dot_diameter_mm: 1.44,
            dot_height_mm: 0.48,
            dot_spacing_mm: 2.34,
            cell_spacing_mm: 6.2,
            line_spacing_mm: 10.0,
            profile: DomeProfile::SphericalCap,
        }
    }

    /// Signage braille, mid-range values of the 2010 ADA Standards for
    /// Accessible Design, Table 703.3.1: dot base diameter 1.5-1.6 mm (we use
    /// 1.55), dot height 0.6-0.9 mm (0.75), dot spacing 2.3-2.5 mm (2.4),
    /// cell spacing 6.1-7.6 mm (6.85), line spacing 10-10.2 mm (10.1).
    pub fn signage() -> Self {
        PageGeometry {
            name: "signage".to_string(),
            dot_diameter_mm: 1.55,
            dot_height_mm: 0.75,
            dot_spacing_mm: 2.4,
            cell_spacing_mm: 6.85,
            line_spacing_mm: 10.1,
            profile: DomeProfile::SphericalCap,
        }
    }

    /// Low dots as on medicine packaging: dot height about 0.20 mm, the
    /// target of EN ISO 17351 (unverified: seen only in secondary sources),
    /// with Marburg Medium spacing (dot 2.5 mm, cell 6.0 mm, line 10.0 mm;
    /// common practice) and a base diameter of about 1.5 mm (unverified).
    /// A hard case for a sensor.
    pub fn low_dots() -> Self {
        PageGeometry {
            name: "low-dots".to_string(),
            dot_diameter_mm: 1.5,
            dot_height_mm: 0.2,
            dot_spacing_mm: 2.5,
            cell_spacing_mm: 6.0,
            line_spacing_mm: 10.0,
            profile: DomeProfile::SphericalCap,
        }
    }

    /// A preset by name: one of [`PAGE_PRESETS`].
    pub fn preset(name: &str) -> Result<Self> {
        match name {
            "nls800" => Ok(Self::nls800()),
            "signage" => Ok(Self::signage()),
            "low-dots" => Ok(Self::low_dots()),
            other => Err(Error::config(
                "page",
                format!(
                    "unknown page preset `{other}`: use one of {}",
                    PAGE_PRESETS.join(", ")
                ),
            )),
        }
    }

    /// Validate: every size positive and finite, dots narrower than their
    /// spacing (so they do not merge), and cells and lines wide enough to
    /// hold a cell.
    pub fn check(&self) -> Result<()> {
        let fields = [
            ("dot_diameter_mm", self.dot_diameter_mm),
            ("dot_height_mm", self.dot_height_mm),
            ("dot_spacing_mm", self.dot_spacing_mm),
            ("cell_spacing_mm", self.cell_spacing_mm),
            ("line_spacing_mm", self.line_spacing_mm),
        ];
        for (name, v) in fields {
            if !(v.is_finite() && v > 0.0 && v < 100.0) {
                return Err(Error::config(
                    format!("page {name}"),
                    format!("is {v}: give a size in mm between 0 and 100"),
                ));
            }
        }
        if self.dot_diameter_mm >= self.dot_spacing_mm {
            return Err(Error::config(
                "page dot_diameter_mm",
                format!(
                    "{} mm is not smaller than the dot spacing {} mm: dots would merge",
                    self.dot_diameter_mm, self.dot_spacing_mm
                ),
            ));
        }
        if self.cell_spacing_mm < self.dot_spacing_mm + self.dot_diameter_mm {
            return Err(Error::config(
                "page cell_spacing_mm",
                format!(
                    "{} mm is less than dot spacing + dot diameter ({} mm): cells would overlap",
                    self.cell_spacing_mm,
                    self.dot_spacing_mm + self.dot_diameter_mm
                ),
            ));
        }
        if self.line_spacing_mm < 3.0 * self.dot_spacing_mm + self.dot_diameter_mm {
            return Err(Error::config(
                "page line_spacing_mm",
                format!(
                    "{} mm is too small to hold a cell of {} mm: lines would overlap",
                    self.line_spacing_mm,
                    3.0 * self.dot_spacing_mm + self.dot_diameter_mm
                ),
            ));
        }
        Ok(())
    }

    /// Base radius of a dot (mm).
    pub fn dot_radius_mm(&self) -> f64 {
        self.dot_diameter_mm / 2.0
    }

    /// Height of one dot (mm) at distance `r` mm from its centre.
    pub fn dot_height_at(&self, r: f64) -> f64 {
        self.profile
            .height(r, self.dot_radius_mm(), self.dot_height_mm)
    }

    /// Centre of dot `d` (1-8) of cell `i` on line `line`, `[x, y]` in mm.
    /// Returns `None` for a dot number outside 1-8.
    pub fn dot_centre(&self, line: usize, i: usize, d: u8) -> Option<[f64; 2]> {
        let (col, row) = dot_col_row(d)?;
        Some([
            i as f64 * self.cell_spacing_mm + col as f64 * self.dot_spacing_mm,
            line as f64 * self.line_spacing_mm + (row as f64 - 1.0) * self.dot_spacing_mm,
        ])
    }
}

/// Column (0 left, 1 right) and row (0 top .. 3 for dots 7-8) of dot `d`.
pub(crate) fn dot_col_row(d: u8) -> Option<(u8, u8)> {
    match d {
        1 => Some((0, 0)),
        2 => Some((0, 1)),
        3 => Some((0, 2)),
        4 => Some((1, 0)),
        5 => Some((1, 1)),
        6 => Some((1, 2)),
        7 => Some((0, 3)),
        8 => Some((1, 3)),
        _ => None,
    }
}

/// Offsets `[dx, dy]` in mm of each raised dot of `cell` from the cell's
/// origin (left column, middle row). At most eight entries.
pub(crate) fn cell_dot_offsets(g: &PageGeometry, cell: Cell) -> Vec<[f64; 2]> {
    (1..=8u8)
        .filter(|&d| cell.has_dot(d))
        .filter_map(dot_col_row)
        .map(|(c, r)| {
            [
                c as f64 * g.dot_spacing_mm,
                (r as f64 - 1.0) * g.dot_spacing_mm,
            ]
        })
        .collect()
}

/// A rendered height field of the page surface.
#[derive(Debug, Clone, PartialEq)]
pub struct HeightMap {
    /// Page coordinates `[x, y]` in mm of sample `[0, 0]`.
    pub origin_mm: [f64; 2],
    /// Distance between samples in mm, the same along x and y.
    pub resolution_mm: f64,
    /// Heights above the page in mm, shape `[ny, nx]`: row `j` is
    /// `y = origin_mm[1] + j * resolution_mm`, column `i` is
    /// `x = origin_mm[0] + i * resolution_mm`.
    pub heights: Array2<f32>,
}

impl HeightMap {
    /// Page coordinates `[x, y]` in mm of sample `[row, col]`.
    pub fn position_mm(&self, row: usize, col: usize) -> [f64; 2] {
        [
            self.origin_mm[0] + col as f64 * self.resolution_mm,
            self.origin_mm[1] + row as f64 * self.resolution_mm,
        ]
    }
}

/// Render the page surface of several lines of cells on a regular grid.
///
/// `lines[j]` is embossed on line `j` (see the module docs for the
/// coordinates). The map covers every cell plus a margin of one dot
/// diameter. `resolution_mm` must lie in `[0.001, 1.0]`; the map may hold at
/// most 50 million samples.
pub fn render_height_map(
    lines: &[Vec<Cell>],
    geometry: &PageGeometry,
    resolution_mm: f64,
) -> Result<HeightMap> {
    geometry.check()?;
    if !(resolution_mm.is_finite() && (0.001..=1.0).contains(&resolution_mm)) {
        return Err(Error::config(
            "resolution_mm",
            format!("is {resolution_mm}: give a grid step between 0.001 and 1 mm"),
        ));
    }
    let n_cells = lines.iter().map(Vec::len).max().unwrap_or(0).max(1);
    let n_lines = lines.len().max(1);
    let margin = geometry.dot_diameter_mm;
    let x0 = -margin;
    let x1 = (n_cells - 1) as f64 * geometry.cell_spacing_mm + geometry.dot_spacing_mm + margin;
    let y0 = -geometry.dot_spacing_mm - margin;
    let y1 = (n_lines - 1) as f64 * geometry.line_spacing_mm + geometry.dot_spacing_mm + margin;
    let nx = ((x1 - x0) / resolution_mm).ceil() as usize + 1;
    let ny = ((y1 - y0) / resolution_mm).ceil() as usize + 1;
    if nx.saturating_mul(ny) > 50_000_000 {
        return Err(Error::config(
            "resolution_mm",
            format!(
                "{resolution_mm} mm gives a {nx} x {ny} map: use a coarser grid or fewer cells"
            ),
        ));
    }
    let mut heights = Array2::<f32>::zeros((ny, nx));
    let a = geometry.dot_radius_mm();
    for (j, line) in lines.iter().enumerate() {
        for (i, &cell) in line.iter().enumerate() {
            for d in 1..=8u8 {
                if !cell.has_dot(d) {
                    continue;
                }
                let Some([cx, cy]) = geometry.dot_centre(j, i, d) else {
                    continue;
                };
                let c_lo = (((cx - a - x0) / resolution_mm).floor().max(0.0)) as usize;
                let c_hi = (((cx + a - x0) / resolution_mm).ceil() as usize).min(nx - 1);
                let r_lo = (((cy - a - y0) / resolution_mm).floor().max(0.0)) as usize;
                let r_hi = (((cy + a - y0) / resolution_mm).ceil() as usize).min(ny - 1);
                for row in r_lo..=r_hi {
                    let y = y0 + row as f64 * resolution_mm;
                    for col in c_lo..=c_hi {
                        let x = x0 + col as f64 * resolution_mm;
                        let r = ((x - cx).powi(2) + (y - cy).powi(2)).sqrt();
                        let h = geometry.dot_height_at(r) as f32;
                        let slot = &mut heights[[row, col]];
                        if h > *slot {
                            *slot = h;
                        }
                    }
                }
            }
        }
    }
    Ok(HeightMap {
        origin_mm: [x0, y0],
        resolution_mm,
        heights,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn spherical_cap_has_apex_and_base() {
        let p = DomeProfile::SphericalCap;
        assert!((p.height(0.0, 0.72, 0.48) - 0.48).abs() < 1e-12);
        assert!(p.height(0.7199, 0.72, 0.48) < 0.01);
        assert_eq!(p.height(0.8, 0.72, 0.48), 0.0);
        // Monotone decreasing from the apex.
        let mut last = f64::INFINITY;
        for k in 0..72 {
            let h = p.height(k as f64 * 0.01, 0.72, 0.48);
            assert!(h <= last);
            last = h;
        }
    }

    #[test]
    fn raised_cosine_halfway() {
        let p = DomeProfile::RaisedCosine;
        assert!((p.height(0.36, 0.72, 0.4) - 0.2).abs() < 1e-12);
    }

    #[test]
    fn presets_check() {
        for name in PAGE_PRESETS {
            PageGeometry::preset(name).unwrap().check().unwrap();
        }
        assert!(PageGeometry::preset("nope").is_err());
        let mut g = PageGeometry::nls800();
        g.dot_diameter_mm = 3.0;
        assert!(g.check().is_err());
        g = PageGeometry::nls800();
        g.dot_height_mm = f64::NAN;
        assert!(g.check().is_err());
    }

    #[test]
    fn dot_centres_follow_numbering() {
        let g = PageGeometry::nls800();
        assert_eq!(g.dot_centre(0, 0, 1), Some([0.0, -2.34]));
        assert_eq!(g.dot_centre(0, 0, 6), Some([2.34, 2.34]));
        assert_eq!(g.dot_centre(1, 2, 5), Some([2.0 * 6.2 + 2.34, 10.0]));
        assert_eq!(g.dot_centre(0, 0, 9), None);
    }
}
