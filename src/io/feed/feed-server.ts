// The WebSocket position feed and its live page, over one HTTP server. Read-only by construction: the only
// client message is a subscribe that picks the client's own update rate; nothing reaches the pipeline.

import { randomBytes } from 'node:crypto';
import { createServer, type IncomingMessage, type ServerResponse } from 'node:http';
import type { Duplex } from 'node:stream';
import type { Subscription } from 'rxjs';
import { WebSocket, WebSocketServer } from 'ws';
import { integerInRange, OptionError, positiveFinite } from '../../core/index.js';
import type { Axes } from '../../stream/index.js';
import { hostOfHeader, isLoopbackHost, tokenMatches } from './access.js';
import { FEED_SCHEMA, feedUpdateMessage, parseClientMessage, type FeedErrorMessage, type FeedHelloMessage } from './messages.js';
import { feedPage } from './page.js';

export interface FeedServerOptions {
  /** The axes to serve (from `createAxes`); the server keeps their pipelines running while it is open. */
  readonly axes: Axes;
  /** Address to bind. Default `127.0.0.1`. Anything but loopback requires `token`. */
  readonly host?: string;
  /** TCP port; 0 picks a free one. Default 0. */
  readonly port?: number;
  /**
   * Shared secret clients present (`?token=` on the page and feed URLs, or `Authorization: Bearer`).
   * At least 16 characters. Required beyond loopback; optional on loopback.
   */
  readonly token?: string;
  /** Extra browser origins allowed to open the feed, e.g. `https://hmi.example`. Default none (same origin only). */
  readonly allowedOrigins?: readonly string[];
  /** Update rate before a client asks, and the most a client may ask for, in Hz. Defaults 10 and 100. */
  readonly defaultUpdateHz?: number;
  readonly maxUpdateHz?: number;
  /** Largest client message in bytes; larger ones close the connection (code 1009). Default 1024; 64..65536. */
  readonly maxMessageBytes?: number;
  /** Bytes queued on a socket beyond which updates are held back (the client then gets only the latest). Default 262144. */
  readonly maxBufferedBytes?: number;
  /** Most simultaneous feed connections. Default 32; 1..1024. */
  readonly maxClients?: number;
  /** Called when the axes' source fails; default: a process warning. Clients get a `source-error` message. */
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

export interface FeedServer {
  /** The page: `http://host:port/` (plus `?token=` when a token is set). */
  readonly pageUrl: string;
  /** The feed: `ws://host:port/feed` (plus `?token=`). */
  readonly feedUrl: string;
  readonly host: string;
  readonly port: number;
  readonly clientCount: number;
  readonly clients: readonly FeedClientInfo[];
  /** Stops accepting, closes every client (code 1001) and the pipelines' keep-alive. */
  close(): Promise<void>;
}

interface Client {
  readonly socket: WebSocket;
  readonly remoteAddress: string;
  seq: number;
  updateHz: number | null;
  subscription: Subscription | null;
}

const FEED_PATH = '/feed';

export async function startFeedServer(options: FeedServerOptions): Promise<FeedServer> {
  const { axes } = options;
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
  const port = integerInRange('port', options.port ?? 0, 0, 65535);
  const maxUpdateHz = positiveFinite('maxUpdateHz', options.maxUpdateHz ?? 100);
  if (maxUpdateHz > 1000) throw new OptionError('maxUpdateHz', 'a positive finite number up to 1000', maxUpdateHz);
  const defaultUpdateHz = positiveFinite('defaultUpdateHz', options.defaultUpdateHz ?? Math.min(10, maxUpdateHz));
  if (defaultUpdateHz > maxUpdateHz) throw new OptionError('defaultUpdateHz', `at most maxUpdateHz = ${maxUpdateHz}`, defaultUpdateHz);
  const maxMessageBytes = integerInRange('maxMessageBytes', options.maxMessageBytes ?? 1024, 64, 65536);
  const maxBufferedBytes = integerInRange('maxBufferedBytes', options.maxBufferedBytes ?? 262144, 1024, 2 ** 30);
  const maxClients = integerInRange('maxClients', options.maxClients ?? 32, 1, 1024);
  const allowedOrigins = new Set((options.allowedOrigins ?? []).map((origin) => origin.toLowerCase()));
  const onSourceError = options.onSourceError ?? ((error: unknown) => process.emitWarning(`feed source failed: ${String(error)}`));

  const clients = new Set<Client>();
  let sourceError: FeedErrorMessage | null = null;

  /** Why a request may not proceed, or null. Loopback: Host must be loopback too (no DNS rebinding). */
  function refusal(request: IncomingMessage, url: URL): { status: number; text: string } | null {
    const hostHeader = request.headers.host;
    if (hostHeader === undefined) return { status: 400, text: 'missing Host header' };
    if (loopback && !isLoopbackHost(hostOfHeader(hostHeader))) {
      return { status: 403, text: `host ${hostOfHeader(hostHeader)} refused: this feed serves loopback only` };
    }
    const origin = request.headers.origin;
    if (origin !== undefined) {
      const same = origin.toLowerCase() === `http://${hostHeader.toLowerCase()}`;
      if (!same && !allowedOrigins.has(origin.toLowerCase())) return { status: 403, text: `origin ${origin} not allowed` };
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

  function upgrade(request: IncomingMessage, socket: Duplex, head: Buffer): void {
    socket.on('error', () => socket.destroy());
    const url = new URL(request.url ?? '/', 'http://feed.invalid');
    const refused =
      url.pathname !== FEED_PATH
        ? { status: 404, text: `no feed at ${url.pathname}: use ${FEED_PATH}` }
        : (refusal(request, url) ?? (clients.size >= maxClients ? { status: 503, text: `too many clients (max ${maxClients})` } : null));
    if (refused) {
      const reason = { 400: 'Bad Request', 401: 'Unauthorized', 403: 'Forbidden', 404: 'Not Found', 503: 'Service Unavailable' }[refused.status];
      socket.end(`HTTP/1.1 ${refused.status} ${reason}\r\nContent-Type: text/plain; charset=utf-8\r\nContent-Length: ${Buffer.byteLength(refused.text)}\r\nConnection: close\r\n\r\n${refused.text}`);
      return;
    }
    wss.handleUpgrade(request, socket, head, (ws) => accept(ws, request.socket.remoteAddress ?? ''));
  }

  function send(client: Client, message: object): void {
    if (client.socket.readyState === WebSocket.OPEN) client.socket.send(JSON.stringify(message));
  }

  function subscribe(client: Client, updateHz: number, trace: boolean): void {
    client.subscription?.unsubscribe();
    client.updateHz = updateHz;
    client.subscription = axes.update$({ updateHz, trace, ready: () => client.socket.bufferedAmount < maxBufferedBytes }).subscribe({
      next: (update) => send(client, feedUpdateMessage(update, ++client.seq)),
      error: (error: unknown) => {
        send(client, { type: 'error', code: 'source-error', message: `the measurement source failed: ${String(error)}` });
        client.socket.close(1011, 'source error');
      },
      complete: () => {
        send(client, { type: 'end' });
        client.socket.close(1000, 'source ended');
      },
    });
  }

  function accept(socket: WebSocket, remoteAddress: string): void {
    const client: Client = { socket, remoteAddress, seq: 0, updateHz: null, subscription: null };
    clients.add(client);
    const hello: FeedHelloMessage = {
      type: 'hello',
      schema: FEED_SCHEMA,
      readOnly: true,
      axes: axes.names,
      updateHz: { default: defaultUpdateHz, max: maxUpdateHz },
      maxMessageBytes,
    };
    send(client, hello);
    if (sourceError !== null) {
      send(client, sourceError);
      socket.close(1011, 'source error');
    }
    socket.on('message', (data, isBinary) => {
      if (isBinary) return send(client, { type: 'error', code: 'bad-message', message: 'binary messages are not accepted: send JSON text' });
      const parsed = parseClientMessage(data.toString(), maxUpdateHz);
      if (!parsed.ok) return send(client, parsed.error);
      subscribe(client, parsed.message.updateHz ?? defaultUpdateHz, parsed.message.trace ?? false);
      send(client, { type: 'subscribed', updateHz: parsed.message.updateHz ?? defaultUpdateHz, trace: parsed.message.trace ?? false });
    });
    // ws reports oversized messages and protocol violations here, then closes (1009, 1002): only this client goes.
    socket.on('error', () => socket.terminate());
    socket.on('close', () => {
      client.subscription?.unsubscribe();
      clients.delete(client);
    });
  }

  const server = createServer(serveHttp);
  server.on('upgrade', upgrade);
  server.on('clientError', (_error, socket) => socket.destroy());
  server.headersTimeout = 10_000;
  server.requestTimeout = 10_000;

  await new Promise<void>((resolve, reject) => {
    server.once('error', reject);
    server.listen(port, host, () => {
      server.off('error', reject);
      resolve();
    });
  });
  const keepAlive = axes.connect({
    error(error: unknown) {
      sourceError = { type: 'error', code: 'source-error', message: `the measurement source failed: ${String(error)}` };
      onSourceError(error);
    },
  });
  const address = server.address();
  const boundPort = typeof address === 'object' && address !== null ? address.port : port;
  const urlHost = host.includes(':') && !host.startsWith('[') ? `[${host}]` : host;
  const query = token === undefined ? '' : `?token=${encodeURIComponent(token)}`;

  return {
    pageUrl: `http://${urlHost}:${boundPort}/${query}`,
    feedUrl: `ws://${urlHost}:${boundPort}${FEED_PATH}${query}`,
    host,
    port: boundPort,
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
    async close() {
      keepAlive.unsubscribe();
      for (const client of clients) {
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
