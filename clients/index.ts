/** The sparsewire client library: producer and subscriber connections to a daemon. */
export { Producer, ProducerStream, type ProducerOptions, type FrameOptions, type ProducerEvents, type DisconnectInfo } from './producer.js';
export { Subscriber, decodeResult, type SubscriberOptions, type SubscriptionRequest, type Result, type SubscriberEvents } from './subscriber.js';
export { AccessRefusedError, endpointUrl, type ConnectionOptions } from './connection.js';
export { DaemonError, ConnectionLostError } from './requests.js';
export { DEFAULT_BACKOFF, type BackoffSettings } from './backoff.js';
export { pause } from './pause.js';
