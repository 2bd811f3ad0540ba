//! Telemetry ring: a fixed-capacity buffer of per-tick samples that counts what it drops.

use heapless::Deque;

/// A first-in first-out buffer of at most `N` samples (`N > 0`, checked at compile time by
/// `heapless`).
///
/// [`push`](Telemetry::push) never panics and never blocks: when the buffer is full the
/// **new** sample is dropped and counted, so what is kept is a gap-free run and the reader
/// learns exactly how many samples it missed ([`dropped`](Telemetry::dropped), a `u32` that
/// saturates at `u32::MAX`).
///
/// ```
/// use ctrl_core::telemetry::Telemetry;
///
/// let mut ring: Telemetry<u32, 2> = Telemetry::new();
/// assert!(ring.push(1));
/// assert!(ring.push(2));
/// assert!(!ring.push(3)); // full: dropped and counted
/// assert_eq!(ring.dropped(), 1);
/// assert_eq!(ring.pop(), Some(1));
/// let rest: Vec<u32> = ring.drain().collect();
/// assert_eq!(rest, [2]);
/// ```
pub struct Telemetry<T, const N: usize> {
    queue: Deque<T, N>,
    dropped: u32,
}

impl<T, const N: usize> Default for Telemetry<T, N> {
    fn default() -> Self {
        Telemetry::new()
    }
}

impl<T, const N: usize> Telemetry<T, N> {
    /// An empty ring (usable in a `static`).
    ///
    /// ```
    /// use ctrl_core::telemetry::Telemetry;
    /// let ring: Telemetry<u8, 16> = Telemetry::new();
    /// assert!(ring.is_empty());
    /// ```
    ///
    /// A zero capacity is refused at compile time:
    ///
    /// ```compile_fail
    /// use ctrl_core::telemetry::Telemetry;
    /// const R: Telemetry<u8, 0> = Telemetry::new();
    /// let _r = R;
    /// ```
    pub const fn new() -> Self {
        Telemetry {
            queue: Deque::new(),
            dropped: 0,
        }
    }

    /// Appends a sample; returns `false` (and counts a drop) if the ring is full.
    ///
    /// ```
    /// use ctrl_core::telemetry::Telemetry;
    /// let mut ring: Telemetry<i32, 1> = Telemetry::new();
    /// assert!(ring.push(7));
    /// assert!(!ring.push(8));
    /// ```
    #[inline]
    pub fn push(&mut self, sample: T) -> bool {
        match self.queue.push_back(sample) {
            Ok(()) => true,
            Err(_) => {
                self.dropped = self.dropped.saturating_add(1);
                false
            }
        }
    }

    /// Removes and returns the oldest sample.
    ///
    /// ```
    /// use ctrl_core::telemetry::Telemetry;
    /// let mut ring: Telemetry<i32, 4> = Telemetry::new();
    /// ring.push(1);
    /// assert_eq!(ring.pop(), Some(1));
    /// assert_eq!(ring.pop(), None);
    /// ```
    pub fn pop(&mut self) -> Option<T> {
        self.queue.pop_front()
    }

    /// Iterator that pops samples oldest first until the ring is empty (samples not taken
    /// stay in the ring).
    ///
    /// ```
    /// use ctrl_core::telemetry::Telemetry;
    /// let mut ring: Telemetry<i32, 4> = Telemetry::new();
    /// ring.push(1);
    /// ring.push(2);
    /// assert_eq!(ring.drain().sum::<i32>(), 3);
    /// assert!(ring.is_empty());
    /// ```
    pub fn drain(&mut self) -> Drain<'_, T, N> {
        Drain { ring: self }
    }

    /// Samples waiting.
    ///
    /// ```
    /// use ctrl_core::telemetry::Telemetry;
    /// let mut ring: Telemetry<i32, 4> = Telemetry::new();
    /// ring.push(1);
    /// assert_eq!(ring.len(), 1);
    /// ```
    pub const fn len(&self) -> usize {
        self.queue.len()
    }

    /// `true` if no sample is waiting.
    ///
    /// ```
    /// use ctrl_core::telemetry::Telemetry;
    /// assert!(Telemetry::<i32, 4>::new().is_empty());
    /// ```
    pub fn is_empty(&self) -> bool {
        self.queue.is_empty()
    }

    /// The capacity `N`.
    ///
    /// ```
    /// use ctrl_core::telemetry::Telemetry;
    /// assert_eq!(Telemetry::<i32, 4>::new().capacity(), 4);
    /// ```
    pub const fn capacity(&self) -> usize {
        N
    }

    /// Samples dropped because the ring was full, since creation or the last
    /// [`take_dropped`](Telemetry::take_dropped) (saturates at `u32::MAX`).
    ///
    /// ```
    /// use ctrl_core::telemetry::Telemetry;
    /// assert_eq!(Telemetry::<i32, 4>::new().dropped(), 0);
    /// ```
    pub const fn dropped(&self) -> u32 {
        self.dropped
    }

    /// Returns the drop count and resets it to zero.
    ///
    /// ```
    /// use ctrl_core::telemetry::Telemetry;
    /// let mut ring: Telemetry<i32, 1> = Telemetry::new();
    /// ring.push(1);
    /// ring.push(2);
    /// assert_eq!(ring.take_dropped(), 1);
    /// assert_eq!(ring.dropped(), 0);
    /// ```
    pub fn take_dropped(&mut self) -> u32 {
        core::mem::take(&mut self.dropped)
    }
}

/// Iterator returned by [`Telemetry::drain`].
///
/// ```
/// use ctrl_core::telemetry::Telemetry;
/// let mut ring: Telemetry<u8, 2> = Telemetry::new();
/// ring.push(9);
/// let mut it = ring.drain();
/// assert_eq!(it.next(), Some(9));
/// assert_eq!(it.next(), None);
/// ```
pub struct Drain<'a, T, const N: usize> {
    ring: &'a mut Telemetry<T, N>,
}

impl<T, const N: usize> Iterator for Drain<'_, T, N> {
    type Item = T;

    fn next(&mut self) -> Option<T> {
        self.ring.pop()
    }
}
