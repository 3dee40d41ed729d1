// Network position feed: WebSocket feed with its live page, and an MQTT publisher, both read-only.
export { isLoopbackHost } from './access.js';
export {
  startFeedServer,
  type FeedClientInfo,
  type FeedServer,
  type FeedServerCounts,
  type FeedServerOptions,
  type FeedSource,
} from './feed-server.js';
export {
  FEED_SCHEMA,
  type FeedAlarmEvent,
  type FeedAxisState,
  type FeedEdgeInput,
  type FeedEdgeMessage,
  type FeedErrorCode,
  type FeedErrorMessage,
  type FeedGeometry,
  type FeedHelloMessage,
  type FeedReferenceCommand,
  type FeedReferencedMessage,
  type FeedState,
  type FeedStatusMessage,
  type FeedSubscribeMessage,
  type FeedTimeBase,
  type FeedUpdateMessage,
  type FeedValueUnit,
  type ParsedClientMessage,
  type ReferenceOutcome,
  type ReferenceRequest,
} from './messages.js';
export {
  createMqttPublisher,
  startMqttPublisher,
  type MqttAxisMessage,
  type MqttGeometryMessage,
  type MqttPublisher,
  type MqttPublisherEvent,
  type MqttPublisherHealth,
  type MqttPublisherOptions,
  type MqttStatusMessage,
} from './mqtt-publisher.js';
export { DEFAULT_MQTT_TOPIC_PREFIX, DEFAULT_MQTT_UPDATE_HZ, DEFAULT_MQTT_URL } from './mqtt-defaults.js';
export { type MqttConnectionOptions, type MqttLinkEvent, type MqttLinkHealth, type MqttTlsOptions } from './mqtt-link.js';
export {
  followEnvironmentTopic,
  parseEnvironmentMessage,
  type EnvironmentReading,
  type EnvironmentTopicEvent,
  type EnvironmentTopicOptions,
} from './environment-topic.js';
