//! The `Network`: a GRU stack and the factorised output head, with batched
//! inference, the batch-1 and streaming paths, and the CTC loss with its
//! gradient computed data-parallel over shards of a batch.

use super::ctc::ctc_loss;
use super::gru::{GruConfig, GruStack, GruState, Scratch};
use super::head::{pattern_log_probs, pattern_log_probs_backward, Head, BLANK, N_LOGITS};
use super::optim::{clip_global_norm, Adam};
use crate::{Error, Result};
use ndarray::{s, Array2, Array3, ArrayView2};
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use rayon::prelude::*;
use serde::{Deserialize, Serialize};

/// A recurrent network mapping frames `[T, inputs]` to 7 logits per frame
/// (blank, dots 1-6), see [`crate::net::pattern_log_probs`]. Serialises
/// with serde; the same type also holds gradients (one value per
/// parameter).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Network {
    gru: GruStack,
    head: Head,
}

/// The loss of a batch and its gradient.
#[derive(Debug, Clone)]
pub struct BatchLoss {
    /// Mean CTC loss per target cell: `Σ_i -ln p(l_i | x_i) / Σ_i |l_i|`
    /// over the sequences that have an alignment.
    pub loss: f64,
    /// Target cells of the batch (the divisor above).
    pub cells: usize,
    /// Frames of the batch (not counting padding).
    pub frames: usize,
    /// Sequences skipped because their target cannot be aligned (too few
    /// frames for the cells): they add nothing to loss or gradient.
    pub skipped: usize,
    /// `∂ loss / ∂ θ` for every parameter, in the network's shape.
    pub grads: Network,
}

/// The state of a streaming (unidirectional) network between frames.
#[derive(Debug, Clone)]
pub struct StreamState {
    gru: GruState,
}

impl Network {
    /// A freshly initialised network (see [`GruStack::new`]; head weights
    /// uniform in `[-1/sqrt(n), 1/sqrt(n)]`, head biases zero), seeded.
    pub fn new(config: GruConfig, seed: u64) -> Result<Network> {
        let mut rng = ChaCha8Rng::seed_from_u64(seed);
        let gru = GruStack::new(config, &mut rng)?;
        let head = Head::new(config.outputs(), &mut rng);
        Ok(Network { gru, head })
    }

    /// A network of this shape with every parameter zero.
    pub fn zeros_like(&self) -> Network {
        let c = self.gru.config();
        Network {
            gru: GruStack::zeros(c),
            head: Head::zeros(c.outputs()),
        }
    }

    /// The shape.
    pub fn config(&self) -> GruConfig {
        self.gru.config()
    }

    /// Number of parameters.
    pub fn n_params(&self) -> usize {
        self.param_sizes().iter().sum()
    }

    /// Lengths of the parameter arrays, in a fixed order (for [`Adam::new`]).
    pub fn param_sizes(&self) -> Vec<usize> {
        self.params().iter().map(|p| p.len()).collect()
    }

    pub(crate) fn params(&self) -> Vec<&[f32]> {
        let mut v = self.gru.params();
        v.extend(self.head.params());
        v
    }

    pub(crate) fn params_mut(&mut self) -> Vec<&mut [f32]> {
        let mut v = self.gru.params_mut();
        v.extend(self.head.params_mut());
        v
    }

    /// Checks parameter shapes against the configuration (for networks
    /// read from a file); the message says what disagrees.
    pub(crate) fn check_shapes(&self) -> std::result::Result<(), String> {
        self.gru.check_shapes()?;
        let n = self.gru.config().outputs();
        if self.head.w.dim() != (n, N_LOGITS) || self.head.b.len() != N_LOGITS {
            return Err(format!(
                "head shapes {:?} and {}, expected ({n}, {N_LOGITS}) and {N_LOGITS}",
                self.head.w.dim(),
                self.head.b.len()
            ));
        }
        if self
            .params()
            .iter()
            .any(|p| p.iter().any(|v| !v.is_finite()))
        {
            return Err("a parameter is not a finite number".into());
        }
        Ok(())
    }

    fn check_frames(&self, x: &ArrayView2<f32>, index: usize) -> Result<()> {
        let want = self.gru.config().inputs;
        if x.ncols() != want {
            return Err(Error::Mismatch {
                what: format!("features per frame of sequence {index}"),
                expected: want.to_string(),
                got: x.ncols().to_string(),
                hint: "the network was built for another sensor or preprocessing; use a model \
                       trained for this taxel count"
                    .into(),
            });
        }
        Ok(())
    }

    /// Logits of one sequence on the batch-1 path (matrix-vector
    /// recurrence): `x` `[T, inputs]` → `[T, 7]`.
    pub fn logits_one(&self, x: ArrayView2<f32>) -> Result<Array2<f32>> {
        self.check_frames(&x, 0)?;
        let y = self.gru.forward_one(x);
        Ok(self.head.logits(y.view()))
    }

    /// Logits of a batch of sequences of any lengths, each `[T_i, inputs]`
    /// → `[T_i, 7]`, computed together with length masks.
    pub fn logits(&self, batch: &[ArrayView2<f32>]) -> Result<Vec<Array2<f32>>> {
        for (i, x) in batch.iter().enumerate() {
            self.check_frames(x, i)?;
        }
        let order = sorted_by_length(batch, &(0..batch.len()).collect::<Vec<_>>());
        let (x, lengths) = time_major(batch, &order, self.gru.config().inputs);
        let (t_len, b) = (x.dim().0, x.dim().1);
        let y = self.gru.forward(x.view(), &lengths);
        let y2 = y
            .into_shape_with_order((t_len * b, self.gru.config().outputs()))
            .expect("standard layout reshapes");
        let z = self.head.logits(y2.view());
        let mut out = vec![Array2::zeros((0, N_LOGITS)); batch.len()];
        for (col, &i) in order.iter().enumerate() {
            out[i] = gather_rows(&z, col, b, lengths[col]);
        }
        Ok(out)
    }

    /// Natural-log class probabilities `[T_i, 65]` of a batch (see
    /// [`crate::net::pattern_log_probs`]).
    pub fn forward(&self, batch: &[ArrayView2<f32>]) -> Result<Vec<Array2<f32>>> {
        Ok(self
            .logits(batch)?
            .iter()
            .map(|z| pattern_log_probs(z.view()))
            .collect())
    }

    /// A zero state for [`Self::step`]; [`Error::Config`] for a
    /// bidirectional network.
    pub fn zero_state(&self) -> Result<StreamState> {
        Ok(StreamState {
            gru: self.gru.zero_state()?,
        })
    }

    /// One streaming step: one frame `[inputs]` in, its 7 logits out. The
    /// numbers equal [`Self::logits_one`] on the whole sequence.
    pub fn step(&self, state: &mut StreamState, frame: &[f32]) -> Result<[f32; N_LOGITS]> {
        let want = self.gru.config().inputs;
        if frame.len() != want {
            return Err(Error::Mismatch {
                what: "features per frame".into(),
                expected: want.to_string(),
                got: frame.len().to_string(),
                hint: "use a model trained for this sensor's taxel count".into(),
            });
        }
        let h = self.gru.step(&mut state.gru, frame);
        let mut z = [0.0f32; N_LOGITS];
        self.head.logits_row(h, &mut z);
        Ok(z)
    }

    /// The CTC loss of a batch and its gradient.
    ///
    /// `batch`: sequences `[T_i, inputs]`; `targets`: the cell masks
    /// (`0..64`) each sequence should read. The batch is split into
    /// `shards` parts (sequences dealt round-robin by decreasing length, so
    /// the parts are balanced) computed in parallel on the current rayon
    /// pool; their gradients are summed in shard order, so the result
    /// depends on `shards` but not on thread timing. Use the thread count.
    pub fn loss_and_grad(
        &self,
        batch: &[ArrayView2<f32>],
        targets: &[&[usize]],
        shards: usize,
    ) -> Result<BatchLoss> {
        if batch.len() != targets.len() {
            return Err(Error::Mismatch {
                what: "targets of the batch".into(),
                expected: batch.len().to_string(),
                got: targets.len().to_string(),
                hint: "give one target cell sequence per input sequence".into(),
            });
        }
        for (i, (x, t)) in batch.iter().zip(targets).enumerate() {
            self.check_frames(x, i)?;
            if let Some(&bad) = t.iter().find(|&&k| k >= BLANK) {
                return Err(Error::Mismatch {
                    what: format!("cell of target {i}"),
                    expected: "a six-dot mask 0..63".into(),
                    got: bad.to_string(),
                    hint: "targets are six-dot cells; 8-dot cells cannot be trained".into(),
                });
            }
        }
        let cells: usize = targets.iter().map(|t| t.len()).sum();
        let frames: usize = batch.iter().map(|x| x.nrows()).sum();
        let scale = 1.0 / cells.max(1) as f64;
        let all = sorted_by_length(batch, &(0..batch.len()).collect::<Vec<_>>());
        let shards = shards.clamp(1, batch.len().max(1));
        let parts: Vec<Vec<usize>> = (0..shards)
            .map(|s| all.iter().skip(s).step_by(shards).copied().collect())
            .collect();
        let results: Vec<(f64, usize, Network)> = parts
            .par_iter()
            .map(|idx| self.shard_loss(batch, targets, idx, scale))
            .collect();
        let mut grads = self.zeros_like();
        let mut nll = 0.0;
        let mut skipped = 0;
        for (l, sk, g) in &results {
            nll += l;
            skipped += sk;
            for (a, b) in grads.params_mut().into_iter().zip(g.params()) {
                a.iter_mut().zip(b).for_each(|(x, y)| *x += y);
            }
        }
        Ok(BatchLoss {
            loss: nll * scale,
            cells,
            frames,
            skipped,
            grads,
        })
    }

    /// One shard: returns the summed negative log-likelihood, the number
    /// of skipped sequences and the gradient scaled by `scale`.
    fn shard_loss(
        &self,
        batch: &[ArrayView2<f32>],
        targets: &[&[usize]],
        idx: &[usize],
        scale: f64,
    ) -> (f64, usize, Network) {
        if idx.is_empty() {
            return (0.0, 0, self.zeros_like());
        }
        let (x, lengths) = time_major(batch, idx, self.gru.config().inputs);
        SCRATCH.with_borrow_mut(|pool| self.shard_loss_in(&x, &lengths, targets, idx, scale, pool))
    }

    /// [`Self::shard_loss`] on the time-major batch `x` `[T, B, inputs]`,
    /// with the large buffers taken from (and given back to) `pool`.
    fn shard_loss_in(
        &self,
        x: &Array3<f32>,
        lengths: &[usize],
        targets: &[&[usize]],
        idx: &[usize],
        scale: f64,
        pool: &mut Scratch,
    ) -> (f64, usize, Network) {
        let mut grads = self.zeros_like();
        let (t_len, b) = (x.dim().0, x.dim().1);
        let width = self.gru.config().outputs();
        let tape = self.gru.forward_train(x.view(), lengths, pool);
        let top = tape
            .output()
            .view()
            .into_shape_with_order((t_len * b, width))
            .expect("standard layout reshapes");
        let z = self.head.logits(top);
        let mut dz = pool.take2(t_len * b, N_LOGITS, true);
        let mut nll = 0.0;
        let mut skipped = 0;
        for (col, &i) in idx.iter().enumerate() {
            let zi = gather_rows(&z, col, b, lengths[col]);
            let lp = pattern_log_probs(zi.view());
            match ctc_loss(lp.view(), targets[i], BLANK) {
                Some(r) if r.loss.is_finite() => {
                    nll += r.loss;
                    let g = r.grad.mapv(|v| (v as f64 * scale) as f32);
                    let dzi = pattern_log_probs_backward(zi.view(), g.view());
                    for t in 0..lengths[col] {
                        dz.row_mut(t * b + col).assign(&dzi.row(t));
                    }
                }
                _ => skipped += 1,
            }
        }
        let mut d_top = pool.take2(t_len * b, width, false);
        self.head
            .backward_into(top, dz.view(), &mut grads.head, &mut d_top);
        let d_top = d_top
            .into_shape_with_order((t_len, b, width))
            .expect("standard layout reshapes");
        self.gru
            .backward(&tape, &d_top, &mut grads.gru, false, pool);
        pool.put3(d_top);
        pool.put2(dz);
        tape.recycle(pool);
        (nll, skipped, grads)
    }

    /// Clips `grads` to global norm `max_norm` and applies one Adam update
    /// with rate `lr`. Returns the gradient norm before clipping.
    pub fn apply_gradients(
        &mut self,
        grads: &mut Network,
        adam: &mut Adam,
        lr: f32,
        max_norm: f32,
    ) -> f32 {
        let norm = clip_global_norm(&mut grads.params_mut(), max_norm);
        let g = grads.params();
        adam.update(&mut self.params_mut(), &g, lr);
        norm
    }
}

thread_local! {
    /// Each worker thread's buffer pool for training steps (see
    /// [`Scratch`]): it lives as long as the thread, so the rayon pool of
    /// a training run reuses the same buffers at every step and frees them
    /// when the run ends.
    static SCRATCH: std::cell::RefCell<Scratch> = std::cell::RefCell::new(Scratch::default());
}

/// `idx` sorted by decreasing sequence length (stable).
fn sorted_by_length(batch: &[ArrayView2<f32>], idx: &[usize]) -> Vec<usize> {
    let mut v = idx.to_vec();
    v.sort_by_key(|&i| std::cmp::Reverse(batch[i].nrows()));
    v
}

/// The sequences `idx` (already sorted by decreasing length) as a padded
/// time-major tensor `[T_max, B, f]` and their lengths.
fn time_major(batch: &[ArrayView2<f32>], idx: &[usize], f: usize) -> (Array3<f32>, Vec<usize>) {
    let lengths: Vec<usize> = idx.iter().map(|&i| batch[i].nrows()).collect();
    let t_len = lengths.first().copied().unwrap_or(0);
    let mut x = Array3::zeros((t_len, idx.len(), f));
    for (col, &i) in idx.iter().enumerate() {
        x.slice_mut(s![..lengths[col], col, ..]).assign(&batch[i]);
    }
    (x, lengths)
}

/// Rows `t * b + col` for `t < len` of a `[T * b, k]` array.
fn gather_rows(z: &Array2<f32>, col: usize, b: usize, len: usize) -> Array2<f32> {
    let mut out = Array2::zeros((len, z.ncols()));
    for t in 0..len {
        out.row_mut(t).assign(&z.row(t * b + col));
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::net::optim::AdamConfig;
    use rand::Rng;

    fn cfg(bi: bool) -> GruConfig {
        GruConfig {
            inputs: 3,
            hidden: 4,
            layers: 2,
            bidirectional: bi,
        }
    }

    fn data(seed: u64, lens: &[usize]) -> Vec<Array2<f32>> {
        let mut rng = ChaCha8Rng::seed_from_u64(seed);
        lens.iter()
            .map(|&t| Array2::from_shape_fn((t, 3), |_| rng.gen_range(-1.0f32..1.0)))
            .collect()
    }

    #[test]
    fn batched_logits_equal_one_at_a_time_and_streaming() {
        let net = Network::new(cfg(false), 1).unwrap();
        let xs = data(2, &[5, 8, 3]);
        let views: Vec<_> = xs.iter().map(|x| x.view()).collect();
        let batched = net.logits(&views).unwrap();
        for (i, x) in xs.iter().enumerate() {
            let one = net.logits_one(x.view()).unwrap();
            let mut st = net.zero_state().unwrap();
            for t in 0..x.nrows() {
                let z = net.step(&mut st, x.row(t).as_slice().unwrap()).unwrap();
                for k in 0..N_LOGITS {
                    approx::assert_relative_eq!(batched[i][[t, k]], one[[t, k]], epsilon = 1e-5);
                    approx::assert_relative_eq!(z[k], one[[t, k]], epsilon = 1e-5);
                }
            }
        }
        let bad = Array2::<f32>::zeros((4, 5));
        assert!(matches!(
            net.logits_one(bad.view()),
            Err(Error::Mismatch { .. })
        ));
    }

    /// End-to-end finite-difference check of the batch loss (GRU + head +
    /// CTC) w.r.t. every parameter: the analytic gradient is the chain
    /// ∂L/∂θ = Σ_t ∂L/∂logp_t · ∂logp_t/∂z_t · ∂z_t/∂θ computed by the
    /// backward passes; compared with central differences (step 1e-2).
    fn check_batch_gradient(bi: bool, shards: usize) {
        let net = Network::new(cfg(bi), 3).unwrap();
        let xs = data(4, &[6, 4, 7]);
        let views: Vec<_> = xs.iter().map(|x| x.view()).collect();
        let t0 = [1usize, 2];
        let t1 = [5usize];
        let t2 = [63usize, 63, 0];
        let targets: Vec<&[usize]> = vec![&t0, &t1, &t2];
        let r = net.loss_and_grad(&views, &targets, shards).unwrap();
        assert_eq!(r.skipped, 0);
        assert_eq!(r.cells, 6);
        let eps = 1e-2f32;
        let n = net.params().len();
        for p in 0..n {
            let len = net.params()[p].len();
            for i in (0..len).step_by(5) {
                let mut a = net.clone();
                a.params_mut()[p][i] += eps;
                let mut b = net.clone();
                b.params_mut()[p][i] -= eps;
                let la = a.loss_and_grad(&views, &targets, 1).unwrap().loss;
                let lb = b.loss_and_grad(&views, &targets, 1).unwrap().loss;
                let numeric = (la - lb) / (2.0 * eps as f64);
                let got = r.grads.params()[p][i] as f64;
                assert!(
                    (got - numeric).abs() < 2e-3 + 1e-2 * numeric.abs(),
                    "param {p}[{i}] bi={bi}: analytic {got}, numeric {numeric}"
                );
            }
        }
    }

    #[test]
    fn batch_gradient_unidirectional() {
        check_batch_gradient(false, 2);
    }

    #[test]
    fn batch_gradient_bidirectional() {
        check_batch_gradient(true, 1);
    }

    #[test]
    fn shards_change_only_rounding_and_repeat_exactly() {
        let net = Network::new(cfg(true), 5).unwrap();
        let xs = data(6, &[9, 7, 7, 3]);
        let views: Vec<_> = xs.iter().map(|x| x.view()).collect();
        let ts: Vec<Vec<usize>> = vec![vec![1, 2, 3], vec![4], vec![4, 4], vec![9]];
        let targets: Vec<&[usize]> = ts.iter().map(|t| t.as_slice()).collect();
        let a = net.loss_and_grad(&views, &targets, 1).unwrap();
        let b = net.loss_and_grad(&views, &targets, 2).unwrap();
        let c = net.loss_and_grad(&views, &targets, 2).unwrap();
        approx::assert_relative_eq!(a.loss, b.loss, max_relative = 1e-6);
        assert_eq!(b.loss, c.loss);
        assert_eq!(b.grads, c.grads);
    }

    #[test]
    fn training_reduces_the_loss_on_a_toy_task() {
        // Sequences whose frames spell their target: frame value = the
        // cell's bit pattern for 3 frames, then 2 blank frames.
        let mut net = Network::new(
            GruConfig {
                inputs: 6,
                hidden: 16,
                layers: 1,
                bidirectional: false,
            },
            7,
        )
        .unwrap();
        let mut rng = ChaCha8Rng::seed_from_u64(8);
        let mut xs = Vec::new();
        let mut ts = Vec::new();
        for _ in 0..8 {
            let cells: Vec<usize> = (0..3).map(|_| rng.gen_range(0..64)).collect();
            let mut x = Array2::zeros((cells.len() * 5, 6));
            for (j, &c) in cells.iter().enumerate() {
                for f in 0..3 {
                    for k in 0..6 {
                        x[[j * 5 + f, k]] = if c >> k & 1 == 1 { 1.0 } else { -1.0 };
                    }
                }
            }
            xs.push(x);
            ts.push(cells);
        }
        let views: Vec<_> = xs.iter().map(|x| x.view()).collect();
        let targets: Vec<&[usize]> = ts.iter().map(|t| t.as_slice()).collect();
        let mut adam = Adam::new(AdamConfig::default(), &net.param_sizes());
        let first = net.loss_and_grad(&views, &targets, 2).unwrap().loss;
        let mut last = first;
        for _ in 0..150 {
            let mut r = net.loss_and_grad(&views, &targets, 2).unwrap();
            last = r.loss;
            net.apply_gradients(&mut r.grads, &mut adam, 0.02, 5.0);
        }
        assert!(last < first * 0.3, "loss {first} -> {last}");
    }
}
