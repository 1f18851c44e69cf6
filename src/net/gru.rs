//! Stacked GRU layers (Cho et al. 2014), unidirectional or bidirectional,
//! with the forward pass, back-propagation through time and a streaming
//! step, all written by hand on ndarray.
//!
//! # Equations
//!
//! The gate variant is the one cuDNN and PyTorch use, with the reset gate
//! applied to the whole recurrent term of the candidate, bias included.
//! For input `x_t` and previous state `h_{t-1}` (row vectors):
//!
//! ```text
//! r_t = σ(x_t W_ir + b_ir + h_{t-1} W_hr + b_hr)
//! z_t = σ(x_t W_iz + b_iz + h_{t-1} W_hz + b_hz)
//! n_t = tanh(x_t W_in + b_in + r_t ⊙ (h_{t-1} W_hn + b_hn))
//! h_t = (1 - z_t) ⊙ n_t + z_t ⊙ h_{t-1}
//! ```
//!
//! `W_i = [W_ir | W_iz | W_in]` is stored `[n_in, 3H]` and
//! `W_h = [W_hr | W_hz | W_hn]` is `[H, 3H]`, gate blocks in the order
//! r, z, n, so `x W_i` for every frame of a layer is one GEMM. The initial
//! state is zero.
//!
//! # Layout and lengths
//!
//! Batches are **time-major**: inputs `[seq_len, batch, features]`, outputs
//! `[seq_len, batch, directions * hidden]` (a bidirectional layer writes the
//! forward direction in columns `0..H` and the backward one in `H..2H`).
//! Sequence `b` has `lengths[b]` valid frames and lengths must be sorted in
//! non-increasing order (the `Network` sorts for you). Frames past a
//! sequence's length are padding: they are never read, the state stops
//! updating there (the backward direction starts from a zero state at the
//! sequence's own last frame), their outputs are zero and they receive no
//! gradient. Because lengths are sorted, the sequences still running at a
//! time step are a prefix of the batch, so each recurrent GEMM only covers
//! rows that are still running.

use super::kernels::{self, gemm, gemm_rows, gemv, gemv_packed, multiversion, GemvPacked, Packed};
use crate::{Error, Result};
use ndarray::{s, Array1, Array2, Array3, ArrayView2, ArrayView3, Axis};
use rand::Rng;
use rand_chacha::ChaCha8Rng;
use serde::{Deserialize, Serialize};

/// The shape of a GRU stack.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
pub struct GruConfig {
    /// Features per input frame (for tactread: taxels after preprocessing).
    pub inputs: usize,
    /// Hidden units per direction, `H`.
    pub hidden: usize,
    /// Number of stacked layers.
    pub layers: usize,
    /// Whether each layer also runs backward in time (offline only: a
    /// bidirectional model cannot stream).
    pub bidirectional: bool,
}

impl GruConfig {
    /// 1, or 2 when bidirectional.
    pub fn directions(&self) -> usize {
        if self.bidirectional {
            2
        } else {
            1
        }
    }

    /// Features per output frame: `directions * hidden`.
    pub fn outputs(&self) -> usize {
        self.directions() * self.hidden
    }

    /// Inputs of layer `l`.
    pub(crate) fn layer_inputs(&self, l: usize) -> usize {
        if l == 0 {
            self.inputs
        } else {
            self.outputs()
        }
    }

    /// Checks that every size is positive.
    pub fn check(&self) -> Result<()> {
        for (name, v) in [
            ("inputs", self.inputs),
            ("hidden", self.hidden),
            ("layers", self.layers),
        ] {
            if v == 0 {
                return Err(Error::config(
                    name,
                    "must be at least 1 (a GRU needs inputs, hidden units and layers)",
                ));
            }
        }
        Ok(())
    }
}

/// Parameters of one direction of one layer.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub(crate) struct GruCell {
    /// `[n_in, 3H]`, gate blocks r, z, n.
    pub(crate) w_i: Array2<f32>,
    /// `[H, 3H]`, gate blocks r, z, n.
    pub(crate) w_h: Array2<f32>,
    /// `[3H]`.
    pub(crate) b_i: Array1<f32>,
    /// `[3H]`.
    pub(crate) b_h: Array1<f32>,
}

impl GruCell {
    fn zeros(n_in: usize, h: usize) -> Self {
        GruCell {
            w_i: Array2::zeros((n_in, 3 * h)),
            w_h: Array2::zeros((h, 3 * h)),
            b_i: Array1::zeros(3 * h),
            b_h: Array1::zeros(3 * h),
        }
    }

    fn hidden(&self) -> usize {
        self.w_h.nrows()
    }
}

/// A stack of GRU layers with its parameters. Serialises with serde (the
/// parameters as ndarray arrays).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct GruStack {
    config: GruConfig,
    /// `layers * directions` cells; cell `l * directions + d`.
    cells: Vec<GruCell>,
}

/// What the training forward pass keeps for back-propagation. Its buffers
/// come from a [`Scratch`] pool and go back there with [`GruTape::recycle`].
pub(crate) struct GruTape {
    /// Input of layer 0, `[T * B, inputs]` (layer `l > 0` reads the output
    /// of layer `l - 1`).
    input: Array2<f32>,
    /// Output of each layer, `[T, B, D * H]`.
    outputs: Vec<Array3<f32>>,
    /// Gate values per cell, `[T, B, 4H]`: r, z, n and `h_{t-1} W_hn + b_hn`
    /// (rows past a sequence's length are not written and hold stale values).
    gates: Vec<Array3<f32>>,
    /// Sequences still running at each time step, `[T]`.
    active: Vec<usize>,
}

impl GruTape {
    /// The top layer's output, `[T, B, D * H]`.
    pub(crate) fn output(&self) -> &Array3<f32> {
        self.outputs
            .last()
            .expect("a GRU stack has at least one layer")
    }

    /// Gives every buffer back to `scratch` for the next step.
    pub(crate) fn recycle(self, scratch: &mut Scratch) {
        scratch.put2(self.input);
        for a in self.outputs.into_iter().chain(self.gates) {
            scratch.put3(a);
        }
    }
}

/// A pool of `f32` buffers reused from one training step to the next, so
/// the large per-step arrays (tape, gradients) are not mapped and zeroed
/// afresh by the operating system at every step. Which buffer a request
/// gets does not change any result: a buffer is zeroed when the caller
/// asks, and otherwise every element that is read was written first.
#[derive(Default)]
pub(crate) struct Scratch {
    free: Vec<Vec<f32>>,
}

impl Scratch {
    /// A buffer of `len` elements, all zero when `zeroed`, else with
    /// unspecified contents.
    pub(crate) fn take(&mut self, len: usize, zeroed: bool) -> Vec<f32> {
        // The smallest free buffer that is large enough, else the largest
        // (it grows once and then fits).
        let pick = self
            .free
            .iter()
            .enumerate()
            .filter(|(_, v)| v.capacity() >= len)
            .min_by_key(|(_, v)| v.capacity())
            .map(|(i, _)| i)
            .or_else(|| {
                self.free
                    .iter()
                    .enumerate()
                    .max_by_key(|(_, v)| v.capacity())
                    .map(|(i, _)| i)
            });
        let mut v = match pick {
            Some(i) => self.free.swap_remove(i),
            None => Vec::new(),
        };
        if zeroed {
            v.clear();
            v.resize(len, 0.0);
        } else {
            v.truncate(len);
            v.resize(len, 0.0);
        }
        v
    }

    /// A zeroed or unspecified `[r, c]` array (see [`Self::take`]).
    pub(crate) fn take2(&mut self, r: usize, c: usize, zeroed: bool) -> Array2<f32> {
        Array2::from_shape_vec((r, c), self.take(r * c, zeroed)).expect("length matches")
    }

    /// A zeroed or unspecified `[t, b, c]` array (see [`Self::take`]).
    pub(crate) fn take3(&mut self, t: usize, b: usize, c: usize, zeroed: bool) -> Array3<f32> {
        Array3::from_shape_vec((t, b, c), self.take(t * b * c, zeroed)).expect("length matches")
    }

    /// Returns a buffer to the pool.
    pub(crate) fn put(&mut self, v: Vec<f32>) {
        if v.capacity() > 0 {
            self.free.push(v);
        }
    }

    /// Returns an array's buffer to the pool.
    pub(crate) fn put2(&mut self, a: Array2<f32>) {
        self.put(a.into_raw_vec_and_offset().0);
    }

    /// Returns an array's buffer to the pool.
    pub(crate) fn put3(&mut self, a: Array3<f32>) {
        self.put(a.into_raw_vec_and_offset().0);
    }
}

/// The state of a unidirectional stack between streaming steps.
#[derive(Debug, Clone)]
pub struct GruState {
    /// Per layer: the current state `[H]`.
    h: Vec<Vec<f32>>,
    /// Scratch: the next state, input and recurrent projections, gates.
    next: Vec<f32>,
    xi: Vec<f32>,
    gh: Vec<f32>,
    cache: Vec<f32>,
    /// Per layer: `W_i` and `W_h` packed for [`gemv_packed`] once, when the
    /// state is made (the streaming step's products; same sums as `gemv`).
    w_i: Vec<GemvPacked>,
    w_h: Vec<GemvPacked>,
}

impl GruStack {
    /// A stack with weights and biases drawn uniformly from
    /// `[-1/sqrt(H), 1/sqrt(H)]` (the PyTorch default, from memory).
    pub fn new(config: GruConfig, rng: &mut ChaCha8Rng) -> Result<Self> {
        config.check()?;
        let mut stack = Self::zeros(config);
        let k = 1.0 / (config.hidden as f32).sqrt();
        for cell in &mut stack.cells {
            for p in [&mut cell.w_i, &mut cell.w_h] {
                p.mapv_inplace(|_| rng.gen_range(-k..k));
            }
            for p in [&mut cell.b_i, &mut cell.b_h] {
                p.mapv_inplace(|_| rng.gen_range(-k..k));
            }
        }
        Ok(stack)
    }

    /// A stack of the given shape with every parameter zero (used to
    /// accumulate gradients).
    pub(crate) fn zeros(config: GruConfig) -> Self {
        let mut cells = Vec::new();
        for l in 0..config.layers {
            for _ in 0..config.directions() {
                cells.push(GruCell::zeros(config.layer_inputs(l), config.hidden));
            }
        }
        GruStack { config, cells }
    }

    /// The shape.
    pub fn config(&self) -> GruConfig {
        self.config
    }

    /// Checks that the parameter arrays agree with the configuration (for
    /// stacks read from a file).
    pub(crate) fn check_shapes(&self) -> std::result::Result<(), String> {
        let c = &self.config;
        if self.cells.len() != c.layers * c.directions() {
            return Err(format!(
                "{} GRU cells for {} layers x {} directions",
                self.cells.len(),
                c.layers,
                c.directions()
            ));
        }
        let h = c.hidden;
        for (i, cell) in self.cells.iter().enumerate() {
            let n_in = c.layer_inputs(i / c.directions());
            if cell.w_i.dim() != (n_in, 3 * h)
                || cell.w_h.dim() != (h, 3 * h)
                || cell.b_i.len() != 3 * h
                || cell.b_h.len() != 3 * h
            {
                return Err(format!(
                    "GRU cell {i}: shapes w_i {:?} w_h {:?} b_i {} b_h {}, expected ({n_in}, {}) ({h}, {}) {} {}",
                    cell.w_i.dim(),
                    cell.w_h.dim(),
                    cell.b_i.len(),
                    cell.b_h.len(),
                    3 * h,
                    3 * h,
                    3 * h,
                    3 * h
                ));
            }
        }
        Ok(())
    }

    /// Every parameter array, flat, in a fixed order.
    pub(crate) fn params(&self) -> Vec<&[f32]> {
        let mut v = Vec::new();
        for c in &self.cells {
            v.push(c.w_i.as_slice().expect("parameters are contiguous"));
            v.push(c.w_h.as_slice().expect("parameters are contiguous"));
            v.push(c.b_i.as_slice().expect("parameters are contiguous"));
            v.push(c.b_h.as_slice().expect("parameters are contiguous"));
        }
        v
    }

    /// Every parameter array, flat and mutable, in the order of [`Self::params`].
    pub(crate) fn params_mut(&mut self) -> Vec<&mut [f32]> {
        let mut v = Vec::new();
        for c in &mut self.cells {
            v.push(c.w_i.as_slice_mut().expect("parameters are contiguous"));
            v.push(c.w_h.as_slice_mut().expect("parameters are contiguous"));
            v.push(c.b_i.as_slice_mut().expect("parameters are contiguous"));
            v.push(c.b_h.as_slice_mut().expect("parameters are contiguous"));
        }
        v
    }

    /// Inference over a batch.
    ///
    /// `x`: `[T, B, inputs]` (time-major); `lengths`: `[B]`, non-increasing,
    /// each at most `T`. Returns the top layer's output `[T, B, D * H]`, zero
    /// past each sequence's length. With `B == 1` the recurrence runs on the
    /// matrix-vector kernel.
    ///
    /// Panics if the shapes disagree or the lengths are not sorted (a
    /// programming error: the `Network` checks user data before this).
    pub fn forward(&self, x: ArrayView3<f32>, lengths: &[usize]) -> Array3<f32> {
        let mut scratch = Scratch::default();
        let tape = self.run(x, lengths, false, &mut scratch);
        let GruTape { mut outputs, .. } = tape;
        outputs.pop().expect("a GRU stack has at least one layer")
    }

    /// Inference over one sequence on the batch-1 path: `x` `[T, inputs]`
    /// → `[T, D * H]`. Layer by layer; the input projection is one GEMM
    /// per block of 256 frames (kept in cache) and the recurrence runs on
    /// the matrix-vector kernel. Same numbers as [`Self::forward`] with
    /// `B = 1` up to rounding.
    pub fn forward_one(&self, x: ArrayView2<f32>) -> Array2<f32> {
        const BLOCK: usize = 256;
        let (t_len, f) = x.dim();
        assert_eq!(f, self.config.inputs, "GRU input features");
        let dirs = self.config.directions();
        let h = self.config.hidden;
        let width = dirs * h;
        let mut input = x.as_standard_layout().into_owned();
        let mut xi = Array2::<f32>::zeros((BLOCK, 3 * h));
        let mut gh = vec![0.0f32; 3 * h];
        let mut hcur = vec![0.0f32; h];
        let mut cache = vec![0.0f32; 4 * h];
        for l in 0..self.config.layers {
            let mut out = Array2::<f32>::zeros((t_len, width));
            for d in 0..dirs {
                let cell = &self.cells[l * dirs + d];
                let w_h = GemvPacked::new(cell.w_h.view());
                let b_h = cell.b_h.as_slice().expect("contiguous");
                hcur.fill(0.0);
                let n_blocks = t_len.div_ceil(BLOCK);
                for blk in 0..n_blocks {
                    let blk = if d == 1 { n_blocks - 1 - blk } else { blk };
                    let t0 = blk * BLOCK;
                    let n = BLOCK.min(t_len - t0);
                    let mut xb = xi.slice_mut(s![..n, ..]);
                    xb.assign(&cell.b_i.broadcast((n, 3 * h)).expect("bias broadcasts"));
                    gemm(
                        input.slice(s![t0..t0 + n, ..]),
                        cell.w_i.view(),
                        1.0,
                        &mut xb,
                    );
                    let xs = xi.as_slice().expect("fresh array");
                    let os = out.as_slice_mut().expect("fresh array");
                    for i in 0..n {
                        let i = if d == 1 { n - 1 - i } else { i };
                        let t = t0 + i;
                        gemv_packed(&hcur, &w_h, b_h, &mut gh);
                        let o = &mut os[t * width + d * h..t * width + (d + 1) * h];
                        gate_forward_row(
                            &xs[i * 3 * h..(i + 1) * 3 * h],
                            &gh,
                            &hcur,
                            o,
                            &mut cache,
                        );
                        hcur.copy_from_slice(o);
                    }
                }
            }
            input = out;
        }
        input
    }

    /// The training forward pass: like [`Self::forward`] but keeps what
    /// back-propagation needs, in buffers taken from `scratch`.
    pub(crate) fn forward_train(
        &self,
        x: ArrayView3<f32>,
        lengths: &[usize],
        scratch: &mut Scratch,
    ) -> GruTape {
        self.run(x, lengths, true, scratch)
    }

    /// The forward pass. With `keep` the tape holds every layer's output
    /// and the gates; without, only the top layer's output (the others go
    /// back to `scratch` as soon as the next layer has read them).
    fn run(
        &self,
        x: ArrayView3<f32>,
        lengths: &[usize],
        keep: bool,
        scratch: &mut Scratch,
    ) -> GruTape {
        let (t_len, b, f) = x.dim();
        assert_eq!(f, self.config.inputs, "GRU input features");
        let active = active_counts(t_len, lengths);
        let dirs = self.config.directions();
        let h = self.config.hidden;
        let mut input = scratch.take2(t_len * b, f, false);
        input.assign(
            &x.into_shape_with_order((t_len * b, f))
                .unwrap_or_else(|_| unreachable!("x is [T, B, f]")),
        );
        let mut outputs: Vec<Array3<f32>> = Vec::new();
        let mut gates = Vec::new();
        for l in 0..self.config.layers {
            let mut out = scratch.take3(t_len, b, dirs * h, true);
            {
                let layer_in = match outputs.last() {
                    None => input.view(),
                    Some(prev) => prev
                        .view()
                        .into_shape_with_order((t_len * b, dirs * h))
                        .expect("standard layout reshapes"),
                };
                for d in 0..dirs {
                    let cell = &self.cells[l * dirs + d];
                    let mut g = keep.then(|| scratch.take3(t_len, b, 4 * h, false));
                    run_cell(
                        cell,
                        layer_in,
                        &mut out,
                        d,
                        d == 1,
                        &active,
                        g.as_mut(),
                        scratch,
                    );
                    gates.extend(g);
                }
            }
            if !keep {
                if let Some(prev) = outputs.pop() {
                    scratch.put3(prev);
                }
            }
            outputs.push(out);
        }
        GruTape {
            input,
            outputs,
            gates,
            active,
        }
    }

    /// Back-propagation through time.
    ///
    /// `tape` from [`Self::forward_train`]; `d_out`: gradient of the loss
    /// w.r.t. the top layer's output, `[T, B, D * H]` (values past a
    /// sequence's length are ignored). Adds the parameter gradients to
    /// `grad` and, when `input_grad`, returns the gradient w.r.t. the
    /// input, `[T, B, inputs]` (zero past each length).
    pub(crate) fn backward(
        &self,
        tape: &GruTape,
        d_out: &Array3<f32>,
        grad: &mut GruStack,
        input_grad: bool,
        scratch: &mut Scratch,
    ) -> Option<Array3<f32>> {
        let (t_len, b, _) = d_out.dim();
        let dirs = self.config.directions();
        let mut d_below: Option<Array3<f32>> = None;
        for l in (0..self.config.layers).rev() {
            let n_in = self.config.layer_inputs(l);
            let want = l > 0 || input_grad;
            let mut d_in = want.then(|| scratch.take2(t_len * b, n_in, true));
            {
                let d_top = d_below.as_ref().unwrap_or(d_out);
                let layer_in = if l == 0 {
                    tape.input.view()
                } else {
                    tape.outputs[l - 1]
                        .view()
                        .into_shape_with_order((t_len * b, n_in))
                        .expect("standard layout reshapes")
                };
                for d in 0..dirs {
                    let i = l * dirs + d;
                    backward_cell(
                        &self.cells[i],
                        layer_in,
                        &tape.outputs[l],
                        &tape.gates[i],
                        d_top,
                        d,
                        d == 1,
                        &tape.active,
                        &mut grad.cells[i],
                        d_in.as_mut(),
                        scratch,
                    );
                }
            }
            if let Some(old) = d_below.take() {
                scratch.put3(old);
            }
            let d_in = d_in?;
            d_below = Some(
                d_in.into_shape_with_order((t_len, b, n_in))
                    .expect("standard layout reshapes"),
            );
        }
        d_below
    }

    /// A zero state for streaming with [`Self::step`]. Fails with
    /// [`Error::Config`] for a bidirectional stack, which needs the whole
    /// sequence.
    pub fn zero_state(&self) -> Result<GruState> {
        if self.config.bidirectional {
            return Err(Error::config(
                "direction",
                "a bidirectional model cannot run frame by frame; train a unidirectional one \
                 (the default) for streaming",
            ));
        }
        let h = self.config.hidden;
        Ok(GruState {
            h: vec![vec![0.0; h]; self.config.layers],
            next: vec![0.0; h],
            xi: vec![0.0; 3 * h],
            gh: vec![0.0; 3 * h],
            cache: vec![0.0; 4 * h],
            w_i: self
                .cells
                .iter()
                .map(|c| GemvPacked::new(c.w_i.view()))
                .collect(),
            w_h: self
                .cells
                .iter()
                .map(|c| GemvPacked::new(c.w_h.view()))
                .collect(),
        })
    }

    /// One streaming step of a unidirectional stack: consumes one frame
    /// `[inputs]`, updates `state` and returns the top layer's new state
    /// `[H]`. Gives the same numbers as [`Self::forward`] on the whole
    /// sequence, frame after frame.
    ///
    /// Panics if `frame` has the wrong length or `state` was made for
    /// another stack.
    pub fn step<'s>(&self, state: &'s mut GruState, frame: &[f32]) -> &'s [f32] {
        assert_eq!(frame.len(), self.config.inputs, "GRU step: frame length");
        assert_eq!(state.h.len(), self.config.layers, "GRU step: state shape");
        for l in 0..self.config.layers {
            let cell = &self.cells[l];
            {
                let input: &[f32] = if l == 0 { frame } else { &state.h[l - 1] };
                gemv_packed(
                    input,
                    &state.w_i[l],
                    cell.b_i.as_slice().expect("contiguous"),
                    &mut state.xi,
                );
            }
            gemv_packed(
                &state.h[l],
                &state.w_h[l],
                cell.b_h.as_slice().expect("contiguous"),
                &mut state.gh,
            );
            gate_forward_row(
                &state.xi,
                &state.gh,
                &state.h[l],
                &mut state.next,
                &mut state.cache,
            );
            std::mem::swap(&mut state.h[l], &mut state.next);
        }
        &state.h[self.config.layers - 1]
    }
}

fn slice(a: &Array2<f32>) -> &[f32] {
    a.as_slice().expect("parameters are contiguous")
}

/// Sequences with `length > t` for each `t` in `0..t_len`; checks sorting.
fn active_counts(t_len: usize, lengths: &[usize]) -> Vec<usize> {
    assert!(
        lengths.windows(2).all(|w| w[0] >= w[1]),
        "GRU lengths must be sorted in non-increasing order"
    );
    assert!(
        lengths.iter().all(|&l| l <= t_len),
        "GRU length longer than the batch"
    );
    (0..t_len)
        .map(|t| lengths.iter().take_while(|&&l| l > t).count())
        .collect()
}

/// Copies `h_{t-1}` of the running rows of direction `d` into `hprev`
/// (`[B, H]`, first `na` rows): the output of the previous step in
/// processing order, or zeros at the first step.
fn gather_prev(
    out: &Array3<f32>,
    t: usize,
    reverse: bool,
    d: usize,
    na: usize,
    hprev: &mut Array2<f32>,
) {
    let h = hprev.ncols();
    let (t_len, _, _) = out.dim();
    let prev = if reverse {
        (t + 1 < t_len).then_some(t + 1)
    } else {
        t.checked_sub(1)
    };
    match prev {
        Some(tp) => {
            hprev
                .slice_mut(s![..na, ..])
                .assign(&out.slice(s![tp, ..na, d * h..(d + 1) * h]))
        }
        None => hprev.slice_mut(s![..na, ..]).fill(0.0),
    }
}

/// Time steps per block of the input projection (forward) and of the
/// weight- and input-gradient products (backward): the block's buffers,
/// `CHUNK * B` rows, stay in the L2 cache, and the products still have
/// `CHUNK * B` rows (or depth) to amortise their blocking. Default 32.
const CHUNK: usize = 32;

/// Blocks `[t_lo, t_hi)` of [`CHUNK`] time steps covering `0..t_len`, in
/// increasing time or, when `descending`, in decreasing time.
fn time_blocks(t_len: usize, descending: bool) -> impl Iterator<Item = (usize, usize)> {
    let n = t_len.div_ceil(CHUNK);
    (0..n).map(move |i| {
        let blk = if descending { n - 1 - i } else { i };
        (blk * CHUNK, ((blk + 1) * CHUNK).min(t_len))
    })
}

/// The time steps `t_lo..t_hi`, in decreasing order when `descending`.
fn block_steps(t_lo: usize, t_hi: usize, descending: bool) -> impl Iterator<Item = usize> {
    (0..t_hi - t_lo).map(move |i| if descending { t_hi - 1 - i } else { t_lo + i })
}

/// Runs one direction of one layer over the batch, writing its outputs
/// into columns `d*H..(d+1)*H` of `out` `[T, B, D*H]` (which arrives
/// zeroed, so padding stays zero). The input projection runs one block of
/// [`CHUNK`] time steps at a time, just before the recurrence reads it.
#[allow(clippy::too_many_arguments)]
fn run_cell(
    cell: &GruCell,
    layer_in: ArrayView2<f32>,
    out: &mut Array3<f32>,
    d: usize,
    reverse: bool,
    active: &[usize],
    mut gates: Option<&mut Array3<f32>>,
    pool: &mut Scratch,
) {
    let h = cell.hidden();
    let (t_len, b, width) = out.dim();
    let mut xi = pool.take2(CHUNK.min(t_len) * b, 3 * h, false);
    let mut hprev = pool.take2(b, h, false);
    let mut gh = pool.take2(b, 3 * h, false);
    let mut scratch = vec![0.0f32; 4 * h];
    let b_h = cell.b_h.as_slice().expect("contiguous");
    let mut packed_w_h: Option<Packed> = None;
    for (t_lo, t_hi) in time_blocks(t_len, reverse) {
        // x W_i + b_i for the block (padding rows too: never read).
        let rows = (t_hi - t_lo) * b;
        let mut xb = xi.slice_mut(s![..rows, ..]);
        xb.assign(&cell.b_i.broadcast((rows, 3 * h)).expect("bias broadcasts"));
        gemm(
            layer_in.slice(s![t_lo * b..t_hi * b, ..]),
            cell.w_i.view(),
            1.0,
            &mut xb,
        );
        let xs = xi.as_slice().expect("contiguous buffer");
        for t in block_steps(t_lo, t_hi, reverse) {
            let na = active[t];
            if na == 0 {
                continue;
            }
            gather_prev(out, t, reverse, d, na, &mut hprev);
            if na == 1 {
                let hp = hprev.as_slice().expect("contiguous buffer");
                let ghs = gh.as_slice_mut().expect("contiguous buffer");
                gemv(&hp[..h], slice(&cell.w_h), b_h, &mut ghs[..3 * h]);
            } else {
                let mut g = gh.slice_mut(s![..na, ..]);
                g.assign(&cell.b_h.broadcast((na, 3 * h)).expect("bias broadcasts"));
                let w_h = packed_w_h.get_or_insert_with(|| Packed::new(cell.w_h.view()));
                gemm_rows(
                    na,
                    hprev.as_slice().expect("contiguous buffer"),
                    h,
                    w_h,
                    gh.as_slice_mut().expect("contiguous buffer"),
                    3 * h,
                );
            }
            let hp = hprev.as_slice().expect("contiguous buffer");
            let ghs = gh.as_slice().expect("contiguous buffer");
            let out_t = out
                .index_axis_mut(Axis(0), t)
                .into_slice()
                .expect("standard layout");
            let mut gates_t = gates.as_mut().map(|g| {
                g.index_axis_mut(Axis(0), t)
                    .into_slice()
                    .expect("standard layout")
            });
            for row in 0..na {
                let base = ((t - t_lo) * b + row) * 3 * h;
                let cache: &mut [f32] = match gates_t.as_mut() {
                    Some(g) => &mut g[row * 4 * h..(row + 1) * 4 * h],
                    None => &mut scratch,
                };
                gate_forward_row(
                    &xs[base..base + 3 * h],
                    &ghs[row * 3 * h..(row + 1) * 3 * h],
                    &hp[row * h..(row + 1) * h],
                    &mut out_t[row * width + d * h..row * width + (d + 1) * h],
                    cache,
                );
            }
        }
    }
    pool.put2(xi);
    pool.put2(hprev);
    pool.put2(gh);
}

/// Back-propagation through one direction of one layer. Adds parameter
/// gradients to `grad` and the input gradient to `d_in` `[T * B, n_in]`
/// when given.
///
/// The recurrence runs backward over blocks of [`CHUNK`] time steps; after
/// each block its gate gradients go into the weight-gradient products
/// (`W_h += h_{t-1}^T dgh`, `W_i += x^T dxi`, depth `CHUNK * B`) and the
/// input-gradient product, so the per-step gradients never exist for the
/// whole sequence at once.
#[allow(clippy::too_many_arguments)]
fn backward_cell(
    cell: &GruCell,
    layer_in: ArrayView2<f32>,
    out: &Array3<f32>,
    gates: &Array3<f32>,
    d_out: &Array3<f32>,
    d: usize,
    reverse: bool,
    active: &[usize],
    grad: &mut GruCell,
    mut d_in: Option<&mut Array2<f32>>,
    pool: &mut Scratch,
) {
    let h = cell.hidden();
    let (t_len, b, width) = out.dim();
    let rows_max = CHUNK.min(t_len) * b;
    let mut dxi = pool.take2(rows_max, 3 * h, false);
    let mut dgh = pool.take2(rows_max, 3 * h, false);
    let mut hprev_blk = pool.take2(rows_max, h, false);
    let mut hprev = pool.take2(b, h, false);
    let mut carry = pool.take2(b, h, true);
    let mut dh = vec![0.0f32; h];
    // W_h^T `[3H, H]`, packed for the per-step products; W_i^T `[3H, n_in]`
    // row-major for the input-gradient product.
    let w_h_t = Packed::new(cell.w_h.t());
    let w_i_t = d_in
        .is_some()
        .then(|| cell.w_i.t().as_standard_layout().into_owned());
    // The reverse of the forward processing order.
    let descending = !reverse;
    for (t_lo, t_hi) in time_blocks(t_len, descending) {
        let rows = (t_hi - t_lo) * b;
        for t in block_steps(t_lo, t_hi, descending) {
            let na = active[t];
            let r0 = (t - t_lo) * b;
            // Rows of finished sequences take no part in the products.
            dxi.slice_mut(s![r0 + na..r0 + b, ..]).fill(0.0);
            dgh.slice_mut(s![r0 + na..r0 + b, ..]).fill(0.0);
            hprev_blk.slice_mut(s![r0 + na..r0 + b, ..]).fill(0.0);
            if na == 0 {
                continue;
            }
            gather_prev(out, t, reverse, d, na, &mut hprev);
            hprev_blk
                .slice_mut(s![r0..r0 + na, ..])
                .assign(&hprev.slice(s![..na, ..]));
            {
                let hp = hprev.as_slice().expect("contiguous buffer");
                let g_t = gates
                    .index_axis(Axis(0), t)
                    .to_slice()
                    .expect("standard layout");
                let do_t = d_out
                    .index_axis(Axis(0), t)
                    .to_slice()
                    .expect("standard layout");
                let dxs = dxi.as_slice_mut().expect("contiguous buffer");
                let dgs = dgh.as_slice_mut().expect("contiguous buffer");
                let cs = carry.as_slice_mut().expect("contiguous buffer");
                for row in 0..na {
                    let c = &mut cs[row * h..(row + 1) * h];
                    let o = &do_t[row * width + d * h..row * width + (d + 1) * h];
                    for j in 0..h {
                        dh[j] = c[j] + o[j];
                    }
                    let base = (r0 + row) * 3 * h;
                    gate_backward_row(
                        &dh,
                        &g_t[row * 4 * h..(row + 1) * 4 * h],
                        &hp[row * h..(row + 1) * h],
                        &mut dxs[base..base + 3 * h],
                        &mut dgs[base..base + 3 * h],
                        c,
                    );
                }
            }
            // carry (= dh ⊙ z so far) += dgh_t W_h^T
            gemm_rows(
                na,
                &dgh.as_slice().expect("contiguous buffer")[r0 * 3 * h..],
                3 * h,
                &w_h_t,
                carry.as_slice_mut().expect("contiguous buffer"),
                h,
            );
        }
        let dx = dxi.slice(s![..rows, ..]);
        let dg = dgh.slice(s![..rows, ..]);
        gemm(
            hprev_blk.slice(s![..rows, ..]).t(),
            dg,
            1.0,
            &mut grad.w_h.view_mut(),
        );
        gemm(
            layer_in.slice(s![t_lo * b..t_hi * b, ..]).t(),
            dx,
            1.0,
            &mut grad.w_i.view_mut(),
        );
        add_row_sums(dg, &mut grad.b_h);
        add_row_sums(dx, &mut grad.b_i);
        if let (Some(d_in), Some(w_i_t)) = (d_in.as_mut(), w_i_t.as_ref()) {
            gemm(
                dx,
                w_i_t.view(),
                1.0,
                &mut d_in.slice_mut(s![t_lo * b..t_hi * b, ..]),
            );
        }
    }
    for a in [dxi, dgh, hprev_blk, hprev, carry] {
        pool.put2(a);
    }
}

/// `acc += Σ_rows a`: `a` `[n, k]` row-major, `acc` `[k]`.
fn add_row_sums(a: ArrayView2<f32>, acc: &mut Array1<f32>) {
    let acc = acc.as_slice_mut().expect("parameters are contiguous");
    for row in a.outer_iter() {
        let row = row.to_slice().expect("row-major buffer");
        acc.iter_mut().zip(row).for_each(|(x, y)| *x += y);
    }
}

/// The gate arithmetic of one step of one sequence.
///
/// `xi = x W_i + b_i` `[3H]`, `gh = h_{t-1} W_h + b_h` `[3H]`, `hp =
/// h_{t-1}` `[H]`; writes `h_t` into `h_out` `[H]` and `[r, z, n, gh_n]`
/// into `cache` `[4H]`.
pub(crate) fn gate_forward_row(
    xi: &[f32],
    gh: &[f32],
    hp: &[f32],
    h_out: &mut [f32],
    cache: &mut [f32],
) {
    multiversion!(fn(xi: &[f32], gh: &[f32], hp: &[f32], h_out: &mut [f32], cache: &mut [f32]) {
        let h = hp.len();
        assert!(xi.len() == 3 * h && gh.len() == 3 * h && h_out.len() == h && cache.len() == 4 * h);
        let (xr, rest) = xi.split_at(h);
        let (xz, xn) = rest.split_at(h);
        let (gr, rest) = gh.split_at(h);
        let (gz, gn) = rest.split_at(h);
        let (cr, rest) = cache.split_at_mut(h);
        let (cz, rest) = rest.split_at_mut(h);
        let (cn, chn) = rest.split_at_mut(h);
        for j in 0..h {
            let r = kernels::sigmoid(xr[j] + gr[j]);
            let z = kernels::sigmoid(xz[j] + gz[j]);
            let n = kernels::tanh(xn[j] + r * gn[j]);
            cr[j] = r;
            cz[j] = z;
            cn[j] = n;
            chn[j] = gn[j];
            h_out[j] = n + z * (hp[j] - n);
        }
    });
}

/// The gate derivatives of one step of one sequence.
///
/// `dh = ∂L/∂h_t` `[H]`, `cache` `[4H]` from [`gate_forward_row`], `hp =
/// h_{t-1}` `[H]`. Writes `∂L/∂(x W_i + b_i)` into `dxi` `[3H]`,
/// `∂L/∂(h_{t-1} W_h + b_h)` into `dgh` `[3H]` and the direct part of
/// `∂L/∂h_{t-1}`, `dh ⊙ z`, into `dhp` `[H]`.
fn gate_backward_row(
    dh: &[f32],
    cache: &[f32],
    hp: &[f32],
    dxi: &mut [f32],
    dgh: &mut [f32],
    dhp: &mut [f32],
) {
    multiversion!(fn(dh: &[f32], cache: &[f32], hp: &[f32], dxi: &mut [f32], dgh: &mut [f32], dhp: &mut [f32]) {
        let h = hp.len();
        assert!(dh.len() == h && cache.len() == 4 * h && dxi.len() == 3 * h && dgh.len() == 3 * h && dhp.len() == h);
        let (cr, rest) = cache.split_at(h);
        let (cz, rest) = rest.split_at(h);
        let (cn, chn) = rest.split_at(h);
        let (xr, rest) = dxi.split_at_mut(h);
        let (xz, xn) = rest.split_at_mut(h);
        let (gr, rest) = dgh.split_at_mut(h);
        let (gz, gn) = rest.split_at_mut(h);
        for j in 0..h {
            let (r, z, n, hn) = (cr[j], cz[j], cn[j], chn[j]);
            let g = dh[j];
            // h = (1 - z) n + z hp
            let dn = g * (1.0 - z);
            let dz = g * (hp[j] - n);
            // n = tanh(a_n), a_n = xn + r hn
            let dan = dn * (1.0 - n * n);
            let dr = dan * hn;
            // z = σ(a_z), r = σ(a_r): σ' = σ (1 - σ)
            let daz = dz * z * (1.0 - z);
            let dar = dr * r * (1.0 - r);
            xr[j] = dar;
            xz[j] = daz;
            xn[j] = dan;
            gr[j] = dar;
            gz[j] = daz;
            gn[j] = dan * r;
            dhp[j] = g * z;
        }
    });
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;
    use rand::SeedableRng;

    fn stack(inputs: usize, hidden: usize, layers: usize, bi: bool, seed: u64) -> GruStack {
        let cfg = GruConfig {
            inputs,
            hidden,
            layers,
            bidirectional: bi,
        };
        GruStack::new(cfg, &mut ChaCha8Rng::seed_from_u64(seed)).unwrap()
    }

    fn random3(t: usize, b: usize, f: usize, seed: u64) -> Array3<f32> {
        let mut rng = ChaCha8Rng::seed_from_u64(seed);
        Array3::from_shape_fn((t, b, f), |_| rng.gen_range(-1.0..1.0))
    }

    /// A naive reference: one sequence, scalar loops in f64, written
    /// straight from the equations in the module docs.
    fn reference_forward(s: &GruStack, x: &Array2<f32>) -> Array2<f64> {
        let c = s.config;
        let h = c.hidden;
        let t_len = x.nrows();
        let mut input: Array2<f64> = x.mapv(|v| v as f64);
        for l in 0..c.layers {
            let mut out = Array2::<f64>::zeros((t_len, c.outputs()));
            for d in 0..c.directions() {
                let cell = &s.cells[l * c.directions() + d];
                let mut hs = vec![0.0f64; h];
                let order: Vec<usize> = if d == 1 {
                    (0..t_len).rev().collect()
                } else {
                    (0..t_len).collect()
                };
                for t in order {
                    let proj = |w: &Array2<f32>, b: &Array1<f32>, v: &[f64], col: usize| {
                        b[col] as f64 + (0..v.len()).map(|k| v[k] * w[[k, col]] as f64).sum::<f64>()
                    };
                    let xv: Vec<f64> = input.row(t).to_vec();
                    let sig = |a: f64| 1.0 / (1.0 + (-a).exp());
                    let mut new = vec![0.0; h];
                    for j in 0..h {
                        let r =
                            sig(proj(&cell.w_i, &cell.b_i, &xv, j)
                                + proj(&cell.w_h, &cell.b_h, &hs, j));
                        let z = sig(proj(&cell.w_i, &cell.b_i, &xv, h + j)
                            + proj(&cell.w_h, &cell.b_h, &hs, h + j));
                        let n = (proj(&cell.w_i, &cell.b_i, &xv, 2 * h + j)
                            + r * proj(&cell.w_h, &cell.b_h, &hs, 2 * h + j))
                        .tanh();
                        new[j] = (1.0 - z) * n + z * hs[j];
                    }
                    hs = new;
                    for j in 0..h {
                        out[[t, d * h + j]] = hs[j];
                    }
                }
            }
            input = out;
        }
        input
    }

    #[test]
    fn batched_forward_matches_naive_reference_with_padding() {
        for bi in [false, true] {
            let s = stack(3, 5, 2, bi, 1);
            let lengths = [6, 4, 4, 1];
            let x = random3(6, 4, 3, 2);
            let y = s.forward(x.view(), &lengths);
            for (b, &len) in lengths.iter().enumerate() {
                let xs = x.slice(s![..len, b, ..]).to_owned();
                let want = reference_forward(&s, &xs);
                for t in 0..6 {
                    for j in 0..s.config.outputs() {
                        let got = y[[t, b, j]] as f64;
                        let w = if t < len { want[[t, j]] } else { 0.0 };
                        assert_relative_eq!(got, w, epsilon = 2e-6);
                    }
                }
            }
        }
    }

    #[test]
    fn batch_one_and_step_match_batched() {
        let s = stack(4, 70, 2, false, 3);
        let x = random3(9, 1, 4, 4);
        let batched = s.forward(x.view(), &[9]);
        let one = s.forward_one(x.slice(s![.., 0, ..]));
        let x2 = random3(9, 2, 4, 4);
        let mut x2 = x2;
        x2.slice_mut(s![.., 0, ..]).assign(&x.slice(s![.., 0, ..]));
        let two = s.forward(x2.view(), &[9, 9]);
        let mut state = s.zero_state().unwrap();
        for t in 0..9 {
            let frame = x.slice(s![t, 0, ..]).to_vec();
            let o = s.step(&mut state, &frame).to_vec();
            for j in 0..70 {
                // GEMV (FMA) and GEMM round differently: a few ulps.
                assert_relative_eq!(o[j], batched[[t, 0, j]], epsilon = 1e-5);
                assert_relative_eq!(one[[t, j]], batched[[t, 0, j]], epsilon = 1e-5);
                assert_relative_eq!(two[[t, 0, j]], batched[[t, 0, j]], epsilon = 1e-5);
            }
        }
        assert!(stack(2, 3, 1, true, 0).zero_state().is_err());
    }

    /// Finite-difference check of every parameter and input gradient for
    /// the loss L = Σ_{t,b,j} c_{tbj} y_{tbj} with fixed random c, so
    /// ∂L/∂y = c. Central differences in f32 with step 1e-2 have
    /// truncation error O(step²) ≈ 1e-4 relative and rounding error about
    /// 1e-7 |L| / step; tolerance 1e-2 relative or 2e-3 absolute.
    fn check_gradients(bi: bool) {
        check_gradients_at(3, 4, bi);
    }

    fn check_gradients_at(inputs: usize, hidden: usize, bi: bool) {
        let s = stack(inputs, hidden, 2, bi, 11);
        let lengths = [5, 3, 2];
        let x = random3(5, 3, inputs, 12);
        let c = random3(5, 3, s.config.outputs(), 13);
        let loss = |s: &GruStack, x: &Array3<f32>| -> f64 {
            let y = s.forward(x.view(), &lengths);
            y.iter()
                .zip(c.iter())
                .map(|(a, b)| *a as f64 * *b as f64)
                .sum()
        };
        let mut pool = Scratch::default();
        // Twice through one pool: the second pass runs on recycled
        // buffers with stale contents and must give the same gradients.
        let mut grad = GruStack::zeros(s.config);
        let mut dx = Array3::zeros((0, 0, 0));
        for pass in 0..2 {
            let tape = s.forward_train(x.view(), &lengths, &mut pool);
            let mut g = GruStack::zeros(s.config);
            let d = s.backward(&tape, &c, &mut g, true, &mut pool).unwrap();
            tape.recycle(&mut pool);
            if pass == 1 {
                assert_eq!(g, grad, "recycled buffers changed the gradient");
                assert_eq!(d, dx, "recycled buffers changed the input gradient");
            }
            pool.put3(std::mem::replace(&mut dx, d));
            grad = g;
        }
        let eps = 1e-2f32;
        let check = |analytic: f32, numeric: f64, what: &str| {
            let tol = 2e-3 + 1e-2 * numeric.abs();
            assert!(
                (analytic as f64 - numeric).abs() < tol,
                "{what}: analytic {analytic}, numeric {numeric}"
            );
        };
        let n_params = s.params().len();
        for p in 0..n_params {
            let len = s.params()[p].len();
            for i in (0..len).step_by(3) {
                let mut plus = s.clone();
                plus.params_mut()[p][i] += eps;
                let mut minus = s.clone();
                minus.params_mut()[p][i] -= eps;
                let numeric = (loss(&plus, &x) - loss(&minus, &x)) / (2.0 * eps as f64);
                check(
                    grad.params()[p][i],
                    numeric,
                    &format!("param {p}[{i}] bi={bi}"),
                );
            }
        }
        for idx in 0..x.len() {
            let (t, b, f) = (idx / (3 * inputs), (idx / inputs) % 3, idx % inputs);
            let mut xp = x.clone();
            xp[[t, b, f]] += eps;
            let mut xm = x.clone();
            xm[[t, b, f]] -= eps;
            let numeric = (loss(&s, &xp) - loss(&s, &xm)) / (2.0 * eps as f64);
            // Padding frames do not influence the loss: numeric is 0 there.
            check(
                dx[[t, b, f]],
                numeric,
                &format!("input [{t},{b},{f}] bi={bi}"),
            );
            if t >= lengths[b] {
                assert_eq!(dx[[t, b, f]], 0.0);
            }
        }
    }

    #[test]
    fn gradients_unidirectional_with_masks() {
        check_gradients(false);
    }

    #[test]
    fn gradients_bidirectional_with_masks() {
        check_gradients(true);
    }

    /// Sizes where every product runs on the vector kernels (`3H = 48`,
    /// `n_in = 16` and `D·H = 32` are multiples of 16), not the fallback.
    #[test]
    fn gradients_on_the_vector_kernels() {
        check_gradients_at(16, 16, false);
        check_gradients_at(16, 16, true);
    }

    #[test]
    fn forward_one_matches_batched_bidirectional_over_blocks() {
        // 600 frames span three blocks of 256.
        let s = stack(4, 8, 2, true, 5);
        let x = random3(600, 1, 4, 6);
        let batched = s.forward(x.view(), &[600]);
        let one = s.forward_one(x.slice(s![.., 0, ..]));
        for t in 0..600 {
            for j in 0..16 {
                assert_relative_eq!(one[[t, j]], batched[[t, 0, j]], epsilon = 1e-5);
            }
        }
    }

    #[test]
    fn config_rejects_zero_sizes() {
        let cfg = GruConfig {
            inputs: 0,
            hidden: 4,
            layers: 1,
            bidirectional: false,
        };
        assert!(matches!(cfg.check(), Err(Error::Config { .. })));
    }
}
