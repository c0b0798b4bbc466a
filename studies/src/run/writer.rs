//! The run directory's writes, in order, on the calling thread or on a writer thread that
//! overlaps them with the next generation's evaluation.
//!
//! The run loop commits generation k (synced appends to evaluations.csv, history.csv and the
//! journal; now and then front.csv, summary.json and a snapshot) while generation k + 1 is
//! evaluated: the writes are the same bytes to the same files in the same order, one after
//! the other on one thread, and the next commit waits for the previous one
//! ([`Writer::flush`]), so at most one generation's commit is ever in flight. A kill loses the
//! generation under evaluation and at most the one being written; nothing committed (a
//! synced journal line) is lost, and the resume is the same as before.

use std::path::PathBuf;
use std::sync::mpsc::{sync_channel, Receiver, SyncSender};
use std::thread::JoinHandle;

use crate::error::{io_error, CliError};
use crate::fsio::{append_synced, write_atomic};

/// One write.
enum Op {
    /// Append and fsync.
    Append(PathBuf, Vec<u8>),
    /// Replace atomically.
    Replace(PathBuf, Vec<u8>),
}

enum Msg {
    Op(Op),
    /// Reply once every earlier write is done, with the first error since the last flush.
    Flush(SyncSender<Option<CliError>>),
}

fn perform(op: Op) -> Result<(), CliError> {
    match op {
        Op::Append(path, bytes) => {
            append_synced(&path, &bytes).map_err(|e| io_error("append to", &path, e))
        }
        Op::Replace(path, bytes) => {
            write_atomic(&path, &bytes).map_err(|e| io_error("write", &path, e))
        }
    }
}

/// Where the run's writes go: done at once, or queued to a writer thread.
pub(crate) struct Writer {
    queue: Option<(SyncSender<Msg>, JoinHandle<()>)>,
}

impl Writer {
    /// Writes done at once on the calling thread.
    pub(crate) fn direct() -> Writer {
        Writer { queue: None }
    }

    /// Writes done in order on a writer thread.
    pub(crate) fn background() -> Writer {
        let (tx, rx) = sync_channel::<Msg>(64);
        let handle = std::thread::spawn(move || serve(rx));
        Writer {
            queue: Some((tx, handle)),
        }
    }

    fn submit(&self, op: Op) -> Result<(), CliError> {
        match &self.queue {
            None => perform(op),
            Some((tx, _)) => tx
                .send(Msg::Op(op))
                .map_err(|_| CliError::Runtime("the writer thread has stopped".into())),
        }
    }

    /// Append `bytes` to `path` and fsync it.
    pub(crate) fn append(&self, path: PathBuf, bytes: Vec<u8>) -> Result<(), CliError> {
        self.submit(Op::Append(path, bytes))
    }

    /// Replace `path` atomically with `bytes`.
    pub(crate) fn replace(&self, path: PathBuf, bytes: Vec<u8>) -> Result<(), CliError> {
        self.submit(Op::Replace(path, bytes))
    }

    /// Wait until every write so far is done; the first error among them, if any.
    pub(crate) fn flush(&self) -> Result<(), CliError> {
        let Some((tx, _)) = &self.queue else {
            return Ok(());
        };
        let (reply, done) = sync_channel(1);
        let stopped = || CliError::Runtime("the writer thread has stopped".into());
        tx.send(Msg::Flush(reply)).map_err(|_| stopped())?;
        match done.recv().map_err(|_| stopped())? {
            None => Ok(()),
            Some(e) => Err(e),
        }
    }

    /// Flush, stop the writer thread and write at once from now on.
    pub(crate) fn finish(&mut self) -> Result<(), CliError> {
        let flushed = self.flush();
        if let Some((tx, handle)) = self.queue.take() {
            drop(tx);
            let _ = handle.join();
        }
        flushed
    }
}

impl Drop for Writer {
    fn drop(&mut self) {
        let _ = self.finish();
    }
}

fn serve(rx: Receiver<Msg>) {
    let mut failed: Option<CliError> = None;
    for msg in rx {
        match msg {
            // After a failure the later writes are skipped: they would follow a gap.
            Msg::Op(op) if failed.is_none() => failed = perform(op).err(),
            Msg::Op(_) => {}
            Msg::Flush(reply) => {
                let _ = reply.send(failed.take());
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn background_writes_land_in_order_and_errors_come_back_at_the_flush() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("a.csv");
        let mut w = Writer::background();
        for k in 0..100 {
            w.append(p.clone(), format!("{k}\n").into_bytes()).unwrap();
        }
        w.replace(dir.path().join("b.json"), b"{}".to_vec())
            .unwrap();
        w.flush().unwrap();
        let want: String = (0..100).map(|k| format!("{k}\n")).collect();
        assert_eq!(std::fs::read_to_string(&p).unwrap(), want);
        w.append(dir.path().join("no/such/dir/c"), b"x".to_vec())
            .unwrap();
        assert!(w.flush().is_err());
        w.finish().unwrap();
    }
}
