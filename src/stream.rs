//! Streaming reading: raw sensor frames in, final words out, with memory
//! that does not grow with the length of the stream.
//!
//! [`StreamReader`] composes, frame by frame, the same stages as the
//! offline path ([`crate::pipeline::read_recording`]): the model's
//! preprocessing through its incremental [`crate::prep::Resampler`]
//! (baseline and scale, resampling by position or time, decimation), one
//! [`Network::step`] of the unidirectional GRU per grid sample (Cho et al.
//! 2014; the state is carried between frames), the head's log-probabilities
//! over the 64 patterns and the blank, and the incremental CTC prefix beam
//! search of [`WordStream`] with the braille code's reader state and lexicon
//! rescoring of each committed word.
//!
//! A bidirectional model needs the whole recording before its first output
//! and is refused with [`Error::Config`].
//!
//! ```no_run
//! use tactread::braille::CodeTable;
//! use tactread::decode::{BeamParams, Decoder};
//! use tactread::net::Model;
//! use tactread::stream::StreamReader;
//! let model = Model::load("model.json".as_ref())?;
//! let en = CodeTable::builtin("en")?;
//! let decoder = Decoder::new(&en, BeamParams::default())?;
//! let mut reader = StreamReader::new(&model, &decoder, Default::default())?;
//! let mut words = Vec::new();
//! # let frames: Vec<(f64, Vec<f32>)> = Vec::new();
//! for (coord, values) in &frames {
//!     reader.push(*coord, values, &mut words)?;
//!     for w in words.drain(..) {
//!         println!("{}", w.text);
//!     }
//! }
//! reader.finish(&mut words)?;
//! # Ok::<(), tactread::Error>(())
//! ```

use crate::decode::{
    BrailleCode, CommitJob, Decoder, StreamParams, StreamWord, WordFinisher, WordStream,
};
use crate::net::{Model, Network, StreamState, N_CLASSES};
use crate::prep::{Grid, Resampler};
use crate::recording::RecordingStream;
use crate::{Error, Result};
use std::path::Path;

/// Frames read per chunk by [`read_recording_streamed`].
const CHUNK_FRAMES: usize = 1024;

/// Reads raw frames one at a time with a unidirectional model and a
/// decoder, committing words as soon as they are final.
pub struct StreamReader<'m, 'd, 'a, C: BrailleCode> {
    network: &'m Network,
    taxels: usize,
    grid: Grid,
    resampler: Resampler<'m>,
    state: StreamState,
    words: WordStream<'d, 'a, C>,
    samples: Vec<f32>,
    log_probs: [f32; N_CLASSES],
}

impl<'m, 'd, 'a, C: BrailleCode> std::fmt::Debug for StreamReader<'m, 'd, 'a, C> {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("StreamReader")
            .field("taxels", &self.taxels)
            .field("words", &self.words)
            .finish()
    }
}

impl<'m, 'd, 'a, C: BrailleCode> StreamReader<'m, 'd, 'a, C> {
    /// A reader for `model` (unidirectional) decoding with `decoder` and the
    /// commit settings `params`.
    pub fn new(
        model: &'m Model,
        decoder: &'d Decoder<'a, C>,
        params: StreamParams,
    ) -> Result<Self> {
        let network = &model.network;
        if network.config().directions() != 1 {
            return Err(Error::config(
                "model",
                "is bidirectional: it needs the whole recording before its first output and \
                 cannot stream; train a streaming model with `tactread train --direction uni`, \
                 or decode without --stream",
            ));
        }
        Ok(StreamReader {
            network,
            taxels: model.prep.taxels,
            grid: model.prep.grid,
            resampler: model.prep.resampler(),
            state: network.zero_state()?,
            words: WordStream::new(decoder, params)?,
            samples: Vec::new(),
            log_probs: [0.0; N_CLASSES],
        })
    }

    /// Taxels per raw frame the model expects.
    pub fn taxels(&self) -> usize {
        self.taxels
    }

    /// Whether the model resamples by position (frames then need a
    /// position, see [`Self::coordinate`]).
    pub fn needs_position(&self) -> bool {
        matches!(self.grid, Grid::Position { .. })
    }

    /// The coordinate the model's grid reads a frame at: its position in mm
    /// for a position grid, else its time in s. `None` when the grid needs
    /// a position and the frame has none.
    pub fn coordinate(&self, time_s: f64, position_mm: Option<f64>) -> Option<f64> {
        match self.grid {
            Grid::Position { .. } => position_mm,
            Grid::Time { .. } => Some(time_s),
        }
    }

    /// Push one raw frame `[taxels]` at coordinate `coord` (see
    /// [`Self::coordinate`]), appending the words it makes final to `out`.
    /// Returns the number of network frames it produced (0 or more: the
    /// resampling grid decides).
    pub fn push(&mut self, coord: f64, frame: &[f32], out: &mut Vec<StreamWord>) -> Result<usize> {
        self.feed(coord, frame, |words, lp| words.push(lp, out))
    }

    /// [`Self::push`] without the rescoring: the commits are queued as
    /// jobs for a [`WordFinisher`] (see [`Self::take_jobs`]), which
    /// [`stream_frames`] runs on a second thread so that a commit never
    /// holds up the next frame.
    pub fn step(&mut self, coord: f64, frame: &[f32]) -> Result<usize> {
        self.feed(coord, frame, |words, lp| words.step(lp))
    }

    /// One raw frame through the resampler and the network; `search` sees
    /// every network frame's log-probabilities `[65]`.
    fn feed(
        &mut self,
        coord: f64,
        frame: &[f32],
        mut search: impl FnMut(&mut WordStream<'d, 'a, C>, &[f32]) -> Result<()>,
    ) -> Result<usize> {
        if frame.len() != self.taxels {
            return Err(Error::Mismatch {
                what: "taxels per frame".into(),
                expected: self.taxels.to_string(),
                got: frame.len().to_string(),
                hint: "use a model trained for this sensor's taxel count".into(),
            });
        }
        self.samples.clear();
        let n = self.resampler.push(coord, frame, &mut self.samples);
        for sample in self.samples.chunks_exact(self.taxels) {
            let z = self.network.step(&mut self.state, sample)?;
            crate::net::pattern_log_probs_row(&z, &mut self.log_probs);
            search(&mut self.words, &self.log_probs)?;
        }
        Ok(n)
    }

    /// The commits [`Self::step`] made since the last call, in order.
    pub fn take_jobs(&mut self) -> std::vec::Drain<'_, CommitJob> {
        self.words.take_jobs()
    }

    /// End of the stream for [`Self::step`] users: the last jobs, in order.
    pub fn finish_jobs(self) -> Vec<CommitJob> {
        self.words.finish_jobs()
    }

    /// The running partial reading since the last committed word.
    pub fn partial(&self) -> String {
        self.words.partial()
    }

    /// Network frames produced so far.
    pub fn network_frames(&self) -> u64 {
        self.words.frames_seen()
    }

    /// Network frames held now (since the last committed space).
    pub fn frames_held(&self) -> usize {
        self.words.frames_held()
    }

    /// End of the stream: append the remaining words to `out`.
    pub fn finish(self, out: &mut Vec<StreamWord>) -> Result<()> {
        self.words.finish(out)
    }
}

/// Read `frames` (`(coordinate, [taxels])` pairs, see
/// [`StreamReader::coordinate`]) with the search on the calling thread and
/// the commits' rescoring on a second thread, which calls `on_word` with
/// every word as soon as it is final. `on_partial`, when given, gets the
/// running partial reading (on the calling thread) after every frame that
/// produced network frames. On an error in `frames`, the words committed
/// before it are still delivered, then the error is returned.
pub fn stream_frames<C, I, F>(
    model: &Model,
    decoder: &Decoder<'_, C>,
    params: StreamParams,
    frames: I,
    mut on_word: F,
    mut on_partial: Option<&mut dyn FnMut(String)>,
) -> Result<()>
where
    C: BrailleCode + Sync,
    for<'x> C::Reader<'x>: Send,
    I: Iterator<Item = Result<(f64, Vec<f32>)>>,
    F: FnMut(&StreamWord) -> Result<()> + Send,
{
    let mut reader = StreamReader::new(model, decoder, params)?;
    std::thread::scope(|scope| {
        let (tx, rx) = std::sync::mpsc::channel::<CommitJob>();
        let worker = scope.spawn(move || -> Result<()> {
            let mut finisher = WordFinisher::new(decoder);
            let mut words = Vec::new();
            for job in rx {
                finisher.run(job, &mut words);
                for w in words.drain(..) {
                    on_word(&w)?;
                }
            }
            Ok(())
        });
        let read = || -> Result<()> {
            for item in frames {
                let (coord, values) = item?;
                let n = reader.step(coord, &values)?;
                for job in reader.take_jobs() {
                    // A closed channel means the worker stopped on an error,
                    // which its join below reports.
                    if tx.send(job).is_err() {
                        return Ok(());
                    }
                }
                if n > 0 {
                    if let Some(f) = on_partial.as_mut() {
                        f(reader.partial());
                    }
                }
            }
            for job in reader.finish_jobs() {
                if tx.send(job).is_err() {
                    break;
                }
            }
            Ok(())
        };
        let result = read();
        drop(tx);
        let worked = worker
            .join()
            .unwrap_or_else(|_| Err(Error::config("stream", "the rescoring thread failed")));
        result.and(worked)
    })
}

/// Stream the recording at `path` (manifest, or frames file beside its
/// manifest) through [`stream_frames`] in chunks of bounded size. Memory
/// does not grow with the recording's length.
pub fn read_recording_streamed<C, F>(
    model: &Model,
    decoder: &Decoder<'_, C>,
    path: &Path,
    params: StreamParams,
    on_word: F,
    on_partial: Option<&mut dyn FnMut(String)>,
) -> Result<()>
where
    C: BrailleCode + Sync,
    for<'x> C::Reader<'x>: Send,
    F: FnMut(&StreamWord) -> Result<()> + Send,
{
    let mut stream = RecordingStream::open(path)?;
    let name = stream.manifest_path().display().to_string();
    model.check_taxels(stream.n_taxels(), &name)?;
    let by_position = matches!(model.prep.grid, Grid::Position { .. });
    if by_position && !stream.has_position() {
        return Err(no_position(&stream.frames_path().display().to_string()));
    }
    let mut chunk: Option<crate::recording::FrameChunk> = None;
    let mut i = 0;
    let frames = std::iter::from_fn(move || loop {
        if let Some(c) = &chunk {
            if i < c.time_s.len() {
                let coord = match (&c.position_mm, by_position) {
                    (Some(p), true) => p[i],
                    _ => c.time_s[i],
                };
                let values = c.frames.row(i).to_vec();
                i += 1;
                return Some(Ok((coord, values)));
            }
        }
        match stream.next_chunk(CHUNK_FRAMES) {
            Ok(Some(c)) => {
                chunk = Some(c);
                i = 0;
            }
            Ok(None) => return None,
            Err(e) => return Some(Err(e)),
        }
    });
    stream_frames(model, decoder, params, frames, on_word, on_partial)
}

/// The error for frames without the position a position-grid model needs.
pub(crate) fn no_position(name: &str) -> Error {
    Error::Mismatch {
        what: format!("position channel of {name}"),
        expected: "a `position_mm` column (the model resamples by position)".into(),
        got: "none".into(),
        hint: "record with the position encoder, or use a model trained on time-resampled \
               recordings"
            .into(),
    }
}
