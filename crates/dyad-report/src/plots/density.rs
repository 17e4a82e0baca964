//! 2-D density estimate for the pair plot: a histogram smoothed with a
//! Gaussian kernel, the density levels enclosing given fractions of the
//! mass, and contour lines by marching squares (Lorensen & Cline 1987,
//! "Marching cubes", SIGGRAPH 21, 163, in its 2-D form).

/// Fractions of a 2-D Gaussian's mass inside its 1 and 2 sigma ellipses:
/// 1 - exp(-k^2 / 2) for k = 1, 2 (common practice for corner plots).
pub const SIGMA_MASS_FRACTIONS: [f64; 2] = [0.393_469_340_287_366_6, 0.864_664_716_763_387_3];

/// A smoothed 2-D histogram on a regular grid of bin centres.
#[derive(Debug, Clone)]
pub struct Grid2 {
    /// Number of bins along x and y.
    pub nx: usize,
    /// Number of bins along y.
    pub ny: usize,
    /// x range covered.
    pub x: (f64, f64),
    /// y range covered.
    pub y: (f64, f64),
    /// Values, `z[iy * nx + ix]`.
    pub z: Vec<f64>,
}

impl Grid2 {
    /// Bin width along x.
    pub fn dx(&self) -> f64 {
        (self.x.1 - self.x.0) / self.nx as f64
    }
    /// Bin width along y.
    pub fn dy(&self) -> f64 {
        (self.y.1 - self.y.0) / self.ny as f64
    }
    /// Centre of bin `ix` along x.
    pub fn xc(&self, ix: usize) -> f64 {
        self.x.0 + (ix as f64 + 0.5) * self.dx()
    }
    /// Centre of bin `iy` along y.
    pub fn yc(&self, iy: usize) -> f64 {
        self.y.0 + (iy as f64 + 0.5) * self.dy()
    }
    /// Bin holding `(x, y)`, if inside.
    pub fn bin_of(&self, x: f64, y: f64) -> Option<(usize, usize)> {
        let fx = (x - self.x.0) / self.dx();
        let fy = (y - self.y.0) / self.dy();
        if fx >= 0.0 && fy >= 0.0 && fx < self.nx as f64 && fy < self.ny as f64 {
            Some((fx as usize, fy as usize))
        } else {
            None
        }
    }
    /// Value of a bin.
    pub fn at(&self, ix: usize, iy: usize) -> f64 {
        self.z[iy * self.nx + ix]
    }
}

/// Histogram of the finite pairs `(xs[i], ys[i])` on an `n x n` grid over
/// the given ranges, smoothed with a Gaussian of `sigma_bins` bins
/// (separable, truncated at 3 sigma, zero outside the grid).
pub fn smoothed_histogram(
    xs: &[f64],
    ys: &[f64],
    x: (f64, f64),
    y: (f64, f64),
    n: usize,
    sigma_bins: f64,
) -> Grid2 {
    let mut grid = Grid2 {
        nx: n,
        ny: n,
        x,
        y,
        z: vec![0.0; n * n],
    };
    for (&a, &b) in xs.iter().zip(ys) {
        if let Some((ix, iy)) = grid.bin_of(a, b) {
            grid.z[iy * n + ix] += 1.0;
        }
    }
    if sigma_bins > 0.0 {
        let radius = (3.0 * sigma_bins).ceil() as isize;
        let kernel: Vec<f64> = (-radius..=radius)
            .map(|k| (-0.5 * (k as f64 / sigma_bins).powi(2)).exp())
            .collect();
        let norm: f64 = kernel.iter().sum();
        let mut tmp = vec![0.0; n * n];
        // Along x.
        for iy in 0..n {
            for ix in 0..n {
                let mut acc = 0.0;
                for (k, w) in kernel.iter().enumerate() {
                    let j = ix as isize + k as isize - radius;
                    if j >= 0 && (j as usize) < n {
                        acc += w * grid.z[iy * n + j as usize];
                    }
                }
                tmp[iy * n + ix] = acc / norm;
            }
        }
        // Along y.
        for iy in 0..n {
            for ix in 0..n {
                let mut acc = 0.0;
                for (k, w) in kernel.iter().enumerate() {
                    let j = iy as isize + k as isize - radius;
                    if j >= 0 && (j as usize) < n {
                        acc += w * tmp[j as usize * n + ix];
                    }
                }
                grid.z[iy * n + ix] = acc / norm;
            }
        }
    }
    grid
}

/// For each fraction f, the bin value t such that the bins with value >= t
/// hold at least the fraction f of the total (the highest-density region).
/// Returns `f64::INFINITY` for an all-zero grid.
pub fn mass_levels(z: &[f64], fractions: &[f64]) -> Vec<f64> {
    let mut sorted: Vec<f64> = z.to_vec();
    sorted.sort_by(|a, b| b.total_cmp(a));
    let total: f64 = sorted.iter().sum();
    fractions
        .iter()
        .map(|&f| {
            if total.is_nan() || total <= 0.0 {
                return f64::INFINITY;
            }
            let mut acc = 0.0;
            for &v in &sorted {
                acc += v;
                if acc >= f * total {
                    return v;
                }
            }
            sorted.last().copied().unwrap_or(f64::INFINITY)
        })
        .collect()
}

/// Contour segments of `grid` at `level`, in data coordinates, by marching
/// squares on the bin centres. The grid is treated as zero beyond its
/// border so contours close.
pub fn contour_segments(grid: &Grid2, level: f64) -> Vec<[(f64, f64); 2]> {
    let (nx, ny) = (grid.nx as isize, grid.ny as isize);
    let value = |ix: isize, iy: isize| -> f64 {
        if ix < 0 || iy < 0 || ix >= nx || iy >= ny {
            0.0
        } else {
            grid.at(ix as usize, iy as usize)
        }
    };
    let xc = |ix: isize| grid.x.0 + (ix as f64 + 0.5) * grid.dx();
    let yc = |iy: isize| grid.y.0 + (iy as f64 + 0.5) * grid.dy();
    let mut out = Vec::new();
    for iy in -1..ny {
        for ix in -1..nx {
            // Corners: 0 bottom-left, 1 bottom-right, 2 top-right, 3 top-left.
            let v = [
                value(ix, iy),
                value(ix + 1, iy),
                value(ix + 1, iy + 1),
                value(ix, iy + 1),
            ];
            let case = v
                .iter()
                .enumerate()
                .fold(0u8, |acc, (k, &z)| acc | (u8::from(z >= level) << k));
            if case == 0 || case == 15 {
                continue;
            }
            let (x0, x1, y0, y1) = (xc(ix), xc(ix + 1), yc(iy), yc(iy + 1));
            let t = |a: f64, b: f64| {
                if (b - a).abs() > 0.0 {
                    ((level - a) / (b - a)).clamp(0.0, 1.0)
                } else {
                    0.5
                }
            };
            // Edges: 0 bottom, 1 right, 2 top, 3 left.
            let edge = |e: u8| -> (f64, f64) {
                match e {
                    0 => (x0 + t(v[0], v[1]) * (x1 - x0), y0),
                    1 => (x1, y0 + t(v[1], v[2]) * (y1 - y0)),
                    2 => (x0 + t(v[3], v[2]) * (x1 - x0), y1),
                    _ => (x0, y0 + t(v[0], v[3]) * (y1 - y0)),
                }
            };
            let centre_above = 0.25 * (v[0] + v[1] + v[2] + v[3]) >= level;
            let pairs: &[(u8, u8)] = match case {
                1 | 14 => &[(3, 0)],
                2 | 13 => &[(0, 1)],
                3 | 12 => &[(3, 1)],
                4 | 11 => &[(1, 2)],
                6 | 9 => &[(0, 2)],
                7 | 8 => &[(3, 2)],
                5 if centre_above => &[(0, 1), (2, 3)],
                5 => &[(3, 0), (1, 2)],
                10 if centre_above => &[(3, 0), (1, 2)],
                10 => &[(0, 1), (2, 3)],
                _ => &[],
            };
            for &(a, b) in pairs {
                out.push([edge(a), edge(b)]);
            }
        }
    }
    out
}

/// Bilinear interpolation between bin centres (zero beyond the border),
/// consistent with the linear interpolation marching squares uses.
pub fn interpolate(grid: &Grid2, x: f64, y: f64) -> f64 {
    let fx = (x - grid.x.0) / grid.dx() - 0.5;
    let fy = (y - grid.y.0) / grid.dy() - 0.5;
    let (ix, iy) = (fx.floor(), fy.floor());
    let (tx, ty) = (fx - ix, fy - iy);
    let (ix, iy) = (ix as isize, iy as isize);
    let v = |i: isize, j: isize| -> f64 {
        if i < 0 || j < 0 || i >= grid.nx as isize || j >= grid.ny as isize {
            0.0
        } else {
            grid.at(i as usize, j as usize)
        }
    };
    (1.0 - ty) * ((1.0 - tx) * v(ix, iy) + tx * v(ix + 1, iy))
        + ty * ((1.0 - tx) * v(ix, iy + 1) + tx * v(ix + 1, iy + 1))
}

/// A horizontal strip of the filled level regions: `(x0, x1, y0, y1, k)`
/// where k is the index of the highest level reached (0 = innermost).
pub type FillRun = (f64, f64, f64, f64, usize);

/// Filled level regions on a grid `sub` times finer than the histogram,
/// merged into horizontal runs so the plot stays small. `levels` must be
/// in decreasing order (innermost first).
pub fn fill_runs(grid: &Grid2, levels: &[f64], sub: usize) -> Vec<FillRun> {
    let (nx, ny) = (grid.nx * sub, grid.ny * sub);
    let (dx, dy) = (grid.dx() / sub as f64, grid.dy() / sub as f64);
    let mut runs = Vec::new();
    for j in 0..ny {
        let y0 = grid.y.0 + j as f64 * dy;
        let mut current: Option<(usize, usize)> = None; // (start column, level)
        for i in 0..=nx {
            let k = if i < nx {
                let z = interpolate(grid, grid.x.0 + (i as f64 + 0.5) * dx, y0 + 0.5 * dy);
                levels.iter().position(|&l| z >= l)
            } else {
                None
            };
            match (current, k) {
                (Some((_, ck)), Some(k)) if ck == k => {}
                (c, k) => {
                    if let Some((start, ck)) = c {
                        let x0 = grid.x.0 + start as f64 * dx;
                        runs.push((x0, grid.x.0 + i as f64 * dx, y0, y0 + dy, ck));
                    }
                    current = k.map(|k| (i, k));
                }
            }
        }
    }
    runs
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn sigma_fractions_match_formula() {
        // 1 - exp(-k^2/2), common practice.
        assert!((SIGMA_MASS_FRACTIONS[0] - (1.0 - (-0.5f64).exp())).abs() < 1e-15);
        assert!((SIGMA_MASS_FRACTIONS[1] - (1.0 - (-2.0f64).exp())).abs() < 1e-15);
    }

    #[test]
    fn mass_levels_by_hand() {
        // Values 5,4,3,2,1 (total 15): 40 % needs 5+4 = 9 >= 6 -> level 4;
        // 90 % needs 5+4+3+2 = 14 >= 13.5 -> level 2.
        let l = mass_levels(&[1.0, 3.0, 5.0, 2.0, 4.0], &[0.4, 0.9]);
        assert_eq!(l, vec![4.0, 2.0]);
    }

    #[test]
    fn contour_of_a_cone_is_a_circle() {
        // z = max(0, 1 - r) on a grid; the level-0.5 contour is r = 0.5.
        let n = 41;
        let mut g = Grid2 {
            nx: n,
            ny: n,
            x: (-1.0, 1.0),
            y: (-1.0, 1.0),
            z: vec![0.0; n * n],
        };
        for iy in 0..n {
            for ix in 0..n {
                let r = (g.xc(ix).powi(2) + g.yc(iy).powi(2)).sqrt();
                g.z[iy * n + ix] = (1.0 - r).max(0.0);
            }
        }
        let segs = contour_segments(&g, 0.5);
        assert!(segs.len() > 20);
        for s in &segs {
            for p in s {
                let r = (p.0 * p.0 + p.1 * p.1).sqrt();
                // Linear interpolation on a cone is exact along grid lines
                // up to the kink; allow a fraction of a bin (0.05).
                assert!((r - 0.5).abs() < 0.02, "r = {r}");
            }
        }
    }

    #[test]
    fn smoothing_preserves_mass_away_from_edges() {
        let xs = vec![0.0; 100];
        let ys = vec![0.0; 100];
        let g = smoothed_histogram(&xs, &ys, (-1.0, 1.0), (-1.0, 1.0), 20, 1.0);
        let total: f64 = g.z.iter().sum();
        assert!((total - 100.0).abs() < 1e-9, "{total}");
    }
}
