// The MQTT defaults apart from the client code, so that the tool's help and option checks read them without loading
// the mqtt package (about 100 modules) when no broker is used.

/** Broker URL when none is given. */
export const DEFAULT_MQTT_URL = 'mqtt://127.0.0.1:1883';
/** Topic prefix when none is given. */
export const DEFAULT_MQTT_TOPIC_PREFIX = 'fringetally';
/** Updates per second per axis when no rate is given. */
export const DEFAULT_MQTT_UPDATE_HZ = 10;
