// The WebSocket position feed and its live page, over one HTTP server. Read-only by default: the only client
// message is a subscribe that picks the client's own update rate. With `onReference`, a re-reference command
// that carries the token reaches the measurement; nothing else does.
// Every client's cost is bounded: its output queue, its message rate, how long it may stay without
// subscribing, and how long it may stay silent (ping/pong); see docs/feed.md, "Limits".

import { randomBytes } from 'node:crypto';
import { createServer, type IncomingMessage, type ServerResponse } from 'node:http';
import { performance } from 'node:perf_hooks';
import type { Duplex } from 'node:stream';
import type { Observable, Subscription } from 'rxjs';
import { WebSocket, WebSocketServer } from 'ws';
import { createSignalMonitor, integerInRange, OptionError, positiveFinite } from '../../core/index.js';

/** The pipeline's own default threshold, asked of the monitor (stated there once; the embedded bundle has no room for a constant). */
const PIPELINE_LOW_SIGNAL_LEVEL = createSignalMonitor().options.lowSignalLevel;
import { createUpdateGeometry, type Axes, type AxisBlockSummary, type AxisGeometryStreamOptions, type UpdateGeometry } from '../../stream/index.js';
import { hostOfHeader, isLoopbackHost, normaliseAddress, tokenMatches } from './access.js';
import {
  FEED_SCHEMA,
  feedEdgeMessage,
  feedTimeBase,
  feedUpdateMessage,
  type FeedEdgeInput,
  parseClientMessage,
  referenceCommandOf,
  runReferenceCommand,
  type FeedErrorMessage,
  type ReferenceOutcome,
  type ReferenceRequest,
  type FeedHelloMessage,
  type FeedState,
  type FeedStatusMessage,
} from './messages.js';
import { feedPage } from './page.js';

/** What the feed serves: the axes (from `createAxes`) and their sample rate, for the time base of each update. */
export interface FeedSource {
  readonly axes: Axes;
  /** Sample rate of the axes' input, Hz. */
  readonly rateHz: number;
  /** Beams of parallel axes: each update then carries `geometry` (yaw, pitch, point of interest; see docs/analysis.md). */
  readonly geometry?: AxisGeometryStreamOptions;
  /** The axes' low-signal threshold (`lowSignalLevel` of their pipelines), shown on the page. Default 0.3, the pipeline's default. */
  readonly lowSignalLevel?: number;
  /**
   * Positions at the edges of digital inputs (e.g. `live.readings$.pipe(latchEdges())`): each goes to every
   * subscribed client as an `edge` message (WebSocket) or on `<prefix>/edge` (MQTT), as it comes.
   */
  readonly edges$?: Observable<FeedEdgeInput>;
  /** Detector outputs of each axis (2, 3 or 4), reported in `status` messages. Default: not reported (null). */
  readonly detectorOutputs?: readonly number[];
}

export interface FeedServerOptions {
  /**
   * What to serve. Absent: the server listens at once with state `waiting` and serves from `attach(source)`,
   * so that clients can connect before the measurement has started.
   */
  readonly source?: FeedSource;
  /** Address to bind. Default `127.0.0.1`. Anything but loopback requires `token`. */
  readonly host?: string;
  /** TCP port; 0 picks a free one. Default 0. */
  readonly port?: number;
  /**
   * Shared secret clients present (`?token=` on the page and feed URLs, or `Authorization: Bearer`).
   * At least 16 characters. Required beyond loopback and behind a proxy; optional on loopback.
   */
  readonly token?: string;
  /** Extra browser origins allowed to open the feed, e.g. `https://hmi.example`. Default none (same origin only). */
  readonly allowedOrigins?: readonly string[];
  /**
   * Addresses of reverse proxies in front of the server (e.g. `127.0.0.1` for one on this machine). A request
   * from one of them may carry the public host name in `Host`, and its page's origin may be `https://<Host>`.
   * Requires `token`. Default none.
   */
  readonly trustedProxies?: readonly string[];
  /** Update rate before a client asks, and the most a client may ask for, in Hz. Defaults 10 and 100. */
  readonly defaultUpdateHz?: number;
  readonly maxUpdateHz?: number;
  /** Largest client message in bytes; larger ones close the connection (code 1009). Default 1024; 64..65536. */
  readonly maxMessageBytes?: number;
  /**
   * Output bytes a connection may have queued and unsent. Updates wait while more is queued; a reply that
   * would go beyond it closes the connection (1008). Default 262144; 1024..2^30.
   */
  readonly maxBufferedBytes?: number;
  /** Most simultaneous feed connections (further upgrades get HTTP 503). Default 32; 1..1024. */
  readonly maxClients?: number;
  /** Most simultaneous connections from one address (further upgrades get HTTP 429). Default 16; 1..1024. */
  readonly maxClientsPerAddress?: number;
  /** Client messages per second on average, and in one burst (a token bucket); beyond, the connection is closed (1008). Defaults 10 and 20. */
  readonly maxMessagesPerS?: number;
  readonly messageBurst?: number;
  /** A connection that has not subscribed this long after opening is closed (1008), ms. Default 10000; 50..600000. */
  readonly subscribeTimeoutMs?: number;
  /**
   * Heartbeat: every this many ms each connection is pinged; one that answered no ping since the previous
   * heartbeat is dropped as dead. Default 15000; 50..600000.
   */
  readonly pingIntervalMs?: number;
  /**
   * Takes re-reference commands (`{"type":"reference","token",…}`, docs/feed.md): called for each one whose token
   * matches `token` and whose fields are valid; its outcome is the reply. Without `token` every command is refused
   * (even on loopback). Absent: the feed is read-only and refuses commands as it refuses anything but subscribe.
   */
  readonly onReference?: (request: ReferenceRequest) => ReferenceOutcome;
  /** Called when the source fails; default: a process warning. Clients get a `source-error` message. */
  readonly onSourceError?: (error: unknown) => void;
}

/** One connected client, for monitoring. */
export interface FeedClientInfo {
  readonly remoteAddress: string;
  /** Sequence number of the last update sent (0 before the first). */
  readonly seq: number;
  /** Bytes queued on its socket; stays near `maxBufferedBytes` at most, however slow the client. */
  readonly bufferedBytes: number;
  /** Its update rate, or null before it subscribes. */
  readonly updateHz: number | null;
}

/** Connections refused or closed by the server's limits since it started. */
export interface FeedServerCounts {
  /** Upgrades refused: over `maxClients` (503) or `maxClientsPerAddress` (429). */
  readonly refusedFull: number;
  readonly refusedPerAddress: number;
  /** Closed with 1008: no subscribe in time, too many messages, output not read. */
  readonly closedIdle: number;
  readonly closedRate: number;
  readonly closedOutput: number;
  /** Dropped after answering no ping for a heartbeat interval. */
  readonly closedDead: number;
  /** Times an update came due for a client that had not read the previous one (its next update then covers the span). */
  readonly updatesMerged: number;
}

export interface FeedServer {
  /** The page: `http://host:port/` (plus `?token=` when a token is set). */
  readonly pageUrl: string;
  /** The feed: `ws://host:port/feed` (plus `?token=`). */
  readonly feedUrl: string;
  /** The page and feed URLs with `?token=<token>` in place of the token: for logs and terminals, never the secret. */
  readonly pageUrlForDisplay: string;
  readonly feedUrlForDisplay: string;
  readonly host: string;
  readonly port: number;
  readonly state: FeedState;
  readonly clientCount: number;
  readonly clients: readonly FeedClientInfo[];
  readonly counts: FeedServerCounts;
  /** Starts serving `source` (once; the server was started without one). Clients already subscribed get updates from now on. */
  attach(source: FeedSource): void;
  /** Stops accepting, closes every client (code 1001) and the pipelines' keep-alive. */
  close(): Promise<void>;
}

interface Client {
  readonly socket: WebSocket;
  readonly remoteAddress: string;
  seq: number;
  updateHz: number | null;
  trace: boolean;
  subscription: Subscription | null;
  /** When the last update was handed to the socket (performance.now), and whether its pong is still awaited. */
  lastSentMs: number;
  awaitingAck: boolean;
  /** Answered a ping (or an update's ping) since the last heartbeat. */
  alive: boolean;
  /** Token bucket of client messages. */
  messageTokens: number;
  messageTokensAtMs: number;
  idleTimer: NodeJS.Timeout | null;
  /** Ticks at which an update was due but held back. */
  heldBack: boolean;
  closing: boolean;
}

const FEED_PATH = '/feed';
/** Close code for every limit a client broke (RFC 6455 §7.4.1: policy violation); the reason names the limit. */
const POLICY = 1008;
/** A client closed for a limit gets this long for the closing handshake before its socket is cut, ms. */
const CLOSE_GRACE_MS = 1000;
/** Pong payload that marks the acknowledgement of an update (heartbeats carry another). */
const UPDATE_ACK = Buffer.from('u');
const HEARTBEAT = Buffer.from('h');

export async function startFeedServer(options: FeedServerOptions): Promise<FeedServer> {
  const host = options.host ?? '127.0.0.1';
  if (typeof host !== 'string' || host === '') throw new OptionError('host', 'a host name or address', host);
  const loopback = isLoopbackHost(host);
  const token = options.token;
  if (token !== undefined && (typeof token !== 'string' || token.length < 16)) {
    throw new OptionError('token', 'a string of at least 16 characters', token === undefined ? token : '(hidden)');
  }
  if (!loopback && token === undefined) {
    throw new OptionError('token', `set when host is not loopback (host ${host} is reachable from the network)`, token);
  }
  const trustedProxies = new Set((options.trustedProxies ?? []).map((address) => normaliseAddress(address)));
  if (trustedProxies.size > 0 && token === undefined) {
    throw new OptionError('token', 'set when trustedProxies are given (a reverse proxy makes the feed reachable from the network)', token);
  }
  const port = integerInRange('port', options.port ?? 0, 0, 65535);
  const maxUpdateHz = positiveFinite('maxUpdateHz', options.maxUpdateHz ?? 100);
  if (maxUpdateHz > 1000) throw new OptionError('maxUpdateHz', 'a positive finite number up to 1000', maxUpdateHz);
  const defaultUpdateHz = positiveFinite('defaultUpdateHz', options.defaultUpdateHz ?? Math.min(10, maxUpdateHz));
  if (defaultUpdateHz > maxUpdateHz) throw new OptionError('defaultUpdateHz', `at most maxUpdateHz = ${maxUpdateHz}`, defaultUpdateHz);
  const maxMessageBytes = integerInRange('maxMessageBytes', options.maxMessageBytes ?? 1024, 64, 65536);
  const maxBufferedBytes = integerInRange('maxBufferedBytes', options.maxBufferedBytes ?? 262144, 1024, 2 ** 30);
  const maxClients = integerInRange('maxClients', options.maxClients ?? 32, 1, 1024);
  const maxClientsPerAddress = integerInRange('maxClientsPerAddress', options.maxClientsPerAddress ?? 16, 1, 1024);
  const maxMessagesPerS = positiveFinite('maxMessagesPerS', options.maxMessagesPerS ?? 10);
  const messageBurst = integerInRange('messageBurst', options.messageBurst ?? 20, 1, 10_000);
  const subscribeTimeoutMs = integerInRange('subscribeTimeoutMs', options.subscribeTimeoutMs ?? 10_000, 50, 600_000);
  const pingIntervalMs = integerInRange('pingIntervalMs', options.pingIntervalMs ?? 15_000, 50, 600_000);
  const allowedOrigins = new Set((options.allowedOrigins ?? []).map((origin) => origin.toLowerCase()));
  for (const origin of allowedOrigins) {
    if (!/^https?:\/\/[^/\s]+$/.test(origin)) throw new OptionError('allowedOrigins', 'origins such as https://hmi.example (scheme and host, no path)', origin);
  }
  const onReference = options.onReference;
  if (onReference !== undefined && typeof onReference !== 'function') throw new OptionError('onReference', 'a function', typeof onReference);
  const onSourceError = options.onSourceError ?? ((error: unknown) => process.emitWarning(`feed source failed: ${String(error)}`));

  const clients = new Set<Client>();
  const perAddress = new Map<string, number>();
  const counts = { refusedFull: 0, refusedPerAddress: 0, closedIdle: 0, closedRate: 0, closedOutput: 0, closedDead: 0, updatesMerged: 0 };
  let source: FeedSource | null = null;
  let geometry: UpdateGeometry | null = null;
  let state: FeedState = 'waiting';
  let sourceError: FeedErrorMessage | null = null;
  let keepAlive: Subscription | null = null;
  let edgeSubscription: Subscription | null = null;
  // The source's latest sample, for the time base of status messages.
  let latestSampleIndex = -1;

  /** Why a request may not proceed, or null. Loopback: Host must be loopback too (no DNS rebinding) unless it came through a declared proxy. */
  function refusal(request: IncomingMessage, url: URL): { status: number; text: string } | null {
    const hostHeader = request.headers.host;
    if (hostHeader === undefined) return { status: 400, text: 'missing Host header' };
    const proxied = trustedProxies.has(normaliseAddress(request.socket.remoteAddress ?? ''));
    if (loopback && !proxied && !isLoopbackHost(hostOfHeader(hostHeader))) {
      return { status: 403, text: `host ${hostOfHeader(hostHeader)} refused: this feed serves loopback only` };
    }
    const origin = request.headers.origin?.toLowerCase();
    if (origin !== undefined) {
      const own = hostHeader.toLowerCase();
      const same = origin === `http://${own}` || (proxied && origin === `https://${own}`);
      if (!same && !allowedOrigins.has(origin)) return { status: 403, text: `origin ${request.headers.origin} not allowed` };
    }
    if (token !== undefined) {
      const bearer = request.headers.authorization;
      const presented = url.searchParams.get('token') ?? (bearer?.startsWith('Bearer ') ? bearer.slice(7) : null);
      if (!tokenMatches(presented, token)) return { status: 401, text: 'wrong or missing token' };
    }
    return null;
  }

  function serveHttp(request: IncomingMessage, response: ServerResponse): void {
    const url = new URL(request.url ?? '/', 'http://feed.invalid');
    const refused = refusal(request, url);
    if (refused) return plain(response, refused.status, refused.text);
    if (request.method !== 'GET' && request.method !== 'HEAD') return plain(response, 405, 'read-only: GET only');
    if (url.pathname !== '/') return plain(response, 404, 'not found: the page is at / and the feed at /feed');
    const nonce = randomBytes(16).toString('base64');
    const body = feedPage(nonce);
    response.writeHead(200, {
      'Content-Type': 'text/html; charset=utf-8',
      'Content-Length': Buffer.byteLength(body),
      'Cache-Control': 'no-store',
      'Content-Security-Policy': `default-src 'none'; script-src 'nonce-${nonce}'; style-src 'nonce-${nonce}'; connect-src 'self'; img-src 'self' data:; base-uri 'none'; form-action 'none'; frame-ancestors 'none'`,
      'X-Content-Type-Options': 'nosniff',
      'Referrer-Policy': 'no-referrer',
    });
    response.end(request.method === 'HEAD' ? undefined : body);
  }

  const wss = new WebSocketServer({ noServer: true, maxPayload: maxMessageBytes, perMessageDeflate: false });
  const REASONS: Record<number, string> = { 400: 'Bad Request', 401: 'Unauthorized', 403: 'Forbidden', 404: 'Not Found', 429: 'Too Many Requests', 503: 'Service Unavailable' };

  function upgrade(request: IncomingMessage, socket: Duplex, head: Buffer): void {
    socket.on('error', () => socket.destroy());
    const url = new URL(request.url ?? '/', 'http://feed.invalid');
    const address = normaliseAddress(request.socket.remoteAddress ?? '');
    let refused = url.pathname !== FEED_PATH ? { status: 404, text: `no feed at ${url.pathname}: use ${FEED_PATH}` } : refusal(request, url);
    if (refused === null && clients.size >= maxClients) {
      counts.refusedFull++;
      refused = { status: 503, text: `too many clients (max ${maxClients})` };
    } else if (refused === null && (perAddress.get(address) ?? 0) >= maxClientsPerAddress) {
      counts.refusedPerAddress++;
      refused = { status: 429, text: `too many connections from ${address} (max ${maxClientsPerAddress})` };
    }
    if (refused) {
      socket.end(`HTTP/1.1 ${refused.status} ${REASONS[refused.status]}\r\nContent-Type: text/plain; charset=utf-8\r\nContent-Length: ${Buffer.byteLength(refused.text)}\r\nConnection: close\r\n\r\n${refused.text}`);
      return;
    }
    wss.handleUpgrade(request, socket, head, (ws) => accept(ws, address));
  }

  /** Closes a client that broke a limit: the code and reason go out, and the socket is cut if it does not finish. */
  function closeFor(client: Client, counter: 'closedIdle' | 'closedRate' | 'closedOutput', reason: string): void {
    if (client.closing) return;
    client.closing = true;
    counts[counter]++;
    client.subscription?.unsubscribe();
    client.socket.close(POLICY, reason);
    setTimeout(() => client.socket.terminate(), CLOSE_GRACE_MS).unref();
  }

  /** A reply (hello, subscribed, error, status): counts against the output limit; a client that lets replies pile up is closed. */
  function reply(client: Client, message: object): void {
    if (client.closing || client.socket.readyState !== WebSocket.OPEN) return;
    const text = JSON.stringify(message);
    if (client.socket.bufferedAmount + Buffer.byteLength(text) > maxBufferedBytes) {
      return closeFor(client, 'closedOutput', `output limit: more than ${maxBufferedBytes} bytes queued unread`);
    }
    client.socket.send(text);
  }

  /**
   * Whether an update may go to `client` now. It must be due at the client's rate, its socket's queue below the
   * limit, and its pong for the previous update received: a client that stops reading therefore has at most one
   * update in flight, and its next update covers the whole span it missed (latest values, min/max, events).
   */
  function ready(client: Client): boolean {
    if (client.updateHz === null || client.closing) return false;
    const now = performance.now();
    // Ticks come at maxUpdateHz; half a tick of tolerance keeps a client at maxUpdateHz from skipping every other one.
    if (now - client.lastSentMs < 1000 / client.updateHz - 500 / maxUpdateHz) return false;
    if (client.awaitingAck || client.socket.bufferedAmount >= maxBufferedBytes) {
      if (!client.heldBack) counts.updatesMerged++;
      client.heldBack = true;
      return false;
    }
    client.heldBack = false;
    client.lastSentMs = now;
    return true;
  }

  function status(): FeedStatusMessage {
    return {
      type: 'status',
      schema: FEED_SCHEMA,
      state,
      axes: source?.axes.names ?? [],
      lowSignalLevel: source === null ? null : (source.lowSignalLevel ?? PIPELINE_LOW_SIGNAL_LEVEL),
      detectorOutputs: source?.detectorOutputs ?? null,
      ...feedTimeBase(source?.rateHz ?? null, latestSampleIndex),
    };
  }

  /** One update stream per client, from its first subscribe to its close: re-subscribing changes only its rate and trace, so no span or event is lost. */
  function startUpdates(client: Client): void {
    if (source === null || client.subscription !== null || client.closing) return;
    const { axes, rateHz } = source;
    client.subscription = axes.update$({ updateHz: maxUpdateHz, trace: true, ready: () => ready(client) }).subscribe({
      next(update) {
        if (client.socket.readyState !== WebSocket.OPEN) return;
        client.socket.send(JSON.stringify(feedUpdateMessage(update, ++client.seq, rateHz, client.trace, geometry === null ? null : geometry.solve(update))));
        client.awaitingAck = true;
        client.socket.ping(UPDATE_ACK);
      },
      error(error: unknown) {
        reply(client, { type: 'error', code: 'source-error', message: `the measurement source failed: ${String(error)}` });
        client.socket.close(1011, 'source error');
      },
      complete() {
        reply(client, { type: 'end' });
        client.socket.close(1000, 'source ended');
      },
    });
  }

  function takeMessageToken(client: Client): boolean {
    const now = performance.now();
    client.messageTokens = Math.min(messageBurst, client.messageTokens + ((now - client.messageTokensAtMs) / 1000) * maxMessagesPerS);
    client.messageTokensAtMs = now;
    if (client.messageTokens < 1) return false;
    client.messageTokens -= 1;
    return true;
  }

  function accept(socket: WebSocket, remoteAddress: string): void {
    const client: Client = {
      socket,
      remoteAddress,
      seq: 0,
      updateHz: null,
      trace: false,
      subscription: null,
      lastSentMs: -Infinity,
      awaitingAck: false,
      alive: true,
      messageTokens: messageBurst,
      messageTokensAtMs: performance.now(),
      idleTimer: null,
      heldBack: false,
      closing: false,
    };
    clients.add(client);
    perAddress.set(remoteAddress, (perAddress.get(remoteAddress) ?? 0) + 1);
    client.idleTimer = setTimeout(() => closeFor(client, 'closedIdle', `no subscribe within ${subscribeTimeoutMs} ms`), subscribeTimeoutMs);
    const hello: FeedHelloMessage = {
      type: 'hello',
      schema: FEED_SCHEMA,
      ...(onReference === undefined ? { readOnly: true } : { readOnly: false, commands: ['reference' as const] }),
      state,
      axes: source?.axes.names ?? [],
      updateHz: { default: defaultUpdateHz, max: maxUpdateHz },
      maxMessageBytes,
      maxMessagesPerS,
      messageBurst,
      subscribeTimeoutMs,
    };
    reply(client, hello);
    reply(client, status());
    if (sourceError !== null) {
      reply(client, sourceError);
      socket.close(1011, 'source error');
    } else if (state === 'ended') {
      reply(client, { type: 'end' });
      socket.close(1000, 'source ended');
    }
    socket.on('message', (data, isBinary) => {
      if (client.closing) return;
      if (!takeMessageToken(client)) return closeFor(client, 'closedRate', `more than ${maxMessagesPerS} messages per second (burst ${messageBurst})`);
      if (isBinary) return reply(client, { type: 'error', code: 'bad-message', message: 'binary messages are not accepted: send JSON text' });
      const text = data.toString();
      const command = onReference === undefined ? null : referenceCommandOf(text);
      if (command !== null) return reply(client, runReferenceCommand(command, token, `WebSocket ${remoteAddress}`, onReference!));
      const parsed = parseClientMessage(text, maxUpdateHz);
      if (!parsed.ok) return reply(client, parsed.error);
      if (client.idleTimer !== null) clearTimeout(client.idleTimer);
      client.idleTimer = null;
      client.updateHz = parsed.message.updateHz ?? defaultUpdateHz;
      client.trace = parsed.message.trace ?? false;
      reply(client, { type: 'subscribed', updateHz: client.updateHz, trace: client.trace });
      startUpdates(client);
    });
    socket.on('pong', (data) => {
      client.alive = true;
      if (data.equals(UPDATE_ACK)) client.awaitingAck = false;
    });
    // ws reports oversized messages and protocol violations here, then closes (1009, 1002): only this client goes.
    socket.on('error', () => socket.terminate());
    socket.on('close', () => {
      if (client.idleTimer !== null) clearTimeout(client.idleTimer);
      client.subscription?.unsubscribe();
      if (clients.delete(client)) {
        const left = (perAddress.get(remoteAddress) ?? 1) - 1;
        if (left === 0) perAddress.delete(remoteAddress);
        else perAddress.set(remoteAddress, left);
      }
    });
  }

  const heartbeat = setInterval(() => {
    for (const client of clients) {
      if (!client.alive) {
        counts.closedDead++;
        client.socket.terminate();
        continue;
      }
      client.alive = false;
      if (client.socket.readyState === WebSocket.OPEN) client.socket.ping(HEARTBEAT);
    }
  }, pingIntervalMs);
  heartbeat.unref();

  function setState(next: FeedState): void {
    state = next;
    for (const client of clients) reply(client, status());
  }

  function attach(next: FeedSource): void {
    if (source !== null) throw new Error('the feed server already has a source: attach it once');
    positiveFinite('source.rateHz', next.rateHz);
    geometry = next.geometry === undefined ? null : createUpdateGeometry(next.geometry, next.axes.names);
    source = next;
    keepAlive = next.axes.connect({
      next(summaries: unknown) {
        latestSampleIndex = (summaries as readonly AxisBlockSummary[])[0]!.sampleIndex;
      },
      error(error: unknown) {
        sourceError = { type: 'error', code: 'source-error', message: `the measurement source failed: ${String(error)}` };
        setState('failed');
        onSourceError(error);
      },
      complete: () => setState('ended'),
    });
    // Edges are events, not states: each goes out once, as a reply, to every subscribed client (a client that
    // does not read them is closed by the output limit like for any reply).
    edgeSubscription = next.edges$?.subscribe({
      next(edge) {
        const message = feedEdgeMessage(edge);
        for (const client of clients) if (client.updateHz !== null) reply(client, message);
      },
      // The keep-alive reports a failing source; the edges end with it.
      error: () => undefined,
    }) ?? null;
    if (state === 'waiting') setState('live');
    for (const client of clients) if (client.updateHz !== null) startUpdates(client);
  }

  const server = createServer(serveHttp);
  server.on('upgrade', upgrade);
  server.on('clientError', (_error, socket) => socket.destroy());
  server.headersTimeout = 10_000;
  server.requestTimeout = 10_000;

  try {
    await new Promise<void>((resolve, reject) => {
      server.once('error', reject);
      server.listen(port, host, () => {
        server.off('error', reject);
        resolve();
      });
    });
  } catch (error) {
    clearInterval(heartbeat);
    throw error;
  }
  if (options.source !== undefined) {
    try {
      attach(options.source);
    } catch (error) {
      // A source refused at attach (its rate, its geometry) must not leave the server listening.
      clearInterval(heartbeat);
      server.close();
      throw error;
    }
  }
  const address = server.address();
  const boundPort = typeof address === 'object' && address !== null ? address.port : port;
  const urlHost = host.includes(':') && !host.startsWith('[') ? `[${host}]` : host;
  const query = token === undefined ? '' : `?token=${encodeURIComponent(token)}`;

  return {
    pageUrl: `http://${urlHost}:${boundPort}/${query}`,
    feedUrl: `ws://${urlHost}:${boundPort}${FEED_PATH}${query}`,
    pageUrlForDisplay: `http://${urlHost}:${boundPort}/${token === undefined ? '' : '?token=<token>'}`,
    feedUrlForDisplay: `ws://${urlHost}:${boundPort}${FEED_PATH}${token === undefined ? '' : '?token=<token>'}`,
    host,
    port: boundPort,
    get state() {
      return state;
    },
    get clientCount() {
      return clients.size;
    },
    get clients() {
      return [...clients].map((client) => ({
        remoteAddress: client.remoteAddress,
        seq: client.seq,
        bufferedBytes: client.socket.bufferedAmount,
        updateHz: client.updateHz,
      }));
    },
    get counts() {
      return { ...counts };
    },
    attach,
    async close() {
      clearInterval(heartbeat);
      keepAlive?.unsubscribe();
      edgeSubscription?.unsubscribe();
      for (const client of clients) {
        if (client.idleTimer !== null) clearTimeout(client.idleTimer);
        client.subscription?.unsubscribe();
        client.socket.close(1001, 'server closing');
      }
      await new Promise<void>((resolve) => {
        server.close(() => resolve());
        // Sockets that do not finish the closing handshake promptly are cut.
        setTimeout(() => {
          for (const client of clients) client.socket.terminate();
          server.closeAllConnections();
        }, 500).unref();
      });
      wss.close();
    },
  };
}

function plain(response: ServerResponse, status: number, text: string): void {
  response.writeHead(status, { 'Content-Type': 'text/plain; charset=utf-8', 'Content-Length': Buffer.byteLength(text), 'Cache-Control': 'no-store' });
  response.end(text);
}
