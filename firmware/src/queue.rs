//! The sample path from the data-ready interrupt to the main loop.
//!
//! A bounded single-producer, single-consumer queue (`heapless::spsc`) split
//! into its two ends: the interrupt owns the [`FrameProducer`], the main loop the
//! [`FrameConsumer`]; neither needs a lock (the queue's indices are atomics).
//! Frames the interrupt cannot use are counted in [`PathCounts`], two atomic
//! counters the main loop takes and resets: overruns (the queue was full, the
//! frame dropped: flagged in the readouts, never silent) and bad frames (CRC or
//! bus error, rejected by the driver: the supervisor's input).

use core::sync::atomic::{AtomicU32, Ordering};
use heapless::spsc::{Consumer, Producer, Queue};

/// Counts of frames that did not reach the main loop.
#[derive(Debug, Default)]
pub struct PathCounts {
    overruns: AtomicU32,
    bad: AtomicU32,
}

impl PathCounts {
    /// Zero counts (usable in a `static`).
    pub const fn new() -> Self {
        Self { overruns: AtomicU32::new(0), bad: AtomicU32::new(0) }
    }

    /// Count a frame dropped because the queue was full.
    pub fn overrun(&self) {
        self.overruns.fetch_add(1, Ordering::Relaxed);
    }

    /// Count a frame the driver rejected.
    pub fn bad_frame(&self) {
        self.bad.fetch_add(1, Ordering::Relaxed);
    }

    /// Overruns since the last call (and reset the count).
    pub fn take_overruns(&self) -> u32 {
        self.overruns.swap(0, Ordering::Relaxed)
    }

    /// Bad frames since the last call (and reset the count).
    pub fn take_bad_frames(&self) -> u32 {
        self.bad.swap(0, Ordering::Relaxed)
    }
}

/// A frame queue of `CAP − 1` frames of `N` codes (heapless keeps one slot free).
pub type FrameQueue<const N: usize, const CAP: usize> = Queue<[i32; N], CAP>;

/// The interrupt's end.
pub struct FrameProducer<'a, const N: usize> {
    tx: Producer<'a, [i32; N]>,
    counts: &'a PathCounts,
}

/// The main loop's end.
pub struct FrameConsumer<'a, const N: usize> {
    rx: Consumer<'a, [i32; N]>,
    counts: &'a PathCounts,
}

/// Split `queue` into the interrupt's and the main loop's ends, sharing `counts`.
pub fn split<'a, const N: usize, const CAP: usize>(
    queue: &'a mut FrameQueue<N, CAP>,
    counts: &'a PathCounts,
) -> (FrameProducer<'a, N>, FrameConsumer<'a, N>) {
    let (tx, rx) = queue.split();
    (FrameProducer { tx, counts }, FrameConsumer { rx, counts })
}

impl<const N: usize> FrameProducer<'_, N> {
    /// Enqueue a frame; a full queue drops it and counts an overrun.
    pub fn push(&mut self, frame: [i32; N]) -> bool {
        match self.tx.enqueue(frame) {
            Ok(()) => true,
            Err(_) => {
                self.counts.overrun();
                false
            }
        }
    }

    /// Count a frame the driver rejected.
    pub fn bad_frame(&mut self) {
        self.counts.bad_frame();
    }
}

impl<const N: usize> FrameConsumer<'_, N> {
    /// The oldest frame.
    pub fn pop(&mut self) -> Option<[i32; N]> {
        self.rx.dequeue()
    }

    /// Frames waiting.
    pub fn len(&self) -> usize {
        self.rx.len()
    }

    /// True when empty.
    pub fn is_empty(&self) -> bool {
        self.rx.is_empty()
    }

    /// The counters shared with the producer.
    pub fn counts(&self) -> &PathCounts {
        self.counts
    }
}
