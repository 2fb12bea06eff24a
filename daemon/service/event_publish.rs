//! Alarm event messages published from the durable alarm journal until the
//! broker acknowledges them.
//!
//! The ledger thread writes every alarm event, with its sequence number,
//! into the journal in the transaction of its batch, and then only says
//! "committed up to sequence N" on a watch channel. This task publishes the
//! journal's events after the store's publish cursor (`store::event_cursor`)
//! on `alarm_event_topic` with QoS 1, on a connection of its own
//! (`[mqtt] client_id` + `-events`, clean session, no last will), and moves
//! the cursor once the broker's PUBACKs cover an unbroken run of them. At
//! start and on every new connection it begins again after the cursor, so
//! an event message lost to a crash or a broker outage between commit and
//! publish is sent later, never lost; one the broker had already taken
//! before the crash may arrive twice, with the same `seq`, and a consumer
//! drops it by that number (README).
//!
//! Only this task publishes on its connection and the session is clean, so
//! the client's `Outgoing::Publish(pkid)` notices come in the order the
//! events were handed to it and nothing is retransmitted behind its back:
//! [`PublishTracker`] (pure) pairs each PUBACK with its event. A connection
//! that fails is dropped whole and a new client made.
//!
//! The cursor is written at most once a second (and at the end): a crash
//! costs at most a second of repeats, not an fsync per event.

use super::shutdown::ShutdownListener;
use crate::ingest::MqttSettings;
use crate::store::Store;
use rumqttc::{AsyncClient, Event, Outgoing, Packet, QoS};
use std::collections::{HashMap, VecDeque};
use std::path::PathBuf;
use std::time::Duration;
use tokio::sync::watch;

/// Events handed to the client and not yet acknowledged, at most.
const MAX_OUTSTANDING: usize = 500;

/// How long the end of a run waits for the broker's last PUBACKs.
const FINAL_WAIT: Duration = Duration::from_secs(2);

/// Pairs PUBACKs with the events sent on one connection and says how far
/// the unbroken run of acknowledged events reaches. Pure.
#[derive(Debug)]
pub struct PublishTracker {
    /// Every event up to this one is acknowledged (durable with the store).
    cursor: u64,
    /// The newest event handed to the client on this connection.
    last_sent: u64,
    /// Handed to the client, waiting for its packet id.
    queued: VecDeque<u64>,
    /// Packet id to event.
    inflight: HashMap<u16, u64>,
    /// Events of this connection in the order sent, with whether acked.
    order: VecDeque<(u64, bool)>,
}

impl PublishTracker {
    /// Starts after `cursor`, the store's publish cursor.
    pub fn new(cursor: u64) -> PublishTracker {
        PublishTracker {
            cursor,
            last_sent: cursor,
            queued: VecDeque::new(),
            inflight: HashMap::new(),
            order: VecDeque::new(),
        }
    }

    /// A new connection: everything not acknowledged is sent again, from
    /// the cursor on.
    pub fn connected(&mut self) {
        self.last_sent = self.cursor;
        self.queued.clear();
        self.inflight.clear();
        self.order.clear();
    }

    /// Every event up to this sequence number is acknowledged.
    pub fn cursor(&self) -> u64 {
        self.cursor
    }

    /// The journal is to be read after this sequence number.
    pub fn last_sent(&self) -> u64 {
        self.last_sent
    }

    /// Events sent and not yet acknowledged.
    pub fn outstanding(&self) -> usize {
        self.order.len()
    }

    /// Event `seq` was handed to the client.
    pub fn sent(&mut self, seq: u64) {
        self.last_sent = self.last_sent.max(seq);
        self.queued.push_back(seq);
        self.order.push_back((seq, false));
    }

    /// The client sent the next handed-over event as packet `pkid`.
    pub fn outgoing(&mut self, pkid: u16) {
        if let Some(seq) = self.queued.pop_front() {
            self.inflight.insert(pkid, seq);
        }
    }

    /// The broker acknowledged packet `pkid`: the new cursor if it moved.
    pub fn acked(&mut self, pkid: u16) -> Option<u64> {
        let seq = self.inflight.remove(&pkid)?;
        if let Some(e) = self.order.iter_mut().find(|(s, _)| *s == seq) {
            e.1 = true;
        }
        let before = self.cursor;
        while let Some(&(s, true)) = self.order.front() {
            self.cursor = self.cursor.max(s);
            self.order.pop_front();
        }
        (self.cursor != before).then_some(self.cursor)
    }
}

/// Run until `shutdown`; then one last pass: everything committed is
/// handed to the broker and its PUBACKs awaited for at most [`FINAL_WAIT`].
/// `committed` carries the newest sequence number the ledger committed.
pub async fn run(
    settings: MqttSettings,
    ledger_path: PathBuf,
    mut committed: watch::Receiver<u64>,
    mut shutdown: ShutdownListener,
) -> anyhow::Result<()> {
    let mut store = tokio::task::block_in_place(|| Store::attach(&ledger_path))
        .map_err(|e| anyhow::anyhow!("alarm event publisher cannot open the ledger: {e}"))?;
    let mut tracker = PublishTracker::new(tokio::task::block_in_place(|| store.published_seq())?);
    let mut saved = tracker.cursor();
    let topic = settings.alarm_event_topic();
    let mut delay = settings.reconnect_min_s;
    let mut committed_open = true;
    loop {
        let options = settings.event_options().map_err(|e| anyhow::anyhow!(e))?;
        let (client, mut eventloop) = AsyncClient::new(options, 4096);
        tracker.connected();
        let mut up = false;
        let mut save_tick = tokio::time::interval(Duration::from_secs(1));
        let ended = loop {
            tokio::select! {
                ev = eventloop.poll() => match ev {
                    Ok(Event::Incoming(Packet::ConnAck(_))) => {
                        up = true;
                        delay = settings.reconnect_min_s;
                        tracing::info!("alarm event publisher connected; publishing from sequence {}", tracker.cursor() + 1);
                        fill(&client, &mut store, &topic, &mut tracker);
                    }
                    Ok(Event::Outgoing(Outgoing::Publish(pkid))) => tracker.outgoing(pkid),
                    Ok(Event::Incoming(Packet::PubAck(a))) => {
                        tracker.acked(a.pkid);
                        fill(&client, &mut store, &topic, &mut tracker);
                    }
                    Ok(_) => {}
                    Err(e) => {
                        if up {
                            tracing::warn!("alarm event publisher: connection lost ({e}); events wait in the journal");
                        } else {
                            tracing::debug!("alarm event publisher: cannot connect ({e})");
                        }
                        break false;
                    }
                },
                r = committed.changed(), if committed_open => {
                    if r.is_err() {
                        committed_open = false;
                    } else if up {
                        fill(&client, &mut store, &topic, &mut tracker);
                    }
                }
                _ = save_tick.tick() => save(&mut store, &tracker, &mut saved),
                _ = shutdown.stopped() => break true,
            }
        };
        if ended {
            if up {
                // The ledger committed its last batch before shutdown.
                fill(&client, &mut store, &topic, &mut tracker);
                let _ = tokio::time::timeout(FINAL_WAIT, async {
                    while tracker.outstanding() > 0 {
                        match eventloop.poll().await {
                            Ok(Event::Outgoing(Outgoing::Publish(pkid))) => tracker.outgoing(pkid),
                            Ok(Event::Incoming(Packet::PubAck(a))) => {
                                tracker.acked(a.pkid);
                                fill(&client, &mut store, &topic, &mut tracker);
                            }
                            Ok(_) => {}
                            Err(_) => break,
                        }
                    }
                })
                .await;
                let _ = client.try_disconnect();
                let _ = tokio::time::timeout(Duration::from_millis(200), eventloop.poll()).await;
            }
            save(&mut store, &tracker, &mut saved);
            if tracker.outstanding() > 0 {
                tracing::warn!(
                    "alarm event publisher stopped with {} event message(s) not acknowledged by the broker; \
                     they are published again at the next start",
                    tracker.outstanding()
                );
            }
            return Ok(());
        }
        save(&mut store, &tracker, &mut saved);
        drop(client);
        tokio::select! {
            _ = tokio::time::sleep(Duration::from_secs_f64(delay.max(0.05))) => {}
            _ = shutdown.stopped() => {
                save(&mut store, &tracker, &mut saved);
                return Ok(());
            }
        }
        delay = (delay * 2.0).min(settings.reconnect_max_s.max(settings.reconnect_min_s));
    }
}

/// Hand the journal's next events to the client, up to [`MAX_OUTSTANDING`].
fn fill(client: &AsyncClient, store: &mut Store, topic: &str, tracker: &mut PublishTracker) {
    while tracker.outstanding() < MAX_OUTSTANDING {
        let room = MAX_OUTSTANDING - tracker.outstanding();
        let events = match tokio::task::block_in_place(|| store.journal_events_after(tracker.last_sent(), room)) {
            Ok(e) => e,
            Err(e) => {
                tracing::error!("alarm event publisher: {e}");
                return;
            }
        };
        if events.is_empty() {
            return;
        }
        for e in events {
            if client.try_publish(topic, QoS::AtLeastOnce, false, e.event).is_err() {
                // The client's queue is full: the rest at the next PUBACK.
                return;
            }
            tracker.sent(e.seq);
        }
    }
}

/// Write the cursor if it moved since the last write.
fn save(store: &mut Store, tracker: &PublishTracker, saved: &mut u64) {
    if tracker.cursor() == *saved {
        return;
    }
    match tokio::task::block_in_place(|| store.set_published_seq(tracker.cursor())) {
        Ok(()) => *saved = tracker.cursor(),
        Err(e) => tracing::error!("alarm event publisher: {e}"),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The cursor moves only over an unbroken run of acknowledged events,
    /// whatever order the PUBACKs come in; a new connection sends again
    /// everything after the cursor.
    #[test]
    fn the_cursor_covers_only_acknowledged_runs() {
        let mut t = PublishTracker::new(10);
        for seq in 11..=13 {
            t.sent(seq);
        }
        assert_eq!(t.last_sent(), 13);
        t.outgoing(1);
        t.outgoing(2);
        t.outgoing(3);
        assert_eq!(t.acked(2), None, "12 acknowledged, 11 not yet");
        assert_eq!(t.cursor(), 10);
        assert_eq!(t.acked(1), Some(12), "11 and 12 now");
        assert_eq!(t.acked(9), None, "an unknown packet id moves nothing");
        assert_eq!(t.outstanding(), 1);
        // The connection drops before 13 is acknowledged.
        t.connected();
        assert_eq!(t.last_sent(), 12, "13 is sent again");
        t.sent(13);
        t.outgoing(1);
        assert_eq!(t.acked(1), Some(13));
        assert_eq!(t.outstanding(), 0);
    }

    /// A PUBACK for a packet id reused on a new connection pairs with the
    /// event sent on that connection, not the old one.
    #[test]
    fn packet_ids_belong_to_their_connection() {
        let mut t = PublishTracker::new(0);
        t.sent(1);
        t.outgoing(7);
        t.connected();
        t.sent(1);
        t.sent(2);
        t.outgoing(1);
        t.outgoing(2);
        assert_eq!(t.acked(7), None, "packet 7 was of the old connection");
        assert_eq!(t.acked(2), None);
        assert_eq!(t.acked(1), Some(2));
    }
}
