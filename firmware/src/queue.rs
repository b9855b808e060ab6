//! The sample path from the data-ready interrupt to the main loop.
//!
//! The interrupt reads a frame and pushes it into a bounded single-producer,
//! single-consumer queue (`heapless::spsc`); the main loop drains it into the
//! receiver. Shared state is guarded by `critical-section`, so the same code
//! runs on the board (interrupts masked) and on the host (a std mutex). When
//! the queue is full the frame is dropped and counted: overruns are reported in
//! the readouts, never silent.

use core::cell::RefCell;
use critical_section::Mutex;
use heapless::spsc::Queue;

/// A bounded frame queue with an overrun counter. `CAP` frames of `N` codes.
pub struct FrameQueue<const N: usize, const CAP: usize> {
    inner: Mutex<RefCell<(Queue<[i32; N], CAP>, u32)>>,
}

impl<const N: usize, const CAP: usize> FrameQueue<N, CAP> {
    /// Empty queue (usable in a `static`).
    pub const fn new() -> Self {
        Self { inner: Mutex::new(RefCell::new((Queue::new(), 0))) }
    }

    /// From the interrupt: enqueue a frame; a full queue drops it and counts an overrun.
    pub fn push(&self, frame: [i32; N]) -> bool {
        critical_section::with(|cs| {
            let mut g = self.inner.borrow_ref_mut(cs);
            match g.0.enqueue(frame) {
                Ok(()) => true,
                Err(_) => {
                    g.1 = g.1.saturating_add(1);
                    false
                }
            }
        })
    }

    /// From the main loop: the oldest frame.
    pub fn pop(&self) -> Option<[i32; N]> {
        critical_section::with(|cs| self.inner.borrow_ref_mut(cs).0.dequeue())
    }

    /// Overruns since the last call (and reset the count).
    pub fn take_overruns(&self) -> u32 {
        critical_section::with(|cs| core::mem::take(&mut self.inner.borrow_ref_mut(cs).1))
    }

    /// Frames waiting.
    pub fn len(&self) -> usize {
        critical_section::with(|cs| self.inner.borrow_ref(cs).0.len())
    }

    /// True when empty.
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }
}

impl<const N: usize, const CAP: usize> Default for FrameQueue<N, CAP> {
    fn default() -> Self {
        Self::new()
    }
}
