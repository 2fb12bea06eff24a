//! One shutdown signal every task listens to, with a completion guard.
//!
//! [`Shutdown::listener`] hands a task a [`ShutdownListener`]: it waits on
//! [`ShutdownListener::stopped`] in its loop, and holding it is the task's
//! completion guard: the task reports done by dropping it (returning is
//! enough). [`Shutdown::stop_and_wait`] raises the signal and then waits,
//! bounded, until every listener handed out is gone, instead of sleeping a
//! fixed time and hoping.

use std::time::Duration;
use tokio::sync::{mpsc, watch};

/// The signal's owner (the main task).
#[derive(Debug)]
pub struct Shutdown {
    signal: watch::Sender<bool>,
    done_tx: Option<mpsc::Sender<()>>,
    done_rx: mpsc::Receiver<()>,
}

/// A task's end of the signal, and its completion guard.
#[derive(Debug, Clone)]
pub struct ShutdownListener {
    signal: watch::Receiver<bool>,
    _guard: mpsc::Sender<()>,
}

impl Default for Shutdown {
    fn default() -> Self {
        Shutdown::new()
    }
}

impl Shutdown {
    /// A signal not yet raised.
    pub fn new() -> Shutdown {
        let (signal, _) = watch::channel(false);
        let (done_tx, done_rx) = mpsc::channel(1);
        Shutdown { signal, done_tx: Some(done_tx), done_rx }
    }

    /// A listener for one task; the task holds it until it is done.
    pub fn listener(&self) -> ShutdownListener {
        ShutdownListener {
            signal: self.signal.subscribe(),
            _guard: self.done_tx.clone().expect("listeners are handed out before stop_and_wait"),
        }
    }

    /// Raise the signal and wait at most `limit` for every listener to be
    /// dropped. `true` if all were; `false` if some task was still running
    /// when the limit passed (the caller logs it and goes on).
    pub async fn stop_and_wait(mut self, limit: Duration) -> bool {
        self.signal.send_replace(true);
        self.done_tx = None;
        // `recv` answers `None` once every guard (sender) is dropped.
        tokio::time::timeout(limit, async { while self.done_rx.recv().await.is_some() {} }).await.is_ok()
    }
}

impl ShutdownListener {
    /// Completes once the signal is raised (at once if it already was).
    pub async fn stopped(&mut self) {
        let _ = self.signal.wait_for(|s| *s).await;
    }

    /// Whether the signal has been raised.
    pub fn is_stopped(&self) -> bool {
        *self.signal.borrow()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Listeners see the signal; stop_and_wait returns once every task
    /// dropped its listener, and reports a task that did not within the
    /// limit.
    #[tokio::test]
    async fn tasks_see_the_signal_and_report_done() {
        let s = Shutdown::new();
        let mut a = s.listener();
        let mut b = s.listener();
        assert!(!a.is_stopped());
        let ta = tokio::spawn(async move { a.stopped().await });
        let tb = tokio::spawn(async move {
            b.stopped().await;
            // Finishing work after the signal, then done.
            tokio::task::yield_now().await;
        });
        assert!(s.stop_and_wait(Duration::from_secs(10)).await, "both tasks reported done");
        ta.await.unwrap();
        tb.await.unwrap();

        let s = Shutdown::new();
        let stuck = s.listener();
        assert!(!s.stop_and_wait(Duration::from_millis(50)).await, "a task holding its guard is reported");
        assert!(stuck.is_stopped());
    }
}
