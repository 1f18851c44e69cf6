//! The recurrent network and its training maths, CPU only: stacked GRU
//! layers (Cho et al. 2014) with hand-written back-propagation through
//! time, the factorised dot + blank output head, the CTC loss (Graves et
//! al. 2006) and the Adam optimiser (Kingma and Ba 2015).
//!
//! | file | what |
//! | --- | --- |
//! | `gru.rs` | GRU stack: batched forward with length masks, BPTT, streaming step |
//! | `head.rs` | 7 logits per frame → log-probabilities of 64 patterns + blank |
//! | `ctc.rs` | CTC loss and gradient, forward-backward in log space |
//! | `optim.rs` | Adam, gradient clipping, learning-rate schedule |
//! | `network.rs` | `Network`: GRU + head, loss and gradient over threads |
//! | `model.rs` | the model file: format tag, architecture, preprocessing, parameters |
//! | `kernels.rs` | fast exp/sigmoid/tanh, batch-1 matrix-vector kernel, few-row and blocked GEMM kernels |

mod ctc;
mod gru;
mod head;
pub(crate) mod kernels;
mod model;
mod network;
mod optim;

pub use ctc::{ctc_loss, CtcLoss};
pub use gru::{GruConfig, GruStack, GruState};
pub(crate) use head::pattern_log_probs_row;
pub use head::{dot_probs, pattern_log_probs, BLANK, N_CLASSES, N_LOGITS};
pub use model::{
    Architecture, FineTunedFrom, Model, SensorSummary, TrainingSummary, MODEL_FORMAT, MODEL_VERSION,
};
pub use network::{BatchLoss, Network, StreamState};
pub use optim::{clip_global_norm, global_norm, Adam, AdamConfig, LrSchedule};
