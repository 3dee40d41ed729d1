// Network position feed: WebSocket feed with its live page, and an MQTT publisher, both read-only.
export * from './access.js';
export * from './feed-server.js';
export * from './messages.js';
export * from './mqtt-publisher.js';
