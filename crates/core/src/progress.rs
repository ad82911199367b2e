//! Progress and cancellation. Long work reports through a [`Progress`] observer; returning
//! [`Flow::Stop`] from `step` asks the work to stop as soon as it safely can.

/// Whether the work should go on.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Flow {
    Continue,
    Stop,
}

/// Receives progress reports. The default methods do nothing, so an observer implements only
/// what it needs.
pub trait Progress {
    /// `done` out of `total` units of the stage called `stage` are finished.
    fn step(&mut self, _stage: &str, _done: u64, _total: u64) -> Flow {
        Flow::Continue
    }
}

/// An observer that ignores everything and never stops the work.
pub struct Silent;

impl Progress for Silent {}

/// For tests: asks the work to stop once `done` reaches the number given.
#[cfg(test)]
pub(crate) struct StopAfter(pub u64);

#[cfg(test)]
impl Progress for StopAfter {
    fn step(&mut self, _: &str, done: u64, _: u64) -> Flow {
        if done >= self.0 {
            Flow::Stop
        } else {
            Flow::Continue
        }
    }
}
