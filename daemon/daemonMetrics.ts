import { type Counter, type Histogram, MetricsRegistry, exponentialBuckets } from './metrics.js';

/** Live values the gauges read at scrape time. */
export interface GaugeReaders {
  streams(): number;
  queuedFrames(): number;
  producerConnections(): number;
  subscriberConnections(): number;
  activeAlerts(): number;
  workers(): number;
  queuedBytes(): number;
}

/**
 * Every metric the daemon exports (names documented in docs/daemon.md). Labels only carry
 * closed sets of values (reasons, alert metrics), never stream names.
 */
export class DaemonMetrics {
  readonly registry = new MetricsRegistry();
  readonly framesReceived: Counter;
  readonly framesSolved: Counter;
  readonly framesRefused: Counter;
  readonly framesDropped: Counter;
  readonly resultsDelivered: Counter;
  readonly resultsMissed: Counter;
  readonly alertsRaised: Counter;
  readonly alertsCleared: Counter;
  readonly messagesRejected: Counter;
  readonly connectionsRefused: Counter;
  readonly connectionsClosed: Counter;
  readonly workersReplaced: Counter;
  readonly ingestPauses: Counter;
  readonly solveSeconds: Histogram;
  readonly latencySeconds: Histogram;

  constructor(read: GaugeReaders) {
    const r = this.registry;
    this.framesReceived = r.counter('sparsewire_frames_received_total', 'Frame messages received from producers.');
    this.framesSolved = r.counter('sparsewire_frames_solved_total', 'Frames solved and published.');
    this.framesRefused = r.counter('sparsewire_frames_refused_total', 'Frames refused on arrival (the producer got a refused message).', ['reason']);
    this.framesDropped = r.counter('sparsewire_frames_dropped_total', 'Accepted frames dropped without a result (subscribers got a missed notice).', ['reason']);
    this.resultsDelivered = r.counter('sparsewire_results_delivered_total', 'Result messages handed to subscriber sockets.');
    this.resultsMissed = r.counter('sparsewire_results_missed_total', 'Results a subscriber did not get because it fell behind (announced with a missed notice).', ['policy']);
    this.alertsRaised = r.counter('sparsewire_alerts_raised_total', 'Alerts raised.', ['metric']);
    this.alertsCleared = r.counter('sparsewire_alerts_cleared_total', 'Alerts cleared.', ['metric']);
    this.messagesRejected = r.counter('sparsewire_messages_rejected_total', 'Messages that could not be decoded or were invalid (answered with an error).', ['code']);
    this.connectionsRefused = r.counter('sparsewire_connections_refused_total', 'WebSocket connections refused at the handshake.', ['reason']);
    this.connectionsClosed = r.counter('sparsewire_connections_closed_total', 'Connections the daemon closed on its own (slow subscriber, dead peer).', ['endpoint', 'reason']);
    this.workersReplaced = r.counter('sparsewire_workers_replaced_total', 'Solver worker threads that died and were replaced.');
    this.ingestPauses = r.counter('sparsewire_ingest_pauses_total', 'Times reading from producers was paused because the queues held too many bytes.');
    this.solveSeconds = r.histogram('sparsewire_solve_seconds', 'Solver time per frame, in seconds.', exponentialBuckets(0.0005, 2, 14));
    this.latencySeconds = r.histogram('sparsewire_frame_latency_seconds', 'Time from receiving a frame to publishing its result, in seconds.', exponentialBuckets(0.0005, 2, 14));
    r.gauge('sparsewire_streams', 'Declared streams.', read.streams);
    r.gauge('sparsewire_queued_frames', 'Frames waiting in all stream queues.', read.queuedFrames);
    r.gauge('sparsewire_queued_bytes', 'Measurement bytes of the frames waiting in all stream queues.', read.queuedBytes);
    r.gauge('sparsewire_producer_connections', 'Open producer connections.', read.producerConnections);
    r.gauge('sparsewire_subscriber_connections', 'Open subscriber connections.', read.subscriberConnections);
    r.gauge('sparsewire_alerts_active', 'Alert rules currently raised.', read.activeAlerts);
    r.gauge('sparsewire_workers', 'Solver worker threads running.', read.workers);
  }

  render(): string {
    return this.registry.render();
  }
}
