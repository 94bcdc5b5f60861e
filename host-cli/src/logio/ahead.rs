//! Reading ahead: a log's records read and decoded on a thread of their
//! own while the caller works on the ones before, so that a replay costs
//! the larger of decoding and replaying a record rather than their sum.
//! The reading thread may also do per-record work that does not depend on
//! the caller's state (the replay's check of the logged readings), which
//! takes it off the caller's path.

use std::sync::mpsc::{self, Receiver, SyncSender};
use std::thread::{self, JoinHandle};

use super::{LogReader, LogRecord};
use crate::error::{CliError, CliResult};

/// Records a batch holds: large enough that handing a batch over costs
/// little per record, small enough that the first arrive at once.
const BATCH: usize = 1024;
/// Batches on their way, besides the one being filled and the one being
/// read: memory is bounded (about 4 × 48 KiB), whatever the log's length.
const IN_FLIGHT: usize = 2;

/// A batch, last record first: the reader takes records with `pop`, which
/// keeps the batch's memory for the next one. Each record comes with what
/// the reading thread computed of it.
type Batch<T> = Vec<CliResult<(LogRecord, T)>>;

/// The records of a [`LogReader`] read on a thread of their own, in order,
/// each with `T`, what the reading thread computed of it;
/// [`ReadAhead::finish`] hands the reader back (its warnings, damage and
/// counts) once the records are used up.
pub struct ReadAhead<T = ()> {
    batches: Receiver<Batch<T>>,
    /// Emptied batches go back to the reading thread.
    spent: SyncSender<Batch<T>>,
    current: Batch<T>,
    thread: Option<JoinHandle<LogReader>>,
}

impl ReadAhead<()> {
    /// Start reading `reader` ahead.
    pub fn new(reader: LogReader) -> ReadAhead<()> {
        ReadAhead::with(reader, |_| ())
    }
}

impl<T: Send + 'static> ReadAhead<T> {
    /// Start reading `reader` ahead, the reading thread computing `each`
    /// of every record.
    pub fn with<F>(reader: LogReader, each: F) -> ReadAhead<T>
    where
        F: FnMut(&LogRecord) -> T + Send + 'static,
    {
        let (send, batches) = mpsc::sync_channel::<Batch<T>>(IN_FLIGHT);
        let (spent, recycled) = mpsc::sync_channel::<Batch<T>>(IN_FLIGHT + 2);
        let thread = thread::spawn(move || fill(reader, each, &send, &recycled));
        ReadAhead {
            batches,
            spent,
            current: Vec::new(),
            thread: Some(thread),
        }
    }

    /// Wait for the reading thread and hand the reader back. Call it once
    /// the records are used up: the reader then knows the whole log. (A
    /// caller that stops early may call it too: the thread stops at its
    /// next batch.)
    pub fn finish(mut self) -> CliResult<LogReader> {
        let thread = self.thread.take();
        // Stop the thread if it is still reading: it finds no one to send
        // its next batch to.
        drop(self);
        match thread.map(JoinHandle::join) {
            Some(Ok(reader)) => Ok(reader),
            _ => Err(CliError::Io("the log reading thread failed".into())),
        }
    }
}

/// The reading thread: batches of records until the log ends or no one
/// takes them.
fn fill<T, F: FnMut(&LogRecord) -> T>(
    mut reader: LogReader,
    mut each: F,
    send: &SyncSender<Batch<T>>,
    recycled: &Receiver<Batch<T>>,
) -> LogReader {
    loop {
        let mut batch = recycled
            .try_recv()
            .unwrap_or_else(|_| Vec::with_capacity(BATCH));
        batch.clear();
        let mut ended = false;
        while batch.len() < BATCH {
            match reader.next() {
                Some(item) => batch.push(item.map(|r| {
                    let t = each(&r);
                    (r, t)
                })),
                None => {
                    ended = true;
                    break;
                }
            }
        }
        batch.reverse();
        if !batch.is_empty() && send.send(batch).is_err() {
            break;
        }
        if ended {
            break;
        }
    }
    reader
}

impl<T> Iterator for ReadAhead<T> {
    type Item = CliResult<(LogRecord, T)>;

    #[inline]
    fn next(&mut self) -> Option<Self::Item> {
        if let Some(item) = self.current.pop() {
            return Some(item);
        }
        let next = self.batches.recv().ok()?;
        let spent = std::mem::replace(&mut self.current, next);
        // The emptied batch's memory goes back to be filled again (if the
        // thread has enough, it is dropped here).
        let _ = self.spent.try_send(spent);
        self.current.pop()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn reads_every_record_in_order_and_hands_the_reader_back() {
        let dir = tempfile::tempdir().expect("tempdir");
        let path = dir.path().join("log.csv");
        let mut text = String::from("t_ms,tx_dbm,rssi_dbm,noise_dbm\n");
        // Enough rows for several batches, one of them bad.
        let n = 3 * BATCH + 17;
        for i in 0..n {
            if i == BATCH + 3 {
                text.push_str("x,1,2,3\n");
            } else {
                text.push_str(&format!("{i},14,-90,\n"));
            }
        }
        std::fs::write(&path, text).expect("write");
        let direct: Vec<Result<u64, String>> = super::super::open(&path)
            .expect("open")
            .map(|r| r.map(|r| r.t_ms).map_err(|e| e.to_string()))
            .collect();
        let mut ahead = ReadAhead::new(super::super::open(&path).expect("open"));
        let got: Vec<Result<u64, String>> = (&mut ahead)
            .map(|r| r.map(|(r, ())| r.t_ms).map_err(|e| e.to_string()))
            .collect();
        assert_eq!(got, direct);
        assert_eq!(got.len(), n);
        assert!(got[BATCH + 3].is_err());
        let reader = ahead.finish().expect("reader back");
        assert_eq!(reader.records_read(), n as u64 - 1);
        assert!(reader.warnings().iter().any(|w| w.contains("noise_dbm")));
        // A caller that stops early gets the reader back too.
        let mut ahead = ReadAhead::new(super::super::open(&path).expect("open"));
        assert!(ahead.next().is_some());
        assert!(ahead.finish().is_ok());
    }
}
