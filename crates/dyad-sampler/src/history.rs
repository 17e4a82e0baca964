//! A bounded, progressively thinned in-memory history of the cold ensemble,
//! used for the autocorrelation-time stopping rule and the final diagnostics.
//!
//! Snapshots are kept every `thin` steps; when the buffer is full every other
//! snapshot is dropped and `thin` doubles, so memory stays between `capacity/2`
//! and `capacity` snapshots however long the run.

/// Thinned history, stored parameter-major and step-major within a parameter
/// (`data[p][snapshot * n_walkers + walker]`), the layout the diagnostics take.
#[derive(Clone, Debug, PartialEq)]
pub(crate) struct History {
    pub dim: usize,
    pub n_walkers: usize,
    /// Maximum number of snapshots (even).
    pub capacity: usize,
    /// Steps between kept snapshots.
    pub thin: u64,
    /// Number of snapshots kept.
    pub len: usize,
    /// Step (absolute) after which recording started; snapshots are taken
    /// at steps `start + k * thin`, k = 1, 2, ...
    pub start: u64,
    pub data: Vec<Vec<f64>>,
}

impl History {
    pub fn new(dim: usize, n_walkers: usize, capacity: usize, start: u64) -> Self {
        let capacity = capacity.max(4) & !1;
        Self {
            dim,
            n_walkers,
            capacity,
            thin: 1,
            len: 0,
            start,
            data: vec![vec![0.0; capacity * n_walkers]; dim],
        }
    }

    /// Restarts recording after `start` (used when the tempering ladder freezes).
    pub fn reset(&mut self, start: u64) {
        self.thin = 1;
        self.len = 0;
        self.start = start;
    }

    /// Whether the snapshot after absolute step `step` should be recorded.
    pub fn wants(&self, step: u64) -> bool {
        step > self.start && (step - self.start).is_multiple_of(self.thin)
    }

    /// Records positions (walker-major, `positions(w)` = walker w's position).
    pub fn record<'a>(&mut self, positions: impl Fn(usize) -> &'a [f64]) {
        if self.len == self.capacity {
            self.halve();
        }
        let nw = self.n_walkers;
        let base = self.len * nw;
        for w in 0..nw {
            let x = positions(w);
            for (p, col) in self.data.iter_mut().enumerate() {
                col[base + w] = x[p];
            }
        }
        self.len += 1;
    }

    fn halve(&mut self) {
        // Keep snapshots at multiples of the doubled thinning (odd indices).
        let nw = self.n_walkers;
        let keep = self.len / 2;
        for col in self.data.iter_mut() {
            for s in 0..keep {
                let from = (2 * s + 1) * nw;
                col.copy_within(from..from + nw, s * nw);
            }
        }
        self.len = keep;
        self.thin *= 2;
    }

    /// Draws of parameter `p` from snapshot `first` on, step-major.
    pub fn draws(&self, p: usize, first: usize) -> &[f64] {
        &self.data[p][first * self.n_walkers..self.len * self.n_walkers]
    }
}
